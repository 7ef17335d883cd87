"""The backends by name, as ``SolveOptions.solver`` names them."""

from __future__ import annotations

from collections.abc import Callable

from rebalance.backends.cbc import CbcBackend
from rebalance.backends.common import Backend
from rebalance.backends.highs import HighsBackend

BACKENDS: dict[str, Callable[[], Backend]] = {"highs": HighsBackend, "cbc": CbcBackend}
