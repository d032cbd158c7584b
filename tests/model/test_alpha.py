"""alpha_alignment and the alpha factor against numpy's lstsq, statsmodels WLS and the dense identity
Σ' = Σ + (σ²/P)·y·yᵀ (issue #24).

Data: ``linearmodels.datasets.french.load()`` (monthly MktRF, SMB, HML, Mom, RF and 30 portfolios,
1949–2017). The risk model is a time-series fit of the 30 portfolios' excess returns on the four
factors; the alpha is each portfolio's mean excess return over the last five years, annualised (a
realised figure, so partly explained by the factors and partly not).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import french

import trimtab
from trimtab import InputError, ModelError, fit_time_series
from trimtab.model import alpha_alignment, with_alpha_factor
from trimtab.model._alpha import ALPHA_FACTOR, without_alpha_factor

FACTORS = ["MktRF", "SMB", "HML", "Mom"]


@pytest.fixture(scope="module")
def french_model() -> tuple[trimtab.FactorModel, pd.Series]:
    data = french.load().set_index("dates")
    portfolios = data.columns[5:]
    excess = data[portfolios].sub(data["RF"], axis=0)
    model = fit_time_series(excess, data[FACTORS], periods_per_year=12)
    alpha = (excess.tail(60).mean() * 12).rename("alpha")
    return model, alpha


def _lstsq(B: np.ndarray, a: np.ndarray, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """numpy's lstsq on √ω-scaled rows: (coefficients, residual α − B·g)."""
    root = np.sqrt(w)
    g = np.linalg.lstsq(B * root[:, None], a * root, rcond=None)[0]
    return g, a - B @ g


