"""Fixtures for the demand tests: the demo history, generated afresh."""

from __future__ import annotations

from pathlib import Path

import pytest
from demand_helpers import load_make_history


@pytest.fixture(scope="session")
def generated_history(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, list]:
    """The demo history written by instances/make_history.py into a fresh folder."""
    out = tmp_path_factory.mktemp("history")
    planted = load_make_history().main(out)
    return out, planted
