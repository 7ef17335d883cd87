"""The benchmark page: docs/benchmarks.md from a results CSV and benchmarks/notes.md.

Used by ``benchmarks/run.py`` after a run, or alone with ``run.py --docs-only``; it reads
results and machine facts and writes markdown, and measures nothing itself.
"""

from __future__ import annotations

import os
import platform
import subprocess
from collections.abc import Callable
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
NOTES = ROOT / "benchmarks" / "notes.md"
DOC = ROOT / "docs" / "benchmarks.md"
# How run.py recorded a working tree with uncommitted changes before it said so in words.
_OLD_DIRTY_SUFFIX = "-dirty"


def commit_words(commit: str) -> str:
    """A recorded commit as the page shows it: an old ``abc1234-dirty`` reads
    ``abc1234 (with uncommitted changes)``, as run.py now records it."""
    if commit.endswith(_OLD_DIRTY_SUFFIX):
        return commit[: -len(_OLD_DIRTY_SUFFIX)] + " (with uncommitted changes)"
    return commit


def machine(rows: list[dict[str, str]], current_commit: Callable[[], str]
            ) -> list[tuple[str, str]]:
    """The machine table: hardware and versions read now, commits from the rows (or
    ``current_commit()`` where the rows have none)."""
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
    commits = (sorted({commit_words(r.get("commit", "")) for r in rows} - {""})
               or [commit_words(current_commit())])
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


def render_page(rows: list[dict[str, str]], csv_path: Path,
                current_commit: Callable[[], str]) -> str:
    """The whole page as markdown: fixed text, machine, targets, results table, then
    ``benchmarks/notes.md`` as it stands."""
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
        "To rebuild this page from those numbers and the notes without solving anything:",
        f"`.venv/bin/python benchmarks/run.py --docs-only --date {csv_path.stem}`.",
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
        "second: what the case held at once, side-by-side processes included (measured",
        "since 2026-12-03, see 2026-12-03: PDLP for the LPs wanted for a point; older rows",
        "have none). Gaps are relative; stage 1 is least weighted shortfall, stage 2 least",
        "cost with that shortfall held.",
        "*load* is the 1-minute load average when the case started and *CPU s* the CPU time",
        "the case got (solver included): on 2 cores, a load above 2 or CPU s well below wall s",
        "means other jobs shared the machine and the times are pessimistic.",
        "",
        "## Machine",
        "",
        "| | |",
        "|---|---|",
    ]
    lines += [f"| {k} | {v} |" for k, v in machine(rows, current_commit)]
    lines += ["", f"Default backend (`SolveOptions().solver`): `{default_backend}`.", "",
              "## Targets (issue 3)", "", "Checked on the default backend's rows.", ""]
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
    return "\n".join(lines) + "\n"


def write_doc(rows: list[dict[str, str]], csv_path: Path,
              current_commit: Callable[[], str], doc: Path = DOC) -> None:
    """Write the page to ``doc`` at once (through a temporary file)."""
    text = render_page(rows, csv_path, current_commit)
    doc.parent.mkdir(parents=True, exist_ok=True)
    tmp = doc.with_suffix(".tmp")
    tmp.write_text(text, encoding="utf-8")
    os.replace(tmp, doc)

