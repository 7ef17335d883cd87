"""The command line end to end, as a user runs it, with its documented exit codes."""

from __future__ import annotations

import json
import re
import shutil
import signal
import subprocess
import sys
import time
from pathlib import Path

import pandas as pd
import psutil
import pytest
from conftest import DATA, ROOT

import rebalance.model as model_module
import rebalance.planning as planning_module
from rebalance.cli import (
    EXIT_INFEASIBLE,
    EXIT_INVALID_INPUT,
    EXIT_NO_PLAN_IN_TIME,
    EXIT_OK,
    EXIT_SOLVER_ERROR,
    EXIT_STOPPED,
    EXIT_VERIFICATION_FAILED,
    main,
)


def run(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run([sys.executable, "-m", "rebalance.cli", *args], capture_output=True,
                          text=True, cwd=ROOT, timeout=300)


def test_plan_then_verify(tmp_path):
    out = tmp_path / "plan"
    done = run("plan", str(DATA / "tiny"), "-o", str(out))
    assert done.returncode == EXIT_OK, done.stderr
    assert "optimal" in done.stdout and "independent verification: passed" in done.stdout
    assert "Caution" in done.stdout
    for name in ("details", "reassignments", "hires", "work", "coverage", "costs"):
        assert (out / f"{name}.csv").exists()
    summary = json.loads((out / "summary.json").read_text())
    assert summary["status"] == "optimal" and summary["verification"]["passed"]
    assert summary["solver"] == "highs" and summary["solver_version"].startswith("HiGHS")
    assert run("verify", str(DATA / "tiny"), str(out)).returncode == EXIT_OK

    details = pd.read_csv(out / "details.csv")
    details.loc[0, "to_office"] = details.loc[0, "from_office"]
    details.to_csv(out / "details.csv", index=False)
    broken = run("verify", str(DATA / "tiny"), str(out))
    assert broken.returncode == EXIT_VERIFICATION_FAILED
    # Led by the file and row to open, the rule in words, not its code (a planner's reading).
    assert (f"  - {out / 'details.csv'}:2: person " in broken.stdout
            and "(a detail goes to another office)" in broken.stdout)
    assert "detail_to" not in broken.stdout


def test_check_prints_a_summary(capsys):
    assert main(["check", str(DATA / "tiny")]) == EXIT_OK
    assert "4 staff" in capsys.readouterr().out


def test_infeasible_limits_are_named(tmp_path, capsys):
    instance = tmp_path / "crowded"
    shutil.copytree(DATA / "tiny", instance)
    (instance / "offices.csv").write_text(
        "office,location,seats,max_hires_per_period\nA,Alder,1,1\nB,Birch,6,1\n")
    (instance / "settings.toml").write_text(
        (DATA / "tiny" / "settings.toml").read_text().replace("max_away_share = 0.5",
                                                              "max_away_share = 0.34"))
    code = main(["plan", str(instance), "-o", str(tmp_path / "out"), "-q"])
    out = capsys.readouterr().out
    assert code == EXIT_INFEASIBLE
    # One seat for three people at A needs two of them away, but at most 0.34 x 3 may be.
    assert "limits in conflict" in out
    assert "seats: A in 2027-" in out or "away share: A in 2027-" in out
    assert not (tmp_path / "out").exists()
    # With no plan the caution about a plan gives way to what happened (a practitioner's
    # reading: it had said "This plan supports a decision" of no plan, and not that nothing
    # was written).
    assert "No plan: nothing was written." in out and "Caution" not in out


def test_no_plan_in_time_keeps_the_old_plan(tmp_path, capsys):
    out = tmp_path / "out"
    out.mkdir()
    (out / "keep.txt").write_text("an earlier plan")
    (out / "summary.json").write_text("{}")  # a plan folder, which a new plan may replace
    code = main(["plan", str(ROOT / "instances" / "demo"), "-o", str(out), "-q",
                 "--time-limit", "0.1"])
    assert code in (EXIT_NO_PLAN_IN_TIME, EXIT_OK)
    if code == EXIT_NO_PLAN_IN_TIME:
        assert "no plan within the time limit" in capsys.readouterr().out
        assert (out / "keep.txt").read_text() == "an earlier plan"


def test_out_of_range_solver_options_are_usage_errors_that_say_what_was_expected(
        tmp_path, capsys):
    # The same ranges settings.toml takes; nothing is solved or written.
    import pytest

    from rebalance.cli import EXIT_USAGE

    out = tmp_path / "plan"
    for flag, value, expected in (("--time-limit", "-5", "seconds, from 0.1 to 10,000,000"),
                                  # settings.toml's bound: past it CBC's stop thread failed.
                                  ("--time-limit", "1e10", "seconds, from 0.1 to 10,000,000"),
                                  ("--gap", "1.5", "a relative gap from 0 to 1"),
                                  ("--gap", "nan", "a relative gap from 0 to 1"),
                                  ("--threads", "0", "a whole number from 1 to"),
                                  ("--threads", "two", "a whole number from 1 to"),
                                  ("--seed", "-1", "a whole number from 0 to"),
                                  # settings.toml's bound, 1e12, on seed and threads too.
                                  ("--seed", "2000000000000", "a whole number from 0 to"),
                                  ("--threads", "2000000000000", "a whole number from 1 to")):
        with pytest.raises(SystemExit) as stop:
            main(["plan", str(DATA / "tiny"), "-o", str(out), flag, value])
        assert stop.value.code == EXIT_USAGE
        err = capsys.readouterr().err
        assert f"argument {flag}: got {value!r}; expected {expected}" in err
        assert "Traceback" not in err
    assert not out.exists()


def test_plan_keeps_time_for_writing_its_files_inside_the_limit(tmp_path, monkeypatch):
    # The limit covers the whole run: the solve gets what is left after reading the instance
    # and the time writing the plan's files is expected to take.
    import rebalance.planning as planning

    seen: list[tuple[float, float]] = []
    real = planning.make_plan

    def spy(instance, options, *args, **kwargs):
        seen.append((options.time_limit_seconds, planning.write_seconds(instance)))
        return real(instance, options, *args, **kwargs)

    monkeypatch.setattr(planning, "make_plan", spy)
    assert main(["plan", str(DATA / "tiny"), "-o", str(tmp_path / "plan"), "--time-limit", "30",
                 "--quiet"]) == EXIT_OK
    [(limit, writing)] = seen
    assert writing >= planning.WRITE_SECONDS_BASE
    assert limit <= 30 - writing



def stopped_midway(tmp_path, command: list[str], sig: signal.Signals
                   ) -> tuple[int, str, str, list[psutil.Process]]:
    """Run ``command`` (``{instance}`` and ``{out}`` filled in) on a generated medium
    instance, 300 s given, two threads: its bound runs beside the search in a solver process
    of its own.  Send ``sig`` once the search has started; return the exit code, stdout,
    stderr and the solver processes that were running then.  Medium, not small: small has no
    side job, so a run that waited for side jobs would pass there too."""
    instance = tmp_path / "medium"
    assert main(["generate", str(instance), "--size", "medium", "--seed", "0"]) == EXIT_OK
    run = subprocess.Popen([part.format(instance=instance, out=tmp_path / "plan")
                            for part in command],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    try:
        assert run.stderr is not None
        seen, solvers = [], []
        for line in run.stderr:  # until the search and the side job both run
            seen.append(line)
            solvers = psutil.Process(run.pid).children(recursive=True)
            if ("searching" in line or "near the LP" in line) and len(solvers) >= 2:
                break
        assert len(solvers) >= 2, f"expected the search and a side job: {seen}"
        run.send_signal(sig)
        # Far inside the 300 s the solvers were given: stopped, not waited for.
        out, err = run.communicate(timeout=60)
    finally:
        if run.poll() is None:
            run.kill()
    _, alive = psutil.wait_procs(solvers, timeout=5)
    assert not alive, f"solver processes left running: {alive}"
    return run.returncode, out, err, solvers


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_a_stopped_plan_ends_at_once_kills_its_solvers_and_writes_nothing(tmp_path, sig):
    # Ctrl-C (or a scheduler's SIGTERM) in the middle of a long solve.
    code, out, err, _ = stopped_midway(
        tmp_path, [sys.executable, "-m", "rebalance.cli", "plan", "{instance}", "-o", "{out}",
                   "--time-limit", "300", "--threads", "2"], sig)
    assert code == EXIT_STOPPED
    assert "stopped from outside; nothing written" in err
    # Said once: the steps the stop cut short do not each report that they failed.
    assert not [line for line in err.splitlines() if "failed" in line or "not solved" in line]
    assert out == ""
    assert not (tmp_path / "plan").exists()


def test_a_stopped_solve_from_python_ends_at_once(tmp_path):
    # A notebook's interrupt is SIGINT to the kernel: make_plan raises at once.
    script = (
        "import sys\n"
        "from dataclasses import replace\n"
        "from rebalance import make_plan, options_from_instance, read_instance\n"
        "instance = read_instance(sys.argv[1])\n"
        "options = replace(options_from_instance(instance), time_limit_seconds=300.0,\n"
        "                  threads=2,\n"
        "                  progress=lambda text: print(text, file=sys.stderr, flush=True))\n"
        "try:\n"
        "    make_plan(instance, options)\n"
        "except KeyboardInterrupt:\n"
        "    print('raised', flush=True)\n")
    code, out, _, _ = stopped_midway(tmp_path, [sys.executable, "-c", script, "{instance}"],
                                     signal.SIGINT)
    assert code == 0 and out.split()[-1] == "raised"


def test_an_output_path_that_holds_other_files_is_refused_before_any_solve(tmp_path, capsys):
    # -o typed as the instance's own folder had replaced the instance with the plan.
    from rebalance.cli import EXIT_USAGE

    instance = tmp_path / "tiny"
    shutil.copytree(DATA / "tiny", instance)
    (instance / "notes.txt").write_text("my notes\n")
    before = sorted(p.name for p in instance.iterdir())
    assert main(["plan", str(instance), "-o", str(instance), "--quiet"]) == EXIT_USAGE
    assert sorted(p.name for p in instance.iterdir()) == before
    assert "not a plan folder written by rebalance" in capsys.readouterr().err
    a_file = tmp_path / "afile"
    a_file.write_text("keep me\n")
    for command in (["plan", str(instance)], ["marginal", str(instance)],
                    ["frontier", str(instance), "--hiring", "1x"]):
        assert main([*command, "-o", str(a_file), "--quiet"]) == EXIT_USAGE
        assert a_file.read_text() == "keep me\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile", "tiny"]  # nothing beside


def test_a_plan_folder_is_replaced_by_the_next_run(tmp_path):
    instance, out = DATA / "tiny", tmp_path / "plan"
    assert main(["plan", str(instance), "-o", str(out), "--quiet"]) == EXIT_OK
    assert main(["plan", str(instance), "-o", str(out), "--quiet"]) == EXIT_OK
    # A plan folder written before folders were marked: known by its summary.json.
    (out / ".rebalance-folder").unlink()
    assert main(["plan", str(instance), "-o", str(out), "--quiet"]) == EXIT_OK
    empty = tmp_path / "empty"
    empty.mkdir()
    assert main(["plan", str(instance), "-o", str(empty), "--quiet"]) == EXIT_OK


def test_a_plan_keeps_the_frontier_already_in_its_folder(tmp_path):
    # frontier.csv belongs to the instance, not to one plan: a plan written over the folder
    # had dropped it, where the analysis commands carry it over.
    out = tmp_path / "analysis"
    assert main(["frontier", str(DATA / "tiny"), "--hiring", "0.5x,1x,2x", "-o", str(out),
                 "--workers", "1", "-q"]) == EXIT_OK
    frontier = (out / "frontier.csv").read_bytes()
    assert main(["plan", str(DATA / "tiny"), "-o", str(out), "--threads", "1", "-q"]) == EXIT_OK
    assert (out / "frontier.csv").read_bytes() == frontier
    assert (out / "summary.json").is_file()
    assert 'id="frontier"' in (out / "report.html").read_text(encoding="utf-8")


def test_a_frontier_with_an_unverified_plan_writes_nothing(tmp_path, monkeypatch, capsys):
    # docs/analysis.md: a command whose plan fails verification writes nothing, exit 6.
    import rebalance.planning as planning
    from rebalance.verify import Violation

    monkeypatch.setattr(planning, "verify_plan",
                        lambda instance, plan: [Violation("test", "here", "made to fail")])
    fresh, kept = tmp_path / "fresh", tmp_path / "kept"
    kept.mkdir()
    (kept / "frontier.csv").write_text("an earlier frontier\n")
    for out in (fresh, kept):
        assert main(["frontier", str(DATA / "tiny"), "--hiring", "1x,2x", "-o", str(out),
                     "--workers", "1", "-q"]) == EXIT_VERIFICATION_FAILED
        err = capsys.readouterr().err
        assert "point 1: the plan failed verification" in err
        assert "  - here: made to fail" in err and "nothing was written" in err
    assert not fresh.exists()
    assert sorted(p.name for p in kept.iterdir()) == ["frontier.csv"]
    assert (kept / "frontier.csv").read_text() == "an earlier frontier\n"


def test_outputs_that_would_land_in_an_instance_are_refused(tmp_path, capsys):
    # README: -o holding the instance itself is refused before any solve.  frontier adds
    # frontier.csv to any other folder, so an instance is what it must not write into.
    from rebalance.cli import EXIT_USAGE
    from rebalance.workbook_writer import folder_to_workbook

    copy = tmp_path / "copy"
    shutil.copytree(DATA / "tiny", copy)
    before = sorted(p.name for p in copy.iterdir())
    assert main(["frontier", str(copy), "--hiring", "1x", "-o", str(copy), "-q"]) == EXIT_USAGE
    assert "holds an instance (settings.toml)" in capsys.readouterr().err
    assert sorted(p.name for p in copy.iterdir()) == before
    # An instance workbook in the folder counts too; plan.xlsx of a plan folder does not.
    books = tmp_path / "books"
    books.mkdir()
    folder_to_workbook(DATA / "tiny", books / "tiny.xlsx")
    assert main(["frontier", str(books / "tiny.xlsx"), "--hiring", "1x", "-o", str(books),
                 "-q"]) == EXIT_USAGE
    assert "holds an instance (tiny.xlsx)" in capsys.readouterr().err
    assert sorted(p.name for p in books.iterdir()) == ["tiny.xlsx"]
    plan = tmp_path / "plan"
    assert main(["plan", str(DATA / "tiny"), "-o", str(plan), "--threads", "1", "-q"]) == EXIT_OK
    (plan / "notes.txt").write_text("mine\n")
    assert main(["frontier", str(DATA / "tiny"), "--hiring", "1x", "-o", str(plan),
                 "--workers", "1", "-q"]) == EXIT_OK
    assert (plan / "frontier.csv").is_file() and (plan / "notes.txt").is_file()


def test_demand_report_folder_of_other_files_is_refused(tmp_path, capsys):
    # OUT is an instance folder by design (demand.csv goes into it), but the report folder
    # is replaced whole: a --report holding anything else had been wiped.
    from rebalance.cli import EXIT_USAGE

    mine = tmp_path / "mine"
    mine.mkdir()
    (mine / "notes.txt").write_text("keep me\n")
    instance = tmp_path / "demo"
    shutil.copytree(ROOT / "instances" / "demo", instance)
    demand = (instance / "demand.csv").read_bytes()
    assert main(["demand", str(ROOT / "instances" / "demo_history"), "-o", str(instance),
                 "--report", str(mine)]) == EXIT_USAGE
    assert "not a demand_report folder" in capsys.readouterr().err
    assert [p.name for p in mine.iterdir()] == ["notes.txt"]
    assert (instance / "demand.csv").read_bytes() == demand


@pytest.mark.parametrize("command", [
    ["plan", str(DATA / "tiny"), "-o", "{out}", "--threads", "1"],
    ["check", str(ROOT / "instances" / "demo")],
])
def test_a_reader_that_leaves_early_is_no_error(tmp_path, command):
    # `rebalance ... | head -1`: the reader closes the pipe before the output ends.  No
    # traceback, no "internal error"; the command finishes (the plan is written).
    out = tmp_path / "plan"
    args = [part.format(out=out) for part in command]
    run = subprocess.Popen([sys.executable, "-m", "rebalance.cli", *args],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT)
    assert run.stdout is not None and run.stderr is not None
    run.stdout.close()  # gone before anything is printed
    err = run.stderr.read()
    run.wait(timeout=300)
    assert run.returncode == EXIT_OK, err
    assert "internal error" not in err and "Traceback" not in err and "Broken" not in err
    if command[0] == "plan":
        assert (out / "summary.json").is_file()


def _spawned(process: psutil.Process) -> bool:
    """Whether ``process`` is a spawned pool worker; not one that has just ended (the base's
    solver processes come and go before the workers start)."""
    try:
        return "spawn_main" in " ".join(process.cmdline())
    except psutil.Error:
        return False


def test_a_stopped_analysis_ends_its_workers_at_once(tmp_path):
    # A sweep: Ctrl-C 3 s into a comparison of three solves (two workers) ended it after
    # 22 s: a worker took its stop as the end of one task and ran the next one queued.
    scenarios = sorted(str(p) for p in (ROOT / "instances" / "demo_scenarios").glob("*.toml"))
    command = [sys.executable, "-m", "rebalance.cli", "compare", str(ROOT / "instances" / "demo"),
               *[part for s in scenarios for part in ("--scenario", s)],
               "-o", str(tmp_path / "cmp"), "--time-limit", "30", "--workers", "2"]
    run = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                           cwd=ROOT)
    try:
        # The base is solved first, in the command's own process (up to its 30 s); then the
        # two scenarios, one a worker.
        deadline = time.monotonic() + 90
        workers: list[psutil.Process] = []
        while len(workers) < 2 and time.monotonic() < deadline:  # both pool workers up
            workers = [p for p in psutil.Process(run.pid).children() if _spawned(p)]
            time.sleep(0.2)
        assert len(workers) >= 2
        time.sleep(3.0)  # into their solves (the demo's take their whole 30 s)
        tree = psutil.Process(run.pid).children(recursive=True)
        run.send_signal(signal.SIGINT)
        signalled = time.monotonic()
        _, err = run.communicate(timeout=60)
        took = time.monotonic() - signalled
    finally:
        if run.poll() is None:
            run.kill()
    assert run.returncode == EXIT_STOPPED and "nothing written" in err
    assert took < 10, f"{took:.1f} s from the signal to the end"  # solves had 30 s each
    _, alive = psutil.wait_procs(tree, timeout=5)
    assert not alive, f"processes left running: {alive}"
    assert not (tmp_path / "cmp").exists()


