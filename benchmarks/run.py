"""Benchmark `rebalance` on generated instances; write a results CSV and docs/benchmarks.md.

    .venv/bin/python benchmarks/run.py --sizes small,medium          # or: make bench
    .venv/bin/python benchmarks/run.py --sizes agency --backends highs --time-limit agency=300
    .venv/bin/python benchmarks/run.py --docs-only                     # the page only, no solving

For each size the instance is generated (``rebalance.generate``, seed 0 unless ``--seed``),
then every (backend, formulation) case runs in its own subprocess, one at a time, with
``--threads`` solver threads (default 2, the benchmark machine's cores: with HiGHS that runs a
large model's LP bound beside the search; ``--threads 1`` keeps a core free for others).  Each
case goes through the public API only: ``read_instance`` -> ``make_plan`` (which builds with
``build_model``, solves with ``solve`` and verifies the named plan).  When ``build_model``
takes a ``pooled`` keyword both formulations are measured; the person-level one only up to
``--person-max-staff`` people, since past that it cannot finish inside its limit (see the
page).  Results for the same day are merged by (size, backend, formulation), so sizes can be
run separately and still land in one table.  The page itself is written by ``page.py``
(``--docs-only`` rebuilds it from the newest results file, or that of ``--date``).

This is not part of the test run: it takes minutes, and timings are machine facts.
"""

from __future__ import annotations

import argparse
import csv
import datetime as dt
import functools
import inspect
import json
import os
import re
import resource
import subprocess
import sys
import threading
import time
from collections.abc import Sequence
from pathlib import Path

from page import DOC, write_doc

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "benchmarks" / "results"
RAW = RESULTS / "raw"  # generated instances and solver logs; not committed (.gitignore)
SIZES = ("small", "medium", "agency", "large")
BACKENDS = ("highs", "cbc")
# Medium, agency and large run for their targets' times (issue 3), so each target is judged on
# a run of exactly that length; what more time buys is measured by hand (notes.md).
TIME_LIMITS = {"small": 60.0, "medium": 60.0, "agency": 120.0, "large": 600.0}
COLUMNS = (
    "date", "size", "staff", "offices", "skills", "periods", "seed", "groups", "backend",
    "formulation", "time_limit_s", "relative_gap", "threads", "status", "verified", "columns",
    "rows", "integer_columns", "read_s", "build_s", "stage1_s", "stage2_s", "solve_s", "extract_s",
    "verify_s", "wall_s", "stage1_status", "stage1_gap", "stage2_status", "stage2_gap", "gap",
    "weighted_shortfall", "total_cost", "peak_mib", "solver_peak_mib", "all_peak_mib", "cpu_s",
    "load_1min",
    "commit",
    "note",
)


# --------------------------------------------------------------------------------------------
# one case, in a subprocess


def _peak_mib() -> tuple[float, float]:
    """Peak resident memory of this process and of its largest finished child, MiB: the
    child is CBC, or HiGHS on models above ``rebalance.backends.highs.HARD_STOP_NONZEROS``."""
    own = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024  # KiB on Linux
    child = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    return round(own, 1), round(child, 1)


class _AllProcessesPeak:
    """The largest proportional set size (Pss: each shared page counted once, split among the
    processes sharing it) summed over this process and all its descendants, sampled every
    half second in a thread: the memory the whole case held at once, which the two peaks
    above only bound from above (forked solver processes share the parent's pages), and
    which also counts the processes that run side by side (an LP beside the search)."""

    SECONDS = 0.5

    def __init__(self) -> None:
        self.peak_kib = 0
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)

    def __enter__(self) -> _AllProcessesPeak:
        self._thread.start()
        return self

    def __exit__(self, *_: object) -> None:
        self._stop.set()
        self._thread.join()

    @property
    def mib(self) -> float:
        return round(self.peak_kib / 1024, 1)

    def _run(self) -> None:
        while not self._stop.is_set():
            self.peak_kib = max(self.peak_kib, sum(_pss_kib(pid) for pid in _family(os.getpid())))
            self._stop.wait(self.SECONDS)


def _family(pid: int) -> list[int]:
    """``pid`` and every process below it (Linux /proc; just ``pid`` elsewhere)."""
    family, i = [pid], 0
    while i < len(family):
        try:
            tasks = Path(f"/proc/{family[i]}/task").iterdir()
            for task in tasks:
                family += [int(c) for c in (task / "children").read_text().split()]
        except OSError:
            pass
        i += 1
    return family


def _pss_kib(pid: int) -> int:
    try:
        for line in Path(f"/proc/{pid}/smaps_rollup").read_text().splitlines():
            if line.startswith("Pss:"):
                return int(line.split()[1])
    except (OSError, ValueError, IndexError):
        pass
    return 0


