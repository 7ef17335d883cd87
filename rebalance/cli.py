"""Command line: parse arguments, call the library, map outcomes to exit codes.

Exit codes (also in the README):
    0  plan found and verified (or: input valid, plan verified)
    1  unexpected internal error
    2  command-line usage error (or an output that may not be replaced or cannot be written)
    3  invalid input (every problem is listed)
    4  infeasible: the hard limits conflict (the conflicting limits are listed)
    5  time limit reached with no plan
    6  the plan failed independent verification
    7  solver error or unknown solver outcome

The analyses compare, replan and marginal give 4, 5 or 7 when a plan they need has none;
frontier only when no budget point has a plan, and it still writes frontier.csv (mixed
outcomes give 4 if any point is infeasible, else 7): docs/analysis.md, *Exit codes*.
"""

from __future__ import annotations

import os
import sys


def _stopped_early(kind: type[BaseException], value: BaseException, tb: object) -> None:
    """``sys.excepthook`` of the command line: a Ctrl-C before :func:`main` runs (while the
    modules load, the first half second) ends the run as a stop later does, exit 130 with
    one line, not a traceback."""
    if issubclass(kind, KeyboardInterrupt):
        try:
            sys.stderr.write("stopped from outside; nothing written\n")
            sys.stderr.flush()
        finally:
            os._exit(130)
    _EXCEPTHOOK(kind, value, tb)  # type: ignore[arg-type]


# ruff: noqa: E402 (the hook goes in before the other imports)
# First, before the slow imports below; not at an interactive prompt, whose Ctrl-C must not
# end it.  (rebalance/__init__.py runs before this module: what it imports comes first.)
_EXCEPTHOOK = sys.excepthook
if not sys.flags.interactive and not hasattr(sys, "ps1"):
    sys.excepthook = _stopped_early

import argparse
import math
import shlex
import signal
import threading
import time
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any, TextIO

from rebalance.backends import raise_if_stopped, stoppable
from rebalance.cli_analysis import add_analysis_commands
from rebalance.cli_common import (
    COUNT,
    EXIT_INFEASIBLE,
    EXIT_INTERNAL,
    EXIT_INVALID_INPUT,
    EXIT_NO_PLAN_IN_TIME,
    EXIT_OK,
    EXIT_SOLVER_ERROR,
    EXIT_STOPPED,
    EXIT_USAGE,
    EXIT_VERIFICATION_FAILED,
    INSTANCE_HELP,
    SCENARIO_COPY,
    STATUS_EXIT,
    VIOLATIONS_SHOWN,
    _err,
    _keep_frontier,
    _load,
    _os_error,
    _output_refused,
    _unreadable_plan,
    add_solver_options,
    asking_review,
    folder_instance,
    scenario_of,
)
from rebalance.numbers import seconds_text
from rebalance.problems import problems_counted
from rebalance.readers import count_problems
from rebalance.solve import Status
from rebalance.verify_causes import first_problems

# The exit codes stay importable from here (tests, scripts); they are defined in cli_common
# so that cli_analysis can use them without importing this module back.
__all__ = [
    "EXIT_INFEASIBLE",
    "EXIT_INTERNAL",
    "EXIT_INVALID_INPUT",
    "EXIT_NO_PLAN_IN_TIME",
    "EXIT_OK",
    "EXIT_SOLVER_ERROR",
    "EXIT_STOPPED",
    "EXIT_USAGE",
    "EXIT_VERIFICATION_FAILED",
    "STATUS_EXIT",
    "VIOLATIONS_SHOWN",
    "build_parser",
    "main",
]


def cmd_check(args: argparse.Namespace) -> int:
    from rebalance.conflicts import seats_cannot_hold
    from rebalance.report import format_check

    instance = _load(args.instance, writes=False)
    if instance is None:
        return EXIT_INVALID_INPUT
    print(format_check(instance))
    # As `plan` would end, without a solve: the seats' conflict is already certain.
    return EXIT_INFEASIBLE if seats_cannot_hold(instance) else EXIT_OK


