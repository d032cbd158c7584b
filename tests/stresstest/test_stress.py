"""trimtab.stress against outside references: dense Gaussian conditioning written with numpy,
a regression of simulated factor draws (statsmodels OLS), exposures × moves, and scipy.stats' χ²."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import french
from scipy import stats

import trimtab
from trimtab import FactorModel, fit_time_series
from trimtab.errors import InputError, ModelError

from ..conftest import random_model


def dense_conditional_mean(F: np.ndarray, named: dict[int, float]) -> np.ndarray:
    """E[f | f_S = s] for f ~ N(0, F), from the textbook partitioned-Gaussian formula with an explicit inverse."""
    S = sorted(named)
    U = [k for k in range(F.shape[0]) if k not in S]
    s = np.array([named[k] for k in S])
    out = np.zeros(F.shape[0])
    out[S] = s
    out[U] = F[np.ix_(U, S)] @ np.linalg.inv(F[np.ix_(S, S)]) @ s
    return out


@pytest.fixture
def model() -> FactorModel:
    return random_model(40, 5, seed=4)


@pytest.fixture
def book(model):
    rng = np.random.default_rng(5)
    w = pd.Series(rng.dirichlet(np.ones(model.n_assets)), index=model.assets)
    b = pd.Series(rng.dirichlet(np.ones(model.n_assets)), index=model.assets)
    return w, b


def test_conditional_moves_match_dense_gaussian_conditioning(model, book):
    # outside reference: the partitioned-Gaussian conditional mean, Σ_US·Σ_SS⁻¹·s (any multivariate
    # statistics text), computed densely with numpy's inverse
    w, b = book
    shocks = {"one": {"f0": -0.1}, "two": {"f0": -0.08, "f3": 0.02}, "three": {"f1": 0.01, "f2": -0.02, "f4": 0.03}}
    result = trimtab.stress(model, w, shocks, benchmark=b)
    F = model.factor_covariance.to_numpy()
    names = list(model.factors)
    for shock, moves in shocks.items():
        expected = dense_conditional_mean(F, {names.index(k): v for k, v in moves.items()})
        np.testing.assert_allclose(result.factor_moves.loc[shock].to_numpy(), expected, rtol=1e-10, atol=1e-15)


def test_conditional_moves_match_regression_of_simulated_draws(model, book):
    # outside reference: statsmodels OLS of the unshocked factors on the shocked ones over 200,000
    # draws of f ~ N(0, F); the fitted slope at s estimates E[f_U | f_S = s]
    rng = np.random.default_rng(11)
    F = model.factor_covariance.to_numpy()
    draws = rng.multivariate_normal(np.zeros(5), F, size=200_000)
    s = np.array([-0.05, 0.02])
    S, U = [0, 3], [1, 2, 4]
    result = trimtab.stress(model, book[0], {"x": {"f0": s[0], "f3": s[1]}})
    for u in U:
        fit = sm.OLS(draws[:, u], draws[:, S]).fit()
        predicted = float(fit.params @ s)
        se = float(np.sqrt(s @ fit.cov_params() @ s))
        assert result.factor_moves.loc["x", f"f{u}"] == pytest.approx(predicted, abs=5 * se)


def test_unconditional_shock_moves_only_the_named_factors(model, book):
    result = trimtab.stress(model, book[0], {"x": {"f2": 0.03}}, conditional=False)
    expected = np.zeros(5)
    expected[2] = 0.03
    np.testing.assert_array_equal(result.factor_moves.loc["x"].to_numpy(), expected)


def test_returns_are_exposures_times_moves(model, book):
    # the stress return written out asset by asset: Σᵢ wᵢ·(B·m)ᵢ, with the N-vector B·m formed densely
    w, b = book
    result = trimtab.stress(model, w, {"a": {"f0": -0.1}, "b": {"f1": 0.02, "f2": -0.01}}, benchmark=b)
    B = model.exposures.to_numpy()
    for shock in ("a", "b"):
        asset_moves = B @ result.factor_moves.loc[shock].to_numpy()
        assert result.returns.loc[shock, "book"] == pytest.approx(float(w.to_numpy() @ asset_moves), rel=1e-12)
        assert result.returns.loc[shock, "benchmark"] == pytest.approx(float(b.to_numpy() @ asset_moves), rel=1e-12)
        assert result.returns.loc[shock, "active"] == pytest.approx(float((w - b).to_numpy() @ asset_moves), rel=1e-10)
    np.testing.assert_allclose(result.contributions.sum(axis=1), result.returns["book"], rtol=1e-12)
    np.testing.assert_allclose(result.active_contributions.sum(axis=1), result.returns["active"], rtol=1e-10)


def test_plausibility_matches_scipy_chi2(model, book):
    # outside reference: scipy.stats.chi2.sf of the Mahalanobis distance computed with numpy's inverse;
    # and, for one factor, the closed form P(χ²₁ ≥ z²) = P(|N(0,1)| ≥ z) with z = |s|/√(h·Fₖₖ)
    F = model.factor_covariance.to_numpy()
    h = 21.0
    result = trimtab.stress(model, book[0], {"two": {"f0": -0.1, "f1": 0.03}, "one": {"f2": -0.04}}, horizon=h)
    s = np.array([-0.1, 0.03])
    d2 = s @ np.linalg.inv(h * F[:2, :2]) @ s
    row = result.plausibility.loc["two"]
    assert row["mahalanobis"] == pytest.approx(d2, rel=1e-12)
    assert row["tail_probability"] == pytest.approx(stats.chi2.sf(d2, df=2), rel=1e-10)
    z = 0.04 / np.sqrt(h * F[2, 2])
    one = result.plausibility.loc["one"]
    assert one["tail_probability"] == pytest.approx(2 * stats.norm.sf(z), rel=1e-10)
    assert one["sigma_equivalent"] == pytest.approx(z, rel=1e-8)


def test_default_horizon_is_one_month_of_periods(book):
    monthly = random_model(40, 5, seed=4, periods_per_year=12)
    assert trimtab.stress(monthly, book[0], {"x": {"f0": -0.1}}).horizon == 1.0
    daily = random_model(40, 5, seed=4, periods_per_year=252)
    assert trimtab.stress(daily, book[0], {"x": {"f0": -0.1}}).horizon == 21.0


def test_specific_moves_by_asset_and_group_are_added(model, book):
    w, b = book
    groups = pd.Series(["g1"] * 20 + ["g2"] * 20, index=model.assets)
    result = trimtab.stress(model, w, {"x": {"f0": -0.1}}, benchmark=b,
                            specific={"x": {"A0003": -0.5, "g2": -0.05}}, groups=groups)
    plain = trimtab.stress(model, w, {"x": {"f0": -0.1}}, benchmark=b)
    e = np.where(groups == "g2", -0.05, 0.0)
    e[3] += -0.5
    assert result.returns.loc["x", "book"] - plain.returns.loc["x", "book"] == pytest.approx(w.to_numpy() @ e, rel=1e-12)
    assert result.contributions.loc["x", "specific"] == pytest.approx(w.to_numpy() @ e, rel=1e-12)
    assert result.returns.loc["x", "active"] - plain.returns.loc["x", "active"] == pytest.approx((w - b).to_numpy() @ e, rel=1e-10)


def test_specific_band_is_one_sigma_over_the_horizon(model, book):
    w, b = book
    result = trimtab.stress(model, w, {"x": {"f0": -0.1}}, benchmark=b, horizon=10)
    d = model.specific_variance.to_numpy()
    assert result.specific_band["book"] == pytest.approx(np.sqrt(10 * d @ w.to_numpy() ** 2))
    assert result.specific_band["active"] == pytest.approx(np.sqrt(10 * d @ (w - b).to_numpy() ** 2))


def test_summary_text_and_frame(model, book):
    result = trimtab.stress(model, book[0], {"crash": {"f0": -0.5}}, benchmark=book[1])
    text = str(result)
    assert "crash" in text and "Implausible" in text
    frame = result.summary().to_frame()
    assert list(frame.columns[:3]) == ["book", "benchmark", "active"]
    assert "largest_loss_from" in frame.columns


@pytest.mark.parametrize(
    ("shocks", "kwargs", "match"),
    [
        ({"x": {"nope": 0.1}}, {}, r"x: unknown factor\(s\) nope"),
        ({"x": {"f0": float("nan")}}, {}, r"x\.f0: expected a finite number"),
        ({"x": {}}, {}, "names no factor"),
        ({}, {}, "no shock given"),
        ([1, 2], {}, "expected a mapping name"),
        ({"x": {"f0": 0.1}}, {"horizon": 0}, "horizon must be a positive number"),
        ({"x": {"f0": 0.1}}, {"specific": {"y": {"A0001": 0.1}}}, r"unknown shock\(s\) y"),
        ({"x": {"f0": 0.1}}, {"specific": {"x": {"ZZZ": 0.1}}}, "x.ZZZ: not an asset of the model"),
        ({"x": {"f0": 0.1}}, {"conditional": "yes"}, "conditional must be True or False"),
    ],
    ids=["unknown-factor", "nan-move", "empty-shock", "no-shocks", "not-a-mapping", "zero-horizon",
         "specific-unknown-shock", "specific-unknown-asset", "conditional-not-bool"],
)
def test_bad_input_is_one_clear_error(model, book, shocks, kwargs, match):
    with pytest.raises(InputError, match=match):
        trimtab.stress(model, book[0], shocks, **kwargs)


def test_singular_shocked_covariance_names_the_factors(book):
    model = random_model(40, 3, seed=2)
    F = model.factor_covariance.to_numpy().copy()
    F[1, :] = F[0, :]
    F[:, 1] = F[:, 0]
    F[1, 1] = F[0, 0]
    singular = FactorModel(model.exposures, pd.DataFrame(F, index=model.factors, columns=model.factors), model.specific_variance)
    with pytest.raises(ModelError, match=r"shocked factors f0, f1 is singular"):
        trimtab.stress(singular, book[0].iloc[:40], {"x": {"f0": -0.1, "f1": -0.1}})


def test_french_factors_time_series_model_stress():
    # real data: linearmodels' monthly French factors and 30 industry portfolios (1949–2016). A market
    # shock of −10% moves SMB, HML and Mom by their sample regressions on the market (statsmodels OLS
    # without a constant on the same factor history: the ratio Cov(f_U, mkt)/Var(mkt) of the estimated F,
    # here equal-weighted so the two agree to rounding)
    data = french.load().set_index("dates")
    factors = data[["MktRF", "SMB", "HML", "Mom"]]
    excess = data[data.columns[5:]].sub(data["RF"], axis=0)
    model = fit_time_series(excess, factors)
    book = pd.Series(1.0 / model.n_assets, index=model.assets)
    result = trimtab.stress(model, book, {"market_down": {"MktRF": -0.10}})
    demeaned = factors.loc[model.factor_history.index] - factors.loc[model.factor_history.index].mean()
    F = model.factor_covariance
    for name in ("SMB", "HML", "Mom"):
        expected = -0.10 * F.loc[name, "MktRF"] / F.loc["MktRF", "MktRF"]
        assert result.factor_moves.loc["market_down", name] == pytest.approx(expected, rel=1e-10)
        slope = sm.OLS(demeaned[name].to_numpy(), demeaned["MktRF"].to_numpy()).fit().params[0]
        assert result.factor_moves.loc["market_down", name] == pytest.approx(-0.10 * slope, rel=0.02)
    # an equal-weighted industry book has a market beta near 1: a −10% market month loses about 10%
    assert -0.12 < result.returns.loc["market_down", "book"] < -0.08
    # a −10% month is about a 2.3σ market month in this sample: rare, not absurd
    assert 1e-3 < result.plausibility.loc["market_down", "tail_probability"] < 0.1
