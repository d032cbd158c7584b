"""Specific variances against statsmodels OLS residual variances and calculations by hand."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import french

from trimtab.errors import InputError
from trimtab.model._covariance_settings import CovarianceSettings
from trimtab.model._specific_variance import specific_variance

FACTORS = ["MktRF", "SMB", "HML", "Mom"]


@pytest.fixture(scope="module")
def french_data() -> pd.DataFrame:
    return french.load().set_index("dates")


@pytest.fixture(scope="module")
def ols_residuals(french_data: pd.DataFrame) -> tuple[pd.DataFrame, pd.Series]:
    """Residuals of the industry portfolios on the four factors (statsmodels OLS) and their SSR/(T−K−1)."""
    industries = french_data.loc[:, "NoDur":"Other"].columns
    X = sm.add_constant(french_data[FACTORS])
    residuals, variances = {}, {}
    for name in industries:
        fit = sm.OLS(french_data[name] - french_data["RF"], X).fit()
        residuals[name] = fit.resid
        variances[name] = fit.mse_resid  # statsmodels: SSR / df_resid
    return pd.DataFrame(residuals), pd.Series(variances)


def test_specific_variance_default_is_statsmodels_mse_resid(ols_residuals: tuple[pd.DataFrame, pd.Series]) -> None:
    residuals, expected = ols_residuals
    got = specific_variance(residuals, dof=len(FACTORS) + 1)
    pd.testing.assert_series_equal(got, expected, rtol=1e-12, check_names=False)
    assert got.name == "specific_variance"


def test_specific_variance_ragged_and_per_asset_dof() -> None:
    rng = np.random.default_rng(8)
    values = rng.normal(size=(40, 3))
    values[:15, 1] = np.nan
    values[[3, 9], 2] = np.nan
    e = pd.DataFrame(values, columns=["a", "b", "c"])
    dof = pd.Series({"c": 2, "a": 1, "b": 5, "unused": 9})
    got = specific_variance(e, dof)
    for name in e:
        col = e[name].dropna().to_numpy()
        assert got[name] == pytest.approx((col**2).sum() / (len(col) - dof[name]), rel=1e-13)


def test_specific_variance_ewma_by_hand() -> None:
    rng = np.random.default_rng(9)
    values = rng.normal(size=(30, 2))
    values[[0, 4, 29], 1] = np.nan
    e = pd.DataFrame(values, columns=["a", "b"])
    got = specific_variance(e, 2, CovarianceSettings(volatility_half_life=6))
    raw = 0.5 ** ((29 - np.arange(30)) / 6)
    for k, name in enumerate(e):
        obs = ~np.isnan(values[:, k])
        n = obs.sum()
        weighted = (raw[obs] * values[obs, k] ** 2).sum() / raw[obs].sum()
        assert got[name] == pytest.approx(weighted * n / (n - 2), rel=1e-13)


def test_specific_variance_ewma_for_an_asset_that_stopped_long_ago() -> None:
    # 0.5^(3000/1) underflows to 0 in float64; the weighted mean square must still be finite and right.
    values = np.full((3010, 2), np.nan)
    values[:, 0] = np.resize([0.01, -0.02], 3010)
    values[:4, 1] = [0.03, -0.01, 0.02, 0.01]
    e = pd.DataFrame(values, columns=["live", "gone"])
    got = specific_variance(e, 0, CovarianceSettings(volatility_half_life=1.0))
    raw = 0.5 ** (3 - np.arange(4))  # weights relative to the newest of the four dates
    assert got["gone"] == pytest.approx((raw * values[:4, 1] ** 2).sum() / raw.sum(), rel=1e-13)
    assert got["live"] == pytest.approx((1 * 0.02**2 + 0.5 * 0.01**2) / 1.5, rel=1e-6)


def test_specific_variance_shrinkage_and_floor_by_hand() -> None:
    rng = np.random.default_rng(10)
    scales = np.array([0.5, 1.0, 2.0, 4.0])
    e = pd.DataFrame(rng.normal(size=(50, 4)) * scales, columns=["w", "x", "y", "z"])
    raw = (e**2).sum() / 49
    got = specific_variance(e, 1, CovarianceSettings(specific_shrinkage=0.25))
    np.testing.assert_allclose(got.to_numpy(), 0.75 * raw + 0.25 * raw.mean(), rtol=1e-13)
    groups = {"w": "g1", "x": "g1", "y": "g2", "z": "g2"}
    grouped = specific_variance(e, 1, CovarianceSettings(specific_shrinkage=0.5), groups=groups)
    target = np.array([raw[["w", "x"]].mean()] * 2 + [raw[["y", "z"]].mean()] * 2)
    np.testing.assert_allclose(grouped.to_numpy(), 0.5 * raw.to_numpy() + 0.5 * target, rtol=1e-13)
    # Cross-sectional mean is kept by shrinkage toward it.
    assert got.mean() == pytest.approx(raw.mean(), rel=1e-13)
    floor = float(raw.iloc[1])
    floored = specific_variance(e, 1, CovarianceSettings(specific_floor=floor))
    np.testing.assert_allclose(floored.to_numpy(), np.maximum(raw.to_numpy(), floor), rtol=1e-13)
    relative = specific_variance(e, 1, CovarianceSettings(specific_floor=0.5, specific_floor_mode="relative"))
    np.testing.assert_allclose(relative.to_numpy(), np.maximum(raw.to_numpy(), 0.5 * raw.median()), rtol=1e-13)
    assert relative["w"] > raw["w"]


def test_specific_variance_errors() -> None:
    e = pd.DataFrame({"a": [0.1, -0.1, 0.2, 0.0], "b": [0.1, np.nan, np.nan, 0.3]})
    with pytest.raises(InputError, match="no more observations than degrees of freedom: b; need more dates than dof"):
        specific_variance(e, 2)
    with pytest.raises(InputError, match="dof has no value for assets: b"):
        specific_variance(e, pd.Series({"a": 1}))
    with pytest.raises(InputError, match="dof must be finite and >= 0; bad for assets: a"):
        specific_variance(e, pd.Series({"a": -1, "b": 0}))
    with pytest.raises(InputError, match="dof must be numbers, got dtype"):
        specific_variance(e, pd.Series({"a": "x", "b": "y"}))
    with pytest.raises(InputError, match="dof must be a number >= 0 or a Series by asset, got -1"):
        specific_variance(e, -1)
    with pytest.raises(InputError, match="groups has no group for assets: b"):
        specific_variance(e, 0, CovarianceSettings(specific_shrinkage=0.1), groups={"a": "g"})
    with pytest.raises(InputError, match="groups has a missing group for assets: a"):
        specific_variance(e, 0, groups=pd.Series({"a": None, "b": "g"}))
    with pytest.raises(InputError, match="specific_variance: infinite values in columns: a"):
        specific_variance(e.replace(0.0, np.inf), 0)
    with pytest.raises(InputError, match="specific_variance: duplicate assets: a"):
        specific_variance(pd.DataFrame([[0.1, 0.2]], columns=["a", "a"]), 0)
    with pytest.raises(InputError, match="specific_variance: no asset columns"):
        specific_variance(e.iloc[:, :0], 0)
    with pytest.raises(InputError, match="expected a DataFrame of dates × assets, got Series"):
        specific_variance(e["a"], 0)  # type: ignore[arg-type]


def test_specific_variance_is_still_importable_from_its_old_places() -> None:
    import trimtab.model
    import trimtab.model._covariance

    assert trimtab.model._covariance.specific_variance is specific_variance
    assert trimtab.model.specific_variance is specific_variance
