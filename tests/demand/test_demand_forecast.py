"""Forecast methods and the backtest against outside references."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rebalance.demand.forecast import (
    backtest_series,
    forecast_series,
    holt_winters_forecast,
    mase,
    selection_origins,
    three_year_average,
)
from rebalance.demand.history import ForecastSettings


def test_mase_on_a_hand_checked_series() -> None:
    # Hyndman and Koehler (2006), "Another look at measures of forecast accuracy", IJF 22(4):
    # q_t = e_t / ((1/(n-1)) sum_{i=2..n} |Y_i - Y_{i-1}|), MASE = mean |q_t|.  By hand:
    # training 1 3 2 5 4 -> naive errors 2 1 3 1, mean 1.75; test errors |6-4|, |5-6| -> 1.5.
    training = np.array([1.0, 3.0, 2.0, 5.0, 4.0])
    assert mase(np.array([6.0, 5.0]), np.array([4.0, 6.0]), training) == pytest.approx(1.5 / 1.75)
    # Seasonal scaling (lag m, as in Hyndman and Athanasopoulos, FPP3 section 5.8), m = 2:
    # differences 2-1, 5-3, 4-2 -> mean 5/3, so MASE = 1.5 / (5/3) = 0.9.
    assert mase(np.array([6.0, 5.0]), np.array([4.0, 6.0]), training, m=2) == pytest.approx(0.9)
    # A constant training series has no scale: undefined, not infinite.
    assert np.isnan(mase(np.array([1.0]), np.array([2.0]), np.ones(5)))


def test_three_year_average_by_hand() -> None:
    # Hand computation of the documented rule (docs/instance-format.md, "Workload history"):
    # the mean of the last three observed values of the same calendar month.
    rng = np.random.default_rng(3)
    y = rng.integers(50, 150, size=40).astype(float)  # months 0..39; next month is 40
    fc = three_year_average(y, 15)
    # h=1 -> month 40, same calendar month as 28, 16, 4
    assert fc[0] == pytest.approx((y[28] + y[16] + y[4]) / 3)
    # h=12 -> month 51: last three observed in that calendar month are 39, 27, 15
    assert fc[11] == pytest.approx((y[39] + y[27] + y[15]) / 3)
    # h=13 -> month 52: still 28, 16, 4 (no recursion on forecasts)
    assert fc[12] == pytest.approx(fc[0])
    with pytest.raises(ValueError):
        three_year_average(y[:35], 1)


def test_seasonal_naive_with_drift_by_hand() -> None:
    # y[t] = t + a seasonal bump: seasonal differences are all 12, so the drift is 12 and
    # the forecast is the value a year earlier plus 12 (plus 24 in the second year).
    season = np.tile([0.0, 5, 9, 3, -2, -6, -8, -4, 1, 4, 6, 2], 4)
    y = np.arange(48.0) + season
    fc = forecast_series(y, "snaive_drift", 24)
    assert fc.mean[0] == pytest.approx(y[36] + 12)
    assert fc.mean[13] == pytest.approx(y[37] + 24)
    # No noise in the differences: every simulated path is the point forecast.
    assert np.allclose(fc.paths, fc.mean[:, None])


def _co2_monthly() -> np.ndarray:
    # Open data shipped inside the statsmodels package: statsmodels.datasets.co2 (weekly
    # atmospheric CO2 at Mauna Loa, 1958-2001), averaged to months.
    from statsmodels.datasets import co2

    weekly = co2.load_pandas().data["co2"]
    return weekly.resample("MS").mean().interpolate()["1980":"2001"].to_numpy(dtype=float)


def test_holt_winters_matches_statsmodels() -> None:
    # Reference library: statsmodels' ExponentialSmoothing fitted directly.  Our forecasts use
    # its fit; the textbook recursion (FPP3 section 8.3) run on its parameters must reproduce
    # its fitted values, and our forecasts must equal its own at every horizon except the
    # multiples of m, where statsmodels 0.15 reuses s[T-m] (statsmodels issue #9538).
    from statsmodels.tsa.holtwinters import ExponentialSmoothing

    y = _co2_monthly()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = ExponentialSmoothing(y, trend="add", damped_trend=True, seasonal="add",
                                   seasonal_periods=12, initialization_method="heuristic"
                                   ).fit(method="least_squares", use_brute=False)
    p = fit.params
    alpha, beta, gamma, phi = (p["smoothing_level"], p["smoothing_trend"],
                               p["smoothing_seasonal"], p["damping_trend"])
    level, trend, seasons = p["initial_level"], p["initial_trend"], list(p["initial_seasons"])
    fitted = []
    for t, value in enumerate(y):
        s_old = seasons[t]
        fitted.append(level + phi * trend + s_old)
        new_level = alpha * (value - s_old) + (1 - alpha) * (level + phi * trend)
        new_trend = beta * (new_level - level) + (1 - beta) * phi * trend
        seasons.append(gamma * (value - level - phi * trend) + (1 - gamma) * s_old)
        level, trend = new_level, new_trend
    assert np.allclose(fitted, fit.fittedvalues, atol=1e-8)

    ours = forecast_series(y, "holt_winters", 24).mean
    theirs = np.asarray(fit.forecast(24))
    not_multiple = [j for j in range(24) if (j + 1) % 12 != 0]
    assert np.allclose(ours[not_multiple], theirs[not_multiple], atol=1e-8)
    textbook = [level + sum(phi ** i for i in range(1, h + 1)) * trend
                + seasons[len(y) + (h - 1) % 12] for h in range(1, 25)]
    assert np.allclose(ours, textbook, atol=1e-8)
    assert np.allclose(holt_winters_forecast(fit.level, fit.trend, fit.season, phi, 24),
                       textbook, atol=1e-8)


def test_selection_beats_the_baseline_on_co2() -> None:
    # statsmodels.datasets.co2: a strong trend, where a three-year average must lag by about
    # two years of growth; the rolling-origin choice must pick a real method and beat the
    # baseline on the held-out year.
    y = _co2_monthly()
    settings = ForecastSettings()
    result = backtest_series(y, settings)
    assert result.origins == selection_origins(len(y), settings) == (228, 234, 240)
    assert result.chosen != "baseline"
    assert result.selection_mase[result.chosen] < result.selection_mase["baseline"]
    assert result.beats_baseline
    assert result.holdout_mase[result.chosen] < 0.5 * result.holdout_mase["baseline"]


def test_backtest_keeps_baseline_on_pure_noise() -> None:
    # Common practice: on a stable seasonal pattern under heavy noise, averaging three years
    # beats one-year-back methods; the choice must then keep the old method.
    rng = np.random.default_rng(11)
    pattern = np.tile([100.0, 95, 110, 120, 115, 105, 100, 80, 105, 110, 100, 85], 7)
    y = pattern + rng.normal(0, 12, len(pattern))
    result = backtest_series(y, ForecastSettings())
    assert result.selection_mase["baseline"] < result.selection_mase["snaive_drift"]


def test_intervals_cover_the_mean() -> None:
    y = _co2_monthly()
    for method in ("baseline", "snaive_drift", "holt_winters"):
        fc = forecast_series(y, method, 24, seed=1)
        lo, hi = np.quantile(fc.paths, [0.1, 0.9], axis=1)
        assert np.all(lo <= fc.mean) and np.all(fc.mean <= hi), method
        assert np.all(hi - lo > 0), method


@settings(max_examples=40, deadline=None)
# No subnormal numbers: scaled, they lose digits (2.2e-313 x 0.01 keeps about 10), which is
# floating point, not MASE; hypothesis found one such series.
@given(st.lists(st.floats(0, 1000, allow_subnormal=False), min_size=48, max_size=72),
       st.floats(0.01, 100), st.floats(-500, 500))
def test_mase_is_scale_free_and_baseline_is_equivariant(values: list[float], scale: float,
                                                        shift: float) -> None:
    # Hyndman and Koehler (2006): MASE is independent of the scale of the data.
    y = np.array(values)
    train, test = y[:-12], y[-12:]
    forecast = three_year_average(train, 12)
    a = mase(test, forecast, train, 12)
    b = mase(scale * test, scale * forecast, scale * train, 12)
    assert (np.isnan(a) and np.isnan(b)) or a == pytest.approx(b, rel=1e-9, abs=1e-12)
    # A mean of past values moves with the data: shifting the series shifts the baseline.
    assert np.allclose(three_year_average(train + shift, 12), forecast + shift)
