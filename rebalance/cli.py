"""Command line: parse arguments, call the library, map outcomes to exit codes.

Exit codes (also in the README):
    0  plan found and verified (or: input valid, plan verified)
    1  unexpected internal error
    2  command-line usage error
    3  invalid input (every problem is listed)
    4  infeasible: the hard limits conflict (the conflicting limits are listed)
    5  time limit reached with no plan
    6  the plan failed independent verification
    7  solver error or unknown solver outcome
"""

from __future__ import annotations

import argparse
import json
import math
import os
import shlex
import sys
import time
from collections.abc import Callable, Sequence
from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Any, TextIO

from rebalance.backends import raise_if_stopped, stoppable
from rebalance.instance import Instance
from rebalance.readers import InstanceError, count_problems, read_instance
from rebalance.report.console import format_frame, is_missing
from rebalance.solve import Status

if TYPE_CHECKING:
    from rebalance.planning import PlanResult

VIOLATIONS_SHOWN = 20  # lines of a long list of problems or violations: enough to see why
EXIT_OK = 0
EXIT_INTERNAL = 1
EXIT_USAGE = 2
EXIT_INVALID_INPUT = 3
EXIT_INFEASIBLE = 4
EXIT_NO_PLAN_IN_TIME = 5
EXIT_VERIFICATION_FAILED = 6
EXIT_SOLVER_ERROR = 7
EXIT_STOPPED = 130  # Ctrl-C or SIGTERM: the shells' 128 + SIGINT

STATUS_EXIT = {
    Status.INFEASIBLE: EXIT_INFEASIBLE,
    Status.NO_PLAN_IN_TIME: EXIT_NO_PLAN_IN_TIME,
    Status.ERROR: EXIT_SOLVER_ERROR,
    Status.UNKNOWN: EXIT_SOLVER_ERROR,
}


def _err(text: str) -> None:
    print(text, file=sys.stderr, flush=True)


def _load(path: str) -> Instance | None:
    try:
        return read_instance(path)
    except InstanceError as exc:
        errors = [p for p in exc.problems if not p.is_warning]
        _err(f"{path}: {count_problems(errors)} problem(s) in the input; nothing was written")
        for problem in exc.problems:
            _err(("  warning: " if problem.is_warning else "  ") + str(problem))
        return None


def _first(lines: Sequence[str], hint: str = "") -> list[str]:
    """The first ``VIOLATIONS_SHOWN`` of ``lines`` and a count of the rest (an old plan of
    another instance had listed 66 lines of names the instance lacks); ``hint`` says how to
    see them all."""
    if len(lines) <= VIOLATIONS_SHOWN:
        return list(lines)
    return [*lines[:VIOLATIONS_SHOWN], f"  ... and {len(lines) - VIOLATIONS_SHOWN} more{hint}"]


def _say_first(head: str, problems: Sequence[object]) -> None:
    """``head``, then the first problems and how many more, on stderr."""
    _err(head)
    for line in _first([f"  {problem}" for problem in problems]):
        _err(line)


def _unreadable_plan(folder: str | Path, exc: InstanceError) -> int:
    _say_first(f"{folder}: not a plan folder rebalance can read, "
               f"{count_problems(exc.problems)} problem(s); nothing was written", exc.problems)
    return EXIT_INVALID_INPUT


def cmd_check(args: argparse.Namespace) -> int:
    from rebalance.report import format_check

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    print(format_check(instance))
    return EXIT_OK