def _seconds_since_process_start() -> float:
    """Time this process has run so far: Python's start and imports (about 0.5 s) come before
    any clock of ours, and a run of ``--time-limit 1`` had ended at 1.4 s."""
    import psutil

    try:
        return max(0.0, time.time() - psutil.Process().create_time())
    except psutil.Error:
        return 0.0


def cmd_plan(args: argparse.Namespace) -> int:
    from rebalance.planning import make_plan, options_from_instance, write_seconds
    from rebalance.report import format_summary

    started = time.perf_counter() - _seconds_since_process_start()
    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    for warning in instance.warnings:
        _err(f"warning: {warning}")
    options = options_from_instance(
        instance, solver=args.solver, time_limit_seconds=args.time_limit,
        relative_gap=args.gap, seed=args.seed, threads=args.threads,
        progress=None if args.quiet else _err)
    # The limit covers the whole run, Python's start, reading the instance and writing the
    # plan included (a 60 s run of a 2,000-person instance had ended at 62 s, writing after
    # its limit).
    read_seconds = time.perf_counter() - started
    kept_seconds = write_seconds(instance)
    limit = options.time_limit_seconds
    options = replace(options, time_limit_seconds=max(0.5, limit - read_seconds - kept_seconds))
    result = make_plan(instance, options)
    raise_if_stopped()  # a stop the solver swallowed still writes nothing
    print(format_summary(result))
    if result.plan is None:
        if result.status is Status.NO_PLAN_IN_TIME:
            # The build's or solve's own words name only their share of the limit.
            _err(_limit_shares(limit, read_seconds, kept_seconds, options.time_limit_seconds))
        return STATUS_EXIT.get(result.status, EXIT_SOLVER_ERROR)
    if not result.verified:
        _err("the plan failed verification; nothing was written")
        return EXIT_VERIFICATION_FAILED
    from rebalance.files import staged_folder
    from rebalance.report.files import write_plan_folder

    # With reasons.csv (why each hire, detail and shortfall, as the analyses write it: a
    # planner defending a plain plan had no reason for a detail away from an office that is
    # short itself) and the frontier a plan there had, both shown by the report.
    with staged_folder(args.out, kind="plan") as folder:
        reasons = write_plan_folder(result, folder, instance_path=args.instance,
                                    more=lambda into: _keep_frontier(args.out, into))
    print(f"\nplan written to {args.out}/")
    review = asking_review(reasons)
    if review:
        # Moves both ways between two offices had sat in reasons.csv alone (a reviewer's).
        print(f"{review:,} of the plan's reasons ask for a review (they end in '(review)' in "
              "reasons.csv and the page's table of reasons): read them before acting on those")
    return EXIT_OK


def _limit_shares(limit: float, read_seconds: float, kept_seconds: float,
                  solve_seconds: float) -> str:
    """How a run's time limit was shared out, for a run that found no plan in it.  Where the
    parts cannot fit, that is said, with a limit that would (a sweep's 1 s run read "of the 1
    s limit, 0.76 s went to ... reading and 2.80 s were kept for writing")."""
    read, kept = seconds_text(read_seconds), seconds_text(kept_seconds)
    solve = seconds_text(solve_seconds)
    if read_seconds + kept_seconds + solve_seconds <= limit * (1 + 1e-9):
        return (f"of the {limit:g} s limit, {read} s went to starting and reading the "
                f"instance, {kept} s were kept for writing the plan's files and {solve} s were "
                "left to build and solve the model")
    # Reading takes about as long again; the model keeps the time the limit was meant for.
    fit = math.ceil(read_seconds + kept_seconds + max(limit, solve_seconds))
    return (f"the {limit:g} s limit is shorter than starting and reading the instance took "
            f"({read} s) plus the time kept for writing the plan's files ({kept} s) and the "
            f"least time the model is given to build and solve ({solve} s), "
            f"{seconds_text(read_seconds + kept_seconds + solve_seconds)} s in all; "
            f"--time-limit {fit} would leave the model {max(limit, solve_seconds):g} s")


