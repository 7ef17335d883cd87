"""Command line of the analyses (issue 5): compare, replan, frontier, marginal.

Their subcommands are added to ``rebalance``'s parser by ``add_analysis_commands``; exit codes
as in ``rebalance/cli.py``.
"""

from __future__ import annotations

import argparse
import textwrap
from collections import Counter
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

from rebalance.cli_common import (
    COUNT,
    EXIT_INFEASIBLE,
    EXIT_INVALID_INPUT,
    EXIT_OK,
    EXIT_SOLVER_ERROR,
    EXIT_USAGE,
    EXIT_VERIFICATION_FAILED,
    INSTANCE_HELP,
    MONEY,
    SCENARIO_COPY,
    STATUS_EXIT,
    _err,
    _keep_frontier,
    _load,
    _number,
    _say_first,
    _say_violations,
    _unreadable_plan,
    add_solver_options,
    copy_scenario,
    scenario_of,
)
from rebalance.conflicts import bulleted
from rebalance.instance import Instance
from rebalance.problems import problems_counted
from rebalance.report.console import counted, format_frame, is_missing
from rebalance.report.inputs import SCENARIO_KEY
from rebalance.report.words import plain_status
from rebalance.solve import Status

if TYPE_CHECKING:
    import pandas as pd


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
        _say_violations(f"{result.instance.name}: the plan failed verification; nothing was "
                        "written", result.violations)
        return EXIT_VERIFICATION_FAILED
    return None


def _write_analysis_plan(args: argparse.Namespace, result, instance: Instance,
                         tables: dict, instance_path: str | None, written: str,
                         more: Callable[[Path], None] | None = None,
                         replanned_at: int | None = None, scenario: str | None = None,
                         assumed: dict | None = None) -> int:
    """Write a verified analysis plan to ``args.out`` (:func:`write_plan_folder`, with the
    frontier.csv already there kept).  A re-plan's summary.json says which re-plan it is and
    ``assumed``, what its scenario changed
    (:func:`rebalance.report.scenario_notes.scenario_entry`), for its page's box."""
    from rebalance.files import staged_folder
    from rebalance.planning import CAUTION
    from rebalance.report.files import write_plan_folder

    summary: dict[str, Any] = {}
    if replanned_at is not None:
        # Which re-plan this is, for the report and for whoever reads the folder later.
        summary["replan"] = {"from_period": instance.period_names[replanned_at],
                             "scenario": scenario}
        if assumed is not None:
            summary[SCENARIO_KEY] = assumed

    def more_files(folder: Path) -> None:
        if more is not None:
            more(folder)
        _keep_frontier(args.out, folder)

    with staged_folder(args.out, kind="plan") as folder:
        write_plan_folder(result, folder, summary, tables, replanned_at, instance_path,
                          more_files)
    print(f"\n{written} written to {args.out}/")
    print("\nCaution: " + CAUTION)
    return EXIT_OK


def _say_gaps(table: pd.DataFrame) -> None:
    """The page's warning, on the console too, where the solves compared stopped short of
    proof (a practitioner's reading: a surge scenario had left less shortfall than the base,
    with no word that the base's search had stopped 31% from its bound)."""
    from rebalance.report.analysis_words import gap_caution

    caution = gap_caution(table)
    if caution:
        print("\n" + textwrap.fill(caution, width=90, break_on_hyphens=False))


