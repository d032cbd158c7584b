"""Covariance refinements for the factor risk model: EWMA, Newey–West, Ledoit–Wolf, floors.

The estimators call :func:`factor_covariance` on their factor returns and :func:`specific_variance`
(in ``_specific_variance``) on their residuals; both take one :class:`CovarianceSettings` (in
``_covariance_settings``, re-exported here). With no settings they return the plain sample
estimates, so an estimator without refinements matches the textbook numbers exactly.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_finite_frame, list_labels
from trimtab.errors import InputError, ScenarioError
from trimtab.model._arguments import is_whole_number
from trimtab.model._covariance_settings import (
    CovarianceSettings,
    check_parameters,
    settings_or_default,
)
from trimtab.model._panel import check_date_frame
from trimtab.model._specific_variance import specific_variance

__all__ = [
    "CovarianceSettings",
    "eigenvalue_floor",
    "ewma_covariance",
    "ewma_weights",
    "factor_covariance",
    "ledoit_wolf",
    "newey_west",
    "specific_variance",
]


# ---------------------------------------------------------------------------------------------
# Weights and weighted second moments (ndarray core)
# ---------------------------------------------------------------------------------------------


def ewma_weights(n_periods: int, half_life: float | None) -> np.ndarray:
    """Exponentially decaying weights over ``n_periods`` observations, oldest first, summing to 1.

    Parameters
    ----------
    n_periods : int
        T, the number of observations (at least 1).
    half_life : float or None
        h > 0 in periods; None gives equal weights 1/T.

    Returns
    -------
    numpy.ndarray
        w of length T with w_t ∝ 0.5^((T−1−t)/h): the newest observation (t = T−1) has the largest
        weight and an observation h periods older has half of it.

    Raises
    ------
    ScenarioError
        If ``n_periods`` < 1 or ``half_life`` is not positive.

    Notes
    -----
    These are the weights of ``pandas.DataFrame.ewm(halflife=h, adjust=True)`` at the last date,
    normalised: decay factor 1 − α = 0.5^(1/h).

    Examples
    --------
    >>> ewma_weights(3, 1.0).round(4)
    array([0.1429, 0.2857, 0.5714])
    """
    if not is_whole_number(n_periods) or n_periods < 1:
        raise ScenarioError(f"ewma_weights: n_periods must be a whole number >= 1, got {n_periods!r}")
    check_parameters("ewma_weights", {"half_life": half_life})
    if half_life is None:
        return np.full(n_periods, 1.0 / n_periods)
    age = np.arange(n_periods - 1, -1, -1, dtype=np.float64)
    raw = np.power(0.5, age / float(half_life))
    return raw / raw.sum()


def _as_matrix(X: Any, owner: str) -> tuple[np.ndarray, pd.Index | None, pd.Index | None]:
    """Float64 2-D view of ``X`` (DataFrame or array), plus its labels if it had them."""
    if isinstance(X, pd.DataFrame):
        check_finite_frame(X, owner)
        return X.to_numpy(dtype=np.float64), X.index, X.columns
    try:
        arr = np.asarray(X, dtype=np.float64)
    except (TypeError, ValueError) as err:
        raise InputError(f"{owner}: expected numbers, could not convert: {err}") from err
    if arr.ndim == 1:
        arr = arr[:, None]
    if arr.ndim != 2:
        raise InputError(f"{owner}: expected a 2-D array (periods × series), got {arr.ndim} dimensions")
    if not np.isfinite(arr).all():
        rows = np.flatnonzero(~np.isfinite(arr).all(axis=1))
        raise InputError(f"{owner}: NaN or infinite values in rows {list_labels(rows.tolist())}")
    return arr, None, None


def _weights_for(weights: Any, n_periods: int, owner: str) -> np.ndarray:
    if weights is None:
        return np.full(n_periods, 1.0 / n_periods)
    w = np.asarray(weights, dtype=np.float64)
    if w.shape != (n_periods,):
        raise InputError(f"{owner}: weights must have shape ({n_periods},), got {w.shape}")
    if not np.isfinite(w).all() or (w < 0).any() or w.sum() <= 0:
        raise InputError(f"{owner}: weights must be finite, non-negative and not all zero")
    return w / w.sum()


def _weighted_long_run(X: np.ndarray, w: np.ndarray, lags: int) -> np.ndarray:
    """Bias-corrected weighted covariance with the Bartlett Newey–West sum (see :func:`newey_west`)."""
    n_periods = X.shape[0]
    centred = X - w @ X
    scaled = np.sqrt(w)[:, None] * centred
    # Reliability-weight correction 1 − Σw²: equals (T−1)/T for equal weights, i.e. ddof=1.
    correction = 1.0 - float(w @ w)
    if correction <= 0:
        raise InputError(f"newey_west: need at least 2 periods with positive weight, got {n_periods} periods")
    S = scaled.T @ scaled
    for lag in range(1, lags + 1):
        gamma = scaled[lag:].T @ scaled[:-lag]
        S += (1.0 - lag / (lags + 1.0)) * (gamma + gamma.T)
    S /= correction
    return 0.5 * (S + S.T)


def _check_lags(lags: int, n_periods: int, owner: str, name: str = "newey_west_lags") -> None:
    check_parameters(owner, {name: lags})
    if lags >= n_periods:
        raise InputError(f"{owner}: {name} must be below the number of periods {n_periods}, got {lags}")


def _relabel(matrix: np.ndarray, labels: pd.Index | None) -> Any:
    if labels is None:
        return matrix
    return pd.DataFrame(matrix, index=labels, columns=labels)


def newey_west(X: Any, lags: int, weights: Any = None) -> Any:
    """Newey–West (Bartlett kernel) long-run covariance of the columns of ``X``.

    Parameters
    ----------
    X : pandas.DataFrame or array_like
        T × K observations, oldest first, no NaN.
    lags : int
        L ≥ 0, below T. L = 0 gives the (weighted) covariance.
    weights : array_like, optional
        Non-negative observation weights (normalised to sum to 1), for instance
        :func:`ewma_weights`. Default equal weights.

    Returns
    -------
    pandas.DataFrame or numpy.ndarray
        K × K symmetric positive semi-definite matrix, labelled like ``X``'s columns.

    Raises
    ------
    InputError
        If ``X`` has NaN or infinite values, the weights have the wrong shape or sign, or L ≥ T.

    Notes
    -----
    With weights w (Σw = 1), weighted mean x̄ = Σ wₜxₜ and yₜ = √wₜ (xₜ − x̄),

        Γ_l = Σ_{t ≥ l} yₜ yₜ₋ₗᵀ,   S = [Γ₀ + Σ_{l=1..L} (1 − l/(L+1)) (Γ_l + Γ_lᵀ)] / (1 − Σw²).

    With equal weights this is (1/(T−1)) × Newey & West's sum of autocovariances of demeaned data,
    the same as statsmodels' ``S_hac_simple`` on demeaned data divided by T − 1, and as T times
    ``cov_hac`` of an OLS on a constant with ``use_correction=True`` (small-sample factor T/(T−1)).
    L = 0 is ``numpy.cov(X, rowvar=False, aweights=w)``. The Bartlett weights keep S positive
    semi-definite.

    References
    ----------
    Newey, W. K. and West, K. D. (1987). A simple, positive semi-definite, heteroskedasticity and
    autocorrelation consistent covariance matrix. Econometrica 55(3), 703–708.

    Examples
    --------
    >>> import numpy as np
    >>> X = np.random.default_rng(0).normal(size=(100, 2))
    >>> np.allclose(newey_west(X, 0), np.cov(X, rowvar=False))
    True
    """
    arr, _, labels = _as_matrix(X, "newey_west")
    _check_lags(lags, arr.shape[0], "newey_west", "lags")
    w = _weights_for(weights, arr.shape[0], "newey_west")
    return _relabel(_weighted_long_run(arr, w, lags), labels)


def _recombine(vol_cov: np.ndarray, corr_cov: np.ndarray) -> np.ndarray:
    """Volatilities from ``vol_cov`` with correlations from ``corr_cov``: D C D."""
    corr_sd = np.sqrt(np.diag(corr_cov))
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = corr_cov / np.outer(corr_sd, corr_sd)
    corr = np.where(np.isfinite(corr), corr, 0.0)
    np.fill_diagonal(corr, 1.0)
    vol_sd = np.sqrt(np.diag(vol_cov))
    combined = corr * np.outer(vol_sd, vol_sd)
    return 0.5 * (combined + combined.T)


def _ewma_core(
    arr: np.ndarray, volatility_half_life: float | None, correlation_half_life: float | None, lags: int
) -> np.ndarray:
    n_periods = arr.shape[0]
    corr_half_life = volatility_half_life if correlation_half_life is None else correlation_half_life
    vol_cov = _weighted_long_run(arr, ewma_weights(n_periods, volatility_half_life), lags)
    if corr_half_life == volatility_half_life:
        return vol_cov
    corr_cov = _weighted_long_run(arr, ewma_weights(n_periods, corr_half_life), lags)
    return _recombine(vol_cov, corr_cov)


def ewma_covariance(
    X: Any,
    volatility_half_life: float | None,
    correlation_half_life: float | None = None,
    *,
    newey_west_lags: int = 0,
) -> Any:
    """EWMA covariance with separate half-lives for volatilities and correlations.

    Parameters
    ----------
    X : pandas.DataFrame or array_like
        T × K observations, oldest first, no NaN.
    volatility_half_life : float or None
        Half-life of the weights for the variances; None gives equal weights.
    correlation_half_life : float or None, default None
        Half-life of the weights for the correlations; None uses ``volatility_half_life``.
    newey_west_lags : int, default 0
        Bartlett lags applied to both weighted matrices before they are recombined.

    Returns
    -------
    pandas.DataFrame or numpy.ndarray
        K × K covariance, labelled like ``X``'s columns.

    Raises
    ------
    ScenarioError
        If a half-life is not positive or the lags are negative.
    InputError
        If ``X`` has NaN or infinite values or the lags are not below T.

    Notes
    -----
    V = S(w_vol), C = S(w_corr) (each from :func:`newey_west` with :func:`ewma_weights`), and

        F_ij = C_ij / √(C_ii C_jj) × √(V_ii V_jj).

    Each S is bias-corrected by 1/(1 − Σw²) around the weighted mean, the convention of
    ``pandas.DataFrame.ewm(halflife=h, adjust=True).cov(bias=False)`` at the last date. With equal
    half-lives F = S(w).

    References
    ----------
    Roberts, S. W. (1959). Control chart tests based on geometric moving averages. Technometrics
    1(3), 239–250 (exponentially weighted moving averages; cited from memory).

    Examples
    --------
    >>> import numpy as np
    >>> X = np.random.default_rng(1).normal(size=(200, 3))
    >>> ewma_covariance(X, 30, 90).shape
    (3, 3)
    """
    arr, _, labels = _as_matrix(X, "ewma_covariance")
    check_parameters(
        "ewma_covariance",
        {"volatility_half_life": volatility_half_life, "correlation_half_life": correlation_half_life},
    )
    _check_lags(newey_west_lags, arr.shape[0], "ewma_covariance")
    if arr.shape[0] < 2:
        raise InputError(f"ewma_covariance: need at least 2 periods, got {arr.shape[0]}")
    return _relabel(_ewma_core(arr, volatility_half_life, correlation_half_life, newey_west_lags), labels)


def _ledoit_wolf_intensity(centred: np.ndarray) -> float:
    """Ledoit–Wolf (2004) shrinkage intensity for centred observations (rows = periods)."""
    n_periods, n_series = centred.shape
    if n_series == 1:
        return 0.0
    S = centred.T @ centred / n_periods
    mu = np.trace(S) / n_series
    # Squared Frobenius norms; the paper's 1/p normalisation cancels in the ratio.
    d2 = float(np.sum(S * S) - n_series * mu * mu)
    row_norm2 = np.einsum("ij,ij->i", centred, centred)
    b2_bar = float((np.sum(row_norm2**2) / n_periods - np.sum(S * S)) / n_periods)
    if d2 <= 0:
        return 0.0
    return min(max(b2_bar, 0.0), d2) / d2


def ledoit_wolf(X: Any) -> tuple[Any, float]:
    """Ledoit–Wolf shrinkage of the sample covariance toward a scaled identity.

    Parameters
    ----------
    X : pandas.DataFrame or array_like
        T × K observations, no NaN. They are demeaned here.

    Returns
    -------
    covariance : pandas.DataFrame or numpy.ndarray
        (1 − δ) S + δ μ I with S = (1/T) Σ (xₜ − x̄)(xₜ − x̄)ᵀ and μ = tr(S)/K.
    shrinkage : float
        δ in [0, 1].

    Raises
    ------
    InputError
        If ``X`` has NaN or infinite values or fewer than 2 periods.

    Notes
    -----
    With d² = ‖S − μI‖², b̄² = (1/T²) Σₜ ‖xₜxₜᵀ − S‖² and b² = min(b̄², d²), δ = b²/d² (Frobenius
    norms). S uses divisor T (maximum likelihood), the convention of
    ``sklearn.covariance.LedoitWolf``; :func:`factor_covariance` applies the same δ to its own
    (divisor T − 1 or weighted) covariance.

    References
    ----------
    Ledoit, O. and Wolf, M. (2004). A well-conditioned estimator for large-dimensional covariance
    matrices. Journal of Multivariate Analysis 88(2), 365–411. Lemma 3.2 and Theorem 3.4.

    Examples
    --------
    >>> import numpy as np
    >>> X = np.random.default_rng(2).normal(size=(30, 10))
    >>> cov, delta = ledoit_wolf(X)
    >>> 0 <= delta <= 1
    True
    """
    arr, _, labels = _as_matrix(X, "ledoit_wolf")
    if arr.shape[0] < 2:
        raise InputError(f"ledoit_wolf: need at least 2 periods, got {arr.shape[0]}")
    centred = arr - arr.mean(axis=0)
    delta = _ledoit_wolf_intensity(centred)
    S = centred.T @ centred / arr.shape[0]
    return _relabel(_shrink_to_identity(S, delta), labels), delta


def _shrink_to_identity(S: np.ndarray, delta: float) -> np.ndarray:
    mu = np.trace(S) / S.shape[0]
    shrunk = (1.0 - delta) * S
    shrunk[np.diag_indices_from(shrunk)] += delta * mu
    return shrunk


def eigenvalue_floor(F: Any, floor: float) -> Any:
    """Raise the small eigenvalues of a symmetric matrix to a fraction of the mean eigenvalue.

    Parameters
    ----------
    F : pandas.DataFrame or array_like
        K × K symmetric matrix.
    floor : float
        Fraction φ in (0, 1] of the mean eigenvalue λ̄ = tr(F)/K.

    Returns
    -------
    pandas.DataFrame or numpy.ndarray
        V diag(max(λᵢ, φ λ̄)) Vᵀ, same labels as ``F``: same eigenvectors, smallest eigenvalue ≥ φ λ̄,
        so positive definite when tr(F) > 0.

    Raises
    ------
    ScenarioError
        If ``floor`` is not in (0, 1].
    InputError
        If ``F`` is not square and symmetric or has NaN or infinite values.

    Notes
    -----
    Eigenvalue clipping of a covariance matrix, common practice (no source).

    Examples
    --------
    >>> import numpy as np
    >>> G = eigenvalue_floor(np.array([[1.0, 0.999], [0.999, 1.0]]), 0.1)
    >>> bool(np.linalg.eigvalsh(G).min() >= 0.1 - 1e-12)
    True
    """
    check_parameters("eigenvalue_floor", {"floor": floor})
    labels = None
    if isinstance(F, pd.DataFrame):
        check_finite_frame(F, "eigenvalue_floor")
        if not F.index.equals(F.columns):
            raise InputError("eigenvalue_floor: the matrix must have the same labels on rows and columns")
        labels = F.index
    arr, _, _ = _as_matrix(F, "eigenvalue_floor")
    if arr.shape[0] != arr.shape[1]:
        raise InputError(f"eigenvalue_floor: expected a square matrix, got shape {arr.shape}")
    scale = max(float(np.abs(arr).max()), 1e-300)
    if np.abs(arr - arr.T).max() > 1e-10 * scale:
        raise InputError("eigenvalue_floor: the matrix is not symmetric")
    return _relabel(_floor_core(arr, float(floor)), labels)


def _floor_core(arr: np.ndarray, floor: float) -> np.ndarray:
    values, vectors = np.linalg.eigh(0.5 * (arr + arr.T))
    level = floor * float(values.mean())
    floored = (vectors * np.maximum(values, level)) @ vectors.T
    return 0.5 * (floored + floored.T)


# ---------------------------------------------------------------------------------------------
# The boundary function the estimators call for F
# ---------------------------------------------------------------------------------------------


def factor_covariance(returns: pd.DataFrame, settings: CovarianceSettings | None = None) -> pd.DataFrame:
    """Factor covariance F from factor returns, with the refinements in ``settings``.

    Parameters
    ----------
    returns : pandas.DataFrame
        Dates × factors, dates increasing, no NaN.
    settings : CovarianceSettings, optional
        None gives the sample covariance with divisor T − 1 (``numpy.cov``).

    Returns
    -------
    pandas.DataFrame
        K × K symmetric matrix labelled by factor on both axes.

    Raises
    ------
    InputError
        On non-numeric columns, NaN or infinite values (naming the columns), duplicate or unsorted
        dates (naming the date), fewer than 2 dates, or lags not below the number of dates.
    ScenarioError
        If ``settings`` is not a CovarianceSettings.

    Notes
    -----
    Steps, in order:

    1. EWMA with separate half-lives and the Newey–West sum (:func:`ewma_covariance`); with no
       half-life and no lags this is ``numpy.cov`` (divisor T − 1).
    2. Ledoit–Wolf: F ← (1 − δ) F + δ (tr F / K) I, with δ from :func:`ledoit_wolf`'s formula on
       the rescaled demeaned observations yₜ = √(T wₜ)(xₜ − x̄_w) (correlation weights); with equal
       weights δ is exactly scikit-learn's ``LedoitWolf().shrinkage_`` and F is T/(T−1) times its
       ``covariance_``.
    3. Eigenvalue floor (:func:`eigenvalue_floor`).

    References
    ----------
    See :func:`ewma_covariance`, :func:`newey_west`, :func:`ledoit_wolf`.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> R = pd.DataFrame(np.random.default_rng(3).normal(size=(60, 2)), columns=["market", "size"])
    >>> np.allclose(factor_covariance(R), np.cov(R.to_numpy(), rowvar=False))
    True
    """
    owner = "factor_covariance"
    check_date_frame(returns, owner, "factors")
    config = settings_or_default(settings, owner)
    arr = returns.to_numpy(dtype=np.float64)
    n_periods = arr.shape[0]
    if n_periods < 2:
        raise InputError(f"{owner}: need at least 2 dates of factor returns, got {n_periods}")
    if returns.shape[1] == 0:
        raise InputError(f"{owner}: no factor columns")
    _check_lags(config.newey_west_lags, n_periods, owner)
    F = _ewma_core(arr, config.volatility_half_life, config.correlation_half_life, config.newey_west_lags)
    if config.shrinkage == "ledoit_wolf":
        half_life = (
            config.volatility_half_life if config.correlation_half_life is None else config.correlation_half_life
        )
        w = ewma_weights(n_periods, half_life)
        rescaled = np.sqrt(n_periods * w)[:, None] * (arr - w @ arr)
        F = _shrink_to_identity(F, _ledoit_wolf_intensity(rescaled))
    if config.eigenvalue_floor is not None:
        F = _floor_core(F, config.eigenvalue_floor)
    return pd.DataFrame(F, index=returns.columns, columns=returns.columns)