def _cpu_seconds() -> float:
    """CPU time of this process and its finished children (solver processes): wall minus
    this is waiting."""
    own = resource.getrusage(resource.RUSAGE_SELF)
    child = resource.getrusage(resource.RUSAGE_CHILDREN)
    return round(own.ru_utime + own.ru_stime + child.ru_utime + child.ru_stime, 2)


def run_case(case: dict[str, object]) -> dict[str, object]:
    """Solve one instance with one backend and formulation; return a result row."""
    from rebalance.model import build_model
    from rebalance.planning import make_plan, options_from_instance
    from rebalance.readers import read_instance

    started = time.perf_counter()
    log = Path(str(case["log"]))
    log.parent.mkdir(parents=True, exist_ok=True)
    handle = log.open("w", encoding="utf-8")

    def progress(text: str) -> None:
        handle.write(f"{time.perf_counter() - started:8.2f} {text}\n")
        handle.flush()

    instance = read_instance(str(case["instance"]))
    read_s = time.perf_counter() - started
    formulation = str(case["formulation"])
    build = build_model
    if "pooled" in inspect.signature(build_model).parameters:
        build = functools.partial(build_model, pooled=formulation == "pooled")
    if case.get("build_only"):
        t0 = time.perf_counter()
        model = build(instance)
        own, _ = _peak_mib()
        return {"status": "built_only", "columns": model.num_cols, "rows": model.num_rows,
                "integer_columns": model.num_integer, "read_s": round(read_s, 2),
                "build_s": round(time.perf_counter() - t0, 2),
                "wall_s": round(time.perf_counter() - started, 2), "peak_mib": own,
                "cpu_s": _cpu_seconds(),
                "note": "model built, not solved (--build-only)"}
    options = options_from_instance(
        instance, solver=case["backend"], time_limit_seconds=float(case["time_limit"]),  # type: ignore[arg-type]
        relative_gap=float(case["gap"]), threads=int(case["threads"]), seed=0,  # type: ignore[arg-type]
        progress=progress)  # type: ignore[arg-type]
    # Whichever way this version of the API takes the formulation: a make_plan keyword, a
    # build callable, or (one formulation only) nothing.
    plan_params = inspect.signature(make_plan).parameters
    with _AllProcessesPeak() as all_peak:
        if "pooled" in plan_params:
            result = make_plan(instance, options, pooled=formulation != "person")  # type: ignore[call-arg,unused-ignore]
        elif "build" in plan_params:
            result = make_plan(instance, options, build=build)  # type: ignore[call-arg,unused-ignore]
        else:
            result = make_plan(instance, options)
    wall = time.perf_counter() - started
    handle.close()
    stages = {s.name: s for s in result.solve.stages}
    first = stages.get("shortfall") or stages.get("weighted")
    second = stages.get("cost")
    own, child = _peak_mib()
    plan = result.plan
    return {
        "status": result.status.value,
        "verified": result.verified,
        "columns": result.num_cols,
        "rows": result.num_rows,
        "integer_columns": result.num_integer,
        "read_s": round(read_s, 2),
        "build_s": round(result.build_seconds, 2),
        "stage1_s": round(first.seconds, 2) if first else "",
        "stage2_s": round(second.seconds, 2) if second else "",
        "solve_s": round(result.solve.solve_seconds, 2),
        "extract_s": round(result.extract_seconds, 2),
        "verify_s": round(result.verify_seconds, 2),
        "wall_s": round(wall, 2),
        "stage1_status": first.status.value if first else "",
        "stage1_gap": _fmt_gap(first.gap) if first else "",
        "stage2_status": second.status.value if second else "",
        "stage2_gap": _fmt_gap(second.gap) if second else "",
        "gap": _fmt_gap(result.solve.gap),
        "weighted_shortfall": round(plan.weighted_shortfall, 3) if plan is not None else "",
        "total_cost": round(plan.total_cost) if plan is not None else "",
        "peak_mib": own,
        "solver_peak_mib": child or "",
        "all_peak_mib": all_peak.mib or "",
        "cpu_s": _cpu_seconds(),
        "note": "; ".join(str(v) for v in result.violations[:2]),
    }


def _fmt_gap(gap: float | None) -> str:
    return "" if gap is None else f"{gap:.5f}"


# --------------------------------------------------------------------------------------------
# the driver


def _limit_memory(gib: float) -> None:
    cap = int(gib * 1024 ** 3)
    resource.setrlimit(resource.RLIMIT_AS, (cap, cap))