def cmd_compare(args: argparse.Namespace) -> int:
    from rebalance.analysis.scenario_files import ScenarioError, folder_name, read_scenarios
    from rebalance.analysis.scenarios import compare_scenarios
    from rebalance.report.analysis_words import FROM_BASE_WORDS, scenario_lines, status_in_words
    from rebalance.report.files import write_plan_folder
    from rebalance.report.scenario_notes import scenario_entry

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    try:
        # Names and their folders are checked here, before any solve (a clash of folders had
        # been an internal error when the plans were written).
        scenarios = read_scenarios(args.scenario, instance)
    except ScenarioError as exc:
        _err(f"{problems_counted(len(exc.problems))} in the scenario files; nothing was written")
        for problem in exc.problems:
            _err(f"  {problem}")
        return EXIT_INVALID_INPUT
    comparison = compare_scenarios(instance, scenarios,
                                   _analysis_options(instance, args, progress=True),
                                   workers=args.workers)
    columns = [c for c in ("scenario", "status", "verified", "gap", "shortfall_gap",
                           "weighted_shortfall", "total_cost", "hires", "detail_periods",
                           "reassignments", "actions_differing")
               if c in comparison.table.columns]
    print(format_frame(status_in_words(comparison.table[columns]), instance.money.currency))
    if len(comparison.names) > 1 and comparison.results[0].plan is not None:
        print("\n" + textwrap.fill(FROM_BASE_WORDS, width=98, break_on_hyphens=False))
    for line in scenario_lines(comparison.table, instance.money.currency, comparison.offices):
        print("\n" + textwrap.fill(line, width=90, break_on_hyphens=False,
                                   subsequent_indent="  "))
    _say_gaps(comparison.table)
    # The base must have a plan; a scenario without one is an answer (under that surge the
    # limits conflict, or no plan came in time), listed with its reason, and the others'
    # plans are still written: one bad surge had thrown away every plan of the comparison.
    code = _plan_failed(comparison.results[0])
    if code is not None:
        return code
    for name, result in zip(comparison.names[1:], comparison.results[1:], strict=True):
        if result.plan is None:
            words = plain_status(result.status)
            print(f"\nscenario '{name}': "
                  + (words if words.startswith("no plan") else f"no plan ({words})")
                  + ("; limits in conflict:" if result.solve.conflicts else ""))
            for line in bulleted(result.solve.conflicts):
                print(f"  {line}")
        elif not result.verified:
            _say_violations(f"scenario '{name}': the plan failed verification; nothing was "
                            "written", result.violations)
            return EXIT_VERIFICATION_FAILED

    by_name = {s.name: s for s in scenarios}
    # One file, one scenario, in the order given (read_scenarios refuses any problem).
    file_of = dict(zip((s.name for s in scenarios), args.scenario, strict=True))

    def scenario_plans(folder: Path) -> None:
        # Inside the compare's staged folder, so each scenario's files land in its one swap.
        for name, other in zip(comparison.names[1:], comparison.results[1:], strict=True):
            if other.plan is None:
                continue
            sub = folder / "scenarios" / folder_name(name)
            sub.mkdir(parents=True)
            # Which scenario's data it keeps: verify against the instance names it; and what
            # the scenario changed, for its page's and workbook's box (the storm's page had
            # shown a hiring cap with no word that part of it was the scenario's).  Its
            # reasons worked out once, by the comparison (for its held_back_by column); its
            # report.html and plan.xlsx (a leader had only CSV files to open) drawn against
            # the scenario's instance, so their figures and verification are its own.  The
            # base instance's path with the scenario file kept beside the plan (SCENARIO_COPY):
            # 'verify' and 'report' apply it, as the comparison did.
            write_plan_folder(other, sub, {"scenario": name, SCENARIO_KEY: scenario_entry(
                by_name[name], instance, other.instance)},
                {"reasons.csv": comparison.reasons[name]}, instance_path=args.instance)
            copy_scenario(file_of[name], sub)

    if len(comparison.actions):
        # The console shows each scenario's actions_differing only: the rows and their
        # reasons (a sentence each) are in the file, the page and the workbook.
        print("\nwhy each action differs: the reason column of scenario_actions.csv (and the "
              "page's table)")
    tables = {"scenarios.csv": comparison.table, "scenario_costs.csv": comparison.costs,
              "scenario_actions.csv": comparison.actions,
              "scenario_offices.csv": comparison.offices}
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
    # -o naming the --from folder is refused before anything is read (cli_common's output
    # check): the old plan is the record of what was decided.
    if args.planned_ahead and not args.scenario:
        # Unchanged data: planned from the start they are the old plan's own problem.
        _err("--planned-ahead needs --scenario: it compares reacting at --at with planning "
             "for the scenario's data from the start; nothing was written")
        return EXIT_USAGE
    try:
        old = read_plan(folder, complete=True)
    except PlanError as exc:
        return _unreadable_plan(folder, exc)
    scenario_name: str | None = None
    assumed: dict | None = None
    if args.scenario:
        from rebalance.analysis.scenario_files import ScenarioError, apply_scenario, read_scenario
        from rebalance.report.scenario_notes import scenario_entry

        try:
            applied = read_scenario(args.scenario, instance)
            base, instance = instance, apply_scenario(instance, applied)
            scenario_name = applied.name
            assumed = scenario_entry(applied, base, instance)
        except ScenarioError as exc:
            _say_first(f"{problems_counted(len(exc.problems))} in the scenario file; "
                       "nothing was written", exc.problems)
            return EXIT_INVALID_INPUT
    made_under = scenario_of(folder)
    if made_under is not None and made_under != scenario_name:
        # Its demand and budgets were the scenario's; the re-plan's are the data given here.
        kept = folder / SCENARIO_COPY
        _err(f"note: the old plan was made under scenario '{made_under}' (its summary.json); "
             "this re-plan reads " + ("the instance's own data" if scenario_name is None
                                      else f"scenario '{scenario_name}'")
             + "; to re-plan under it, give --scenario "
             + (str(kept) if kept.is_file() else "with its file"))
    if args.at not in instance.period_names:
        _err(f"--at {args.at}: not a period of the instance; expected one of "
             f"{', '.join(instance.period_names)}")
        return EXIT_USAGE
    costs = DisruptionCosts(args.disruption_detail, args.disruption_reassignment,
                            args.disruption_hire)
    from dataclasses import replace

    from rebalance.analysis.planned_ahead import plan_ahead, split_time, with_planned_ahead

    options = _analysis_options(instance, args, progress=True)
    own, ahead_options = split_time(options) if args.planned_ahead else (options, options)
    try:
        out = replan(instance, old, instance.period_names.index(args.at), own, costs,
                     allow_recall=args.allow_recall, folder=folder)
    except ReplanError as exc:
        _say_first(f"{folder}: the old plan cannot be carried forward; nothing was written",
                   exc.problems)
        return EXIT_INVALID_INPUT
    if out.old_plan_violations:
        _say_first(f"note: the old plan breaks {counted(len(out.old_plan_violations), 'rule')} "
                   "of the current data; the new plan keeps every rule from the re-plan period "
                   "on:",
                   out.old_plan_violations)
    for note in out.notes:
        _err(f"note: {note}")
    # No new plan: no table of it (it had printed as NaN and "0 change(s)" before the reason).
    code = _plan_failed(out.result)
    if code is not None:
        return code
    ahead = None
    if args.planned_ahead:
        _err(f"planning the same data from {instance.period_names[0]}, nothing fixed: "
             f"{_seconds(ahead_options.time_limit_seconds)} of the --time-limit, the re-plan "
             f"had {_seconds(own.time_limit_seconds)}")
        ahead = plan_ahead(instance, ahead_options)
        out = replace(out, summary=with_planned_ahead(out.summary, out.result, ahead))
    from rebalance.report.console import format_outcome

    print(format_outcome(out.result, replan=True) + "\n")
    # By the one number rule, row by row: money rows whole with the currency, counts whole.
    print(format_frame(out.summary, instance.money.currency))
    n = len(out.changes)
    print(f"\n{n:,} change{'' if n == 1 else 's'} against the old plan from {args.at} on")
    if len(out.changes):
        # The reasons run to a sentence each: too wide beside the table, so they stay in
        # changes.csv (and the page and workbook), and the console says where.
        print(format_frame(out.changes.head(30).drop(columns="reason", errors="ignore"),
                           instance.money.currency))
        print("why each changed: the reason column of changes.csv (and the page's table)")
    # Not a change (no disruption cost), but the figures move with it: "0 change(s)" beside
    # a different idle capacity had read as an unchanged plan.
    summary = out.summary
    split = summary.loc[summary["measure"] == "work_split_changes", "new_plan"].tolist()
    moved = int(split[0]) if split and not is_missing(split[0]) else 0
    if moved:
        works = "person-period works" if moved == 1 else "person-periods work"
        print(f"work split: {moved:,} {works} differently from {args.at} on (no disruption "
              "cost: moving work between a person's skills is not a change of detail, "
              "reassignment or hire)")
    else:
        print(f"work split: everyone works as in the old plan from {args.at} on")
    more = None
    if ahead is not None:
        from rebalance.cli_planned_ahead import planned_ahead_folder, say_late_notice

        code = say_late_notice(out.summary, args.at, instance, ahead)
        if code is not None:
            return code
        more = planned_ahead_folder(ahead, scenario_name, assumed, args.at, args.scenario,
                                    args.instance)
    if args.scenario:
        # Under a scenario the plan belongs to the changed data: the scenario file is kept
        # beside it (SCENARIO_COPY), and 'verify' and 'report' apply it to the instance.
        ahead_files = more

        def more(folder: Path) -> None:
            copy_scenario(args.scenario, folder)
            if ahead_files is not None:
                ahead_files(folder)

    return _write_analysis_plan(args, out.result, instance,
                                {"changes.csv": out.changes, "replan.csv": out.summary,
                                 **({} if out.reasons is None
                                    else {"reasons.csv": out.reasons.table})},
                                args.instance,
                                "new plan, changes.csv and replan.csv" if not more else
                                "new plan, changes.csv, replan.csv and the plan made ahead "
                                "(planned_ahead/)",
                                more=more, replanned_at=out.at, scenario=scenario_name,
                                assumed=assumed)


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
    from rebalance.report.analysis_charts import grid_texts

    # The caps each point allows and the new money it spends over point 1's, beside its
    # grid values (factors alone had not said how much money a point is); the grid values
    # as typed (1.5, not 1.500).
    shown = grid_texts(frontier.table[["point", "hiring_budget", "moves_budget",
                                       "hiring_cap_total", "status", "gap", "shortfall_gap",
                                       "weighted_shortfall", "total_cost", "extra_cost",
                                       "knee"]])
    print(format_frame(shown, instance.money.currency))
    # What a "-" means, said only under a column that shows one (a grid with --moves had
    # been told "a moves_budget of - keeps the instance's caps" with no "-" in sight).
    dashes = {"moves_budget": "a moves_budget of - keeps the instance's caps",
              "hiring_cap_total": "a hiring_cap_total of - has some year with no hiring cap"}
    notes = [f"hiring_budget and moves_budget: {frontier.table['budget_unit'].iloc[0]}",
             *[words for column, words in dashes.items()
               if frontier.table[column].isna().any()],
             "hiring_cap_total: the hiring caps of all budget years together",
             "extra_cost: new money over point 1's"]
    print("\n" + textwrap.fill("; ".join(notes), width=98, break_on_hyphens=False))
    _say_gaps(frontier.table)
    # A point without a plan (infeasible, out of time) is a result the table reports; a plan
    # that fails verification is a fault, and its figures would mislead: nothing is written.
    failed = [(point, result) for point, result in zip(
        frontier.table["point"], frontier.results, strict=True)
        if result.plan is not None and not result.verified]
    for point, result in failed:
        _say_violations(f"point {point}: the plan failed verification", result.violations)
    if failed:
        _err("nothing was written")
        return EXIT_VERIFICATION_FAILED
    planless = [result.status for result in frontier.results if result.plan is None]
    if planless and len(planless) < len(frontier.results):
        print(f"\n{len(planless)} of {len(frontier.results)} points had no plan "
              f"({_counted(planless)}): their rows have no figures and no knee")
    out = Path(args.out)
    fresh = not out.exists() or not any(out.iterdir())
    # Written even when no point has a plan: the table is the answer that every budget of
    # the grid was infeasible or out of time (it had then exited 0 as if all were well).
    path = write_table(frontier.table, out / "frontier.csv")
    if fresh:
        # A folder it made is an analysis folder: a plan or analysis may join it later.
        mark_folder(out, "plan")
    print(f"\nwrote {path}")
    from rebalance.planning import CAUTION

    # Each point is a plan a leader may read a budget decision off: the same caution, where
    # there is a plan at all.
    if len(planless) < len(frontier.results):
        print("\nCaution: " + CAUTION)
    if planless and len(planless) == len(frontier.results):
        _err(f"no budget point gave a plan ({_counted(planless)}); {path} lists each "
             "point's status")
        return _no_plan_exit(planless)
    return EXIT_OK