def cmd_verify(args: argparse.Namespace) -> int:
    from rebalance.plan import PlanError
    from rebalance.report import format_violations
    from rebalance.verify import verify_folder

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    if not Path(args.plan_dir).is_dir():
        _err(f"{args.plan_dir}: plan folder not found")
        return EXIT_INVALID_INPUT
    instance = folder_instance(instance, args.plan_dir, writes=False)
    if instance is None:
        return EXIT_INVALID_INPUT
    try:
        # A table missing or unreadable is bad input here, not a broken rule.
        violations = verify_folder(instance, args.plan_dir, complete=True)
    except PlanError as exc:
        return _unreadable_plan(args.plan_dir, exc, writes=False)
    head, *lines = format_violations(violations).splitlines()
    keeps_copy = (Path(args.plan_dir) / SCENARIO_COPY).is_file()
    scenario = scenario_of(Path(args.plan_dir)) if violations and not keeps_copy else None
    if scenario is not None:
        # A folder written before plans kept their scenario file.
        # A plan made under a scenario keeps the scenario's data, not the instance's: its
        # demand and budgets read as broken here (a sweep's planner took that for a fault).
        print(f"This plan was made under scenario '{scenario}' (summary.json) and was "
              "verified against it when made; checked here against the instance's own data, "
              "the scenario's changes show up as problems below.")
    print("\n".join([head, *(lines if args.all else
                              first_problems(lines, "; --all lists every one"))]))
    return EXIT_OK if not violations else EXIT_VERIFICATION_FAILED


def cmd_demand(args: argparse.Namespace) -> int:
    from rebalance.demand import (
        HistoryError,
        format_demand_summary,
        output_folder_problem,
        run_demand,
        write_demand,
    )
    from rebalance.files import output_problem

    # OUT not an instance folder is a refused output, said as such before the history is read
    # (it had read "HISTORY: 1 problem in the input", exit 3).
    not_instance = output_folder_problem(args.out)
    if not_instance is not None:
        _err(f"{args.out}: {not_instance}; nothing was written")
        return EXIT_USAGE
    # OUT is an instance folder by design (demand.csv is written into it); the report folder
    # is replaced whole, so it must be a new or empty folder or an earlier report: a
    # --report typed as a folder of other files had been wiped.
    report = args.report or str(Path(args.out) / "demand_report")
    refused = output_problem(report, "demand_report")
    if refused is not None:
        _err(refused)
        return EXIT_USAGE

    try:
        result = run_demand(args.history, args.out)
    except HistoryError as exc:
        errors = [p for p in exc.problems if not p.is_warning]
        _err(f"{args.history}: {problems_counted(count_problems(errors))} in the input; "
             "nothing was written")
        for problem in exc.problems:
            _err(("  warning: " if problem.is_warning else "  ") + str(problem))
        return EXIT_INVALID_INPUT
    from rebalance.planning import FORECAST_CAUTION

    for warning in result.warnings:
        _err(f"warning: {warning}")
    report = write_demand(result, args.out, args.report)
    print(format_demand_summary(result, report))
    print(f"demand written to {Path(args.out) / 'demand.csv'} (trace: demand_trace.csv)")
    print("\nCaution: " + FORECAST_CAUTION)
    return EXIT_OK


def cmd_report(args: argparse.Namespace) -> int:
    from rebalance.plan import PlanError
    from rebalance.report import format_violations
    from rebalance.report.files import rebuild_reports
    from rebalance.report.inputs import stored_instance_path
    from rebalance.verify import verify_folder

    if not Path(args.plan_dir).is_dir():
        _err(f"{args.plan_dir}: plan folder not found")
        return EXIT_INVALID_INPUT
    source = args.instance or stored_instance_path(args.plan_dir)
    if source is None:
        # A folder of analysis tables alone (frontier.csv) has no summary.json to name one.
        said = ("summary.json names no instance" if (Path(args.plan_dir) / "summary.json").exists()
                else "no summary.json here to name the instance")
        _err(f"{args.plan_dir}: {said}; give --instance")
        return EXIT_USAGE
    instance = _load(source)
    if instance is not None:
        instance = folder_instance(instance, args.plan_dir)
    if instance is None:
        return EXIT_INVALID_INPUT
    try:
        violations = verify_folder(instance, args.plan_dir)
        written = rebuild_reports(args.plan_dir, instance, violations)
    except PlanError as exc:  # a missing table is drawn around; one that cannot be read is not
        return _unreadable_plan(args.plan_dir, exc)
    for path in written:
        print(f"wrote {path}")
    if violations:
        # Written all the same, saying so on its first card: a planner may need to see what
        # an edited plan looks like.  Capped as verify's list is; report has no --all.
        head, *lines = format_violations(violations).splitlines()
        verify = f"rebalance verify {shlex.quote(str(source))} {shlex.quote(args.plan_dir)} --all"
        for line in [head, *first_problems(lines, f"; {verify} lists every one")]:
            _err(line)
        return EXIT_VERIFICATION_FAILED
    return EXIT_OK