def cmd_plan(args: argparse.Namespace) -> int:
    from rebalance.planning import make_plan, options_from_instance, write_outputs, write_seconds
    from rebalance.report import format_summary

    started = time.perf_counter()
    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    for warning in instance.warnings:
        _err(f"warning: {warning}")
    options = options_from_instance(
        instance, solver=args.solver, time_limit_seconds=args.time_limit,
        relative_gap=args.gap, seed=args.seed, threads=args.threads,
        progress=None if args.quiet else _err)
    # The limit covers the whole run, reading the instance and writing the plan included
    # (a 60 s run of a 2,000-person instance had ended at 62 s, writing after its limit).
    read_seconds = time.perf_counter() - started
    options = replace(options, time_limit_seconds=max(
        0.5, options.time_limit_seconds - read_seconds - write_seconds(instance)))
    result = make_plan(instance, options)
    raise_if_stopped()  # a stop the solver swallowed still writes nothing
    print(format_summary(result))
    if result.plan is None:
        return STATUS_EXIT.get(result.status, EXIT_SOLVER_ERROR)
    if not result.verified:
        _err("the plan failed verification; nothing was written")
        return EXIT_VERIFICATION_FAILED
    from rebalance.report.files import plan_extras

    def extra(result: PlanResult, folder: Path) -> None:
        _keep_frontier(args.out, folder)  # first: the report shows it
        plan_extras(args.instance)(result, folder)

    write_outputs(result, args.out, extra=extra)
    print(f"\nplan written to {args.out}/")
    return EXIT_OK


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
    try:
        # A table missing or unreadable is bad input here, not a broken rule.
        violations = verify_folder(instance, args.plan_dir, complete=True)
    except PlanError as exc:
        return _unreadable_plan(args.plan_dir, exc)
    head, *lines = format_violations(violations).splitlines()
    print("\n".join([head, *(lines if args.all else
                              _first(lines, "; --all lists every one"))]))
    return EXIT_OK if not violations else EXIT_VERIFICATION_FAILED


def cmd_demand(args: argparse.Namespace) -> int:
    from rebalance.demand import HistoryError, format_demand_summary, run_demand, write_demand
    from rebalance.files import output_problem

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
        _err(f"{args.history}: {count_problems(errors)} problem(s) in the input; nothing was "
             "written")
        for problem in exc.problems:
            _err(("  warning: " if problem.is_warning else "  ") + str(problem))
        return EXIT_INVALID_INPUT
    from rebalance.planning import FORECAST_CAUTION

    for warning in result.warnings:
        _err(f"warning: {warning}")
    report = write_demand(result, args.out, args.report)
    print(format_demand_summary(result, report))
    print(f"demand written to {Path(args.out) / 'demand.csv'} (trail: demand_trace.csv)")
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
        _err(f"{args.plan_dir}: summary.json names no instance; give --instance")
        return EXIT_USAGE
    instance = _load(source)
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
        for line in [head, *_first(lines, f"; {verify} lists every one")]:
            _err(line)
        return EXIT_VERIFICATION_FAILED
    return EXIT_OK


def cmd_generate(args: argparse.Namespace) -> int:
    from rebalance.generate import generate, spec_for_size, write_generated

    out = Path(args.out)
    if out.exists() and (not out.is_dir() or any(out.iterdir())) and not args.force:
        what = "already exists and is not empty" if out.is_dir() else "is a file"
        _err(f"{out}: {what}; give --force to replace it")
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


# --------------------------------------------------------------------------------------------
# analyses (issue 5): compare, replan, frontier, marginal


def _analysis_options(instance, args: argparse.Namespace, progress: bool = False):
    from rebalance.planning import options_from_instance

    return options_from_instance(
        instance, solver=args.solver, time_limit_seconds=args.time_limit,
        relative_gap=args.gap, seed=args.seed,
        progress=_err if progress and not args.quiet else None)


def _plan_failed(result) -> int | None:
    """Exit code when a solve gave no verified plan, else None."""
    if result.plan is None:
        _err(f"{result.instance.name}: no plan ({result.status.value}); nothing was written")
        for conflict in result.solve.conflicts:
            _err(f"  {conflict}")
        return STATUS_EXIT.get(result.status, EXIT_SOLVER_ERROR)
    if not result.verified:
        _say_unverified(f"{result.instance.name}: the plan failed verification; nothing was "
                        "written", result)
        return EXIT_VERIFICATION_FAILED
    return None


def _say_unverified(head: str, result: PlanResult) -> None:
    """``head``, then the first violations of ``result``'s plan."""
    _err(head)
    for violation in result.violations[:VIOLATIONS_SHOWN]:
        _err(f"  {violation}")


def _keep_frontier(out: str, folder: Path) -> None:
    """A frontier.csv already in the output folder belongs to the instance, not to one plan:
    carry it into the folder that replaces it."""
    import shutil

    old = Path(out) / "frontier.csv"
    if old.is_file():
        shutil.copy2(old, folder / "frontier.csv")


