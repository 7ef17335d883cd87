"""What the live progress lines on stderr say: a sub-search never shows its own bound as the
stage's, the undo search shows the plan's objective without its tie-break, and
``rebalance marginal`` says up front how many solves it runs and the most time they take.
"""

from __future__ import annotations

import math
import re
import subprocess
import sys
import time
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from conftest import DATA, ROOT

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.analysis.marginal import binding_candidates, most_seconds
from rebalance.backends import HighsBackend, search_line
from rebalance.generate import generate, spec_for_size, write_generated
from rebalance.model import build_model
from rebalance.numbers import progress_value

TINY = DATA / "tiny"
_LINE = re.compile(r"rounding search: best plan [\d.,]+, bound ([\d.,]*\d)")


def test_a_sub_search_line_shows_the_stage_bound_and_never_its_own() -> None:
    # A search of part of the model proves a bound for that part only (rebalance.heuristics:
    # on the demo's cost stage 2,053,328 where the stage's LP gives 1,651,285).
    line = search_line(240.0, 164.0, 0, 154.0, part_of_stage=True)
    # By hand: gap (240 - 154) / 240 = 35.83%, against the stage's 154, not the search's 164.
    assert line == ("  searching: best plan 240, bound 154 (the stage's), gap 35.83%, "
                    "0 nodes")
    # With no bound proven for the stage yet, no bound and no gap at all.
    line = search_line(240.0, 164.0, 0, None, part_of_stage=True)
    assert "164" not in line and "gap" not in line and "no bound proven for the stage" in line
    # A search of the whole model still shows the higher of its own and the known bound.
    assert "bound 164, gap" in search_line(240.0, 164.0, 0, 154.0)


def test_the_rounding_search_shows_the_lp_bound_of_the_stage(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # A planner read the gap going backwards when the whole model's search took over from
    # the rounding search (the demo: 16.68% there, then 31.49%).  Its lines must show the
    # stage's best proven bound, here the LP relaxation: a bound of the whole stage
    # (common practice: an LP relaxation bounds its MIP's minimum from below).
    import rebalance.backends.highs as highs
    from rebalance.heuristics import first_plan_from_lp

    monkeypatch.setattr(highs, "PROGRESS_SECONDS", 0.0)  # every callback says a line
    instance = read_instance(write_generated(generate(spec_for_size("small", seed=0)),
                                             tmp_path / "small"))
    model = build_model(instance)
    said: list[str] = []
    options = options_from_instance(instance, relative_gap=0.0, progress=said.append)
    _, lp_bound = first_plan_from_lp(HighsBackend(), model, model.shortfall_weight, [],
                                     options, time.perf_counter() + 6.0, None, said.append)
    assert lp_bound is not None
    shown = [match.group(1) for line in said if (match := _LINE.search(line))]
    assert shown, said  # the rounding search said how it went
    assert set(shown) == {progress_value(lp_bound)}, said


def test_the_undo_search_shows_the_plans_objective_without_its_tie_break(
        monkeypatch: pytest.MonkeyPatch) -> None:
    # The re-plan's search that undoes changes prices each change at a tie-break, and its
    # line had shown 2,470,501 of a plan costing 2,470,500.  The tie-break is raised here
    # so that it shows in six significant figures (tiny's cost is 43,000).
    import rebalance.heuristics as heuristics

    monkeypatch.setattr(heuristics, "TIE_BREAK", 0.01)
    instance = read_instance(TINY)
    result = make_plan(instance, options_from_instance(instance, relative_gap=0.0))
    model = build_model(instance)
    x = result.solve.x
    assert x is not None and x.size == model.num_cols
    # An old plan with none of the plan's hires, details or moves, and the shortfall held
    # at the plan's, as a re-plan's cost stage holds it: the changes that lower the shortfall
    # stay, and each is priced at the tie-break in the search's objective.
    hint = np.where(model.is_integer, 0.0, x)
    held = [(model.shortfall_weight, float(model.shortfall_weight @ x) + 1e-6)]
    said: list[str] = []
    options = options_from_instance(instance, relative_gap=0.0)
    out = heuristics.toward_hint(HighsBackend(), replace(model, hint=hint), model.cost, held,
                                 options, x, 10.0, said.append)
    lines = [line for line in said if line.startswith("  undoing changes that do not pay:")]
    assert lines, said
    # The plan's cost is cost @ x of the plan handed back (common practice: a linear
    # objective's value), with no tie-break in it.
    assert f"plan with {progress_value(float(model.cost @ out))} in" in lines[-1], lines
    # Nor does any line show a search's own figures: they carry the tie-break.
    assert not any("best plan" in line for line in said), said


def _marginal(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "rebalance.cli", "marginal", str(TINY),
                           *args], cwd=ROOT, capture_output=True, text=True, timeout=300)


