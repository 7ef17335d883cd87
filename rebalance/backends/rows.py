"""The rows every backend solves over: the model's with extra rows below, scaled per row."""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from rebalance.model import Model


def stacked_rows(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> tuple[
        sp.csr_matrix, np.ndarray, np.ndarray]:
    """The model's rows with ``extra_rows`` (row, upper bound) below them, unscaled: the
    rows every backend solves over, in the order their prices come back."""
    matrix, row_lo, row_hi = model.matrix, model.row_lower, model.row_upper
    if extra_rows:
        extra = sp.csr_matrix(np.vstack([r for r, _ in extra_rows]))
        matrix = sp.vstack([matrix, extra], format="csr")
        row_lo = np.concatenate([row_lo, np.full(len(extra_rows), -math.inf)])
        row_hi = np.concatenate([row_hi, [ub for _, ub in extra_rows]])
    return matrix, row_lo, row_hi


def scaled_rows(model: Model, extra_rows: list[tuple[np.ndarray, float]]) -> tuple[
        sp.csr_matrix, np.ndarray, np.ndarray, np.ndarray]:
    """The model's rows plus ``extra_rows``, each row scaled to a largest coefficient near 1,
    and the factor of each row (a price of a scaled row times it prices the row itself).

    Money rows (budgets, cost adjustments) carry coefficients up to 1e5 beside head and FTE
    rows near 1; left so, HiGHS's interior point method stalls on the demo-sized models.
    Scaling by powers of two changes neither the solution nor the rounding of any value.
    """
    matrix, row_lo, row_hi = stacked_rows(model, extra_rows)
    factor = row_scale(matrix)
    big = factor != 1.0
    if not big.any():
        return matrix, row_lo, row_hi, factor
    return (sp.diags(factor, format="csr") @ matrix, row_lo * factor, row_hi * factor, factor)


def row_scale(matrix: sp.csr_matrix) -> np.ndarray:
    """Per row, a power of two that brings its largest coefficient near 1 (1 where it is
    at most 2 already): see :func:`scaled_rows`."""
    largest = np.zeros(matrix.shape[0])
    counts = np.diff(matrix.indptr)
    nonempty = counts > 0
    largest[nonempty] = np.maximum.reduceat(np.abs(matrix.data), matrix.indptr[:-1][nonempty])
    factor = np.ones_like(largest)
    big = largest > 2.0
    factor[big] = np.exp2(-np.round(np.log2(largest[big])))
    return factor