def test_building_past_the_time_limit_is_no_plan_in_time_and_writes_nothing(
        tmp_path, monkeypatch, capsys):
    # The limit covers building too (issue 3): an instance of hundreds of offices with many
    # relocatable people had built for 90 s and 14 GB under a 15 s limit.  Here the deadline
    # has passed when building starts.
    build = planning_module.build_model
    monkeypatch.setattr(planning_module, "build_model",
                        lambda *args, **kwargs: build(*args, **{**kwargs, "deadline": 0.0}))
    out = tmp_path / "plan"
    code = main(["plan", str(DATA / "tiny"), "-o", str(out), "--time-limit", "5"])
    assert code == EXIT_NO_PLAN_IN_TIME
    shown = capsys.readouterr().out
    assert "building the model ran past the time limit" in shown
    assert not out.exists()


def test_building_with_memory_nearly_gone_is_a_clear_error_and_writes_nothing(
        tmp_path, monkeypatch, capsys):
    # With a 200-office instance, half its people relocatable, building had held all 24 GB
    # of this machine and been killed by the kernel: building now stops with memory low.
    monkeypatch.setattr(model_module, "NONZEROS_PER_CHECK", 1)
    monkeypatch.setattr(model_module, "MIN_FREE_MEMORY_SHARE", 1.0)  # never enough free
    out = tmp_path / "plan"
    code = main(["plan", str(DATA / "tiny"), "-o", str(out)])
    assert code == EXIT_SOLVER_ERROR
    assert "machine's memory nearly used up" in capsys.readouterr().out
    assert not out.exists()



