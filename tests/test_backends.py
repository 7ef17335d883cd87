"""Backend contracts that the two-stage solve relies on."""

from __future__ import annotations

import importlib
import sys
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

from rebalance.backends import HighsBackend

sys.path.insert(0, str(Path(__file__).parent / "analysis"))


def test_a_start_never_replaces_a_better_plan():
    # A re-plan model where HiGHS 1.16, given the old plan as a feasible start, reported the
    # optimal cost (11,000) but returned the start (24,000) as its solution (issue 5 report).
    from analysis_helpers import exact_options
    from randomized import random_instance

    from rebalance import make_plan

    replan = importlib.import_module("rebalance.analysis.replan")
    instance = random_instance(307, people=5, periods=5)
    options = exact_options(instance)
    base = make_plan(instance, options)
    captured = []
    original = replan._fix_and_price
    try:
        replan._fix_and_price = lambda *a, **k: captured.append(original(*a, **k)) or captured[-1]
        result = replan.replan(instance, base.plan, 4, options)
    finally:
        replan._fix_and_price = original
    model, start = captured[-1], result.result.solve.x
    backend = HighsBackend()
    first = backend.run(model, model.shortfall_weight, [], options, 30, None)
    rows = [(model.shortfall_weight, first.objective + 1e-6)]
    fresh = backend.run(model, model.cost, rows, options, 30, None)
    warm = backend.run(model, model.cost, rows, options, 30, start)
    for out in (fresh, warm):
        assert out.x is not None
        assert abs(float(model.cost @ out.x) - out.objective) <= 1e-6 * (1 + abs(out.objective))
    assert warm.objective <= fresh.objective + 1e-6 * (1 + abs(fresh.objective))


def test_relative_gap_of_a_plan_scoring_zero_above_a_lower_bound_is_undefined():
    from rebalance.backends import relative_gap

    assert relative_gap(0.0, -5.0) is None
    assert relative_gap(0.0, 0.0) == 0.0
    assert relative_gap(100.0, 90.0) == 0.1
    assert relative_gap(100.0, None) is None


def test_a_bound_below_zero_is_raised_to_the_objective_floor():
    # Costs and shortfall are never negative, so 0 bounds every stage from below; the
    # relaxation's bound can sit under it (relocatable cost-adjustment columns).
    import numpy as np

    from rebalance.backends import BackendOutcome, Status
    from rebalance.stage_claims import with_floor as _with_floor

    x = np.zeros(1)
    zero = BackendOutcome(Status.FEASIBLE_WITH_GAP, x, 0.0, -4e4, "Time limit reached", 1.0)
    proven = _with_floor(zero, 0.01)
    assert proven.status is Status.OPTIMAL and proven.bound == 0.0
    some = BackendOutcome(Status.FEASIBLE_WITH_GAP, x, 50.0, -4e4, "Time limit reached", 1.0)
    raised = _with_floor(some, 0.01)
    assert raised.status is Status.FEASIBLE_WITH_GAP and raised.bound == 0.0
    none = BackendOutcome(Status.NO_PLAN_IN_TIME, None, None, -4e4, "Time limit reached", 1.0)
    assert _with_floor(none, 0.01) == none


def test_a_run_in_a_child_process_gives_the_same_optimum_and_its_progress(monkeypatch):
    # MIPs above a toy's size, and anything above HARD_STOP_NONZEROS, run in a child process
    # that can be killed at the wall-clock limit; forced here on tiny, it must give the
    # in-process optimum, in both stages.
    from conftest import DATA, solve_verified

    from rebalance import read_instance
    from rebalance.backends import highs as highs_module

    tiny = read_instance(DATA / "tiny")
    usual = solve_verified(tiny)
    monkeypatch.setattr(highs_module, "HARD_STOP_NONZEROS", 0)
    forced = solve_verified(tiny)
    assert forced.status is usual.status
    assert forced.plan.weighted_shortfall == usual.plan.weighted_shortfall
    assert forced.plan.total_cost == usual.plan.total_cost