def _write_analysis_plan(args: argparse.Namespace, result, instance: Instance,
                         tables: dict, instance_path: str | None, written: str,
                         more: Callable[[Path], None] | None = None,
                         replanned_at: int | None = None, scenario: str | None = None) -> int:
    """Write a verified analysis plan to ``args.out`` with ``tables``, its reasons and the
    report; ``more`` adds to the folder first.  ``instance_path`` is recorded for
    'rebalance report'."""
    from rebalance.analysis.output import write_tables
    from rebalance.analysis.reasons import reasons
    from rebalance.planning import CAUTION, write_outputs
    from rebalance.report.files import plan_extras

    def extra(result: PlanResult, folder: Path) -> None:
        assert result.plan is not None  # write_outputs writes only a plan
        write_tables({**tables, "reasons.csv": reasons(instance, result.plan,
                                                        replanned_at).table}, folder)
        if replanned_at is not None:
            # Which re-plan this is, for the report and for whoever reads the folder later.
            summary = json.loads((folder / "summary.json").read_text())
            summary["replan"] = {"from_period": instance.period_names[replanned_at],
                                 "scenario": scenario}
            (folder / "summary.json").write_text(json.dumps(summary, indent=2) + "\n")
        if more is not None:
            more(folder)
        _keep_frontier(args.out, folder)
        plan_extras(instance_path)(result, folder)

    write_outputs(result, args.out, extra=extra)
    print(f"\n{written} written to {args.out}/")
    print("\nCaution: " + CAUTION)
    return EXIT_OK


def cmd_compare(args: argparse.Namespace) -> int:
    from rebalance.analysis.output import write_tables
    from rebalance.analysis.reasons import reasons
    from rebalance.analysis.scenarios import (
        ScenarioError,
        compare_scenarios,
        folder_name,
        read_scenarios,
    )
    from rebalance.plan import write_plan
    from rebalance.planning import summary_dict

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    try:
        # Names and their folders are checked here, before any solve (a clash of folders had
        # been an internal error when the plans were written).
        scenarios = read_scenarios(args.scenario, instance)
    except ScenarioError as exc:
        _err(f"{len(exc.problems)} problem(s) in the scenario file(s); nothing was written")
        for problem in exc.problems:
            _err(f"  {problem}")
        return EXIT_INVALID_INPUT
    comparison = compare_scenarios(instance, scenarios, _analysis_options(instance, args),
                                   workers=args.workers)
    columns = [c for c in ("scenario", "status", "verified", "gap", "weighted_shortfall",
                           "total_cost", "hires", "detail_periods", "reassignments",
                           "actions_differing") if c in comparison.table.columns]
    print(format_frame(comparison.table[columns], instance.money.currency))
    for result in comparison.results:
        code = _plan_failed(result)
        if code is not None:
            return code

    def scenario_plans(folder: Path) -> None:
        for name, other in zip(comparison.names[1:], comparison.results[1:], strict=True):
            if other.plan is None:
                continue
            sub = folder / "scenarios" / folder_name(name)
            sub.mkdir(parents=True)
            write_plan(other.plan, sub)
            (sub / "summary.json").write_text(json.dumps(summary_dict(other), indent=2) + "\n")
            write_tables({"reasons.csv": reasons(other.instance, other.plan).table}, sub)

    tables = {"scenarios.csv": comparison.table, "scenario_costs.csv": comparison.costs,
              "scenario_actions.csv": comparison.actions}
    return _write_analysis_plan(args, comparison.results[0], instance, tables, args.instance,
                                "base plan, scenarios.csv and each scenario's plan",
                                more=scenario_plans)


