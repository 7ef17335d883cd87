"""Files written whole: under a fresh name beside the target, then renamed into place, so a
reader never sees half a file or half a folder."""

from __future__ import annotations

import contextlib
import os
import secrets
import shutil
from collections.abc import Iterator
from pathlib import Path

__all__ = ["OutputInUse", "atomic_file", "instance_file", "mark_folder", "output_problem",
           "sibling_name", "staged_folder"]

# Written into every folder staged with a kind: its content names the kind, so a later run
# replaces only a folder of the same kind that this tool wrote.
MARKER = ".rebalance-folder"


class OutputInUse(Exception):
    """The output path holds something a write would destroy; nothing was written."""


def sibling_name(path: Path) -> Path:
    """A fresh hidden name beside ``path``, to write under before renaming into place.

    Not mkstemp or mkdtemp: their private modes (0600, 0700) would stick to the file or folder
    once renamed, where a colleague reading the plan expects the usual mode.
    """
    return path.with_name(f".{path.name}.{secrets.token_hex(8)}.tmp")


@contextlib.contextmanager
def atomic_file(path: str | Path) -> Iterator[Path]:
    """A fresh name beside ``path`` to write the file under: renamed into place when the block
    ends, removed if it fails, so ``path`` holds the whole new file or its old content.

    ``path``'s folder is made where it is missing.  Same folder, so the rename is atomic.
    """
    target = Path(path)
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = sibling_name(target)
    try:
        yield tmp
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)  # begun, say, before a full disk stopped it
        raise


def output_problem(out_dir: str | Path, kind: str | None) -> str | None:
    """Why ``out_dir`` may not be replaced by a folder of ``kind``, or None if it may.

    It may be replaced where it does not exist, is an empty folder, or is a ``kind`` folder
    this tool wrote (its marker says so; a plan folder from before the marker has its
    summary.json, a demand report its qc_verdict.txt).  Anything else (an instance folder, a
    folder of the user's own files, a file) would be destroyed by the swap: one ``-o`` typed
    as the instance's folder had wiped the instance.  ``kind`` None (files are added, none
    removed): only a file in the way, or a folder holding an instance
    (:func:`instance_file`), is a problem.
    """
    out = Path(out_dir)
    if not out.exists():
        return None
    if not out.is_dir():
        return f"{out}: is a file, not a folder; nothing was written"
    if not any(out.iterdir()):
        return None
    if kind is None:
        # Files are added beside what is there, but not into an instance: a frontier.csv
        # typed into the instance's own folder had been written there.
        found = instance_file(out)
        return None if found is None else (
            f"{out}: holds an instance ({found.name}); give another folder for the output, "
            "such as a plan folder; nothing was written")
    marker = out / MARKER
    if marker.is_file():
        if marker.read_text(encoding="utf-8").strip() == kind:
            return None
    elif kind == "plan" and (out / "summary.json").is_file():
        return None
    elif kind == "demand_report" and (out / "qc_verdict.txt").is_file():
        return None  # demand reports are not marked; each has its verdict
    return (f"{out}: already holds files that are not a {kind} folder written by rebalance; "
            "nothing was written (give a new or empty folder, or remove this one)")


def instance_file(folder: Path) -> Path | None:
    """The file that makes ``folder`` an instance: its settings.toml, or a workbook with a
    settings or staff sheet (an instance workbook's; plan.xlsx has neither), else None."""
    if (folder / "settings.toml").is_file():
        return folder / "settings.toml"
    for path in sorted(folder.glob("*.xlsx")):
        try:
            from openpyxl import load_workbook

            book = load_workbook(path, read_only=True)
            names = {name.strip().lower() for name in book.sheetnames}
            book.close()
        except Exception:  # not a workbook the readers could read as an instance either
            continue
        if names & {"settings", "staff"}:
            return path
    return None


def mark_folder(folder: Path, kind: str) -> None:
    """Mark ``folder`` as a ``kind`` folder this tool wrote (see :func:`output_problem`)."""
    (folder / MARKER).write_text(kind + "\n", encoding="utf-8")


@contextlib.contextmanager
def staged_folder(out_dir: str | Path, kind: str | None = None) -> Iterator[Path]:
    """Write into a temporary sibling folder, then swap it in: all of it or nothing.

    With ``kind``, the folder is marked as one, and an existing ``out_dir`` is replaced only
    where :func:`output_problem` allows it (else :class:`OutputInUse`, before anything is
    written)."""
    # Absolute: "." has no name to put a sibling beside (an internal error in a sweep).
    out = Path(os.path.abspath(out_dir))
    problem = output_problem(out, kind) if kind is not None else None
    if problem is not None:
        raise OutputInUse(problem)
    try:
        out.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:  # a file where a folder on the way should be
        raise OutputInUse(f"{out_dir}: its folder cannot be made ({exc.strerror}: "
                          f"{exc.filename}); nothing was written") from None
    tmp = sibling_name(out)
    tmp.mkdir()
    if kind is not None:
        mark_folder(tmp, kind)
    try:
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    old = None
    if out.exists():
        old = sibling_name(out)
        os.replace(out, old)
    os.replace(tmp, out)
    if old is not None:
        if old.is_dir():
            shutil.rmtree(old, ignore_errors=True)
        else:  # a file replaced by --force (rmtree had left it behind, hidden)
            old.unlink(missing_ok=True)