def test_a_child_s_progress_lines_reach_this_process():
    from rebalance.backends import BackendOutcome, SolveOptions, Status, run_in_child

    def talks(options: SolveOptions, on_plan, on_bound) -> BackendOutcome:
        assert options.progress is not None
        for i in range(3):
            options.progress(f"line {i}")
        return BackendOutcome(Status.OPTIMAL, None, 1.0, 1.0, "Optimal", 0.0)

    said: list[str] = []
    out = run_in_child(talks, SolveOptions(progress=said.append), 30.0)
    assert said == ["line 0", "line 1", "line 2"]
    assert out.status is Status.OPTIMAL and out.objective == 1.0


def test_a_child_past_the_wall_clock_limit_is_stopped(monkeypatch):
    # A solver that does not give control back (HiGHS in presolve at agency scale) is killed
    # once the limit and a grace have passed: no plan in time, never a hang.
    import time

    from rebalance.backends import BackendOutcome, SolveOptions, Status, run_in_child
    from rebalance.backends import highs as highs_module

    def stuck(options: SolveOptions, on_plan, on_bound) -> BackendOutcome:
        time.sleep(60)
        raise AssertionError("not reached")

    started = time.perf_counter()
    out = run_in_child(stuck, SolveOptions(), 1.0)
    assert time.perf_counter() - started < 10
    assert out.status is Status.NO_PLAN_IN_TIME and out.x is None
    assert out.killed
    assert highs_module.HIGHS_GRACE_SECONDS > 0


def test_a_child_that_fails_reports_an_error_instead_of_a_plan():
    from rebalance.backends import BackendOutcome, SolveOptions, Status, run_in_child

    def broken(options: SolveOptions, on_plan, on_bound) -> BackendOutcome:
        raise MemoryError("out of memory in the solver")

    out = run_in_child(broken, SolveOptions(), 30.0)
    assert out.status is Status.ERROR and "MemoryError" in out.words


def test_a_child_killed_after_finding_a_plan_keeps_its_last_plan():
    # HiGHS can take long to give control back after an interrupt on a huge model (the large
    # benchmark's hires pass: 30 s); the plans it handed over before the kill are not lost.
    import time

    import numpy as np

    from rebalance.backends import BackendOutcome, SolveOptions, Status, run_in_child

    def slow_to_return(options: SolveOptions, on_plan, on_bound) -> BackendOutcome:
        on_plan(np.array([3.0, 1.0]), 7.0)
        on_bound(3.5)
        on_plan(np.array([2.0, 1.0]), 5.0)
        on_bound(4.0)
        time.sleep(60)
        raise AssertionError("not reached")

    out = run_in_child(slow_to_return, SolveOptions(), 1.0)
    assert out.status is Status.FEASIBLE_WITH_GAP and out.bound == 4.0
    assert out.x is not None and list(out.x) == [2.0, 1.0] and out.objective == 5.0

    def silent(options: SolveOptions, on_plan, on_bound) -> BackendOutcome:
        time.sleep(60)
        raise AssertionError("not reached")

    assert run_in_child(silent, SolveOptions(), 1.0).bound is None


def test_a_plan_found_by_a_child_before_the_kill_is_scored_and_kept(monkeypatch):
    # Through the backend: HiGHS in a child that is killed right after its first plans.
    from conftest import DATA

    from rebalance import read_instance
    from rebalance.backends import HighsBackend, SolveOptions, Status
    from rebalance.backends import highs as highs_module
    from rebalance.model import build_model

    model = build_model(read_instance(DATA.parent.parent / "instances" / "demo"))
    monkeypatch.setattr(highs_module, "HARD_STOP_NONZEROS", 0)
    # HiGHS is told 3.5 s, the kill comes at 3 s; it finds its first demo plans within 1 s.
    monkeypatch.setattr(highs_module, "HIGHS_GRACE_SECONDS", -0.5)
    out = HighsBackend().run(model, model.shortfall_weight, [], SolveOptions(), 3.0, None)
    assert out.status is Status.FEASIBLE_WITH_GAP and out.words == "stopped at the time limit"
    assert out.killed
    assert out.x is not None and out.objective == float(model.shortfall_weight @ out.x)
    activity = model.matrix @ out.x
    assert (activity <= model.row_upper + 1e-6).all()
    assert (activity >= model.row_lower - 1e-6).all()
    # The search's bound as it stood before the kill is kept: at least the LP relaxation's
    # value (reference: scipy's linprog, method "highs"), at most the plan's.
    from scipy.optimize import linprog

    rows_up = np.isfinite(model.row_upper)
    rows_lo = np.isfinite(model.row_lower)
    lp = linprog(model.shortfall_weight,
                 A_ub=sp.vstack([model.matrix[rows_up], -model.matrix[rows_lo]]),
                 b_ub=np.concatenate([model.row_upper[rows_up], -model.row_lower[rows_lo]]),
                 bounds=list(zip(model.col_lower, model.col_upper, strict=True)),
                 method="highs")
    assert lp.status == 0
    assert out.bound is not None and lp.fun - 1e-6 <= out.bound <= out.objective + 1e-9


