"""The helpers the three estimators share: date checks and labels, the sampling frequency, fit statistics."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from trimtab.errors import DataWarning, InputError
from trimtab.model._panel import (
    check_date_frame,
    check_dates,
    date_label,
    infer_periods_per_year,
    observed_at_least,
    per_asset_fit,
    warn_dropped,
)


def test_date_label_gives_the_day_unless_there_is_a_time_of_day() -> None:
    assert date_label(pd.Timestamp("2024-01-02")) == "2024-01-02"
    assert date_label(np.datetime64("2024-01-02")) == "2024-01-02"
    assert date_label(pd.Timestamp("2024-01-02 15:30")) == "2024-01-02T15:30:00"
    # a time of day below a second is still a time of day (ISO 8601 keeps the fraction)
    assert date_label(pd.Timestamp("2024-01-02 00:00:00.250")) == "2024-01-02T00:00:00.250000"
    assert date_label(7) == "7" and date_label("Q1") == "Q1"


@pytest.mark.parametrize(
    ("index", "expected"),
    [
        (pd.bdate_range("2024-01-01", periods=30), 252.0),
        (pd.date_range("2024-01-01", periods=30, freq="D"), 252.0),
        (pd.date_range("2024-01-05", periods=30, freq="W-FRI"), 52.0),
        (pd.date_range("2020-01-31", periods=30, freq="ME"), 12.0),
        (pd.period_range("2020-01", periods=30, freq="M"), 12.0),
        (pd.date_range("2000-03-31", periods=12, freq="QE"), 4.0),
        (pd.date_range("2000-12-31", periods=12, freq="YE"), 1.0),
        # median gap of exactly 4.5 days (gaps 3, 6, 3, 6, …): the daily rule is tried first
        (pd.DatetimeIndex(np.datetime64("2024-01-01") + np.cumsum([0] + [3, 6] * 10)), 252.0),
    ],
)
def test_periods_per_year_from_the_median_spacing(index: pd.Index, expected: float) -> None:
    # 252 trading days, 52 weeks, 12 months, 4 quarters a year: common practice (no source)
    assert infer_periods_per_year(index, None, "x") == expected


@pytest.mark.parametrize(
    ("index", "given", "match"),
    [
        (pd.RangeIndex(5), None, r"x: cannot infer periods_per_year from an index of type RangeIndex \(dtype int64\) with 5 entries"),
        (pd.Index(["a", "b"]), None, r"of type Index \(dtype (object|str)\) with 2 entries; read the dates as dates"),
        (pd.DatetimeIndex(["2024-01-02"]), None, r"x: cannot infer periods_per_year from 1 date\(s\); need at least 2"),
        (pd.date_range("2024-01-01", periods=5, freq="15D"), None, r"median date spacing of 15 days \(known: daily 252, weekly 52"),
        (pd.RangeIndex(5), 0, r"x: periods_per_year must be a positive number or None, got 0"),
        (pd.RangeIndex(5), True, r"periods_per_year must be a positive number or None, got True"),
    ],
)
def test_periods_per_year_refused(index: pd.Index, given: object, match: str) -> None:
    with pytest.raises(InputError, match=match):
        infer_periods_per_year(index, given, "x")


def test_given_periods_per_year_is_returned_as_float() -> None:
    assert infer_periods_per_year(pd.RangeIndex(3), 12, "x") == 12.0


def test_check_dates_names_the_first_pair_out_of_order() -> None:
    check_dates(pd.DatetimeIndex(["2024-01-01", "2024-01-02"]), "x")
    with pytest.raises(InputError, match=r"x: dates must be increasing; 2024-01-02 comes after 2024-01-03 \(sort"):
        check_dates(pd.DatetimeIndex(["2024-01-01", "2024-01-03", "2024-01-02"]), "x")
    with pytest.raises(InputError, match=r"x: duplicate dates: 2024-01-01"):
        check_dates(pd.DatetimeIndex(["2024-01-01", "2024-01-01"]), "x")
    with pytest.raises(InputError, match=r"x: dates of mixed types cannot be ordered; expected increasing dates"):
        check_dates(pd.Index([1, "a", 2], dtype=object), "x")


def test_check_date_frame_errors() -> None:
    frame = pd.DataFrame({"a": [1.0, np.nan], "b": [np.inf, 2.0]}, index=pd.bdate_range("2024-01-01", periods=2))
    assert check_date_frame(frame, "x", "assets", finite=False) is frame
    with pytest.raises(InputError, match="x: expected a DataFrame of dates × assets, got list"):
        check_date_frame([1, 2], "x", "assets")
    with pytest.raises(InputError, match=r"x is empty \(shape \(0, 2\)\); expected at least one date and one asset"):
        check_date_frame(frame.iloc[:0], "x", "assets", nonempty=True)
    with pytest.raises(InputError, match="x: duplicate assets: a"):
        check_date_frame(frame.set_axis(["a", "a"], axis=1), "x", "assets")
    with pytest.raises(InputError, match="x: non-numeric columns: c; expected numbers"):
        check_date_frame(frame.assign(c="text"), "x", "assets", finite=False)
    with pytest.raises(InputError, match="x: infinite values in columns: b"):
        check_date_frame(frame, "x", "assets", allow_nan=True)
    with pytest.raises(InputError, match=r"x: missing \(NaN\) values in columns: a"):
        check_date_frame(frame[["a"]], "x", "assets")


def test_per_asset_fit_matches_pandas_over_observed_dates() -> None:
    rng = np.random.default_rng(4)
    returns = rng.normal(size=(30, 4))
    residuals = 0.5 * returns + rng.normal(scale=0.1, size=(30, 4))
    residuals[:10, 1] = np.nan
    returns[:10, 1] = np.nan
    residuals[:, 3] = np.nan
    residuals[0, 3] = 0.1  # one observation: no variance
    stats = per_asset_fit(returns, residuals)
    u, r = pd.DataFrame(residuals), pd.DataFrame(returns).where(pd.DataFrame(residuals).notna())
    # pandas var skips NaN and uses divisor n − 1
    np.testing.assert_array_equal(stats["n_observations"], [30, 20, 30, 1])
    np.testing.assert_allclose(stats["residual_volatility"][:3], np.sqrt(u.var().to_numpy()[:3]), rtol=1e-12)
    np.testing.assert_allclose(stats["r_squared"][:3], 1 - (u.var() / r.var()).to_numpy()[:3], rtol=1e-12)
    assert np.isnan(stats["residual_volatility"][3]) and np.isnan(stats["r_squared"][3])
    frame = pd.DataFrame(residuals, columns=list("ABCD"))
    assert list(observed_at_least(frame, 20)) == ["A", "B", "C"]


def test_warn_dropped_groups_the_assets_by_reason() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        warn_dropped(pd.Series(dtype=object), "x")  # nothing left out: no warning
    dropped = pd.Series({"A": "no returns", "B": "no exposures", "C": "no returns"})
    with pytest.warns(DataWarning, match=r"x: 3 assets left out \(no exposures: B; no returns: A, C\)"):
        warn_dropped(dropped, "x")
