"""Benchmark `rebalance` on generated instances; write a results CSV and docs/benchmarks.md.

    .venv/bin/python benchmarks/run.py --sizes small,medium          # or: make bench
    .venv/bin/python benchmarks/run.py --sizes agency --backends highs --time-limit agency=300
    .venv/bin/python benchmarks/run.py --docs-only                     # rebuild the page only

For each size the instance is generated (``rebalance.generate``, seed 0 unless ``--seed``),
then every (backend, formulation) case runs in its own subprocess, one at a time, with
``--threads`` solver threads (default 2, the benchmark machine's cores: with HiGHS that runs a
large model's LP bound beside the search; ``--threads 1`` keeps a core free for others).  Each
case goes through the public API only: ``read_instance`` -> ``make_plan`` (which builds with
``build_model``, solves with ``solve`` and verifies the named plan).  When ``build_model``
takes a ``pooled`` keyword both formulations are measured; the person-level one only up to
``--person-max-staff`` people, since past that it cannot finish inside its limit (see the
page).  Results for the same day are merged by (size, backend, formulation), so sizes can be
run separately and still land in one table.

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
import platform
import re
import resource
import subprocess
import sys
import threading
import time
from collections.abc import Sequence
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
RESULTS = ROOT / "benchmarks" / "results"
RAW = RESULTS / "raw"  # generated instances and solver logs; not committed (.gitignore)
NOTES = ROOT / "benchmarks" / "notes.md"
DOC = ROOT / "docs" / "benchmarks.md"
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
    """The commit measured; "-dirty" when the working tree had uncommitted changes other than
    this script's own output (which a run that merges its sizes as it goes leaves behind)."""
    head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], capture_output=True,
                          text=True, cwd=ROOT).stdout.strip()
    changed = subprocess.run(
        ["git", "status", "--porcelain", "--untracked-files=no", "--", ".",
         f":!{RESULTS.relative_to(ROOT)}", f":!{DOC.relative_to(ROOT)}"],
        capture_output=True, text=True, cwd=ROOT).stdout.strip()
    return (head + ("-dirty" if changed else "")) if head else "unknown"


def machine(rows: list[dict[str, str]]) -> list[tuple[str, str]]:
    from importlib.metadata import version

    import pulp

    cpu = "unknown"
    cpuinfo = Path("/proc/cpuinfo")
    if cpuinfo.exists():
        for line in cpuinfo.read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    memory = "unknown"
    meminfo = Path("/proc/meminfo")
    if meminfo.exists():
        for line in meminfo.read_text().splitlines():
            if line.startswith("MemTotal"):
                memory = f"{int(line.split()[1]) / 1024 ** 2:.1f} GiB"
    cbc = "unknown"
    try:
        text = subprocess.run([pulp.PULP_CBC_CMD().path, "-quit"], capture_output=True,
                              text=True, timeout=20).stdout
        cbc = next((ln.split(":", 1)[1].strip() for ln in text.splitlines()
                    if ln.startswith("Version")), "unknown")
    except (OSError, subprocess.SubprocessError):
        pass
    commits = sorted({r.get("commit", "") for r in rows} - {""}) or [_commit()]
    return [
        ("CPU", cpu), ("cores", str(os.cpu_count())), ("memory", memory),
        ("OS", f"{platform.system()} {platform.release()}"),
        ("Python", platform.python_version()), ("HiGHS (highspy)", version("highspy")),
        ("PuLP", pulp.__version__), ("CBC (bundled with PuLP)", cbc),
        ("rebalance commit(s) measured", ", ".join(commits)),
    ]


def _num(value: str) -> float | None:
    try:
        return float(value)
    except ValueError:
        return None


def _cell(value: str, kind: str = "") -> str:
    if value in ("", "None"):
        return "–"
    if kind == "gap":
        v = _num(value)
        if v is not None and v > 1e3:
            # relative_gap divides by max(|plan|, 1e-9): a plan of cost 0 above a negative
            # bound has no meaningful relative gap.
            return "unbounded (plan 0, bound < 0)"
        return value if v is None else f"{v:.2%}"
    if kind == "int":
        v = _num(value)
        return value if v is None else f"{int(v):,}"
    if kind == "round":
        v = _num(value)
        return value if v is None else f"{v:,.1f}"
    return value


