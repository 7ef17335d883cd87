"""Helpers for the demand tests: paths of the demo and a loader for make_history.py."""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path
from types import ModuleType

from rebalance.readers import read_tables

ROOT = Path(__file__).parent.parent.parent
DEMO = ROOT / "instances" / "demo"
DEMO_HISTORY = ROOT / "instances" / "demo_history"


def load_make_history() -> ModuleType:
    spec = importlib.util.spec_from_file_location("make_history",
                                                  ROOT / "instances" / "make_history.py")
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules["make_history"] = module  # dataclasses look their module up by name
    spec.loader.exec_module(module)
    return module


def demo_names() -> tuple[set[str], set[str]]:
    _, tables, _ = read_tables(DEMO)
    return ({r["office"] for r in tables["offices"].rows},
            {r["skill"] for r in tables["skills"].rows})
