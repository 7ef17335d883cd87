"""What the command-line modules share: exit codes, messages on stderr, reading an instance,
and the argparse number types.

The exit codes are listed in ``rebalance/cli.py``'s docstring.  The underscored helpers are
for ``rebalance.cli`` and ``rebalance.cli_analysis`` only, no API.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

from rebalance.instance import Instance
from rebalance.problems import problems_counted
from rebalance.read_limits import MAX_NUMBER, MAX_TIME_LIMIT_SECONDS
from rebalance.readers import InstanceError, count_problems, read_instance
from rebalance.solve import Status
from rebalance.verify import Violation
from rebalance.verify_causes import PROBLEMS_SHOWN, first_problems

if TYPE_CHECKING:
    import pandas as pd

# Of a long list of problems or violations: enough to see why (the page's cap too), as
# verify_causes.first_problems cuts them.
VIOLATIONS_SHOWN = PROBLEMS_SHOWN
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


def _load(path: str, writes: bool = True) -> Instance | None:
    """The instance at ``path``, or None after listing its problems on stderr.  ``writes``
    False (``check``, which never writes): no "nothing was written" after the count."""
    try:
        return read_instance(path)
    except OSError as exc:  # no permission, a file gone meanwhile: the input, not an output
        _err(_unreadable(exc, path) + ("; nothing was written" if writes else ""))
        return None
    except InstanceError as exc:
        errors = [p for p in exc.problems if not p.is_warning]
        _err(f"{path}: {problems_counted(count_problems(errors))} in the input"
             + ("; nothing was written" if writes else ""))
        for problem in exc.problems:
            _err(("  warning: " if problem.is_warning else "  ") + str(problem))
        return None


def _unreadable(exc: OSError, path: str | Path) -> str:
    """``exc``'s file (else ``path``) cannot be read, and why."""
    return f"{exc.filename or path}: cannot be read ({exc.strerror or exc})"


# What each command writes: (attribute, how), "folder" replaced whole, "into" files added
# into a folder, "file" one file, "there" files added into a folder that must exist (the
# command itself says so where it does not); the attributes it reads from are its inputs.
_WRITES = {"plan": (("out", "folder"),), "compare": (("out", "folder"),),
           "replan": (("out", "folder"),), "marginal": (("out", "folder"),),
           "generate": (("out", "folder"),), "frontier": (("out", "into"),),
           "workbook": (("out", "file"),), "report": (("plan_dir", "there"),),
           "demand": (("out", "there"), ("report", "folder"))}
_READS = {"instance": "the instance", "from_dir": "the --from folder",
          "scenario": "a scenario file", "history": "the history", "folder": "the instance",
          "plan_dir": "the plan folder"}


def _outputs(args: argparse.Namespace) -> list[tuple[str, str]]:
    """The paths ``args.command`` writes, each with how (see ``_WRITES``)."""
    found = []
    for name, how in _WRITES.get(args.command, ()):
        value = getattr(args, name, None)
        if name == "report" and value is None:  # demand's default report folder, in OUT
            value = str(Path(args.out) / "demand_report") if Path(args.out).is_dir() else None
        if value is not None:
            found.append((value, how))
    return found


def _inputs(args: argparse.Namespace) -> list[tuple[str, str]]:
    """The paths ``args`` names to read from, each with what it is."""
    found: list[tuple[str, str]] = []
    for name, what in _READS.items():
        value = getattr(args, name, None)
        for path in value if isinstance(value, list) else [] if value is None else [value]:
            found.append((what, path))
    return found


def _output_refused(args: argparse.Namespace) -> str | None:
    """Why an output of ``args`` cannot be written, before anything is read or solved (an
    unwritable ``-o`` had been found only after the whole solve), or None."""
    from rebalance.files import input_problem, output_problem, place_problem, unwritable

    inputs = _inputs(args)
    for path, how in _outputs(args):
        # The current folder first (a plan folder replaced from inside it), then what is
        # there, then an input it holds, then whether it can be made.
        # An empty folder is filled in place (files.staged_folder): generate . is fine there.
        filled = args.command == "generate" and Path(path).is_dir() and not any(
            Path(path).iterdir())
        problem = place_problem(path) if how == "folder" and not filled else None
        if problem is None and hasattr(args, "output_kind") and path == args.out:
            problem = output_problem(path, args.output_kind)
        if problem is None and how == "folder":
            problem = input_problem(path, inputs)
        if how == "there" and not Path(path).is_dir():
            continue
        problem = problem or unwritable(path, into=how in ("into", "there"))
        if problem is not None:
            return problem
    return None


def _os_error(args: argparse.Namespace, exc: OSError) -> int:
    """A file that could not be read or written, said as which: an input that cannot be read
    is invalid input (exit 3), not an output that "cannot be written" (an unreadable
    staff.csv had blamed the -o folder)."""
    name = exc.filename
    holding = [path for path, _ in _outputs(args)
               if name is not None and _within(name, path, sibling=True)]
    if name is not None and not holding and any(_within(name, path) for _, path in _inputs(args)):
        _err(_unreadable(exc, name) + "; nothing was written")
        return EXIT_INVALID_INPUT
    where = (holding or [name or getattr(args, "out", None) or "the output"])[0]
    _err(f"{where}: cannot be written ({exc.strerror or exc}); nothing was written")
    return EXIT_USAGE


def _within(name: str | Path, path: str | Path, sibling: bool = False) -> bool:
    """``name`` is ``path`` or inside it, or (``sibling``) a name staged beside it."""
    real, top = Path(os.path.realpath(name)), Path(os.path.realpath(path))
    return real == top or top in real.parents or (
        sibling and real.parent == top.parent and real.name.startswith(f".{top.name}."))