def _dominant(row: dict[str, str]) -> str:
    parts = {"read": row["read_s"], "build": row["build_s"], "stage 1": row["stage1_s"],
             "stage 2": row["stage2_s"], "extract": row["extract_s"], "verify": row["verify_s"]}
    values = {k: _num(v) or 0.0 for k, v in parts.items()}
    wall = _num(row["wall_s"]) or sum(values.values())
    if wall <= 0:
        return "–"
    name = max(values, key=lambda k: values[k])
    build_share = (values["build"] + values["extract"]) / wall
    return f"{name} {values[name] / wall:.0%}; build+extract {build_share:.0%}"


def _targets(rows: list[dict[str, str]], default_backend: str) -> list[str]:
    """The targets of issue 3, checked against the rows of the default backend."""
    def case(size: str) -> dict[str, str] | None:
        found = [r for r in rows if r["size"] == size and r["backend"] == default_backend
                 and r["formulation"] in ("pooled", "default")
                 and r["status"] not in ("built_only", "not_run")]
        return found[0] if found else None

    built = {r["size"] for r in rows if r["status"] == "built_only"}

    def not_run(size: str) -> str:
        return "not solved (model built only)" if size in built else "not run"

    out = []
    medium = case("medium")
    if medium is None:
        out.append(f"- medium (both stages proven within 1% in under 60 s): {not_run('medium')}")
    else:
        gaps = [_num(medium["stage1_gap"]), _num(medium["stage2_gap"])]
        ok = (all(g is not None and g <= 0.01 for g in gaps)
              and (_num(medium["wall_s"]) or 1e9) < 60 and medium["verified"] == "True")
        out.append(f"- medium (both stages proven within 1% in under 60 s): "
                   f"{'met' if ok else 'MISSED'} — {medium['status']}, stage gaps "
                   f"{_cell(medium['stage1_gap'], 'gap')} / {_cell(medium['stage2_gap'], 'gap')},"
                   f" {medium['wall_s']} s")
    agency = case("agency")
    if agency is None:
        out.append("- agency (verified plan within 1% in under 120 s, peak under 4 GiB): "
                   + not_run("agency"))
    else:
        gap = _num(agency["gap"])
        # All processes sampled together where measured; else the sum of the two peaks,
        # which bounds it from above.
        peak = _num(agency.get("all_peak_mib", "")) or (
            (_num(agency["peak_mib"]) or 1e9) + (_num(agency["solver_peak_mib"]) or 0.0))
        measured = ("all processes, sampled" if _num(agency.get("all_peak_mib", ""))
                    else "process + solver process")
        ok = (agency["verified"] == "True" and gap is not None and gap <= 0.01
              and (_num(agency["wall_s"]) or 1e9) < 120 and peak < 4096)
        out.append(f"- agency (verified plan within 1% in under 120 s, peak under 4 GiB): "
                   f"{'met' if ok else 'MISSED'} — {agency['status']}, gap "
                   f"{_cell(agency['gap'], 'gap')} (stage gaps "
                   f"{_cell(agency['stage1_gap'], 'gap')} / "
                   f"{_cell(agency['stage2_gap'], 'gap')}), {agency['wall_s']} s, "
                   f"at most {peak:.0f} MiB ({measured})")
    large = case("large")
    if large is None:
        out.append("- large (verified plan with its gap in under 10 minutes): " + not_run("large"))
    else:
        ok = (large["verified"] == "True" and large["gap"] != ""
              and (_num(large["wall_s"]) or 1e9) < 600)
        out.append(f"- large (verified plan with its gap in under 10 minutes): "
                   f"{'met' if ok else 'MISSED'} — {large['status']}, gap "
                   f"{_cell(large['gap'], 'gap')}, {large['wall_s']} s")
    return out