def _tiny_in_euros(tmp_path):
    instance = tmp_path / "tiny"
    shutil.copytree(DATA / "tiny", instance)
    with open(instance / "settings.toml", "a", encoding="utf-8") as settings:
        settings.write('\n[money]\ncurrency = "EUR"\n')
    return instance


def test_a_replans_comparison_prints_by_the_one_number_rule(tmp_path, capsys):
    # A practitioner's reading: replan.csv printed as "total_cost 2,463,500.00", "hires
    # 24.00" and "difference -0.00", no currency.
    instance = _tiny_in_euros(tmp_path)
    assert main(["plan", str(instance), "-o", str(tmp_path / "old"), "-q"]) == EXIT_OK
    capsys.readouterr()
    assert main(["replan", str(instance), "--from", str(tmp_path / "old"), "--at", "2027-Q3",
                 "-o", str(tmp_path / "new"), "-q", "--gap", "0"]) == EXIT_OK
    out = capsys.readouterr().out
    # Columns are two spaces or more apart; each measure reads in words.
    cells = [re.split(r"\s{2,}", line.strip()) for line in out.splitlines()]
    rows = {c[0]: c[1:] for c in cells
            if c[0] in ("new money", "hires", "disruption cost", "weighted shortfall")}
    assert rows["new money"] == ["43,000 EUR", "43,000 EUR", "0 EUR"]
    assert rows["disruption cost"] == ["0 EUR", "0 EUR", "0 EUR"]
    assert rows["hires"] == ["1", "1", "0"]
    assert rows["weighted shortfall"][-1] == "0"
    assert ".00" not in out.split("measure", 1)[1].split(" against the old plan", 1)[0]


