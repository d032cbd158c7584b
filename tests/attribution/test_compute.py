"""attribute() against plain numpy on the dense Σ = B·F·Bᵀ + D, a two-asset case by hand, and bad input."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import approx_fprime

from trimtab import FactorModel, InputError
from trimtab.attribution import attribute

from ..conftest import random_model


def dense(model: FactorModel) -> np.ndarray:
    B, F, d = (model.exposures.to_numpy(), model.factor_covariance.to_numpy(), model.specific_variance.to_numpy())
    return B @ F @ B.T + np.diag(d)


def portfolios(model: FactorModel, seed: int) -> tuple[pd.Series, pd.Series]:
    rng = np.random.default_rng(seed)
    w = pd.Series(rng.dirichlet(np.ones(model.n_assets)), index=model.assets)
    b = pd.Series(rng.dirichlet(np.ones(model.n_assets)), index=model.assets)
    return w, b


@pytest.mark.parametrize("active", [False, True], ids=["total", "active"])
@pytest.mark.parametrize("seed", [0, 1, 2], ids=lambda s: f"seed{s}")
def test_every_figure_matches_dense_numpy(seed: int, active: bool) -> None:
    model = random_model(n_assets=30, n_factors=4, seed=seed, periods_per_year=52)
    w, b = portfolios(model, seed + 100)
    attr = attribute(model, w, b if active else None)
    S, ppy = dense(model), 52.0
    B, F, d = model.exposures.to_numpy(), model.factor_covariance.to_numpy(), model.specific_variance.to_numpy()
    wv, bv = w.to_numpy(), b.to_numpy()
    a = wv - bv if active else wv
    # Reference: plain dense linear algebra on Σ (numpy), annualised by ppy (variance) and √ppy (vol).
    sigma = np.sqrt(ppy * a @ S @ a)
    assert attr.risk == pytest.approx(sigma, rel=1e-12)
    assert attr.variance == pytest.approx(ppy * a @ S @ a, rel=1e-12)
    assert attr.factor_variance == pytest.approx(ppy * a @ (B @ F @ B.T) @ a, rel=1e-12)
    assert attr.specific_variance == pytest.approx(ppy * a @ np.diag(d) @ a, rel=1e-12)
    assert attr.factor_risk == pytest.approx(np.sqrt(ppy * a @ (B @ F @ B.T) @ a), rel=1e-12)
    assert attr.specific_risk == pytest.approx(np.sqrt(ppy * np.sum(d * a * a)), rel=1e-12)
    marginal = ppy * (S @ a) / sigma
    np.testing.assert_allclose(attr.by_asset["marginal_contribution"], marginal, rtol=1e-10)
    np.testing.assert_allclose(attr.by_asset["contribution"], a * marginal, rtol=1e-10, atol=1e-16)
    np.testing.assert_allclose(attr.by_asset["percent"], 100 * a * marginal / sigma, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(
        attr.by_asset["factor_contribution"], ppy * a * (B @ F @ B.T @ a) / sigma, rtol=1e-10, atol=1e-16
    )
    np.testing.assert_allclose(attr.by_asset["specific_contribution"], ppy * d * a * a / sigma, rtol=1e-10)
    x = B.T @ a
    np.testing.assert_allclose(attr.by_factor["active_exposure"], x, rtol=1e-12)
    np.testing.assert_allclose(attr.by_factor["portfolio_exposure"], B.T @ wv, rtol=1e-12)
    np.testing.assert_allclose(attr.by_factor["benchmark_exposure"], B.T @ bv if active else 0.0, rtol=1e-12)
    np.testing.assert_allclose(attr.by_factor["factor_volatility"], np.sqrt(ppy * np.diag(F)), rtol=1e-12)
    np.testing.assert_allclose(attr.by_factor["marginal_contribution"], ppy * F @ x / sigma, rtol=1e-10)
    np.testing.assert_allclose(attr.by_factor["contribution"], ppy * x * (F @ x) / sigma, rtol=1e-10, atol=1e-16)
    # Correlation of the portfolio with each factor from the joint covariance of (asset returns, factor
    # returns): r = B·f + e gives Cov(r, f) = B·F (textbook identity for a linear factor model).
    joint = np.block([[S, B @ F], [F @ B.T, F]])
    n = model.n_assets
    for k in range(model.n_factors):
        u = np.r_[a, np.zeros(model.n_factors)]
        v = np.zeros(n + model.n_factors)
        v[n + k] = 1.0
        expected = (u @ joint @ v) / np.sqrt((u @ joint @ u) * (v @ joint @ v))
        assert attr.factor_correlation.iloc[k] == pytest.approx(expected, rel=1e-10)
    asset_vol = np.sqrt(ppy * np.diag(S))
    assert attr.diversification_ratio == pytest.approx(np.abs(a) @ asset_vol / sigma, rel=1e-10)
    if active:
        assert attr.kind == "active"
        assert attr.beta == pytest.approx((wv @ S @ bv) / (bv @ S @ bv), rel=1e-12)
        assert attr.portfolio_risk == pytest.approx(np.sqrt(ppy * wv @ S @ wv), rel=1e-12)
        assert attr.benchmark_risk == pytest.approx(np.sqrt(ppy * bv @ S @ bv), rel=1e-12)
        np.testing.assert_allclose(attr.by_asset["active_weight"], a)
        np.testing.assert_allclose(attr.by_asset["benchmark_weight"], bv)
    else:
        assert attr.kind == "total" and attr.beta is None and attr.benchmark_risk is None
        assert "benchmark_weight" not in attr.by_asset.columns


@pytest.mark.parametrize("n_held", [1, 3, 29, 30], ids=lambda n: f"held{n}")
def test_diversification_ratio_for_sparse_and_full_books(n_held: int) -> None:
    # Choueifaty & Coignard (2008): DR = Σ|wᵢ|σᵢ / σ_p, with σᵢ from the dense Σ diagonal (numpy); a single
    # asset has DR = 1 exactly.
    model = random_model(n_assets=30, n_factors=4, seed=9)
    rng = np.random.default_rng(10)
    w = pd.Series(rng.dirichlet(np.ones(n_held)), index=model.assets[:n_held])
    S = dense(model)
    wv = model.weights_array(w)
    expected = np.abs(wv) @ np.sqrt(252 * np.diag(S)) / np.sqrt(252 * wv @ S @ wv)
    ratio = attribute(model, w).diversification_ratio
    assert ratio == pytest.approx(expected, rel=1e-12)
    if n_held == 1:
        assert ratio == pytest.approx(1.0, rel=1e-12)


@pytest.mark.parametrize("active", [False, True], ids=["total", "active"])
def test_euler_sums_and_percentages(active: bool) -> None:
    model = random_model(n_assets=60, n_factors=6, seed=7)
    w, b = portfolios(model, 8)
    attr = attribute(model, w, b if active else None, factor_groups={"f0": "market", "f1": "style", "f2": "style"})
    # Euler's theorem for functions homogeneous of degree one: σ = Σᵢ aᵢ ∂σ/∂aᵢ.
    assert abs(attr.by_asset["contribution"].sum() - attr.risk) < 1e-10
    assert abs(attr.by_factor["contribution"].sum() + attr.specific_contribution - attr.risk) < 1e-10
    assert abs(attr.by_factor_group["contribution"].sum() - attr.risk) < 1e-10
    np.testing.assert_allclose(
        attr.by_asset["factor_contribution"] + attr.by_asset["specific_contribution"],
        attr.by_asset["contribution"],
        atol=1e-14,
    )
    assert abs(attr.by_asset["factor_contribution"].sum() - attr.factor_contribution) < 1e-10
    assert attr.by_asset["percent"].sum() == pytest.approx(100.0, abs=1e-9)
    assert attr.by_factor_group["percent"].sum() == pytest.approx(100.0, abs=1e-9)
    assert attr.factor_percent + attr.specific_percent == pytest.approx(100.0, abs=1e-12)
    assert attr.factor_variance + attr.specific_variance == pytest.approx(attr.variance, rel=1e-14)
    groups = attr.by_factor_group
    assert list(groups.index) == ["market", "style", "other", "specific"]
    assert groups.loc["style", "n_factors"] == 2 and groups.loc["other", "n_factors"] == 3


def test_marginal_contributions_are_the_gradient_of_risk() -> None:
    # Reference: scipy.optimize.approx_fprime, a finite-difference gradient of σ(w) = √(ppy·wᵀΣw).
    model = random_model(n_assets=12, n_factors=3, seed=4)
    w, _ = portfolios(model, 5)
    S = dense(model)
    grad = approx_fprime(w.to_numpy(), lambda v: np.sqrt(252 * v @ S @ v), 1e-7)
    attr = attribute(model, w)
    np.testing.assert_allclose(attr.by_asset["marginal_contribution"], grad, rtol=1e-5)


def test_two_assets_by_hand() -> None:
    # One factor (market) with variance f = 0.04, exposures β = (1, 0.5), specific variances
    # d = (0.01, 0.03), one period a year (ppy = 1), weights w = (0.6, 0.4):
    #   Σ = β·f·βᵀ + diag(d) = [[0.05, 0.02], [0.02, 0.04]]
    #   x = βᵀw = 0.8;  factor variance x²f = 0.0256;  specific Σdᵢwᵢ² = 0.0036 + 0.0048 = 0.0084
    #   σ² = 0.034;  Σw = (0.038, 0.028);  contributions wᵢ(Σw)ᵢ/σ = (0.0228, 0.0112)/σ → 67.0588%, 32.9412%
    #   factor parts wᵢβᵢ·f·x = (0.0192, 0.0064); specific parts dᵢwᵢ² = (0.0036, 0.0048)   (all /σ)
    #   diversification ratio (0.6·√0.05 + 0.4·√0.04)/σ
    # Against b = (0.5, 0.5): Σb = (0.035, 0.03), bᵀΣb = 0.0325, wᵀΣb = 0.033 → β = 1.0153846…
    #   a = (0.1, −0.1): Σa = (0.003, −0.002), aᵀΣa = 0.0005 → TE = √0.0005; contributions 60%, 40%;
    #   active exposure 0.05 → factor variance 0.0001 (20%), specific 0.0004 (80%).
    B = pd.DataFrame({"market": [1.0, 0.5]}, index=["AAA", "BBB"])
    F = pd.DataFrame([[0.04]], index=["market"], columns=["market"])
    model = FactorModel(B, F, pd.Series([0.01, 0.03], index=["AAA", "BBB"]), periods_per_year=1)
    w = pd.Series({"AAA": 0.6, "BBB": 0.4})
    attr = attribute(model, w)
    sigma = np.sqrt(0.034)
    assert attr.variance == pytest.approx(0.034, rel=1e-14)
    assert attr.factor_variance == pytest.approx(0.0256, rel=1e-14)
    assert attr.specific_variance == pytest.approx(0.0084, rel=1e-14)
    np.testing.assert_allclose(attr.by_asset["marginal_contribution"], [0.038 / sigma, 0.028 / sigma], rtol=1e-13)
    np.testing.assert_allclose(attr.by_asset["contribution"], [0.0228 / sigma, 0.0112 / sigma], rtol=1e-13)
    np.testing.assert_allclose(attr.by_asset["percent"], [67.05882352941177, 32.94117647058823], rtol=1e-12)
    np.testing.assert_allclose(attr.by_asset["factor_contribution"], [0.0192 / sigma, 0.0064 / sigma], rtol=1e-13)
    np.testing.assert_allclose(attr.by_asset["specific_contribution"], [0.0036 / sigma, 0.0048 / sigma], rtol=1e-13)
    assert attr.by_factor.loc["market", "contribution"] == pytest.approx(0.0256 / sigma, rel=1e-13)
    assert attr.diversification_ratio == pytest.approx((0.6 * np.sqrt(0.05) + 0.4 * 0.2) / sigma, rel=1e-13)

    active = attribute(model, w, pd.Series({"AAA": 0.5, "BBB": 0.5}))
    assert active.beta == pytest.approx(0.033 / 0.0325, rel=1e-13)
    assert active.risk == pytest.approx(np.sqrt(0.0005), rel=1e-13)
    np.testing.assert_allclose(active.by_asset["percent"], [60.0, 40.0], rtol=1e-12)
    assert active.factor_percent == pytest.approx(20.0, rel=1e-12)
    assert active.specific_percent == pytest.approx(80.0, rel=1e-12)
    assert active.by_factor.loc["market", "active_exposure"] == pytest.approx(0.05, rel=1e-13)


def test_zero_risk_gives_nan_contributions_without_warnings(small_model: FactorModel) -> None:
    w, _ = portfolios(small_model, 3)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        attr = attribute(small_model, w, w)
        assert attr.is_zero_risk and attr.risk == 0.0 and attr.variance == 0.0
        for column in ("marginal_contribution", "contribution", "percent", "factor_contribution"):
            assert attr.by_asset[column].isna().all()
        assert attr.by_factor["contribution"].isna().all()
        assert attr.by_factor_group["percent"].isna().all()
        assert attr.factor_correlation.isna().all()
        assert np.isnan(attr.diversification_ratio) and np.isnan(attr.factor_percent)
        assert attr.value_at_risk() == 0.0 and attr.expected_shortfall() == 0.0
        assert attr.beta == pytest.approx(1.0, rel=1e-12)
        assert "contributions are undefined" in str(attr)
    empty = attribute(small_model, pd.Series(dtype=float))
    assert empty.is_zero_risk and np.isnan(empty.specific_contribution) and np.isnan(empty.factor_contribution)


def test_benchmark_missing_assets_count_as_zero(small_model: FactorModel) -> None:
    w, _ = portfolios(small_model, 4)
    partial = pd.Series({"A0001": 0.5, "A0002": 0.5})
    full = pd.Series(0.0, index=small_model.assets)
    full[["A0001", "A0002"]] = 0.5
    assert attribute(small_model, w, partial).risk == attribute(small_model, w, full).risk
    np.testing.assert_array_equal(attribute(small_model, w, partial).by_asset, attribute(small_model, w, full).by_asset)


def test_model_factor_groups_are_the_default() -> None:
    base = random_model(n_assets=10, n_factors=3, seed=2)
    model = FactorModel(base.exposures, base.factor_covariance, base.specific_variance, factor_groups={"f0": "market"})
    w, _ = portfolios(model, 1)
    assert list(attribute(model, w).by_factor_group.index) == ["market", "other", "specific"]
    assert list(attribute(model, w, factor_groups={"f1": "style"}).by_factor_group.index) == ["other", "style", "specific"]
    assert list(attribute(base, w).by_factor_group.index) == ["factors", "specific"]


def test_bad_input_is_named(small_model: FactorModel) -> None:
    w, _ = portfolios(small_model, 6)
    with pytest.raises(InputError, match=r"attribute: model must be a trimtab.FactorModel, got dict"):
        attribute({}, w)  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"weights: assets not in the risk model: ZZZ"):
        attribute(small_model, pd.Series({"ZZZ": 1.0}))
    with pytest.raises(InputError, match=r"weights: missing or infinite values for: A0003"):
        attribute(small_model, pd.Series({"A0003": np.nan}))
    with pytest.raises(InputError, match=r"benchmark: assets not in the risk model: OUT1, OUT2"):
        attribute(small_model, w, pd.Series({"A0001": 0.5, "OUT1": 0.25, "OUT2": 0.25}))
    with pytest.raises(InputError, match=r"factor_groups names factors the model lacks: nope"):
        attribute(small_model, w, factor_groups={"nope": "style"})
    with pytest.raises(InputError, match=r"factor_groups must be a mapping factor → group label, got list"):
        attribute(small_model, w, factor_groups=["f0"])  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"may not use the label 'specific'"):
        attribute(small_model, w, factor_groups={"f0": "specific"})
    with pytest.raises(InputError, match=r"attributes must be a DataFrame indexed by asset, got Series"):
        attribute(small_model, w, attributes=pd.Series({"A0001": "x"}))  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"attribute: attributes: duplicate asset ids: A0001"):
        attribute(small_model, w, attributes=pd.DataFrame({"sector": ["x", "y"]}, index=["A0001", "A0001"]))