def write_doc(rows: list[dict[str, str]], csv_path: Path) -> None:
    from rebalance.solve import SolveOptions

    default_backend = SolveOptions().solver
    # Rows from before the column existed ran with one thread.
    threads_used = " or ".join(sorted({r.get("threads") or "1" for r in rows}))
    lines = [
        "# Benchmarks",
        "",
        "Generated by `benchmarks/run.py` (run `make bench`, or "
        "`.venv/bin/python benchmarks/run.py --sizes small,medium`); do not edit by hand —",
        "the commentary comes from `benchmarks/notes.md`. Raw numbers: "
        f"`{csv_path.relative_to(ROOT)}`.",
        "",
        "Each size is generated with `rebalance generate --size SIZE --seed 0` (counts: staff /",
        "offices / skills / quarters). Every case runs alone in its own process, through the",
        "public API (`read_instance`, then `make_plan`, which builds the model, solves both",
        "stages within one wall-clock limit, names people and verifies the plan).",
        f"`solver.threads` = {threads_used}: with 2 and HiGHS, a model over 30,000 columns and",
        "up to 3 million nonzeros computes its LP bound in a second solver process beside the",
        "search (HiGHS itself runs one thread). Peak memory is the process's maximum resident",
        "set; the largest solver process (CBC always, HiGHS on models above 500,000 nonzeros)",
        "is listed beside it, and the two together bound the case's peak from above (they share",
        "pages) where no LP runs beside the search. *all MiB* is the largest proportional set",
        "size (shared pages counted once) summed over the case's processes, sampled every half",
        "second: what the case held at once, side-by-side processes included (from the",
        "twelfth session on; older rows have none). Gaps are relative; stage 1 is least",
        "weighted shortfall, stage 2 least cost with that shortfall held.",
        "*load* is the 1-minute load average when the case started and *CPU s* the CPU time",
        "the case got (solver included): on 2 cores, a load above 2 or CPU s well below wall s",
        "means other jobs shared the machine and the times are pessimistic.",
        "",
        "## Machine",
        "",
        "| | |",
        "|---|---|",
    ]
    lines += [f"| {k} | {v} |" for k, v in machine(rows)]
    lines += ["", f"Default backend (`SolveOptions().solver`): `{default_backend}`.", "",
              "## Targets of issue 3 (default backend)", ""]
    lines += _targets(rows, default_backend)
    lines += ["", "## Results", "",
              "| size | staff / offices / skills / periods (groups) | backend | formulation "
              "| limit s | status | verified | columns | rows | integer | build s | stage 1 s "
              "| stage 2 s | wall s | weighted shortfall | stage 1 gap | stage 2 gap "
              "| peak MiB | solver MiB | all MiB | CPU s | load | most time |",
              "|" + "---|" * 23]
    for r in rows:
        sizes = (f"{_cell(r['staff'], 'int')} / {r['offices']} / {r['skills']} / "
                 f"{r['periods']} ({_cell(r['groups'], 'int')})")
        dominant = _dominant(r) if r["status"] not in ("not_run", "killed", "crashed",
                                                       "built_only") else "–"
        lines.append(
            f"| {r['size']} | {sizes} | {r['backend']} | {r['formulation']} "
            f"| {_cell(r['time_limit_s'])} | {r['status']} | {_cell(r['verified'])} "
            f"| {_cell(r['columns'], 'int')} | {_cell(r['rows'], 'int')} "
            f"| {_cell(r['integer_columns'], 'int')} | {_cell(r['build_s'])} "
            f"| {_cell(r['stage1_s'])} | {_cell(r['stage2_s'])} | {_cell(r['wall_s'])} "
            f"| {_cell(r['weighted_shortfall'], 'round')} "
            f"| {_cell(r['stage1_gap'], 'gap')} | {_cell(r['stage2_gap'], 'gap')} "
            f"| {_cell(r['peak_mib'])} | {_cell(r['solver_peak_mib'])} "
            f"| {_cell(r.get('all_peak_mib', ''))} "
            f"| {_cell(r.get('cpu_s', ''))} | {_cell(r.get('load_1min', ''))} | {dominant} |")
    notes = [r for r in rows if r["note"]]
    if notes:
        lines += ["", "Notes on cases:", ""]
        lines += [f"- {r['size']} / {r['backend']} / {r['formulation']}: {r['note']}"
                  for r in notes]
    if NOTES.exists():
        lines += ["", NOTES.read_text(encoding="utf-8").strip()]
    DOC.parent.mkdir(parents=True, exist_ok=True)
    tmp = DOC.with_suffix(".tmp")
    tmp.write_text("\n".join(lines) + "\n", encoding="utf-8")
    os.replace(tmp, DOC)


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
    parser.add_argument("--date", default=dt.datetime.now(dt.UTC).strftime("%Y-%m-%d"))
    parser.add_argument("--docs-only", action="store_true",
                        help="rebuild docs/benchmarks.md from the results CSV of --date")
    parser.add_argument("--case", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.case:
        _limit_memory(args.memory_gib)
        print(json.dumps(run_case(json.loads(args.case))))
        return 0
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
    write_doc(rows, csv_path)
    print(f"wrote {csv_path.relative_to(ROOT)} and {DOC.relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(ROOT))
    sys.exit(main())
