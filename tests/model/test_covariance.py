"""Covariance refinements against scikit-learn, statsmodels, pandas, numpy and naive loops."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import french
from sklearn.covariance import LedoitWolf, ledoit_wolf_shrinkage
from statsmodels.stats.sandwich_covariance import S_hac_simple, cov_hac

from trimtab.errors import InputError, ScenarioError
from trimtab.model._covariance import (
    CovarianceSettings,
    eigenvalue_floor,
    ewma_covariance,
    ewma_weights,
    factor_covariance,
    ledoit_wolf,
    newey_west,
)

FACTORS = ["MktRF", "SMB", "HML", "Mom"]


@pytest.fixture(scope="module")
def french_data() -> pd.DataFrame:
    return french.load().set_index("dates")


@pytest.fixture(scope="module")
def factor_returns(french_data: pd.DataFrame) -> pd.DataFrame:
    return french_data[FACTORS]


def autocorrelated(n_periods: int = 240, n_series: int = 3, seed: int = 0) -> np.ndarray:
    """AR(1)-like series so the Newey–West lags matter."""
    rng = np.random.default_rng(seed)
    shocks = rng.normal(size=(n_periods, n_series))
    out = shocks.copy()
    for t in range(1, n_periods):
        out[t] += 0.5 * out[t - 1]
    return out + np.arange(1, n_series + 1)


def naive_ewma_covariance(X: np.ndarray, half_life: float) -> np.ndarray:
    """Loop version: w_t ∝ 0.5^((T−1−t)/h), weighted mean, divisor Σw − Σw²/Σw."""
    T, K = X.shape
    raw = [0.5 ** ((T - 1 - t) / half_life) for t in range(T)]
    total = sum(raw)
    mean = [sum(raw[t] * X[t, k] for t in range(T)) / total for k in range(K)]
    out = np.zeros((K, K))
    for i in range(K):
        for j in range(K):
            acc = sum(raw[t] * (X[t, i] - mean[i]) * (X[t, j] - mean[j]) for t in range(T))
            out[i, j] = acc / (total - sum(r * r for r in raw) / total)
    return out


# --- ewma_weights ------------------------------------------------------------------------------


def test_ewma_weights_halve_every_half_life_and_sum_to_one() -> None:
    w = ewma_weights(50, 5.0)
    assert w.sum() == pytest.approx(1.0, abs=1e-15)
    assert np.argmax(w) == 49
    # Definition: the weight 5 periods older is half (closed form).
    np.testing.assert_allclose(w[:-5] / w[5:], 0.5, rtol=1e-13)
    np.testing.assert_array_equal(ewma_weights(4, None), np.full(4, 0.25))


def test_ewma_weights_match_pandas_ewm_weights() -> None:
    # pandas ewm(halflife=h, adjust=True).mean() at the last date is Σ w_t x_t with these weights.
    x = pd.Series(np.random.default_rng(1).normal(size=30))
    expected = x.ewm(halflife=4.0, adjust=True).mean().iloc[-1]
    assert ewma_weights(30, 4.0) @ x.to_numpy() == pytest.approx(expected, rel=1e-13)


@pytest.mark.parametrize(
    ("n_periods", "half_life", "match"),
    [(0, 3.0, "n_periods must be a whole number >= 1, got 0"), (5, -1.0, "half_life must be a positive number")],
)
def test_ewma_weights_errors(n_periods: int, half_life: float, match: str) -> None:
    with pytest.raises(ScenarioError, match=match):
        ewma_weights(n_periods, half_life)


# --- ewma_covariance ---------------------------------------------------------------------------


def test_ewma_covariance_matches_naive_loop() -> None:
    X = autocorrelated(80, 3, seed=2)
    np.testing.assert_allclose(ewma_covariance(X, 12.0), naive_ewma_covariance(X, 12.0), rtol=1e-12)


def test_ewma_covariance_matches_pandas_ewm_cov_unbiased(factor_returns: pd.DataFrame) -> None:
    # Convention check: pandas ewm(halflife=h, adjust=True).cov(bias=False) at the last date uses the
    # same weights, the weighted mean and the factor (Σw)²/((Σw)² − Σw²).
    expected = factor_returns.ewm(halflife=24.0, adjust=True).cov(bias=False).loc[factor_returns.index[-1]]
    got = ewma_covariance(factor_returns, 24.0)
    pd.testing.assert_frame_equal(got, expected.loc[FACTORS, FACTORS], rtol=1e-11, atol=0, check_names=False)


def test_ewma_covariance_matches_numpy_aweights(factor_returns: pd.DataFrame) -> None:
    # numpy.cov with aweights and ddof=1 is the same reliability-weight estimator.
    w = ewma_weights(len(factor_returns), 36.0)
    expected = np.cov(factor_returns.to_numpy(), rowvar=False, aweights=w)
    np.testing.assert_allclose(ewma_covariance(factor_returns.to_numpy(), 36.0), expected, rtol=1e-12)


def test_ewma_separate_half_lives_recombine_vol_and_correlation(factor_returns: pd.DataFrame) -> None:
    X = factor_returns.to_numpy()
    got = ewma_covariance(X, 12.0, 60.0)
    vol = naive_ewma_covariance(X[-200:], 12.0)  # weights older than 200 periods are ~1e-5 of the newest
    vol_full = np.cov(X, rowvar=False, aweights=ewma_weights(len(X), 12.0))
    corr_full = np.cov(X, rowvar=False, aweights=ewma_weights(len(X), 60.0))
    sd_c = np.sqrt(np.diag(corr_full))
    sd_v = np.sqrt(np.diag(vol_full))
    expected = corr_full / np.outer(sd_c, sd_c) * np.outer(sd_v, sd_v)
    np.testing.assert_allclose(got, expected, rtol=1e-12)
    # Variances follow the volatility half-life, correlations the correlation half-life.
    np.testing.assert_allclose(np.diag(got), np.diag(vol_full), rtol=1e-12)
    np.testing.assert_allclose(np.diag(got), np.diag(vol), rtol=1e-3)
    assert np.linalg.eigvalsh(got).min() > 0


def test_ewma_covariance_errors() -> None:
    X = autocorrelated(20, 2)
    with pytest.raises(ScenarioError, match="correlation_half_life must be a positive number"):
        ewma_covariance(X, 5.0, 0.0)
    with pytest.raises(InputError, match="need at least 2 periods, got 1"):
        ewma_covariance(X[:1], 5.0)
    with pytest.raises(InputError, match="newey_west_lags must be below the number of periods 20, got 20"):
        ewma_covariance(X, 5.0, newey_west_lags=20)
    bad = X.copy()
    bad[3, 1] = np.nan
    with pytest.raises(InputError, match=r"ewma_covariance: NaN or infinite values in rows 3"):
        ewma_covariance(bad, 5.0)
    with pytest.raises(InputError, match="expected a 2-D array"):
        ewma_covariance(np.zeros((2, 2, 2)), 5.0)
    with pytest.raises(InputError, match="expected numbers, could not convert"):
        ewma_covariance([["a", "b"], ["c", "d"]], 5.0)


# --- newey_west --------------------------------------------------------------------------------


@pytest.mark.parametrize("lags", [0, 1, 4])
def test_newey_west_matches_statsmodels_s_hac_simple(lags: int) -> None:
    # statsmodels S_hac_simple: Σ_l bartlett(l)(Γ_l + Γ_lᵀ) on given scores, unnormalised; ours divides by T − 1.
    X = autocorrelated(240, 3, seed=3)
    expected = S_hac_simple(X - X.mean(axis=0), nlags=lags) / (len(X) - 1)
    np.testing.assert_allclose(newey_west(X, lags), expected, rtol=1e-12)


def test_newey_west_is_t_times_hac_variance_of_the_mean() -> None:
    # statsmodels cov_hac of OLS on a constant = long-run variance / T, with use_correction=True
    # giving the small-sample factor T/(T − 1): the convention newey_west matches.
    X = autocorrelated(300, 2, seed=4)
    T = len(X)
    got = newey_west(X, 5)
    for k in range(2):
        fit = sm.OLS(X[:, k], np.ones(T)).fit()
        hac = cov_hac(fit, nlags=5, use_correction=True)
        assert got[k, k] == pytest.approx(T * float(hac[0, 0]), rel=1e-12)
    # The same number through the OLS HAC covariance option of statsmodels.
    fit = sm.OLS(X[:, 0], np.ones(T)).fit(cov_type="HAC", cov_kwds={"maxlags": 5, "use_correction": True})
    assert got[0, 0] == pytest.approx(T * float(fit.cov_params()[0, 0]), rel=1e-12)


def test_newey_west_with_weights_is_rescaled_bartlett_sum() -> None:
    X = autocorrelated(60, 2, seed=5)
    w = ewma_weights(60, 10.0)
    mean = w @ X
    y = np.sqrt(w)[:, None] * (X - mean)
    expected = y.T @ y
    for lag in (1, 2):
        gamma = sum(np.outer(y[t], y[t - lag]) for t in range(lag, 60))
        expected = expected + (1 - lag / 3) * (gamma + gamma.T)
    expected /= 1 - w @ w
    np.testing.assert_allclose(newey_west(X, 2, weights=w * 7.0), expected, rtol=1e-12)
    # Unnormalised weights are normalised; the result is PSD (Newey & West 1987).
    assert np.linalg.eigvalsh(newey_west(X, 2, weights=w)).min() > 0


def test_newey_west_keeps_labels(factor_returns: pd.DataFrame) -> None:
    got = newey_west(factor_returns, 2)
    assert list(got.index) == FACTORS and list(got.columns) == FACTORS


def test_newey_west_errors() -> None:
    X = autocorrelated(10, 2)
    with pytest.raises(ScenarioError, match=r"newey_west: lags must be a whole number of lags >= 0, got -1"):
        newey_west(X, -1)
    with pytest.raises(ScenarioError, match=r"lags must be a whole number of lags >= 0, got 1.5"):
        newey_west(X, 1.5)  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"lags must be below the number of periods 10, got 10"):
        newey_west(X, 10)
    with pytest.raises(InputError, match=r"weights must have shape \(10,\), got \(3,\)"):
        newey_west(X, 1, weights=[1, 2, 3])
    with pytest.raises(InputError, match="weights must be finite, non-negative and not all zero"):
        newey_west(X, 1, weights=-np.ones(10))
    with pytest.raises(InputError, match="need at least 2 periods with positive weight"):
        newey_west(X, 0, weights=np.eye(10)[0])


# --- ledoit_wolf -------------------------------------------------------------------------------


def test_ledoit_wolf_matches_sklearn_on_french_factors(factor_returns: pd.DataFrame) -> None:
    # scikit-learn LedoitWolf (assume_centered=False) on the same data.
    reference = LedoitWolf().fit(factor_returns.to_numpy())
    cov, shrinkage = ledoit_wolf(factor_returns)
    assert shrinkage == pytest.approx(reference.shrinkage_, abs=1e-10)
    np.testing.assert_allclose(cov.to_numpy(), reference.covariance_, rtol=0, atol=1e-10)
    assert list(cov.index) == FACTORS


def test_ledoit_wolf_matches_sklearn_when_series_outnumber_periods(french_data: pd.DataFrame) -> None:
    # 30 portfolios on 24 months: a singular sample covariance, so shrinkage matters.
    X = french_data.iloc[:24, 5:].to_numpy()
    reference = LedoitWolf().fit(X)
    cov, shrinkage = ledoit_wolf(X)
    assert shrinkage == pytest.approx(reference.shrinkage_, abs=1e-10)
    np.testing.assert_allclose(cov, reference.covariance_, rtol=1e-10, atol=1e-12)
    assert np.linalg.eigvalsh(cov).min() > 0


def test_ledoit_wolf_single_series_does_not_shrink() -> None:
    x = np.random.default_rng(6).normal(size=(30, 1))
    cov, shrinkage = ledoit_wolf(x)
    assert shrinkage == LedoitWolf().fit(x).shrinkage_ == 0.0
    assert cov[0, 0] == pytest.approx(np.var(x), rel=1e-14)


def test_ledoit_wolf_errors() -> None:
    with pytest.raises(InputError, match="ledoit_wolf: need at least 2 periods, got 1"):
        ledoit_wolf(np.ones((1, 3)))


# --- eigenvalue_floor --------------------------------------------------------------------------


def test_eigenvalue_floor_keeps_eigenvectors_and_raises_small_eigenvalues() -> None:
    rng = np.random.default_rng(7)
    A = rng.normal(size=(5, 3))
    F = A @ A.T  # rank 3: two zero eigenvalues
    values, vectors = np.linalg.eigh(F)
    floored = eigenvalue_floor(F, 0.05)
    level = 0.05 * values.mean()
    new_values = np.linalg.eigvalsh(floored)
    assert new_values.min() >= level * (1 - 1e-12)
    # Same eigenvectors: Vᵀ F' V is diagonal with max(λ, level) on it.
    np.testing.assert_allclose(vectors.T @ floored @ vectors, np.diag(np.maximum(values, level)), atol=1e-12)
    # Eigenvalues already above the level are unchanged.
    np.testing.assert_allclose(np.sort(new_values)[2:], values[2:], rtol=1e-12)


def test_eigenvalue_floor_on_dataframe_keeps_labels(factor_returns: pd.DataFrame) -> None:
    F = factor_returns.cov()
    floored = eigenvalue_floor(F, 1.0)
    assert floored.index.equals(F.index) and floored.columns.equals(F.columns)
    # Floor 1 × mean eigenvalue on every eigenvalue below the mean: closed form check.
    values = np.linalg.eigvalsh(F.to_numpy())
    np.testing.assert_allclose(np.linalg.eigvalsh(floored.to_numpy()), np.maximum(values, values.mean()), rtol=1e-12)


def test_eigenvalue_floor_errors() -> None:
    with pytest.raises(ScenarioError, match=r"floor must be a fraction of the mean eigenvalue in \(0, 1\], got 0"):
        eigenvalue_floor(np.eye(2), 0)
    with pytest.raises(ScenarioError, match="got None"):
        eigenvalue_floor(np.eye(2), None)  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"expected a square matrix, got shape \(2, 3\)"):
        eigenvalue_floor(np.ones((2, 3)), 0.1)
    with pytest.raises(InputError, match="the matrix is not symmetric"):
        eigenvalue_floor(np.array([[1.0, 0.5], [0.0, 1.0]]), 0.1)
    with pytest.raises(InputError, match="same labels on rows and columns"):
        eigenvalue_floor(pd.DataFrame(np.eye(2), index=["a", "b"], columns=["a", "c"]), 0.1)


# --- factor_covariance -------------------------------------------------------------------------


def test_factor_covariance_default_is_numpy_cov(factor_returns: pd.DataFrame) -> None:
    got = factor_covariance(factor_returns)
    np.testing.assert_array_equal(got.to_numpy(), got.to_numpy().T)
    np.testing.assert_allclose(got.to_numpy(), np.cov(factor_returns.to_numpy(), rowvar=False), rtol=1e-13)
    assert list(got.index) == FACTORS and list(got.columns) == FACTORS


def test_factor_covariance_ledoit_wolf_is_sklearn_rescaled(factor_returns: pd.DataFrame) -> None:
    # Documented convention: same δ as scikit-learn, applied to the T − 1 covariance.
    T = len(factor_returns)
    reference = LedoitWolf().fit(factor_returns.to_numpy())
    got = factor_covariance(factor_returns, CovarianceSettings(shrinkage="ledoit_wolf"))
    np.testing.assert_allclose(got.to_numpy(), reference.covariance_ * T / (T - 1), rtol=1e-12)


def test_factor_covariance_steps_compose(factor_returns: pd.DataFrame) -> None:
    settings = CovarianceSettings(
        volatility_half_life=24, correlation_half_life=96, newey_west_lags=2, shrinkage="ledoit_wolf", eigenvalue_floor=0.5
    )
    X = factor_returns.to_numpy()
    T = len(X)
    step1 = ewma_covariance(X, 24, 96, newey_west_lags=2)
    w = ewma_weights(T, 96)
    # δ from scikit-learn on the rescaled observations, already centred at the weighted mean.
    delta = ledoit_wolf_shrinkage(np.sqrt(T * w)[:, None] * (X - w @ X), assume_centered=True)
    mu = np.trace(step1) / 4
    step2 = (1 - delta) * step1 + delta * mu * np.eye(4)
    expected = eigenvalue_floor(step2, 0.5)
    np.testing.assert_allclose(factor_covariance(factor_returns, settings).to_numpy(), expected, rtol=1e-12)
    assert np.linalg.eigvalsh(expected).min() >= 0.5 * np.trace(step2) / 4 * (1 - 1e-12)


def test_factor_covariance_single_half_life_is_pandas_ewm(factor_returns: pd.DataFrame) -> None:
    got = factor_covariance(factor_returns, CovarianceSettings(volatility_half_life=12))
    expected = factor_returns.ewm(halflife=12, adjust=True).cov(bias=False).loc[factor_returns.index[-1]]
    np.testing.assert_allclose(got.to_numpy(), expected.loc[FACTORS, FACTORS].to_numpy(), rtol=1e-11)


def test_factor_covariance_input_errors(factor_returns: pd.DataFrame) -> None:
    frame = factor_returns.iloc[:10].copy()
    with pytest.raises(InputError, match="factor_covariance: expected a DataFrame of dates × factors, got ndarray"):
        factor_covariance(frame.to_numpy())  # type: ignore[arg-type]
    nan = frame.copy()
    nan.iloc[2, 1] = np.nan
    with pytest.raises(InputError, match=r"factor_covariance: missing \(NaN\) values in columns: SMB"):
        factor_covariance(nan)
    inf = frame.copy()
    inf.iloc[2, 3] = np.inf
    with pytest.raises(InputError, match="factor_covariance: infinite values in columns: Mom"):
        factor_covariance(inf)
    text = frame.assign(HML=["x"] * 10)
    with pytest.raises(InputError, match="factor_covariance: non-numeric columns: HML"):
        factor_covariance(text)
    dup = frame.copy()
    dup.index = [frame.index[0]] + list(frame.index[:-1])
    with pytest.raises(InputError, match="factor_covariance: duplicate dates: "):
        factor_covariance(dup)
    unsorted = frame.iloc[[0, 2, 1, 3]]
    with pytest.raises(InputError, match=r"factor_covariance: dates must be increasing; 1949-02-01 comes after 1949-03-01"):
        factor_covariance(unsorted)
    mixed = frame.copy()
    mixed.index = ["a", 1] + list(range(2, 10))
    with pytest.raises(InputError, match="factor_covariance: dates of mixed types cannot be ordered"):
        factor_covariance(mixed)
    same = frame.copy()
    same.columns = ["MktRF", "MktRF", "HML", "Mom"]
    with pytest.raises(InputError, match="factor_covariance: duplicate factors: MktRF"):
        factor_covariance(same)
    with pytest.raises(InputError, match="need at least 2 dates of factor returns, got 1"):
        factor_covariance(frame.iloc[:1])
    with pytest.raises(InputError, match="factor_covariance: no factor columns"):
        factor_covariance(frame.iloc[:, :0])
    with pytest.raises(InputError, match="newey_west_lags must be below the number of periods 10, got 12"):
        factor_covariance(frame, CovarianceSettings(newey_west_lags=12))
    with pytest.raises(ScenarioError, match="settings must be a CovarianceSettings or None, got dict"):
        factor_covariance(frame, {"shrinkage": "ledoit_wolf"})  # type: ignore[arg-type]
