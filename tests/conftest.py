"""Shared fixtures: instance folders under tests/data, a solve helper that always verifies,
and the reference solvers (scipy's linprog and milp)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import Bounds, LinearConstraint, OptimizeResult, linprog, milp

from rebalance import make_plan, options_from_instance, read_instance
from rebalance.instance import Instance
from rebalance.model import Model
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


def scipy_lp(model: Model, objective: np.ndarray, lower: np.ndarray | None = None,
             upper: np.ndarray | None = None) -> OptimizeResult:
    """The LP relaxation of ``model`` by scipy's linprog (its own HiGHS build), within column
    bounds ``lower`` and ``upper`` where given (else the model's), rows read as plain
    inequalities A x <= b: no row scaling, no presolve choices of ours."""
    finite_upper, finite_lower = np.isfinite(model.row_upper), np.isfinite(model.row_lower)
    a_ub = sp.vstack([model.matrix[finite_upper], -model.matrix[finite_lower]], format="csr")
    b_ub = np.concatenate([model.row_upper[finite_upper], -model.row_lower[finite_lower]])
    lower = model.col_lower if lower is None else lower
    upper = model.col_upper if upper is None else upper
    return linprog(objective, A_ub=a_ub, b_ub=b_ub,
                   bounds=list(zip(lower, upper, strict=True)), method="highs")


def scipy_milp(model: Model, objective: np.ndarray, lower: np.ndarray | None = None,
               upper: np.ndarray | None = None,
               extra_rows: tuple[tuple[np.ndarray, float], ...] = ()) -> OptimizeResult:
    """The optimum of ``model`` (plus ``extra_rows``, each row <= its bound) by scipy's milp
    (its own HiGHS build), within column bounds ``lower`` and ``upper`` where given."""
    constraints = [LinearConstraint(model.matrix, model.row_lower, model.row_upper)]
    constraints += [LinearConstraint(row[None, :], -np.inf, bound) for row, bound in extra_rows]
    return milp(objective, integrality=model.is_integer.astype(int),
                bounds=Bounds(model.col_lower if lower is None else lower,
                              model.col_upper if upper is None else upper),
                constraints=constraints)
