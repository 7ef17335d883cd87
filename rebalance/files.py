"""Files written whole: under a fresh name beside the target, then renamed into place, so a
reader never sees half a file or half a folder."""

from __future__ import annotations

import contextlib
import os
import secrets
import shutil
import signal
import threading
from collections.abc import Iterator, Sequence
from pathlib import Path

__all__ = ["OutputInUse", "atomic_file", "forget_written", "input_problem", "instance_file",
           "mark_folder", "output_problem", "place_problem", "sibling_name", "staged_folder",
           "unwritable", "written"]

# What this process has put in place (a folder swapped in, a file renamed), newest last: a
# stop that comes after a swap must not say "nothing written" of a complete plan.
_WRITTEN: list[Path] = []

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
        with _stops_held():  # the rename and its record together
            os.replace(tmp, target)
            _WRITTEN.append(target)
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
    # Files renamed into place inside the staged folder are not written until it is.
    before = len(_WRITTEN)
    try:
        if kind is not None:
            mark_folder(tmp, kind)
        yield tmp
    except BaseException:
        del _WRITTEN[before:]
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    del _WRITTEN[before:]
    # The swap and its clean-up run whole: a stop between the two renames had left no folder
    # at OUT, old and new plans hidden beside it, and the words "nothing written".  A stop
    # that came meanwhile is delivered after, with OUT recorded as written.
    try:
        with _stops_held():
            _swap(tmp, out)
            _WRITTEN.append(out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)  # gone already where the swap was made
        raise


def _swap(tmp: Path, out: Path) -> None:
    """Put folder ``tmp`` at ``out``, removing what was there; on a failure, ``out`` as it
    was.  An empty folder at ``out`` is filled, not replaced: it may be the current folder
    (``rebalance generate .``), which a swap would leave a shell in as a deleted folder."""
    if out.is_dir() and not any(out.iterdir()):
        moved: list[Path] = []
        try:
            for entry in sorted(tmp.iterdir()):
                os.replace(entry, out / entry.name)
                moved.append(out / entry.name)
        except BaseException:
            for path in moved:  # out was empty: back to empty
                if path.is_dir():
                    shutil.rmtree(path, ignore_errors=True)
                else:
                    path.unlink(missing_ok=True)
            raise
        tmp.rmdir()
        return
    old = None
    if out.exists():
        old = sibling_name(out)
        os.replace(out, old)
    try:
        os.replace(tmp, out)
    except BaseException:
        if old is not None:
            os.replace(old, out)
        raise
    if old is not None:
        if old.is_dir() and not old.is_symlink():
            shutil.rmtree(old, ignore_errors=True)
        else:  # a file replaced by --force, or a link (rmtree had left either behind, hidden)
            old.unlink(missing_ok=True)


_STOPS = (signal.SIGINT, signal.SIGTERM)


@contextlib.contextmanager
def _stops_held() -> Iterator[None]:
    """SIGINT and SIGTERM held back within and delivered on leaving, to the handlers there
    were before.  Python handlers, not only ``signal.pthread_sigmask``: a mask holds back
    only this thread's signals, and the kernel hands a process's signal to any thread not
    masking it (a solver's or a pool's), whose handler would still raise here between two
    renames.  Signals reach Python's handlers in the main thread only, so elsewhere this
    holds nothing back (nor can a signal interrupt such a thread)."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    held: list[int] = []

    def hold(signum: int, frame: object) -> None:
        held.append(signum)

    before = {sig: signal.signal(sig, hold) for sig in _STOPS}
    try:
        yield
    finally:
        for sig, handler in before.items():  # None: one set outside Python, not restorable
            signal.signal(sig, signal.SIG_DFL if handler is None else handler)
        for signum in dict.fromkeys(held):  # each once, in order of arrival
            signal.raise_signal(signum)


def written() -> list[Path]:
    """What this process has put in place since :func:`forget_written`, oldest first."""
    return list(_WRITTEN)


def forget_written() -> None:
    """Start a new record of what is written (a command line run's start)."""
    _WRITTEN.clear()


def unwritable(path: str | Path, into: bool = False) -> str | None:
    """Why a file or folder cannot be written at ``path``, or None: found before a solve
    (an unwritable ``-o`` had been found only after one).  ``into``: files are written
    into the folder ``path`` (where it exists) rather than beside it.

    The nearest folder that exists on the way is tried with a folder made and removed there
    at once: no permission, a read-only disk, /proc all say so; a file on the way is named.
    """
    if not str(path):
        return "an empty name is no folder; nothing was written"
    target = Path(os.path.abspath(path))
    start = target if into and target.is_dir() else target.parent
    for folder in (start, *start.parents):
        if folder.is_dir():
            break
        if folder.exists() or folder.is_symlink():
            return (f"{path}: its folder cannot be made ({folder} is a file, not a folder); "
                    "nothing was written")
    probe = sibling_name(folder / "probe")
    try:
        probe.mkdir()
        probe.rmdir()
    except OSError as exc:
        return (f"{path}: cannot be written ({exc.strerror or exc}: {folder}); "
                "nothing was written")
    return None


def place_problem(out: str | Path) -> str | None:
    """Why the folder ``out``, replaced whole, would take the current folder with it, or
    None: ``out`` is empty (the current folder), the current folder or one of its parents
    (``-o .`` had removed the folder the shell was in)."""
    if not str(out):
        return ("an empty name is no folder (it would be the current folder); give a "
                "folder of its own for the output; nothing was written")
    target = Path(os.path.realpath(out))
    here = Path(os.path.realpath(os.getcwd()))
    if target == here or target in here.parents:
        return (f"{out}: is the current folder or holds it; the output replaces its folder "
                "whole, so give a folder of its own; nothing was written")
    return None


def input_problem(out: str | Path, inputs: Sequence[tuple[str, str | Path]]) -> str | None:
    """Why the folder ``out``, replaced whole, would take one of ``inputs`` with it, each
    (what it is, its path): the instance, the plan re-planned from; or None."""
    target = Path(os.path.realpath(out))
    for what, given in inputs:
        if not str(given):
            continue
        real = Path(os.path.realpath(given))
        if real == target or target in real.parents:
            return (f"{out}: {'is' if real == target else 'holds'} {what} ({given}), which "
                    "the output would replace; give another folder to keep both; nothing was "
                    "written")
    return None