def cmd_generate(args: argparse.Namespace) -> int:
    from rebalance.generate import generate, replace_problem, spec_for_size, write_generated

    out = Path(args.out)
    # Before generating: --force replaces only an instance generate wrote (write_generated
    # refuses anything else too, but only after the work).
    refused = replace_problem(out)
    if refused is None and out.is_dir() and any(out.iterdir()) and not args.force:
        refused = f"{out}: holds an instance rebalance generate wrote; give --force to replace it"
    if refused is not None:
        _err(refused)
        return EXIT_USAGE
    spec = spec_for_size(
        args.size, staff=args.staff, offices=args.offices, skills=args.skills,
        periods=args.periods, seed=args.seed, multi_skill_share=args.multi_skill_share,
        pool_size=args.pool_size, surge_factor=args.surge_factor,
        budget_tightness=args.budget_tightness, vacancy_share=args.vacancy_share,
        attrition_scale=args.attrition_scale, leaver_share=args.leaver_share,
        relocatable_share=args.relocatable_share, detail_share=args.detail_share)
    problems = spec.problems()
    if problems:
        for problem in problems:
            _err(f"generate: {problem}")
        return EXIT_USAGE
    generated = generate(spec)
    write_generated(generated, out)
    print(f"wrote {out}/: {spec.staff} staff in {spec.offices} offices "
          f"({len(generated.cities)} fictional cities), {spec.skills} skills, "
          f"{spec.periods} periods, {generated.groups} groups of interchangeable people")
    print(f"  short: {', '.join(generated.short_offices)}")
    print(f"  surplus: {', '.join(generated.surplus_offices)}")
    if spec.surge_factor != 1.0:  # a factor of 1 leaves the demand as it was: no surge
        print(f"  surge: {', '.join(generated.surge_offices)} in "
              f"{' and '.join(generated.surge_periods)}")
    return EXIT_OK