def test_a_small_mip_run_that_does_not_stop_is_killed_at_the_wall_clock(monkeypatch):
    # Size is no guard: HiGHS 1.16 ran on for over 13 minutes past a 1,500 s limit in the
    # presolve of a restart on a 10k-column model (benchmarks/notes.md, "2026-12-03: how far
    # the plans are from the optimum").  A Python sleep stands in for the solver that does not
    # give control back.
    import time

    from conftest import DATA

    from rebalance import read_instance
    from rebalance.backends import HighsBackend, SolveOptions, Status
    from rebalance.backends import highs as highs_module
    from rebalance.model import build_model

    model = build_model(read_instance(DATA.parent.parent / "instances" / "demo"))
    assert model.num_integer and model.matrix.nnz < highs_module.HARD_STOP_NONZEROS

    def does_not_stop(self, *args, **kwargs):
        time.sleep(60)
        raise AssertionError("not reached")

    monkeypatch.setattr(HighsBackend, "_run_here", does_not_stop)
    started = time.perf_counter()
    out = HighsBackend().run(model, model.shortfall_weight, [], SolveOptions(), 1.0, None)
    assert time.perf_counter() - started < 10
    assert out.status is Status.NO_PLAN_IN_TIME and out.x is None


def test_cbc_is_not_started_once_building_its_model_has_used_the_time():
    # PuLP builds and writes CBC's model in Python, where no signal to CBC can stop it: with
    # no time left after building, the run ends there, honestly without a plan.
    from conftest import DATA

    from rebalance import read_instance
    from rebalance.backends import CbcBackend, SolveOptions, Status
    from rebalance.model import build_model

    model = build_model(read_instance(DATA.parent.parent / "instances" / "demo"))
    out = CbcBackend().run(model, model.shortfall_weight, [], SolveOptions(solver="cbc"), 0.05,
                           None)
    assert out.status is Status.NO_PLAN_IN_TIME and out.x is None
    assert "CBC" in out.words
    assert out.seconds < 1.0  # CBC itself is given at least a second whenever it starts


def test_a_progress_line_never_shows_a_bound_below_one_known_before_the_search():
    # A search's own bound starts below the stage's LP relaxation (the demo's cost stage:
    # 1.668e6 after the LP's 1.634e6 had been reported); a planner should not see it fall.
    from rebalance.backends import search_line

    assert search_line(200.0, 150.0, 7, 160.0) == (
        "  searching: best plan 200, bound 160, gap 20.00%, 7 nodes")
    assert search_line(200.0, 190.0, 7, 160.0).startswith("  searching: best plan 200, "
                                                           "bound 190, gap 5.00%")
    assert "gap undefined" in search_line(0.0, float("-inf"), 0, -1.0)