def test_marginal_prints_each_step_with_its_unit(tmp_path, capsys):
    # The console's step column had read "10" for seats and "100,000" for budgets, no unit.
    instance = _tiny_in_euros(tmp_path)
    assert main(["marginal", str(instance), "-o", str(tmp_path / "m"), "-q"]) == EXIT_OK
    out = capsys.readouterr().out
    table = pd.read_csv(tmp_path / "m" / "marginal_values.csv")
    assert len(table)
    from rebalance.report.analysis_charts import step_words

    for step, unit in zip(table["step"], table["unit"], strict=True):
        words = step_words(float(step), str(unit), "EUR")
        assert " " in words and words in out  # "+10 seats", "+100,000 EUR"


def test_marginal_help_says_where_estimates_come_from(capsys):
    with pytest.raises(SystemExit):
        main(["marginal", "--help"])
    text = " ".join(capsys.readouterr().out.split())
    assert "LP-dual estimates" not in text
    assert "LP re-solves with the limit moved, else LP duals" in text


def test_the_time_limit_counts_from_the_start_of_the_process():
    # Python's start and imports (about 0.5 s) had come before the clock of `plan`, which
    # counts the whole run against its --time-limit: a run of 1 s had ended at 1.4 s.
    code = ("import time; time.sleep(1.0); "
            "from rebalance.cli import _seconds_since_process_start as since; print(since())")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert 1.0 <= float(run.stdout) < 30.0