def _counted(statuses: Sequence[Status]) -> str:
    """How many of each status, in order of first appearance: '2 infeasible, 1 error'."""
    counts = Counter(status.value for status in statuses)
    return ", ".join(f"{n} {status.replace('_', ' ')}" for status, n in counts.items())


def _no_plan_exit(statuses: Sequence[Status]) -> int:
    """The exit code of solves none of which gave a plan: their shared outcome's code, as
    'rebalance plan' gives for one.  Mixed, infeasible wins: a conflict of limits is a firm
    answer about the data that more time would not change, while a point out of time or a
    solver error says only that that search gave nothing; then a solver error before time."""
    codes = {STATUS_EXIT.get(status, EXIT_SOLVER_ERROR) for status in statuses}
    if len(codes) == 1:
        return codes.pop()
    # Mixed without a conflict: out of time and solver errors (STATUS_EXIT has no other).
    return EXIT_INFEASIBLE if EXIT_INFEASIBLE in codes else EXIT_SOLVER_ERROR


def cmd_marginal(args: argparse.Namespace) -> int:
    from rebalance.analysis.marginal import (
        Steps,
        binding_candidates,
        marginal_values,
        most_seconds,
        resolve_count,
    )
    from rebalance.planning import make_plan

    instance = _load(args.instance)
    if instance is None:
        return EXIT_INVALID_INPUT
    options = _analysis_options(instance, args)
    # --time-limit is per solve, and the re-solves run quietly in a pool: the wall time is
    # said up front, as far as it is known before the base plan says which limits bind.
    limit = options.time_limit_seconds
    each = f"each solve stops at --time-limit {_seconds(limit)}"
    if args.max_resolves is None:
        _err(f"marginal: the base plan, then a re-solve of each limit it leaves binding, "
             f"{args.workers} at a time; {each} (how many, and the most time in all, are "
             "said once the base plan is found)")
    else:
        _err(f"marginal: up to {1 + args.max_resolves} solves, the base plan, then at most "
             f"{args.max_resolves} re-solves, {args.workers} at a time; {each}, so at most "
             f"{_seconds(limit + most_seconds(args.max_resolves, options, args.workers))} "
             "in all with the LP estimates, besides building models")
    base = make_plan(instance, _analysis_options(instance, args, progress=True))
    code = _plan_failed(base)
    if code is not None:
        return code
    steps = Steps(budget=args.budget_step)
    candidates = binding_candidates(base, steps)
    resolves = resolve_count(candidates, args.max_resolves)
    if resolves:
        firsts = sum(1 for c in candidates if c.first_vacancy)
        bound = len(candidates) - firsts
        binds = "1 limit binds" if bound == 1 else f"{bound} limits bind"
        if firsts:  # they bind nothing: counted apart
            binds += (f" and {firsts} first funded vacanc{'y' if firsts == 1 else 'ies'} "
                      "could help")
        _err(f"marginal: {binds}; re-solving {resolves}, {min(args.workers, resolves)} at a "
             f"time, each stopped at {_seconds(limit)}: at most "
             f"{_seconds(most_seconds(resolves, options, args.workers))} more with the LP "
             "estimates, besides building models")
    values = marginal_values(base, options, steps, workers=args.workers,
                             max_resolves=args.max_resolves, candidates=candidates)
    if len(values.table):
        from rebalance.report.analysis_charts import step_words

        # The limit in words ("hiring budget 2027"); the CSV keeps its codes beside them.
        shown = values.table[["rank", "limit_in_words", "step", "shortfall_reduction",
                              "cost_change", "estimate_shortfall_reduction", "status"]].rename(
            columns={"limit_in_words": "limit"})
        # A step with its unit, as the page writes it: "10" alone was seats or money.
        shown["step"] = [step_words(None if is_missing(step) else float(step),
                                    "" if is_missing(unit) else str(unit),
                                    instance.money.currency)
                         for step, unit in zip(values.table["step"], values.table["unit"],
                                               strict=True)]
        print(format_frame(shown, instance.money.currency))
        from rebalance.report.analysis_words import marginal_gap_words

        assert base.plan is not None  # _plan_failed returned for a run with none
        within = marginal_gap_words(values.table, base.plan.weighted_shortfall)
        if within:
            print("\n" + textwrap.fill(within, width=98, break_on_hyphens=False))
    else:
        print("no limit binds the plan, so there is nothing to rank; "
              "marginal_values.csv is written with its header only")
    return _write_analysis_plan(args, base, instance, {"marginal_values.csv": values.table},
                                args.instance, "plan, marginal_values.csv and reasons.csv")