def test_only_a_search_of_the_whole_model_is_told_the_stages_bound(monkeypatch):
    # The rounding search runs on a narrowed model: its bound is no bound of the stage, so its
    # lines carry their own label, and the stage's LP bound is not passed to it as known.
    from rebalance import backends
    from rebalance.model import build_model
    from rebalance.planning import options_from_instance
    from rebalance.readers import read_instance

    solve = importlib.import_module("rebalance.solve")

    instance = read_instance(Path(__file__).parent / "data" / "tiny")
    model = build_model(instance)
    runs: list[tuple[bool, bool, float | None, float | None]] = []

    class Spy(HighsBackend):
        def run(self, run_model, objective, extra_rows, options, time_limit, start, **kw):
            out = super().run(run_model, objective, extra_rows, options, time_limit, start,
                              **kw)
            whole = (np.array_equal(run_model.col_lower, model.col_lower)
                     and np.array_equal(run_model.col_upper, model.col_upper))
            if run_model.num_cols == model.num_cols:  # not the staying-put split alone
                runs.append((bool(run_model.num_integer), whole, options.known_bound,
                             out.objective))
            return out

    monkeypatch.setitem(backends.BACKENDS, "highs", Spy)  # the dict solve() looks in
    lines: list[str] = []
    options = options_from_instance(instance, relative_gap=0.0, time_limit_seconds=30.0,
                                    progress=lines.append)
    result = solve.solve(model, options)
    assert result.status is backends.Status.OPTIMAL
    # Each stage's LP relaxation, then the final work split's LP.
    relaxations = [objective for integer, _, _, objective in runs if not integer][:2]
    whole = [known for integer, is_whole, known, _ in runs if integer and is_whole]
    narrowed = [known for integer, is_whole, known, _ in runs if integer and not is_whole]
    assert len(relaxations) == len(whole) == 2 and narrowed
    for lp, known in zip(relaxations, whole, strict=True):
        assert known is not None and lp is not None and known >= lp - 1e-9
    assert all(known is None for known in narrowed)


class _Hook:
    """Stands in for a highspy callback slot: ``slot += function`` keeps the function."""

    def __init__(self) -> None:
        self.functions: list = []

    def __iadd__(self, function):
        self.functions.append(function)
        return self


def _highs_event(best: float):
    from types import SimpleNamespace

    event = SimpleNamespace(interrupted=False,
                            data_out=SimpleNamespace(mip_primal_bound=best, mip_dual_bound=0.0,
                                                     mip_node_count=0))
    event.interrupt = lambda: setattr(event, "interrupted", True)
    return event


def test_a_search_with_overtime_runs_past_its_limit_only_until_its_first_plan():
    import time
    from types import SimpleNamespace

    from rebalance.backends.highs import _watch_highs

    h = SimpleNamespace(cbSimplexInterrupt=_Hook(), cbIpmInterrupt=_Hook(),
                        cbMipInterrupt=_Hook(), cbMipImprovingSolution=_Hook())
    now = time.perf_counter()
    _watch_highs(h, now - 1.0, None, overtime=60.0)  # its limit passed a second ago
    [check] = h.cbMipInterrupt.functions
    no_plan, with_plan = _highs_event(float("inf")), _highs_event(10.0)
    check(no_plan)
    check(with_plan)
    assert not no_plan.interrupted and with_plan.interrupted
    _watch_highs(h, now - 1.0, None, overtime=0.5)  # and its overtime too
    late = _highs_event(float("inf"))
    h.cbMipInterrupt.functions[-1](late)
    assert late.interrupted


def test_cbc_is_stopped_in_its_overtime_once_its_log_shows_a_plan(tmp_path):
    import time

    from rebalance.backends.cbc import _Deadline

    log = tmp_path / "cbc.log"
    log.write_text("Cbc0010I After 0 nodes, 1 on tree, 1e+50 best solution, best possible 3\n")
    guard = _Deadline(time.perf_counter() + 0.1, 30.0, log)
    guard.start()
    time.sleep(1.0)
    assert not guard.fired  # past its limit, but no plan yet
    log.write_text(log.read_text() + "Cbc0012I Integer solution of 7 found by feasibility pump\n")
    time.sleep(1.0)
    assert guard.fired
    guard.stop()