def test_report_on_a_folder_with_no_summary_says_so(tmp_path, capsys):
    # A sweep: `report` on a folder holding only frontier.csv said "summary.json names no
    # instance", of a summary.json that was not there.
    from rebalance.cli import EXIT_USAGE

    folder = tmp_path / "frontier-only"
    folder.mkdir()
    (folder / "frontier.csv").write_text("point,hiring_budget\n1,1.0\n")
    code = main(["report", str(folder)])
    assert code == EXIT_USAGE
    assert "no summary.json here to name the instance; give --instance" in capsys.readouterr().err


def test_a_seats_conflict_says_how_many_people_are_based_there(tmp_path, capsys):
    # Hand count (tests/data/seats_short/NOTE.md): at a share of 0.25, A's 2 seats hold 5
    # people in 2027-Q1, of whom at most 2 may go (a5 reassigned, 1 of the 4 others away).
    instance = tmp_path / "seats_short"
    shutil.copytree(DATA / "seats_short", instance)
    settings = instance / "settings.toml"
    settings.write_text(settings.read_text().replace("max_away_share = 0.5",
                                                     "max_away_share = 0.25"))
    code = main(["plan", str(instance), "-o", str(tmp_path / "out"), "-q"])
    out = capsys.readouterr().out
    assert code == EXIT_INFEASIBLE
    assert ("seats: A in 2027-Q1 (over by 1): 2 seats for 5 people based there; 3 must be "
            "away or moved, and at most 2 may be away or moved (can_detail, can_relocate, "
            "max_away_share)") in out