def _seconds(seconds: float) -> str:
    """A duration as a planner reads it: "40 s", "2 min 40 s"."""
    whole = round(seconds)
    if whole < 120:
        return f"{whole} s"
    minutes, left = divmod(whole, 60)
    return f"{minutes} min {left} s" if left else f"{minutes} min"


def add_analysis_commands(sub) -> None:
    """Add compare, replan, frontier and marginal to ``sub``, the parser's subcommands."""
    def solver_options(p: argparse.ArgumentParser) -> None:
        add_solver_options(p, "each solve")
        p.add_argument("--workers", type=COUNT, default=2, help="solves in parallel (default 2)")
        p.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")

    p = sub.add_parser("compare", help="solve the base, then each surge scenario from the "
                                       "base plan, and compare them")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.add_argument("--scenario", action="append", required=True, metavar="FILE",
                   help="scenario TOML file (repeat for several)")
    p.add_argument("-o", "--out", required=True, help="folder for the base plan and tables")
    solver_options(p)
    p.set_defaults(run=cmd_compare, output_kind="plan")

    p = sub.add_parser("replan", help="re-plan from a period, keeping close to an old plan")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.add_argument("--from", dest="from_dir", required=True, metavar="PLAN_DIR",
                   help="folder of the plan in force (rebalance plan -o)")
    p.add_argument("--at", required=True, metavar="PERIOD", help="first period to re-plan")
    p.add_argument("-o", "--out", required=True,
                   help="folder for the new plan (not the --from folder)")
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
    p.add_argument("--planned-ahead", action="store_true",
                   help="also plan the scenario's data from the first period, nothing fixed, "
                        "into OUT/planned_ahead/, and say what reacting at PERIOD cost (a "
                        "third of --time-limit; the re-plan keeps two thirds)")
    solver_options(p)
    p.set_defaults(run=cmd_replan, output_kind="plan")

    p = sub.add_parser("frontier", help="least shortfall and its cost over a budget grid")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.add_argument("--hiring", required=True, metavar="GRID",
                   help="a,b,c or start:stop:step per year; a trailing x makes factors")
    p.add_argument("--moves", metavar="GRID", help="moves caps to sweep as well")
    p.add_argument("-o", "--out", required=True, help="folder for frontier.csv")
    solver_options(p)
    p.set_defaults(run=cmd_frontier, output_kind=None)  # adds frontier.csv, removes nothing

    p = sub.add_parser("marginal", help="plan, marginal values of binding limits, reasons")
    p.add_argument("instance", help=INSTANCE_HELP)
    p.add_argument("-o", "--out", required=True,
                   help="folder for the plan, marginal_values.csv and reasons.csv")
    p.add_argument("--budget-step", default=100_000.0,
                   type=_number(float, 1.0, what="an amount of money, at least 1"),
                   help="money a budget is relaxed by (default 100000)")
    p.add_argument("--max-resolves", type=COUNT,
                   help="re-solve only this many limits, those with the best estimates "
                        "first (from LP re-solves with the limit moved, else LP duals); from "
                        "2 on, a hiring (else moves) budget is kept among them")
    solver_options(p)
    p.set_defaults(run=cmd_marginal, output_kind="plan")