def test_cbc_log_lines_reach_the_file_while_cbc_runs(tmp_path):
    # A sweep found the demo's CBC log empty from 3 s to 19 s (C's stdio holds a file's output
    # back in 4 KiB blocks), so no progress line showed and the check for a first plan could
    # not fire. Through the launcher, what the log holds mid-run ends with a whole line.
    # The model: a market split instance (Cornuejols and Dawande, "A class of hard small 0-1
    # programs", IPCO 1998), hard for branch and bound at 40 binaries, so CBC is still busy.
    import random
    import shutil
    import subprocess
    import time

    import pulp

    from rebalance.backends.cbc import _bundled_cbc, _cbc_launcher

    if shutil.which("stdbuf") is None:
        pytest.skip("no stdbuf here: CBC's log comes in blocks (documented)")
    assert _cbc_launcher() != _bundled_cbc()
    rng = random.Random(1)
    prob = pulp.LpProblem("market_split", pulp.LpMinimize)
    x = [prob.add_variable(f"x{j}", cat=pulp.LpBinary) for j in range(40)]
    over = [prob.add_variable(f"s{i}", lowBound=0) for i in range(5)]
    under = [prob.add_variable(f"t{i}", lowBound=0) for i in range(5)]
    prob += pulp.lpSum(over) + pulp.lpSum(under)
    for i in range(5):
        a = [rng.randint(0, 99) for _ in x]
        prob += pulp.lpSum(c * v for c, v in zip(a, x, strict=True)) + over[i] - under[i] \
            == sum(a) // 2
    mps = tmp_path / "split.mps"
    prob.writeMPS(str(mps))
    log = tmp_path / "cbc.log"
    with log.open("w") as out:
        run = subprocess.Popen([_cbc_launcher(), str(mps), "-sec", "6", "-solve"],
                               stdin=subprocess.DEVNULL, stdout=out, stderr=out)
        time.sleep(3.0)
        mid_run = log.read_text()
        still_running = run.poll() is None
        run.wait()
    assert still_running
    assert mid_run and mid_run.endswith("\n")
    assert log.read_text().startswith(mid_run)


def test_cbc_gives_no_point_from_an_lp_it_stopped_part_way(tmp_path):
    # PuLP reads CBC's "Stopped on iterations - objective value ..." as a feasible solution,
    # but a simplex stopped part way holds no feasible point of an LP: with dual simplex this
    # relaxation came back at 184.8 against its optimum of 333.1 (HiGHS).  Primal simplex
    # solves it in about 5 s; one second must end in no point at all.
    from rebalance.backends import CbcBackend, SolveOptions
    from rebalance.generate import GeneratorSpec, generate, write_generated
    from rebalance.model import build_model
    from rebalance.readers import read_instance
    from rebalance.solve import Status
    from rebalance.split import relaxed

    spec = GeneratorSpec(staff=300, offices=40, skills=6, periods=8, seed=3)
    instance = read_instance(write_generated(generate(spec), tmp_path / "forty"))
    model = build_model(instance)
    out = CbcBackend().run(relaxed(model), model.shortfall_weight, [],
                           SolveOptions(solver="cbc"), 1.0, None)
    assert out.x is None and out.objective is None
    assert out.status is Status.NO_PLAN_IN_TIME


def test_cbc_solves_an_lp_once_by_primal_simplex(tiny, tmp_path, monkeypatch):
    # PuLP's COIN_CMD ends an LP's command line with -initialSolve, which after -primalS
    # solved it again by dual simplex after presolve (a 40-office relaxation: 14.2 s of CPU
    # against 9.5 s).  CBC is run here behind a script that notes its arguments.
    from conftest import scipy_lp

    from rebalance.backends import CbcBackend, SolveOptions
    from rebalance.backends import cbc as cbc_module
    from rebalance.model import build_model
    from rebalance.solve import Status
    from rebalance.split import relaxed

    noted = tmp_path / "arguments.txt"
    script = tmp_path / "cbc"
    script.write_text(f'#!/bin/sh\necho "$@" >> {noted}\nexec {cbc_module._bundled_cbc()} "$@"\n')
    script.chmod(0o700)
    monkeypatch.setattr(cbc_module, "_cbc_launcher", lambda: str(script))
    model = build_model(tiny)
    out = CbcBackend().run(relaxed(model), model.shortfall_weight, [],
                           SolveOptions(solver="cbc"), 30.0, None)
    arguments = noted.read_text().split()
    assert "-primalS" in arguments and "-initialSolve" not in arguments
    assert out.status is Status.OPTIMAL
    # Reference: scipy's linprog (its own HiGHS build) on the same relaxation.
    reference = scipy_lp(model, model.shortfall_weight)
    assert out.objective == pytest.approx(reference.fun, rel=1e-6, abs=1e-6)