def test_every_option_of_every_command_says_what_it_is():
    # `rebalance COMMAND --help` is where a planner learns the options: none may be bare
    # (plan's --solver and --seed, and the analyses' instance and -o, had been).
    import argparse

    from rebalance.cli import build_parser

    commands = next(a for a in build_parser()._actions
                    if isinstance(a, argparse._SubParsersAction))
    bare = [f"{name} {action.dest}" for name, parser in commands.choices.items()
            for action in parser._actions
            if not isinstance(action, argparse._HelpAction) and not action.help]
    assert bare == []


def test_a_time_limit_too_short_for_its_parts_is_said_so_with_one_that_fits() -> None:
    # Sweep (3,000 people, --time-limit 1): "of the 1 s limit, 0.76 s went to starting and
    # reading the instance and 2.80 s were kept for writing", parts over the whole.  Common
    # practice: the shares of a whole add up to it, or the message says they cannot.
    from rebalance.cli import _limit_shares

    assert _limit_shares(1.0, 0.76, 2.80, 0.5) == (
        "the 1 s limit is shorter than starting and reading the instance took (0.76 s) plus "
        "the time kept for writing the plan's files (2.80 s) and the least time the model is "
        "given to build and solve (0.50 s), 4.06 s in all; --time-limit 5 would leave the "
        "model 1 s")
    assert _limit_shares(60.0, 0.76, 2.80, 56.44) == (
        "of the 60 s limit, 0.76 s went to starting and reading the instance, 2.80 s were "
        "kept for writing the plan's files and 56.44 s were left to build and solve the model")