def _formulations(staff: int, person_max_staff: int) -> list[tuple[str, str]]:
    """(formulation, reason to skip or '') for the build_model found at run time."""
    from rebalance.model import build_model

    if "pooled" not in inspect.signature(build_model).parameters:
        return [("default", "")]
    person_skip = "" if staff <= person_max_staff else (
        f"skipped: person-level model of {staff} staff is beyond --person-max-staff "
        f"{person_max_staff}")
    return [("pooled", ""), ("person", person_skip)]


def run_size(size: str, args: argparse.Namespace, date: str) -> list[dict[str, object]]:
    from rebalance.generate import generate, spec_for_size, write_generated

    spec = spec_for_size(size, seed=args.seed)
    t0 = time.perf_counter()
    generated = generate(spec)
    folder = RAW / "instances" / f"{size}-seed{args.seed}"
    write_generated(generated, folder)
    print(f"== {size}: generated {folder.relative_to(ROOT)} in {time.perf_counter() - t0:.2f}s "
          f"({spec.staff} staff, {generated.groups} groups)", flush=True)
    base: dict[str, object] = {
        "date": date, "size": size, "staff": spec.staff, "offices": spec.offices,
        "skills": spec.skills, "periods": spec.periods, "seed": spec.seed,
        "groups": generated.groups, "time_limit_s": args.limits[size],
        "relative_gap": args.gap, "threads": args.threads, "commit": _commit(),
    }
    rows = []
    # A model is the same for every backend: building it once per formulation is enough.
    for backend in (["none"] if size in args.build_only else args.backends):
        for formulation, skip in _formulations(spec.staff, args.person_max_staff):
            row = dict(base, backend=backend, formulation=formulation)
            if skip:
                row.update(status="not_run", note=skip)
                rows.append(row)
                print(f"   {backend:5} {formulation:7} {skip}", flush=True)
                continue
            case = {"instance": str(folder), "backend": backend, "formulation": formulation,
                    "time_limit": args.limits[size], "gap": args.gap, "threads": args.threads,
                    "build_only": size in args.build_only,
                    "log": str(RAW / "logs" / f"{date}-{size}-{backend}-{formulation}.log")}
            # Others may share the machine: the load at the start says how alone a case ran.
            row["load_1min"] = round(os.getloadavg()[0], 2)
            # The solve enforces its own limit; the kill is only a backstop for an overrun.
            kill_after = args.limits[size] * 1.5 + 120
            started = time.perf_counter()
            try:
                done = subprocess.run(
                    [sys.executable, __file__, "--case", json.dumps(case),
                     "--memory-gib", str(args.memory_gib)],
                    capture_output=True, text=True, timeout=kill_after, cwd=ROOT,
                    env=dict(os.environ, OMP_NUM_THREADS="1"))
            except subprocess.TimeoutExpired:
                row.update(status="killed", wall_s=round(time.perf_counter() - started, 1))
                row.update(_from_log(Path(str(case["log"]))))
                row["note"] = (f"no answer within {kill_after:.0f}s, killed; last progress: "
                               + str(row.get("note", "none")))
            else:
                lines = [ln for ln in done.stdout.splitlines() if ln.startswith("{")]
                if done.returncode == 0 and lines:
                    row.update(json.loads(lines[-1]))
                else:
                    tail = (done.stderr.strip().splitlines() or ["no output"])[-1]
                    row.update(status="crashed", wall_s=round(time.perf_counter() - started, 1),
                               note=f"exit {done.returncode}: {tail[:200]}")
            rows.append(row)
            print(f"   {backend:5} {formulation:7} {row['status']:18} gap {row.get('gap', '')!s:8} "
                  f"wall {row.get('wall_s', '')}s build {row.get('build_s', '')}s "
                  f"peak {row.get('peak_mib', '')} MiB {row.get('note', '')}", flush=True)
    return rows


_MODEL_LINE = re.compile(r"model: (\d+) columns \((\d+) integer\), (\d+) rows, built in "
                         r"([\d.]+)s")


def _from_log(log: Path) -> dict[str, object]:
    """What a killed case's progress log still tells: model size, build time, last line."""
    if not log.exists():
        return {}
    lines = [ln.strip() for ln in log.read_text(errors="replace").splitlines() if ln.strip()]
    out: dict[str, object] = {}
    for line in lines:
        match = _MODEL_LINE.search(line)
        if match:
            out.update(columns=int(match.group(1)), integer_columns=int(match.group(2)),
                       rows=int(match.group(3)), build_s=float(match.group(4)))
    if lines:
        out["note"] = lines[-1][:160]
    return out


def _read_csv(path: Path) -> list[dict[str, str]]:
    if not path.exists():
        return []
    with path.open(newline="") as handle:
        return list(csv.DictReader(handle))