def cmd_workbook(args: argparse.Namespace) -> int:
    from rebalance.workbook_writer import folder_to_workbook

    out = Path(args.out)
    # Refused before the folder is read, as other outputs are before a solve.
    refused = ""
    if Path(args.folder).suffix.lower() == ".xlsx":
        refused = f"{args.folder}: is a workbook already; expected an instance folder"
    elif out.suffix.lower() != ".xlsx":
        refused = f"{out}: expected a file name ending in .xlsx (check and plan read only those)"
    elif out.is_dir():
        refused = f"{out}: is a folder; expected a workbook file"
    elif out.exists() and not args.force:
        refused = f"{out}: already exists; give --force to replace it"
    if refused:
        _err(f"{refused}; nothing was written")
        return EXIT_USAGE
    # Only a valid instance is copied: the book would fail check just as the folder does.
    instance = _load(args.folder)
    if instance is None:
        return EXIT_INVALID_INPUT
    for warning in instance.warnings:
        _err(f"warning: {warning}")
    rows: dict[str, int] = {}
    try:
        folder_to_workbook(args.folder, out, rows)
    except OSError as exc:  # a file where a folder on the way should be, no permission
        _err(f"{out}: cannot be written ({exc.strerror or exc}); nothing was written")
        return EXIT_USAGE
    print(f"wrote {out}: {len(rows)} sheets ({', '.join(rows)}), "
          f"{sum(rows.values()):,} rows below their column names")
    return EXIT_OK


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="rebalance",
        description="Turn a forecast of work into a verified staffing plan.")
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("check", help="validate an instance folder or .xlsx workbook")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.set_defaults(run=cmd_check)

    p = sub.add_parser("plan", help="solve an instance and write a verified plan")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.add_argument("-o", "--out", required=True, help="folder for the plan tables")
    add_solver_options(p, "the whole run")
    p.add_argument("--threads", type=COUNT,
                   help="solver threads; with 2, a large model's bound is worked out beside "
                        "the search (default: the instance's [solver] threads, else 1)")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")
    p.set_defaults(run=cmd_plan, output_kind="plan")

    p = sub.add_parser("verify", help="check a plan folder against its instance")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.add_argument("plan_dir", help="folder a plan was written to (rebalance plan -o)")
    p.add_argument("--all", action="store_true",
                   help=f"list every problem, not only the first {VIOLATIONS_SHOWN}")
    p.set_defaults(run=cmd_verify)

    p = sub.add_parser("demand", help="forecast FTE demand from workload history into an "
                       "instance's demand.csv")
    p.add_argument("history", help="folder of case arrivals, time records, expected hours")
    p.add_argument("-o", "--out", required=True,
                   help="instance folder (its settings.toml, offices.csv and skills.csv are read)")
    p.add_argument("--report", help="folder for the backtest and QC tables "
                   "(default: OUT/demand_report)")
    p.set_defaults(run=cmd_demand)

    p = sub.add_parser("report", help="rebuild report.html and plan.xlsx of a plan folder")
    p.add_argument("plan_dir", help="folder a plan was written to (rebalance plan -o)")
    p.add_argument("--instance", help="instance folder or .xlsx (default: the one named in "
                   "the folder's summary.json)")
    p.set_defaults(run=cmd_report)

    p = sub.add_parser("generate", help="write a synthetic instance folder (fictional, seeded)")
    p.add_argument("out", help="folder to write")
    p.add_argument("--size", choices=("small", "medium", "agency", "large"), default="small",
                   help="preset counts (staff/offices/skills/periods); the options below win")
    # Defaults and ranges in the help, from the spec itself (a sweep: they showed only in
    # the error for a value outside them).
    from rebalance.generate import (
        KNOB_RANGES,
        MAX_OFFICES,
        MAX_PERIODS,
        MAX_SKILLS,
        MAX_STAFF,
        PRESETS,
        GeneratorSpec,
    )

    small = PRESETS["small"]
    p.add_argument("--staff", type=int,
                   help=f"at least 2 per office, at most {MAX_STAFF:,} (small: {small[0]})")
    p.add_argument("--offices", type=int, help=f"2 to {MAX_OFFICES} (small: {small[1]})")
    p.add_argument("--skills", type=int, help=f"1 to {MAX_SKILLS} (small: {small[2]})")
    p.add_argument("--periods", type=int,
                   help=f"quarters from 2027-Q1, 3 to {MAX_PERIODS} (small: {small[3]})")
    p.add_argument("--seed", type=int, default=0, help="0 or more (default 0)")
    knobs = GeneratorSpec()
    for name, text in (
            ("multi_skill_share", "share of groups with 2+ skills"),
            ("pool_size", "mean people per group of interchangeable people (job-family "
                          "compression)"),
            ("surge_factor", "demand multiplier at surge offices in the two surge periods"),
            ("budget_tightness", "budgets as a share of the cost of closing every gap by "
                                 "hiring"),
            ("vacancy_share", "funded vacancies per head"),
            ("attrition_scale", "multiplier on attrition rates"),
            ("leaver_share", "share of people with a last period"),
            ("relocatable_share", "share of groups who may be reassigned to another office"),
            ("detail_share", "share of groups who may go on detail")):
        low, high = KNOB_RANGES[name]
        span = f"{low:g} or more" if high is None else f"{low:g} to {high:g}"
        p.add_argument(f"--{name.replace('_', '-')}", type=float,
                       help=f"{text}; {span} (default {getattr(knobs, name):g})")
    p.add_argument("--force", action="store_true",
                   help="replace OUT if it holds an instance generate wrote (nothing else)")
    p.set_defaults(run=cmd_generate)

    p = sub.add_parser("workbook", help="copy a valid instance folder into one .xlsx workbook")
    p.add_argument("folder", help="instance folder (it is checked first, as check does)")
    p.add_argument("-o", "--out", required=True, help="workbook to write, ending in .xlsx")
    p.add_argument("--force", action="store_true", help="replace OUT if it exists")
    p.set_defaults(run=cmd_workbook)
    add_analysis_commands(sub)
    return parser