def test_a_full_disk_while_writing_is_said_plainly_and_writes_nothing(tmp_path, capsys,
                                                                     monkeypatch):
    # An OSError while writing the reports had ended as "internal error ... please report
    # this"; every output is staged, so nothing is left half-written and the old folder stays.
    import rebalance.report.files as files_module

    out = tmp_path / "plan"
    assert main(["plan", str(DATA / "tiny"), "-o", str(out), "--quiet"]) == EXIT_OK
    before = sorted(p.name for p in out.iterdir())
    capsys.readouterr()

    def full(*args, **kwargs):
        raise OSError(28, "No space left on device", str(out / ".report.html.tmp"))

    monkeypatch.setattr(files_module, "write_html", full)
    assert main(["plan", str(DATA / "tiny"), "-o", str(out), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert f"{out}: cannot be written (No space left on device); nothing was written" in err
    assert "internal error" not in err
    assert sorted(p.name for p in out.iterdir()) == before
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM])
def test_a_stop_just_after_the_plan_is_swapped_in_says_it_was_written(tmp_path, monkeypatch,
                                                                     capsys, sig):
    # It had said "stopped from outside; nothing written" of a folder holding the new plan
    # whole.  The signal is sent by the last rename itself, not timed.
    import os

    import rebalance.files as files_module

    out = tmp_path / "plan"
    real_replace = os.replace

    def replace(src, dst):  # type: ignore[no-untyped-def]
        real_replace(src, dst)
        if str(dst) == str(out):
            os.kill(os.getpid(), sig)

    monkeypatch.setattr(files_module.os, "replace", replace)
    assert main(["plan", str(DATA / "tiny"), "-o", str(out), "--quiet"]) == EXIT_STOPPED
    err = capsys.readouterr().err
    assert f"{out}/: written in full; then stopped from outside" in err
    assert "nothing written" not in err
    assert (out / "summary.json").is_file()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["plan"]


def test_a_sigterm_after_the_solve_handlers_are_gone_is_still_said(tmp_path):
    # Between the solve's handlers and the end, SIGTERM had its default action: the run died
    # without a word (exit 143, 128 + SIGTERM by the shells' rule).  Sent in a child process,
    # which that default would kill.
    out = tmp_path / "plan"
    script = (
        "import contextlib, os, signal, sys\n"
        "import rebalance.cli as cli\n"
        "real = cli.stoppable\n"
        "@contextlib.contextmanager\n"
        "def then_term():\n"
        "    with real():\n"
        "        yield\n"
        "    os.kill(os.getpid(), signal.SIGTERM)\n"
        "cli.stoppable = then_term\n"
        f"sys.exit(cli.main(['plan', {str(DATA / 'tiny')!r}, '-o', {str(out)!r}, '-q']))\n")
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True,
                          cwd=ROOT, timeout=300)
    assert done.returncode == EXIT_STOPPED, done.stderr
    assert f"{out}/: written in full; then stopped from outside" in done.stderr
    assert "Plan for tiny" in done.stdout  # what was said before is not lost


def test_a_ctrl_c_before_main_runs_ends_quietly_with_130():
    # While the modules load there is no main() to catch it: it had printed a traceback.
    done = subprocess.run([sys.executable, "-c", "import rebalance.cli\nraise KeyboardInterrupt"],
                          capture_output=True, text=True, cwd=ROOT, timeout=300)
    assert done.returncode == EXIT_STOPPED
    assert done.stderr == "stopped from outside; nothing written\n"


@pytest.mark.parametrize("command", [
    ["plan", "{tiny}", "-o", "{out}"],
    ["marginal", "{tiny}", "-o", "{out}"],
    ["frontier", "{tiny}", "--hiring", "1x", "-o", "{out}"],
    ["workbook", "{tiny}", "-o", "{out}.xlsx"],
    ["generate", "{out}"],
    ["replan", "{tiny}", "--from", "{tiny}", "--at", "2027-Q3", "-o", "{out}"],
    ["compare", "{tiny}", "--scenario", "{tiny}/settings.toml", "-o", "{out}"],
])
def test_an_output_that_cannot_be_written_is_refused_before_any_solve(tmp_path, capsys,
                                                                     monkeypatch, command):
    # Found only after the whole solve, the plan's summary printed, it had wasted the time.
    import rebalance.cli_common as common

    def no_read(*args, **kwargs):  # type: ignore[no-untyped-def]
        raise AssertionError("the instance was read before the output was checked")

    monkeypatch.setattr(common, "read_instance", no_read)
    (tmp_path / "afile").write_text("x", encoding="utf-8")
    for out, why in ((tmp_path / "afile" / "sub", "afile is a file, not a folder"),
                     ("/proc/rebalance-out", ": /proc); nothing")):  # Linux
        argv = [part.format(tiny=DATA / "tiny", out=out) for part in command]
        assert main(argv) == 2
        out_err = capsys.readouterr()
        assert why in out_err.err and "nothing was written" in out_err.err
        assert out_err.out == ""


