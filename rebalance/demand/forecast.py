"""Monthly volume forecasts: the three-year-average baseline and two real methods.

Methods (``y`` is a monthly series, ``T`` its length, ``h`` months ahead, ``m = 12``,
``k = (h - 1) // 12``):

``baseline``
    the old method: ``yhat[T+h] = mean(y[T+h-12(k+1)], y[T+h-12(k+2)], y[T+h-12(k+3)])``,
    the mean of the last three observed values of the same calendar month.
``snaive_drift``
    seasonal naive with drift: ``yhat[T+h] = y[T+h-12(k+1)] + (k+1) d``, with ``d`` the mean of
    the seasonal differences ``y[t] - y[t-12]``.
``holt_winters``
    additive Holt-Winters with damped trend (statsmodels ``ExponentialSmoothing``).

A method is chosen per series by rolling-origin backtest on MASE (:func:`mase`); the last
``holdout_months`` are held out of the choice and used only to report chosen vs baseline.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

from rebalance.demand.history import ForecastSettings

__all__ = [
    "METHODS",
    "Forecast",
    "SeriesBacktest",
    "backtest_series",
    "forecast_series",
    "holt_winters_forecast",
    "mase",
    "three_year_average",
]

METHODS = ("baseline", "snaive_drift", "holt_winters")
SEASON = 12
PATHS = 1000


@dataclass(frozen=True)
class Forecast:
    """Point forecasts (``mean``, length h) and simulated sample paths (``paths``, h x PATHS)."""

    method: str
    mean: np.ndarray
    paths: np.ndarray


@dataclass(frozen=True)
class SeriesBacktest:
    """Backtest of one series: MASE by method on the selection origins and on the holdout."""

    origins: tuple[int, ...]
    selection_mase: dict[str, float]
    holdout_mase: dict[str, float]
    chosen: str

    @property
    def beats_baseline(self) -> bool:
        """Chosen method's holdout MASE is below the baseline's (false if the baseline won)."""
        return bool(self.holdout_mase[self.chosen] < self.holdout_mase["baseline"])


def mase(actual: np.ndarray, forecast: np.ndarray, training: np.ndarray, m: int = 1) -> float:
    """Mean absolute scaled error (Hyndman and Koehler 2006).

    Errors are scaled by the in-sample mean absolute error of the naive forecast, lag ``m``:
    ``(1 / (n - m)) sum_{t=m+1..n} |y_t - y_{t-m}|`` over the training data.  ``m = 1`` is the
    paper's definition; ``m = 12`` its seasonal variant used for selection here.  NaN when
    the scale is zero (a constant training series) or the training data is too short.
    """
    train = np.asarray(training, dtype=float)
    if len(train) <= m:
        return float("nan")
    scale = float(np.mean(np.abs(train[m:] - train[:-m])))
    if scale == 0.0:
        return float("nan")
    errors = np.asarray(actual, dtype=float) - np.asarray(forecast, dtype=float)
    return float(np.mean(np.abs(errors)) / scale)


def three_year_average(y: np.ndarray, h: int) -> np.ndarray:
    """The baseline: mean of the last three observed values of the same calendar month."""
    y = np.asarray(y, dtype=float)
    n = len(y)
    if n < 3 * SEASON:
        raise ValueError(f"the baseline needs 36 months of history; got {n}")
    out = np.empty(h)
    for step in range(1, h + 1):
        k = (step - 1) // SEASON
        out[step - 1] = np.mean([y[n + step - 1 - SEASON * (k + j)] for j in (1, 2, 3)])
    return out


def _baseline(y: np.ndarray, h: int, rng: np.random.Generator) -> Forecast:
    mean = three_year_average(y, h)
    # Spread: in-sample errors of the same rule one season ahead, independent across months
    # (an approximation: the rule has no error model of its own).
    past = [y[t] - np.mean(y[t - 36:t:12]) for t in range(36, len(y))]
    sd = float(np.std(past, ddof=1)) if len(past) > 1 else float(np.std(y))
    return Forecast("baseline", mean, mean[:, None] + sd * rng.standard_normal((h, PATHS)))


def _snaive_drift(y: np.ndarray, h: int, rng: np.random.Generator) -> Forecast:
    y = np.asarray(y, dtype=float)
    n = len(y)
    diffs = y[SEASON:] - y[:-SEASON]
    drift = float(np.mean(diffs))
    sigma = float(np.std(diffs - drift, ddof=1)) if len(diffs) > 1 else 0.0
    steps = np.arange(1, h + 1)
    k = (steps - 1) // SEASON
    base = y[n + steps - 1 - SEASON * (k + 1)]
    mean = base + (k + 1) * drift
    # Paths under the model y[t] = y[t-12] + d + e: each calendar month walks on its own,
    # and all share one error in the estimated drift.
    drift_error = sigma / np.sqrt(len(diffs)) * rng.standard_normal(PATHS)
    walks = sigma * rng.standard_normal((int(k.max()) + 1, SEASON, PATHS)).cumsum(axis=0)
    noise = walks[k, (n + steps - 1) % SEASON, :]
    paths = mean[:, None] + (k + 1)[:, None] * drift_error[None, :] + noise
    return Forecast("snaive_drift", mean, paths)


def _holt_winters(y: np.ndarray, h: int, rng: np.random.Generator) -> Forecast:
    from statsmodels.tsa.holtwinters import ExponentialSmoothing

    with warnings.catch_warnings():
        # Convergence chatter on short series; the backtest judges the result instead.
        warnings.simplefilter("ignore")
        model = ExponentialSmoothing(np.asarray(y, dtype=float), trend="add", damped_trend=True,
                                     seasonal="add", seasonal_periods=SEASON,
                                     initialization_method="heuristic")
        # Least squares reaches the same SSE as the default optimiser here, several times faster.
        fit = model.fit(method="least_squares", use_brute=False)
        library_mean = np.asarray(fit.forecast(h), dtype=float)
        paths = np.asarray(fit.simulate(h, anchor="end", repetitions=PATHS, error="add",
                                        random_state=rng), dtype=float).reshape(h, PATHS)
    mean = holt_winters_forecast(np.asarray(fit.level), np.asarray(fit.trend),
                                 np.asarray(fit.season), float(fit.params["damping_trend"]), h)
    # statsmodels 0.15 uses s[T-m] instead of the final s[T] at horizons that are multiples of
    # m (statsmodels issue #9538, fixed after 0.15); shift its paths onto the textbook mean.
    paths = paths + (mean - library_mean)[:, None]
    if not np.all(np.isfinite(mean)):
        raise ValueError("Holt-Winters fit did not converge to finite forecasts")
    return Forecast("holt_winters", mean, paths)


def holt_winters_forecast(level: np.ndarray, trend: np.ndarray, season: np.ndarray, phi: float,
                          h: int) -> np.ndarray:
    """Additive damped Holt-Winters forecasts from the fitted states (FPP3 section 8.3).

    ``yhat[T+j] = l[T] + (phi + ... + phi^j) b[T] + s[T + j - m(k+1)]``, ``k = (j-1) // m``.
    """
    steps = np.arange(1, h + 1)
    damped = np.cumsum(phi ** steps)
    n = len(level)
    seasonal = season[n - SEASON + (steps - 1) % SEASON]
    return np.asarray(level[-1] + damped * trend[-1] + seasonal, dtype=float)


_RUNNERS = {"baseline": _baseline, "snaive_drift": _snaive_drift, "holt_winters": _holt_winters}


def forecast_series(y: np.ndarray, method: str, h: int, seed: int = 0) -> Forecast:
    """Forecast ``h`` months after the end of ``y`` with one method (means clipped at 0)."""
    result = _RUNNERS[method](np.asarray(y, dtype=float), h, np.random.default_rng(seed))
    return Forecast(method, np.maximum(result.mean, 0.0), np.maximum(result.paths, 0.0))


def _score(y: np.ndarray, origin: int, horizon: int, method: str, seed: int) -> float:
    train, test = y[:origin], y[origin:origin + horizon]
    try:
        fc = forecast_series(train, method, horizon, seed)
    except (ValueError, np.linalg.LinAlgError):
        return float("inf")
    return mase(test, fc.mean, train, SEASON)


def selection_origins(n: int, settings: ForecastSettings) -> tuple[int, ...]:
    """Forecast origins for the choice: their test windows end before the holdout starts."""
    holdout_start = n - settings.holdout_months
    origins = []
    for j in range(settings.selection_origins):
        origin = holdout_start - settings.holdout_months - j * settings.origin_step_months
        if origin >= settings.min_training_months:
            origins.append(origin)
    return tuple(sorted(origins))


def backtest_series(y: np.ndarray, settings: ForecastSettings) -> SeriesBacktest:
    """Choose a method by rolling-origin MASE, then score chosen and baseline on the holdout.

    Raises ``ValueError`` when the series is too short for one selection origin.
    """
    y = np.asarray(y, dtype=float)
    origins = selection_origins(len(y), settings)
    if not origins:
        raise ValueError("too short for a backtest")
    horizon = settings.holdout_months
    selection: dict[str, float] = {}
    for method in METHODS:
        scores = [_score(y, o, horizon, method, settings.seed) for o in origins]
        selection[method] = float(np.mean(scores)) if all(np.isfinite(scores)) else float("inf")
    # Ties and undefined scores go to the baseline: a new method must earn its place.
    chosen = "baseline"
    for method in METHODS[1:]:
        if selection[method] < selection[chosen]:
            chosen = method
    holdout_start = len(y) - horizon
    holdout = {m: _score(y, holdout_start, horizon, m, settings.seed) for m in METHODS}
    return SeriesBacktest(origins, selection, holdout, chosen)