# Lines as CBC 2.10.3 (bundled with PuLP 3.3.2) wrote them: a 40-office stage stopped in
# preprocessing, a run with its summary, and two models it showed infeasible.
STOPPED_IN_PREPROCESSING = """Option for timeMode changed from cpu to elapsed
Continuous objective value is 333.079 - 9.43 seconds
Cgl0003I 0 fixed, 0 tightened bounds, 7 strengthened rows, 0 substitutions"""
SUMMARY = """Result - Stopped on time limit

No feasible solution found
Lower bound:                    336.016
Enumerated nodes:               0"""
PREPROCESSING_INFEASIBLE = """Cgl0000I Cut generators found to be infeasible! (or unbounded)
Pre-processing says infeasible or unbounded"""
LP_INFEASIBLE = """Presolve determined that the problem was infeasible with tolerance of 1e-08
Analysis indicates model infeasible or unbounded
Primal infeasible - objective value 5.5
Result - Linear relaxation infeasible"""


def test_cbc_bound_and_infeasibility_are_read_from_what_its_log_shows():
    from rebalance.backends.cbc import _CBC_PROVEN_INFEASIBLE, _cbc_bound

    # Each at the least value its printed digits may stand for (one unit in the last place).
    assert _cbc_bound(STOPPED_IN_PREPROCESSING) == pytest.approx(333.078, abs=1e-9)
    assert _cbc_bound(STOPPED_IN_PREPROCESSING + "\n" + SUMMARY) == pytest.approx(336.015,
                                                                                 abs=1e-9)
    assert _cbc_bound("Lower bound:                    1e+50") is None
    assert _cbc_bound("") is None
    assert _CBC_PROVEN_INFEASIBLE.search(PREPROCESSING_INFEASIBLE)
    assert _CBC_PROVEN_INFEASIBLE.search(LP_INFEASIBLE)
    # A stopped run's lines carry no proof, whatever PuLP then reads from its solution file.
    assert not _CBC_PROVEN_INFEASIBLE.search(STOPPED_IN_PREPROCESSING + "\n" + SUMMARY)
    assert not _CBC_PROVEN_INFEASIBLE.search("5130  Obj 0.00024938509 Primal inf 36857.683 (2768)")


def test_cbc_bounds_are_read_below_their_rounding_and_a_finished_search_proves_its_gap():
    # A sweep: CBC printed "Lower bound: 201.618" of a stage whose optimum is 201.61754
    # (HiGHS and CBC with no gap), and a 1% search that ran to its end ("Optimal solution
    # found", no "Lower bound" line) was given its plan as its bound, a gap of 0, for a plan
    # 0.013% above the optimum.  CBC 2.10.3's lines, as it wrote them.
    from rebalance.backends.cbc import _cbc_bound, _optimal_bound

    assert _cbc_bound("Lower bound:                    201.618") < 201.61754
    assert _cbc_bound("Lower bound:                    2.4235e+06") == pytest.approx(
        2.4234e6, abs=1e-6)
    progress = ("Continuous objective value is 41.2176 - 0.00 seconds\n"
                "Cbc0010I After 0 nodes, 1 on tree, 46.406518 best solution, best possible "
                "44.529414 (0.20 seconds)\n")
    # The root LP's, not the progress lines' (they may bound a model reduced on a restart).
    assert _cbc_bound(progress) == pytest.approx(41.2175, abs=1e-9)
    finished = progress + "Result - Optimal solution found\n\nObjective value: 44.79604626\n"
    # Ran to its end: what the gap asked leaves proven, or the root LP's value if higher.
    alone = "Result - Optimal solution found\n"
    assert _optimal_bound(alone, 44.79604626, 0.01) == pytest.approx(44.79604626 * 0.99)
    assert _optimal_bound(finished, 44.79604626, 0.01) == pytest.approx(44.79604626 * 0.99)
    assert _optimal_bound(finished, 41.3, 0.01) == pytest.approx(41.2175, abs=1e-9)
    assert _optimal_bound(finished, 44.79604626, 0.0) == 44.79604626
    assert _optimal_bound(finished + SUMMARY, 337.0, 0.01) == pytest.approx(336.015, abs=1e-9)