@pytest.mark.parametrize("out", ["", ".", "{here}", "{here}/."])
def test_an_out_folder_must_be_a_folder_of_its_own(tmp_path, monkeypatch, capsys, out):
    # -o "" had written into the current folder ("plan written to /"); -o . had replaced the
    # current folder, a plan folder of an earlier run, leaving the shell in a deleted one.
    here = tmp_path / "plan"
    assert main(["plan", str(DATA / "tiny"), "-o", str(here), "--quiet"]) == EXIT_OK
    before = sorted(here.iterdir())
    monkeypatch.chdir(here)
    capsys.readouterr()
    assert main(["plan", str(DATA / "tiny"), "-o", out.format(here=here), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "a folder of its own" in err and "nothing was written" in err
    assert sorted(here.iterdir()) == before and here.samefile(Path.cwd())


def test_an_out_folder_holding_the_instance_is_refused(tmp_path, capsys):
    plans = tmp_path / "plans"
    assert main(["plan", str(DATA / "tiny"), "-o", str(plans), "--quiet"]) == EXIT_OK
    shutil.copytree(DATA / "tiny", plans / "inst")  # an instance kept in a plan folder
    capsys.readouterr()
    assert main(["plan", str(plans / "inst"), "-o", str(plans), "--quiet"]) == 2
    assert f"{plans}: holds the instance ({plans / 'inst'})" in capsys.readouterr().err
    assert (plans / "inst" / "staff.csv").is_file()


def test_an_unreadable_input_file_is_invalid_input_not_an_output_problem(tmp_path):
    # It had read "staff.csv: cannot be written", exit 2, and for plan blamed the -o folder.
    # As root the file is read by a user with no rights to it (setpriv(1)); root itself
    # passes every permission check (capabilities(7), CAP_DAC_OVERRIDE).
    import os
    import tempfile

    base = Path(tempfile.mkdtemp(prefix="rebalance-unreadable-"))  # others may enter
    try:
        base.chmod(0o777)
        instance = base / "inst"
        shutil.copytree(DATA / "tiny", instance)
        for path in [instance, *instance.iterdir()]:
            path.chmod(0o755 if path.is_dir() else 0o644)
        (instance / "staff.csv").chmod(0)
        prefix: list[str] = []
        if os.geteuid() == 0:
            if shutil.which("setpriv") is None:
                pytest.skip("running as root without setpriv to drop the rights")
            prefix = ["setpriv", "--reuid=65534", "--regid=65534", "--clear-groups"]
        for command in (["check", str(instance)],
                        ["plan", str(instance), "-o", str(base / "plan"), "-q"]):
            done = subprocess.run([*prefix, sys.executable, "-m", "rebalance.cli", *command],
                                  capture_output=True, text=True, cwd=ROOT, timeout=300)
            assert done.returncode == EXIT_INVALID_INPUT, done.stderr
            assert f"{instance / 'staff.csv'}: cannot be read (Permission denied)" in done.stderr
            assert "cannot be written" not in done.stderr and "plan:" not in done.stderr
    finally:
        shutil.rmtree(base, ignore_errors=True)


def test_every_path_a_command_takes_is_checked_before_the_run() -> None:
    # cli_common's _WRITES and _READS are kept by hand beside the parser: a new command's or
    # option's path missing there would not be checked before the solve (an unwritable -o
    # had been found only after it).  Every argument with no type and no fixed choices is a
    # path, except the few named here, which are not.
    import argparse

    from rebalance.cli import build_parser
    from rebalance.cli_common import _READS, _WRITES

    not_paths = {"at", "hiring", "moves"}  # a period name; the budget grids
    subcommands = next(a for a in build_parser()._actions
                       if isinstance(a, argparse._SubParsersAction))
    for command, parser in subcommands.choices.items():
        written = {name for name, _ in _WRITES.get(command, ())}
        for action in parser._actions:
            if (action.type is not None or action.choices is not None or action.nargs == 0
                    or action.dest in {"help", *not_paths}):
                continue
            assert action.dest in written or action.dest in _READS, (command, action.dest)


def test_plan_counts_the_reasons_that_ask_for_a_review(tmp_path) -> None:
    # Moves both ways between two offices are marked "(review)" in reasons.csv only; plan
    # now counts them on the console.  Counted by hand below: two of the four rows, as the
    # table is written and as it reads back (an empty reason is NaN).
    from rebalance.cli_common import asking_review

    path = tmp_path / "reasons.csv"
    path.write_text('action,reason\nreassignment,"moves both ways, A and B (review)"\n'
                    "detail,needed at B\nreassignment,no reason found (review)\nshortfall,\n")
    assert asking_review(pd.read_csv(path)) == 2
    assert asking_review(pd.DataFrame({"reason": ["fine", "look (review)", ""]})) == 1