class _ReaderMayLeave:
    """A standard stream whose reader may go away (``rebalance check X | head -1``): from
    then on the rest goes to the null device, as the Python docs advise for SIGPIPE, instead
    of a BrokenPipeError.  The run still finishes and writes what it was asked to write."""

    def __init__(self, stream: TextIO) -> None:
        self.stream = stream

    def write(self, text: str) -> int:
        try:
            return self.stream.write(text)
        except BrokenPipeError:
            self._to_null()
            return len(text)

    def flush(self) -> None:
        try:
            self.stream.flush()
        except BrokenPipeError:
            self._to_null()

    def _to_null(self) -> None:
        # The descriptor, not just this object: the interpreter's last flush at exit and
        # anything else writing to it would meet the closed pipe again.
        null = os.open(os.devnull, os.O_WRONLY)
        try:
            os.dup2(null, self.stream.fileno())
        finally:
            os.close(null)

    def __getattr__(self, name: str) -> Any:
        return getattr(self.stream, name)


def main(argv: Sequence[str] | None = None) -> int:
    from rebalance.files import forget_written

    forget_written()
    streams = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _ReaderMayLeave(sys.stdout), _ReaderMayLeave(sys.stderr)
    before = _stop_by_interrupt()
    try:
        try:
            return _main(argv)
        except KeyboardInterrupt:  # anywhere: reading, solving, writing, saying
            _say_stopped()
            return EXIT_STOPPED
        finally:
            sys.stdout.flush()  # through the guard (--help too): what is still buffered may
    except KeyboardInterrupt:  # meet a reader that has gone; a second stop while it is said
        return EXIT_STOPPED
    finally:
        for sig, handler in before.items():
            signal.signal(sig, handler)
        sys.stdout, sys.stderr = streams


def _stop_by_interrupt() -> dict[int, Any]:
    """SIGTERM raises KeyboardInterrupt for the whole run, as Ctrl-C does, where it had its
    default action: between the solve's handlers and the end, it had killed the run without
    a word (exit 143).  The handlers there were, to restore."""
    if (threading.current_thread() is not threading.main_thread()
            or signal.getsignal(signal.SIGTERM) != signal.SIG_DFL):
        return {}
    return {signal.SIGTERM: signal.signal(signal.SIGTERM, signal.default_int_handler)}


def _say_stopped() -> None:
    """That the run was stopped, and what it had put in place first: a plan folder swapped in
    whole just before the stop is written (it had read "nothing written")."""
    from rebalance.files import written

    done = written()
    if not done:
        _err("stopped from outside; nothing written")
        return
    names = ", ".join(f"{path}/" if path.is_dir() else str(path) for path in done)
    _err(f"{names}: written in full; then stopped from outside (nothing else written)")


def _main(argv: Sequence[str] | None) -> int:
    args = build_parser().parse_args(argv)
    from rebalance.files import OutputInUse

    # Before any solve, any read: a run refused only at the end would have wasted its time.
    problem = _output_refused(args)
    if problem is not None:
        _err(problem)
        return EXIT_USAGE
    try:
        with stoppable():
            code: int = args.run(args)
    except OutputInUse as exc:  # the output path changed while the run solved
        _err(str(exc))
        return EXIT_USAGE
    except OSError as exc:  # a full disk, no permission: every output is staged or atomic
        return _os_error(args, exc)
    except Exception as exc:  # the last line of defence: a message, not a traceback
        _err(f"internal error: {type(exc).__name__}: {exc}")
        _err("please report this with the instance that caused it")
        return EXIT_INTERNAL
    return code


if __name__ == "__main__":
    sys.exit(main())