def cmd_replan(args: argparse.Namespace) -> int:
    from rebalance.analysis.replan import DisruptionCosts, ReplanError, replan
    from rebalance.plan import PlanError, read_plan

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    folder = Path(args.from_dir)
    try:
        old = read_plan(folder, complete=True)
    except PlanError as exc:
        return _unreadable_plan(folder, exc)
    scenario_name: str | None = None
    if args.scenario:
        from rebalance.analysis.scenarios import ScenarioError, apply_scenario, read_scenario

        try:
            applied = read_scenario(args.scenario, instance)
            instance = apply_scenario(instance, applied)
            scenario_name = applied.name
        except ScenarioError as exc:
            _say_first(f"{len(exc.problems)} problem(s) in the scenario file; "
                       "nothing was written", exc.problems)
            return EXIT_INVALID_INPUT
    if args.at not in instance.period_names:
        _err(f"--at {args.at}: not a period of the instance; expected one of "
             f"{', '.join(instance.period_names)}")
        return EXIT_USAGE
    costs = DisruptionCosts(args.disruption_detail, args.disruption_reassignment,
                            args.disruption_hire)
    try:
        out = replan(instance, old, instance.period_names.index(args.at),
                     _analysis_options(instance, args, progress=True), costs,
                     allow_recall=args.allow_recall, folder=folder)
    except ReplanError as exc:
        _say_first(f"{folder}: the old plan cannot be carried forward; nothing was written",
                   exc.problems)
        return EXIT_INVALID_INPUT
    if out.old_plan_violations:
        _say_first(f"note: the old plan breaks {len(out.old_plan_violations)} rule(s) of the "
                   "current data; the new plan keeps every rule from the re-plan period on:",
                   out.old_plan_violations)
    for note in out.notes:
        _err(f"note: {note}")
    # No new plan: no table of it (it had printed as NaN and "0 change(s)" before the reason).
    code = _plan_failed(out.result)
    if code is not None:
        return code
    from rebalance.report.console import format_outcome

    print(format_outcome(out.result, replan=True) + "\n")
    # By the one number rule, row by row: money rows whole with the currency, counts whole.
    print(format_frame(out.summary, instance.money.currency))
    print(f"\n{len(out.changes)} change(s) against the old plan from {args.at} on")
    if len(out.changes):
        print(format_frame(out.changes.head(30), instance.money.currency))

    # Under a scenario the plan belongs to the changed data, not to the instance folder:
    # record no instance path, so 'rebalance report' asks for one rather than mislead.
    return _write_analysis_plan(args, out.result, instance,
                                {"changes.csv": out.changes, "replan.csv": out.summary},
                                None if args.scenario else args.instance,
                                "new plan, changes.csv and replan.csv", replanned_at=out.at,
                                scenario=scenario_name)


def cmd_frontier(args: argparse.Namespace) -> int:
    from rebalance.analysis.frontier import (
        BudgetGrid,
        budget_frontier,
        parse_grid,
        uncapped_years,
    )
    from rebalance.analysis.output import write_table
    from rebalance.files import mark_folder

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    try:
        hiring, factor = parse_grid(args.hiring)
        moves, moves_factor = parse_grid(args.moves) if args.moves else ((), factor)
    except ValueError as exc:
        _err(f"grid: {exc}")
        return EXIT_USAGE
    if args.moves and moves_factor != factor:
        _err("grid: give --hiring and --moves both as factors (x) or both as amounts")
        return EXIT_USAGE
    grid = BudgetGrid(hiring, moves, factor)
    for year in uncapped_years(instance, grid):
        _err(f"warning: {year} has no cap to scale; every point leaves it uncapped")
    if instance.objective.mode == "weighted":
        _err("note: the frontier is the least shortfall each budget buys, so every point is "
             "solved shortfall first, not in the instance's weighted mode")
    frontier = budget_frontier(instance, grid, _analysis_options(instance, args),
                               workers=args.workers)
    shown = frontier.table[["point", "hiring_budget", "moves_budget", "status", "gap",
                            "weighted_shortfall", "total_cost", "knee"]]
    print(format_frame(shown, instance.money.currency))
    print(f"\nhiring_budget and moves_budget: {frontier.table['budget_unit'].iloc[0]}; an "
          "empty moves_budget keeps the instance's caps")
    # A point without a plan (infeasible, out of time) is a result the table reports; a plan
    # that fails verification is a fault, and its figures would mislead: nothing is written.
    failed = [(point, result) for point, result in zip(
        frontier.table["point"], frontier.results, strict=True)
        if result.plan is not None and not result.verified]
    for point, result in failed:
        _say_unverified(f"point {point}: the plan failed verification", result)
    if failed:
        _err("nothing was written")
        return EXIT_VERIFICATION_FAILED
    out = Path(args.out)
    fresh = not out.exists() or not any(out.iterdir())
    path = write_table(frontier.table, out / "frontier.csv")
    if fresh:
        # A folder it made is an analysis folder: a plan or analysis may join it later.
        mark_folder(out, "plan")
    print(f"\nwrote {path}")
    return EXIT_OK


