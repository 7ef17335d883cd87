"""Shared fixtures: instance folders under tests/data and a solve helper that always verifies."""

from __future__ import annotations

from pathlib import Path

import pytest

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.instance import Instance
from rebalance.planning import PlanResult

DATA = Path(__file__).parent / "data"
ROOT = Path(__file__).parent.parent


@pytest.fixture
def tiny() -> Instance:
    return read_instance(DATA / "tiny")


def solve_verified(instance: Instance, **overrides: object) -> PlanResult:
    """Solve exactly (gap 0) and insist the plan passes the independent verifier."""
    overrides.setdefault("relative_gap", 0.0)
    overrides.setdefault("time_limit_seconds", 120.0)
    pooled = bool(overrides.pop("pooled", True))
    pair_details = overrides.pop("pair_details", None)
    result = make_plan(instance, options_from_instance(instance, **overrides), pooled=pooled,
                       pair_details=pair_details)  # type: ignore[arg-type]
    assert result.plan is not None, result.status
    assert result.verified, [str(v) for v in result.violations]
    return result