def _say_violations(head: str, violations: Sequence[Violation]) -> None:
    """``head``, then the first problems of a failed verification as ``rebalance verify``
    lists them (knock-on lines under their cause, a run of periods one line), on stderr."""
    from rebalance.report.console import format_violations

    _err(head)
    for line in first_problems(format_violations(violations).splitlines()[1:],
                       "; rebalance verify with --all lists every one"):
        _err(line)


def _say_first(head: str, problems: Sequence[object]) -> None:
    """``head``, then the first problems and how many more, on stderr."""
    _err(head)
    for line in first_problems([f"  {problem}" for problem in problems]):
        _err(line)


def _unreadable_plan(folder: str | Path, exc: InstanceError, writes: bool = True) -> int:
    """``writes`` False (``verify``, which never writes): no "nothing was written"."""
    _say_first(f"{folder}: not a plan folder rebalance can read, "
               f"{problems_counted(count_problems(exc.problems))}"
               + ("; nothing was written" if writes else ""), exc.problems)
    return EXIT_INVALID_INPUT


def asking_review(reasons: pd.DataFrame) -> int:
    """How many of a plan's ``reasons`` (reasons.csv's table) ask for a review."""
    return int(reasons["reason"].fillna("").astype(str).str.endswith("(review)").sum())


def _keep_frontier(out: str, folder: Path) -> None:
    """A frontier.csv already in the output folder belongs to the instance, not to one plan:
    carry it into the folder that replaces it."""
    import shutil

    old = Path(out) / "frontier.csv"
    if old.is_file():
        shutil.copy2(old, folder / "frontier.csv")


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


# As settings.toml bounds them: past 1e7 s a CBC run had printed tracebacks (its stop
# thread's wait overflowed), past 1e12 money is a typo.
SECONDS = _number(float, 0.1, MAX_TIME_LIMIT_SECONDS, what="seconds, from 0.1 to 10,000,000")
GAP = _number(float, 0.0, 1.0, what="a relative gap from 0 to 1, e.g. 0.01")
# Bounded as settings.toml's seed and threads are (a reviewer's 2e12 passed here, refused there).
COUNT = _number(int, 1, MAX_NUMBER, what="a whole number from 1 to 1,000,000,000,000")
SEED = _number(int, 0, MAX_NUMBER, what="a whole number from 0 to 1,000,000,000,000")
MONEY = _number(float, 0.0, MAX_NUMBER, what="an amount of money, from 0 to 1,000,000,000,000")

# Help shared by the commands that read an instance and solve it; a setting on the command
# line overrides the instance's settings.toml.
INSTANCE_HELP = "instance folder, or one .xlsx workbook with a sheet per table"
SOLVER_HELP = "solver (default: the instance's [solver] name, else highs)"
GAP_HELP = ("relative gap at which to stop, e.g. 0.01 (default: the instance's [solver] "
            "relative_gap, else 0.0001)")
SEED_HELP = ("the solver's random seed: the same seed gives the same plan, unless the "
             "time limit stops the search (default: "
             "the instance's [solver] seed, else 0)")


def add_solver_options(p: argparse.ArgumentParser, limit_covers: str) -> None:
    """--solver, --time-limit, --gap and --seed, as every solving command takes them;
    ``limit_covers`` says what the limit is for ("the whole run", "each solve")."""
    p.add_argument("--solver", choices=("highs", "cbc"), help=SOLVER_HELP)
    p.add_argument("--time-limit", type=SECONDS,
                   help=f"seconds for {limit_covers} (default: the instance's [solver] "
                        "time_limit_seconds, else 300)")
    p.add_argument("--gap", type=GAP, help=GAP_HELP)
    p.add_argument("--seed", type=SEED, help=SEED_HELP)


# A plan made under a scenario keeps a copy of its scenario file, so that 'verify' and
# 'report' check and draw it against the data it was made for (the instance with the
# scenario applied), not the instance's own: both had reported its surge as broken rules.
SCENARIO_COPY = "scenario.toml"


def copy_scenario(scenario_file: str | Path, folder: Path) -> None:
    """Keep ``scenario_file`` in plan folder ``folder`` as :data:`SCENARIO_COPY`."""
    import shutil

    shutil.copyfile(scenario_file, folder / SCENARIO_COPY)


def folder_instance(instance: Instance, plan_dir: str | Path,
                    writes: bool = True) -> Instance | None:
    """``instance`` as the plan in ``plan_dir`` was made for it: with the folder's copy of
    its scenario file applied where it keeps one (saying so on stdout), else as it is.
    None after listing the scenario file's problems on stderr (it no longer fits the
    instance)."""
    from rebalance.analysis.scenario_files import ScenarioError, apply_scenario, read_scenario

    copy = Path(plan_dir) / SCENARIO_COPY
    if not copy.is_file():
        return instance
    try:
        scenario = read_scenario(copy, instance)
    except ScenarioError as exc:
        _say_first(f"{copy}: the scenario this plan was made under does not fit the instance "
                   f"given, {problems_counted(len(exc.problems))}"
                   + ("; nothing was written" if writes else ""), exc.problems)
        return None
    print(f"with scenario '{scenario.name}' applied to the instance's data ({copy}), as the "
          "plan was made")
    return apply_scenario(instance, scenario)


def scenario_of(folder: Path) -> str | None:
    """The scenario a plan folder's summary.json says its plan was made under, if any."""
    try:
        summary = json.loads((folder / "summary.json").read_text())
    except (OSError, ValueError):
        return None
    if not isinstance(summary, dict):
        return None
    replanned = summary.get("replan")
    name = summary.get("scenario") or (replanned.get("scenario")
                                       if isinstance(replanned, dict) else None)
    return name if isinstance(name, str) and name else None