def cmd_marginal(args: argparse.Namespace) -> int:
    from rebalance.analysis.marginal import Steps, marginal_values
    from rebalance.planning import make_plan

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    base = make_plan(instance, _analysis_options(instance, args, progress=True))
    code = _plan_failed(base)
    if code is not None:
        return code
    values = marginal_values(base, _analysis_options(instance, args),
                             Steps(budget=args.budget_step), workers=args.workers,
                             max_resolves=args.max_resolves)
    if len(values.table):
        from rebalance.report.analysis_view import step_words

        shown = values.table[["rank", "limit", "where", "step", "shortfall_reduction",
                              "cost_change", "estimate_shortfall_reduction", "status"]].copy()
        # A step with its unit, as the page writes it: "10" alone was seats or money.
        shown["step"] = [step_words(None if is_missing(step) else float(step),
                                    "" if is_missing(unit) else str(unit),
                                    instance.money.currency)
                         for step, unit in zip(values.table["step"], values.table["unit"],
                                               strict=True)]
        print(format_frame(shown, instance.money.currency))
    else:
        print("no limit binds the plan, so there is nothing to rank; "
              "marginal_values.csv is written with its header only")
    return _write_analysis_plan(args, base, instance, {"marginal_values.csv": values.table},
                                args.instance, "plan, marginal_values.csv and reasons.csv")


def _number(kind: type, minimum: float, maximum: float | None = None,
            what: str = "") -> Callable[[str], float]:
    """An argparse type: a ``kind`` (int or float) in [minimum, maximum], as settings.toml
    takes it; anything else is a usage error that says what was expected."""
    def parse(text: str) -> float:
        try:
            value = kind(text)
        except ValueError:
            value = None
        if value is None or not math.isfinite(value) or value < minimum or (
                maximum is not None and value > maximum):
            raise argparse.ArgumentTypeError(f"got {text!r}; expected {what}")
        return value

    return parse


SECONDS = _number(float, 0.1, what="seconds, at least 0.1")
GAP = _number(float, 0.0, 1.0, what="a relative gap from 0 to 1, e.g. 0.01")
COUNT = _number(int, 1, what="a whole number, at least 1")
SEED = _number(int, 0, what="a whole number, at least 0")
MONEY = _number(float, 0.0, what="an amount of money, at least 0")