def merge_results(path: Path, new_rows: list[dict[str, object]]) -> list[dict[str, str]]:
    """Same-day rows with the same (size, backend, formulation) are replaced by new ones."""
    key = ("size", "backend", "formulation")
    fresh = {tuple(str(r[k]) for k in key) for r in new_rows}
    kept = [r for r in _read_csv(path) if tuple(r[k] for k in key) not in fresh]
    rows = kept + [{c: str(r.get(c, "")) for c in COLUMNS} for r in new_rows]
    rows.sort(key=lambda r: (SIZES.index(r["size"]) if r["size"] in SIZES else 9,
                             r["backend"], r["formulation"]))
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.with_suffix(".tmp")
    with tmp.open("w", newline="") as handle:
        out = csv.DictWriter(handle, fieldnames=list(COLUMNS), lineterminator="\n")
        out.writeheader()
        out.writerows(rows)
    os.replace(tmp, path)
    return rows


def _commit() -> str:
    """The commit measured, followed by " (with uncommitted changes)" when the working tree
    had changes other than this script's own output (which a run that merges its sizes as it
    goes leaves behind).  Rows before this wording read "-dirty"; the page words them alike."""
    head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True,
                          text=True, cwd=ROOT).stdout.strip()
    changed = subprocess.run(
        ["git", "status", "--porcelain", "--untracked-files=no", "--", ".",
         f":!{RESULTS.relative_to(ROOT)}", f":!{DOC.relative_to(ROOT)}"],
        capture_output=True, text=True, cwd=ROOT).stdout.strip()
    return (head + (" (with uncommitted changes)" if changed else "")) if head else "unknown"


def _parse_limits(text: str) -> dict[str, float]:
    limits = dict(TIME_LIMITS)
    for part in filter(None, text.split(",")):
        size, _, value = part.partition("=")
        if size not in SIZES or not value:
            raise argparse.ArgumentTypeError(f"'{part}': expected SIZE=SECONDS, e.g. small=60")
        limits[size] = float(value)
    return limits


def _parse_list(allowed: Sequence[str]):
    def parse(text: str) -> list[str]:
        items = [t for t in text.split(",") if t]
        bad = [t for t in items if t not in allowed]
        if bad or not items:
            raise argparse.ArgumentTypeError(f"expected a comma list of {', '.join(allowed)}")
        return items
    return parse


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else "")
    parser.add_argument("--sizes", type=_parse_list(SIZES), default=["small", "medium"])
    parser.add_argument("--backends", type=_parse_list(BACKENDS), default=list(BACKENDS))
    parser.add_argument("--time-limit", dest="limits", type=_parse_limits, default=TIME_LIMITS,
                        help="per-size seconds for the whole run, e.g. small=60,agency=300")
    parser.add_argument("--build-only", type=_parse_list(SIZES), default=[],
                        help="sizes whose models are only built and measured, not solved")
    parser.add_argument("--gap", type=float, default=0.01, help="relative gap to stop at")
    parser.add_argument("--seed", type=int, default=0, help="generator seed")
    parser.add_argument("--threads", type=int, default=2,
                        help="solver.threads for every case (default 2, this machine's cores)")
    parser.add_argument("--person-max-staff", type=int, default=2000,
                        help="run the person-level formulation only up to this many staff")
    parser.add_argument("--memory-gib", type=float, default=12.0,
                        help="address-space cap per case (a runaway case fails, not the host)")
    parser.add_argument("--date", help="the results file's day (default: today; with "
                        "--docs-only, the newest results file)")
    parser.add_argument("--docs-only", action="store_true",
                        help="rebuild docs/benchmarks.md from a results CSV and "
                        "benchmarks/notes.md, solving nothing")
    parser.add_argument("--case", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.case:
        _limit_memory(args.memory_gib)
        print(json.dumps(run_case(json.loads(args.case))))
        return 0
    if args.date is None:
        newest = sorted(RESULTS.glob("*.csv"))[-1:] if args.docs_only else []
        args.date = (newest[0].stem if newest
                     else dt.datetime.now(dt.UTC).strftime("%Y-%m-%d"))
    csv_path = RESULTS / f"{args.date}.csv"
    if args.docs_only:
        rows = _read_csv(csv_path)
        if not rows:
            print(f"{csv_path}: no results to write up", file=sys.stderr)
            return 3
    else:
        new: list[dict[str, object]] = []
        for size in args.sizes:
            new += run_size(size, args, args.date)
            rows = merge_results(csv_path, new)  # after each size: a long run keeps its work
    write_doc(rows, csv_path, _commit)
    wrote = "" if args.docs_only else f"{csv_path.relative_to(ROOT)} and "
    print(f"wrote {wrote}{DOC.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    sys.exit(main())