def test_marginal_says_its_solves_and_most_time_up_front(tmp_path: Path) -> None:
    # --time-limit is per solve: a user must know the wall time before it starts.
    done = _marginal("-o", str(tmp_path / "m"), "--gap", "0", "--time-limit", "30",
                     "--max-resolves", "2", "--workers", "2", "-q")
    assert done.returncode == 0, done.stderr
    first, then = [line for line in done.stderr.splitlines() if line.startswith("marginal:")]
    # By hand: the base plan 30 s, the estimates' LPs 2 x min(60, 30) s, then two re-solves
    # in one round of two, 30 s: 120 s in all (common practice: a pool of W runs N jobs in
    # ceil(N / W) rounds).
    assert first == ("marginal: up to 3 solves, the base plan, then at most 2 re-solves, 2 at "
                     "a time; each solve stops at --time-limit 30 s, so at most 2 min in all "
                     "with the LP estimates, besides building models")
    # Said before the base plan's solve: the plan's lines are quiet here (-q), so first.
    assert done.stderr.splitlines()[0] == first
    found = binding_candidates(make_plan(read_instance(TINY), options_from_instance(
        read_instance(TINY), relative_gap=0.0)))
    limits = sum(1 for c in found if not c.first_vacancy)
    assert limits >= 2  # tiny: the hiring budget, the away share, B's hiring slots
    # Review at B: tiny funds no vacancy, and its plan hires a new review position at B
    # (tests/data/tiny/NOTE.md), which a vacancy would fund; A is short of nothing.
    assert len(found) - limits == 1
    # By hand as above, without the base plan: 60 s of LPs and one round of 30 s.
    assert then == (f"marginal: {limits} limits bind and 1 first funded vacancy could help; "
                    "re-solving 2, 2 at a time, each stopped at 30 s: at most 90 s more with "
                    "the LP estimates, besides building models")


def test_marginal_without_a_cap_says_the_count_once_the_base_plan_is_found(
        tmp_path: Path) -> None:
    done = _marginal("-o", str(tmp_path / "m"), "--gap", "0", "--time-limit", "10", "-q")
    assert done.returncode == 0, done.stderr
    first, then = [line for line in done.stderr.splitlines() if line.startswith("marginal:")]
    assert "once the base plan is found" in first and "10 s" in first
    found = re.fullmatch(r"marginal: (\d+) limits bind and (\d+) first funded vacanc(?:y|ies) "
                         r"could help; re-solving (\d+), 2 at a time, each stopped at 10 s: at "
                         r"most (\d+) s more .*", then)
    assert found, then
    bind, firsts, resolves, seconds = (int(found.group(i)) for i in (1, 2, 3, 4))
    limits = bind + firsts
    # Every binding limit is re-solved without --max-resolves (docs/analysis.md); the time
    # by hand as above: 2 x 10 s of LPs and ceil(N / 2) rounds of 10 s.
    assert resolves == limits
    assert seconds == 20 + math.ceil(resolves / 2) * 10


def test_most_seconds_counts_rounds_of_workers() -> None:
    options = options_from_instance(read_instance(TINY), time_limit_seconds=40.0)
    # By hand: LPs 2 x 40 s, then 5 re-solves two at a time in 3 rounds of 40 s (common
    # practice: ceil(5 / 2) = 3); one at a time, 5 rounds; none, nothing at all.
    assert most_seconds(5, options, 2) == 80 + 3 * 40
    assert most_seconds(5, options, 1) == 80 + 5 * 40
    assert most_seconds(0, options, 2) == 0
    # A limit above 60 s leaves the LPs at 60 s each (rebalance.analysis.marginal_estimate).
    assert most_seconds(1, replace(options, time_limit_seconds=300.0), 2) == 120 + 300


def test_the_old_plans_line_says_its_work_split_was_redone(tiny, capsys):
    # A reviewer's reading of a re-plan: "the old plan's moves and hires, work split afresh:
    # 192.29" beside replan.csv's old plan at 192.592 read as a contradiction; the line now
    # says the split was redone and that the plan's own may leave more short.
    from rebalance.analysis.replan import DisruptionCosts, replan

    said: list[str] = []
    options = replace(options_from_instance(tiny), progress=said.append)
    base = make_plan(tiny, replace(options, progress=None))
    assert base.plan is not None
    replan(tiny, base.plan, 1, options, DisruptionCosts(2000, 10000, 5000))
    assert any("the old plan's moves and hires with the work split redone for these data "
               "(its own split may leave more short)" in line for line in said), said