def test_a_plan_meeting_its_bound_is_optimal_but_a_bound_above_it_proves_nothing():
    # A cost of 0 against a solver's bound of 0 had stayed "feasible" in one run and read
    # "optimal" in another (a sweep); a bound above the plan is a solver's wrong claim.
    from rebalance.backends import BackendOutcome, Status
    from rebalance.stage_claims import with_floor as _with_floor

    x = np.zeros(1)
    met = _with_floor(BackendOutcome(Status.FEASIBLE_WITH_GAP, x, 0.0, 0.0,
                                     "Time limit reached", 1.0), 0.0)
    assert met.status is Status.OPTIMAL and "bound" in met.words
    above = _with_floor(BackendOutcome(Status.FEASIBLE_WITH_GAP, x, 109_000.0, 117_000.0,
                                       "Optimal", 1.0), 0.01)
    assert above.status is Status.FEASIBLE_WITH_GAP


def test_cbc_may_build_its_model_in_the_overtime_a_stage_without_a_plan_has():
    # The build checks had used the plain limit: with overtime allowed, CBC gave up ("no
    # time left to run CBC after building its model") with a third of a 5 s run unused.
    from conftest import DATA

    from rebalance import read_instance
    from rebalance.backends import CbcBackend, SolveOptions, Status
    from rebalance.model import build_model

    model = build_model(read_instance(DATA / "tiny"))
    out = CbcBackend().run(model, model.shortfall_weight, [],
                           SolveOptions(solver="cbc", overtime_without_plan=30.0), 0.0001, None)
    assert out.status is Status.OPTIMAL and out.x is not None


def test_staying_put_is_an_lp_of_the_work_split_alone(monkeypatch):
    # Handed the whole model with its whole numbers fixed, CBC spent a 40-office stage's 1.9 s
    # on PuLP's building and the run ended with no plan (exit 5): the step's model is the work
    # split, every whole-number column held apart.
    from conftest import DATA

    from rebalance import read_instance
    from rebalance.backends import SolveOptions
    from rebalance.heuristics import stay_put_plan
    from rebalance.model import build_model

    model = build_model(read_instance(DATA / "tiny"))
    seen = []

    class Spy(HighsBackend):
        def run(self, m, *args, **kwargs):
            seen.append(m)
            return super().run(m, *args, **kwargs)

    import time

    x = stay_put_plan(Spy(), model, model.shortfall_weight, SolveOptions(),
                      time.perf_counter() + 30.0, lambda _: None)
    assert x is not None and x.size == model.num_cols
    assert seen and all(not m.is_integer.any() and m.num_cols < model.num_cols for m in seen)
    assert np.array_equal(x[model.is_integer], model.col_lower[model.is_integer])


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="prctl and setpriv: Linux")
def test_cbc_dies_with_a_run_killed_outright(tmp_path):
    # A reviewer's check: a run killed with SIGKILL (the out-of-memory killer) runs no
    # clean-up, and its CBC went on solving, re-parented to pid 1.  Through util-linux's
    # setpriv --pdeathsig, the kernel now kills it with the run.
    import os
    import shutil
    import signal
    import subprocess
    import time

    import psutil

    if shutil.which("setpriv") is None:
        pytest.skip("util-linux's setpriv is not installed")
    rebalance = Path(sys.executable).with_name("rebalance")
    subprocess.run([str(rebalance), "generate", str(tmp_path / "i"), "--size", "small",
                    "--seed", "1"], check=True, capture_output=True)
    run = subprocess.Popen([str(rebalance), "plan", str(tmp_path / "i"), "-o",
                            str(tmp_path / "o"), "--solver", "cbc", "--time-limit", "60", "-q"],
                           stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    parent = psutil.Process(run.pid)
    solvers: list[psutil.Process] = []
    for _ in range(300):
        solvers = [p for p in parent.children(recursive=True) if p.name() == "cbc"]
        if solvers or run.poll() is not None:
            break
        time.sleep(0.05)
    assert solvers, "no CBC process was seen running"
    os.kill(run.pid, signal.SIGKILL)
    run.wait()
    _, alive = psutil.wait_procs(solvers, timeout=5)
    for process in alive:
        process.kill()
    assert not alive
