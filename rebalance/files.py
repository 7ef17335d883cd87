"""Files written whole: under a fresh name beside the target, then renamed into place, so a
reader never sees half a file or half a folder."""

from __future__ import annotations

import contextlib
import os
import secrets
import shutil
from collections.abc import Iterator
from pathlib import Path

__all__ = ["sibling_name", "staged_folder"]


def sibling_name(path: Path) -> Path:
    """A fresh hidden name beside ``path``, to write under before renaming into place.

    Not mkstemp or mkdtemp: their private modes (0600, 0700) would stick to the file or folder
    once renamed, where a colleague reading the plan expects the usual mode.
    """
    return path.with_name(f".{path.name}.{secrets.token_hex(8)}.tmp")


@contextlib.contextmanager
def staged_folder(out_dir: str | Path) -> Iterator[Path]:
    """Write into a temporary sibling folder, then swap it in: all of it or nothing."""
    out = Path(out_dir)
    out.parent.mkdir(parents=True, exist_ok=True)
    tmp = sibling_name(out)
    tmp.mkdir()
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
        shutil.rmtree(old, ignore_errors=True)