def _add_analysis_commands(sub) -> None:
    def solver_options(p: argparse.ArgumentParser) -> None:
        p.add_argument("--solver", choices=("highs", "cbc"))
        p.add_argument("--time-limit", type=SECONDS, help="seconds for each solve")
        p.add_argument("--gap", type=GAP, help="relative gap at which to stop, e.g. 0.01")
        p.add_argument("--seed", type=SEED)
        p.add_argument("--workers", type=COUNT, default=2, help="solves in parallel (default 2)")
        p.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")

    p = sub.add_parser("compare", help="solve the base and surge scenarios side by side")
    p.add_argument("instance")
    p.add_argument("--scenario", action="append", required=True, metavar="FILE",
                   help="scenario TOML file (repeat for several)")
    p.add_argument("-o", "--out", required=True, help="folder for the base plan and tables")
    solver_options(p)
    p.set_defaults(run=cmd_compare, output_kind="plan")

    p = sub.add_parser("replan", help="re-plan from a period, keeping close to an old plan")
    p.add_argument("instance")
    p.add_argument("--from", dest="from_dir", required=True, metavar="PLAN_DIR")
    p.add_argument("--at", required=True, metavar="PERIOD", help="first period to re-plan")
    p.add_argument("-o", "--out", required=True)
    p.add_argument("--disruption-detail", type=MONEY, default=2000.0,
                   help="cost of each changed person-period of detail (default 2000)")
    p.add_argument("--disruption-reassignment", type=MONEY, default=10000.0,
                   help="cost of each reassignment added or dropped (default 10000)")
    p.add_argument("--disruption-hire", type=MONEY, default=5000.0,
                   help="cost of each hire more or fewer (default 5000)")
    p.add_argument("--allow-recall", action="store_true",
                   help="details under way may end early")
    p.add_argument("--scenario", metavar="FILE",
                   help="re-plan under a surge scenario's data (what landed at PERIOD)")
    solver_options(p)
    p.set_defaults(run=cmd_replan, output_kind="plan")

    p = sub.add_parser("frontier", help="least shortfall and its cost over a budget grid")
    p.add_argument("instance")
    p.add_argument("--hiring", required=True, metavar="GRID",
                   help="a,b,c or start:stop:step per year; a trailing x makes factors")
    p.add_argument("--moves", metavar="GRID", help="moves caps to sweep as well")
    p.add_argument("-o", "--out", required=True, help="folder for frontier.csv")
    solver_options(p)
    p.set_defaults(run=cmd_frontier, output_kind=None)  # adds frontier.csv, removes nothing

    p = sub.add_parser("marginal", help="plan, marginal values of binding limits, reasons")
    p.add_argument("instance")
    p.add_argument("-o", "--out", required=True)
    p.add_argument("--budget-step", default=100_000.0,
                   type=_number(float, 1.0, what="an amount of money, at least 1"),
                   help="money a budget is relaxed by (default 100000)")
    p.add_argument("--max-resolves", type=COUNT,
                   help="re-solve only this many limits, those with the best estimates "
                        "first (from LP re-solves with the limit moved, else LP duals)")
    solver_options(p)
    p.set_defaults(run=cmd_marginal, output_kind="plan")


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="rebalance",
        description="Turn a forecast of work into a verified staffing plan.")
    sub = parser.add_subparsers(dest="command", required=True)

    p = sub.add_parser("check", help="validate an instance folder or .xlsx workbook")
    p.add_argument("instance")
    p.set_defaults(run=cmd_check)

    p = sub.add_parser("plan", help="solve an instance and write a verified plan")
    p.add_argument("instance")
    p.add_argument("-o", "--out", required=True, help="folder for the plan tables")
    p.add_argument("--solver", choices=("highs", "cbc"))
    p.add_argument("--time-limit", type=SECONDS, help="seconds for the whole run")
    p.add_argument("--gap", type=GAP, help="relative gap at which to stop, e.g. 0.01")
    p.add_argument("--seed", type=SEED)
    p.add_argument("--threads", type=COUNT,
                   help="solver threads; with 2, a large model's bound is worked out beside "
                        "the search")
    p.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")
    p.set_defaults(run=cmd_plan, output_kind="plan")

    p = sub.add_parser("verify", help="check a plan folder against its instance")
    p.add_argument("instance")
    p.add_argument("plan_dir")
    p.add_argument("--all", action="store_true",
                   help=f"list every violation, not only the first {VIOLATIONS_SHOWN}")
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
    p.add_argument("plan_dir")
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
        PRESETS,
        GeneratorSpec,
    )

    small = PRESETS["small"]
    p.add_argument("--staff", type=int, help=f"at least 2 per office (small: {small[0]})")
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
    p.add_argument("--force", action="store_true", help="replace OUT if it exists")
    p.set_defaults(run=cmd_generate)
    _add_analysis_commands(sub)
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
    streams = sys.stdout, sys.stderr
    sys.stdout, sys.stderr = _ReaderMayLeave(sys.stdout), _ReaderMayLeave(sys.stderr)
    try:
        return _main(argv)
    finally:
        sys.stdout.flush()  # through the guard (--help too): what is still buffered may meet
        sys.stdout, sys.stderr = streams  # a reader that has gone


def _main(argv: Sequence[str] | None) -> int:
    args = build_parser().parse_args(argv)
    from rebalance.files import OutputInUse, output_problem

    # Before any solve: a run refused only at the end would have wasted its time limit.
    problem = output_problem(args.out, args.output_kind) if hasattr(args, "output_kind") else None
    if problem is not None:
        _err(problem)
        return EXIT_USAGE
    try:
        with stoppable():
            code: int = args.run(args)
    except KeyboardInterrupt:
        _err("stopped from outside; nothing written")
        return EXIT_STOPPED
    except OutputInUse as exc:  # the output path changed while the run solved
        _err(str(exc))
        return EXIT_USAGE
    except Exception as exc:  # the last line of defence: a message, not a traceback
        _err(f"internal error: {type(exc).__name__}: {exc}")
        _err("please report this with the instance that caused it")
        return EXIT_INTERNAL
    return code


if __name__ == "__main__":
    sys.exit(main())