@pytest.mark.parametrize("weighted", [False, True], ids=["equal-weights", "inverse-specific-variance"])
def test_spanned_share_and_residual_equal_numpy_lstsq(french_model, weighted: bool) -> None:
    model, alpha = french_model
    weights = 1.0 / model.specific_variance if weighted else None
    result = trimtab.alpha_alignment(model, alpha, weights=weights)
    B, a = model.exposures.to_numpy(), alpha.reindex(model.assets).to_numpy()
    w = weights.to_numpy() if weighted else np.ones(len(a))
    g, e = _lstsq(B, a, w)
    # reference: numpy.linalg.lstsq; uncentred R² = 1 − Σωe²/Σωα² (no intercept)
    np.testing.assert_allclose(result.orthogonal.to_numpy(), e, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(result.implied_factor_returns.to_numpy(), g, rtol=1e-10)
    np.testing.assert_allclose(result.spanned_share, 1 - (w @ e**2) / (w @ a**2), rtol=1e-12)
    np.testing.assert_allclose(result.factor_part + result.orthogonal, a, rtol=1e-12)
    # the residual is ω-orthogonal to every exposure column (normal equations)
    np.testing.assert_allclose(B.T @ (w * e), 0.0, atol=1e-12 * np.abs(B.T @ (w * a)).max())
    # the factor shares add up to the spanned share
    np.testing.assert_allclose(result.factors["share_of_alpha"].sum(), result.spanned_share, rtol=1e-10)


@pytest.mark.parametrize("weighted", [False, True], ids=["ols", "wls"])
def test_projection_matches_statsmodels(french_model, weighted: bool) -> None:
    model, alpha = french_model
    weights = model.specific_variance.rdiv(1.0) if weighted else None
    result = alpha_alignment(model, alpha, weights=weights)
    # reference: statsmodels WLS with no constant; its R² is then the uncentred one, Σωe²/Σωα²
    w = weights.to_numpy() if weighted else np.ones(model.n_assets)
    fit = sm.WLS(alpha.reindex(model.assets).to_numpy(), model.exposures.to_numpy(), weights=w).fit()
    np.testing.assert_allclose(result.implied_factor_returns.to_numpy(), fit.params, rtol=1e-9)
    np.testing.assert_allclose(result.orthogonal.to_numpy(), fit.resid, rtol=1e-9, atol=1e-14)
    np.testing.assert_allclose(result.spanned_share, fit.rsquared, rtol=1e-10)


def test_augmented_covariance_is_sigma_plus_rank_one(french_model) -> None:
    model, alpha = french_model
    sigma, weights = 0.03, 1.0 / model.specific_variance
    augmented = model.with_alpha_factor(alpha, sigma, weights=weights)
    y = augmented.exposures[ALPHA_FACTOR].to_numpy()
    e = alpha_alignment(model, alpha, weights=weights).orthogonal.to_numpy()
    w = weights.to_numpy()
    # y is e scaled to a weighted root-mean-square of 1
    np.testing.assert_allclose(np.sqrt((w @ y**2) / w.sum()), 1.0, rtol=1e-14)
    np.testing.assert_allclose(y * np.sqrt((w @ e**2) / w.sum()), e, rtol=1e-12, atol=1e-16)
    # closed form: Σ' = Σ + (σ²/P)·y·yᵀ, P = 12 (monthly); dense, N = 30
    expected = model.covariance().to_numpy() + (sigma**2 / 12) * np.outer(y, y)
    np.testing.assert_allclose(augmented.covariance().to_numpy(), expected, rtol=1e-14, atol=1e-18)
    F = augmented.factor_covariance
    assert F.loc[ALPHA_FACTOR, ALPHA_FACTOR] == sigma**2 / 12
    assert (F.loc[ALPHA_FACTOR].drop(ALPHA_FACTOR) == 0).all()
    assert augmented.provenance[ALPHA_FACTOR]["volatility"] == sigma
    back = without_alpha_factor(augmented)
    np.testing.assert_array_equal(back.covariance().to_numpy(), model.covariance().to_numpy())
    # the function and the method agree
    same = with_alpha_factor(model, alpha, sigma, weights)
    np.testing.assert_array_equal(same.exposures.to_numpy(), augmented.exposures.to_numpy())


def test_portfolio_variance_rises_by_its_alpha_factor_exposure(french_model) -> None:
    model, alpha = french_model
    augmented = model.with_alpha_factor(alpha, 0.05)
    w = pd.Series(np.linspace(-1, 1, model.n_assets) / 10, index=model.assets)
    y = augmented.exposures[ALPHA_FACTOR].to_numpy()
    # wᵀΣ'w = wᵀΣw + (σ²/P)(yᵀw)²
    np.testing.assert_allclose(augmented.variance(w), model.variance(w) + 0.05**2 / 12 * (y @ w.to_numpy()) ** 2, rtol=1e-13)


def test_spanned_alpha_adds_a_zero_factor(french_model) -> None:
    model, _ = french_model
    alpha = model.exposures @ pd.Series([0.02, 0.01, 0.0, -0.01], index=model.factors)
    result = alpha_alignment(model, alpha)
    assert result.spanned_share == pytest.approx(1.0, abs=1e-12)
    assert result.warnings == ()
    augmented = model.with_alpha_factor(alpha, 0.03)
    np.testing.assert_allclose(augmented.covariance().to_numpy(), model.covariance().to_numpy(), rtol=1e-12)


def test_mostly_unspanned_alpha_warns_and_summarises(french_model) -> None:
    model, _ = french_model
    rng = np.random.default_rng(24)
    alpha = pd.Series(rng.normal(size=model.n_assets) * 0.02, index=model.assets)
    e = alpha_alignment(model, alpha).orthogonal
    result = alpha_alignment(model, e)  # wholly outside the span
    assert result.spanned_share == pytest.approx(0.0, abs=1e-12)
    assert len(result.warnings) == 1 and "outside the factor span" in result.warnings[0]
    text = str(result)
    assert "spanned by the factors" in text and "warning:" in text
    frame = result.summary().to_frame()
    assert frame.loc["total", "share_of_alpha"] == 1.0
    assert frame.loc["outside the factor span", "share_of_alpha"] == pytest.approx(1.0)


def test_bad_inputs_name_what_is_wrong(french_model) -> None:
    model, alpha = french_model
    with pytest.raises(InputError, match="volatility 3 is above 1 .*0.03 for 3%"):
        model.with_alpha_factor(alpha, 3)
    with pytest.raises(InputError, match="volatility must be a positive number"):
        model.with_alpha_factor(alpha, -0.01)
    with pytest.raises(InputError, match="alpha weights: must be ≥ 0"):
        alpha_alignment(model, alpha, weights=-model.specific_variance)
    with pytest.raises(InputError, match="alpha weights: every weight is 0"):
        alpha_alignment(model, alpha, weights=0 * model.specific_variance)
    with pytest.raises(InputError, match="alpha: assets not in the risk model: ZZZ"):
        alpha_alignment(model, pd.Series({"ZZZ": 0.01}))
    with pytest.raises(ModelError, match="already has a factor named 'alpha_factor'"):
        model.with_alpha_factor(alpha, 0.03).with_alpha_factor(alpha, 0.03)
