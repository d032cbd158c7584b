"""The unit rules of :mod:`trimtab.units` against real published data and closed forms (issue #20).

Outside data: linearmodels' copy of Ken French's monthly factors and industry portfolios (shipped in the
linearmodels package, as fractions; the French data library itself publishes them in percent).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from trimtab.errors import DataWarning, InputError
from trimtab.units import (
    ALPHA_SPREAD_LIMIT,
    RETURN_SIZE_LIMIT,
    check_alpha,
    check_book,
    check_returns,
    move_problem,
    periods_per_year_of,
    typical_annual_size,
)


@pytest.fixture(scope="module")
def french() -> pd.DataFrame:
    pytest.importorskip("linearmodels")
    from linearmodels.datasets import french as data

    frame = data.load()
    frame.index = pd.DatetimeIndex(pd.to_datetime(frame.pop("dates")))
    return frame.drop(columns=["RF"])


def test_the_mad_scale_is_the_normal_consistency_constant() -> None:
    # 1 / Φ⁻¹(3/4) (scipy), the factor that makes the median absolute deviation a standard deviation
    from trimtab.units import _rules

    assert _rules._MAD_TO_SD == pytest.approx(1 / stats.norm.ppf(0.75), rel=1e-4)


def test_monthly_dates_give_12_periods_a_year(french: pd.DataFrame) -> None:
    assert periods_per_year_of(french.index) == pytest.approx(12, rel=0.02)
    assert periods_per_year_of(pd.bdate_range("2024-01-01", periods=300)) == 252


def test_published_factors_as_fractions_pass_and_in_percent_are_caught(french: pd.DataFrame) -> None:
    size = typical_annual_size(french, 12)
    # the market, size, value, momentum factors and 30 industries: about 15% a year (common practice: 5-25%)
    assert 0.05 < size < 0.3
    assert check_returns(french, "french.csv") is french
    with pytest.raises(InputError, match=r"^french\.csv: returns look like percent, not fractions: .* declare unit: percent$"):
        check_returns(french * 100, "french.csv")  # as the French data library publishes them
    with pytest.warns(DataWarning, match=r"french\.csv: returns read as percent \(unit: percent\) and divided by 100"):
        converted = check_returns(french * 100, "french.csv", unit="percent")
    np.testing.assert_allclose(converted.to_numpy(), french.to_numpy(), rtol=1e-12)


def test_the_threshold_sits_between_the_units(french: pd.DataFrame) -> None:
    # a fraction five times as volatile as the published factors still passes; a percent file of
    # factors five times calmer is still caught
    assert typical_annual_size(french * 5, 12) < RETURN_SIZE_LIMIT < typical_annual_size(french * 100 / 5, 12)


def test_alpha_spread() -> None:
    rng = np.random.default_rng(20)
    alpha = pd.Series(rng.normal(0, 0.02, 500))  # a 2% a year cross-sectional spread
    assert check_alpha(alpha, "alpha.csv") is alpha
    with pytest.raises(InputError, match=r"alpha\.csv: alpha looks like percent, not annual fractions: its spread across assets is 2\.\d+"):
        check_alpha(alpha * 100, "alpha.csv")
    assert float(np.std(alpha * 100)) > ALPHA_SPREAD_LIMIT > float(np.std(alpha * 20))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        np.testing.assert_allclose(check_alpha(alpha * 100, "alpha.csv", unit="percent"), alpha)
    with pytest.raises(InputError, match=r"alpha\.csv: unit must be one of fraction, percent, got 'bp'"):
        check_alpha(alpha, "alpha.csv", unit="bp")


@pytest.mark.parametrize(
    ("weights", "message"),
    [
        ([0.6, 0.4], None),
        ([0.5, 0.3], None),  # 20% cash
        ([0.6, 0.4000005], None),  # fully invested to a solver's tolerance, not a unit slip
        ([0.6, 0.402], r"holdings weights sum to 1\.002, more than the whole NAV \(1\)"),
        ([1.3, -0.3], None),  # 130/30
        ([1.0, -1.0], None),  # market neutral, gross 2
        ([0.6, 0.6], r"holdings weights sum to 1\.2, more than the whole NAV \(1\)"),
        ([60.0, 37.0], r"sum to 97, .*these look like percent$"),
        ([2.0, -1.5], r"gross Σ\|w\| 3\.5, above the 3 a book may hold"),
    ],
    ids=["full", "cash", "solver-tolerance", "over-0.2pct", "130-30", "neutral", "over-1", "percent", "gross-3.5"],
)
def test_one_book_rule(weights: list[float], message: str | None) -> None:
    if message is None:
        check_book(np.array(weights), "book.csv")
    else:
        with pytest.raises(InputError, match=message):
            check_book(np.array(weights), "book.csv")


def test_moves() -> None:
    assert move_problem(-0.99) is None
    assert move_problem(-1.0) == "a move of -1 is -100%; write returns as fractions (-0.10 is -10%)"
