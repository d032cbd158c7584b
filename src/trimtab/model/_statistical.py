"""The statistical factor model: principal components of the return panel, k chosen by Bai & Ng (2002).

The demeaned T × N return matrix X = U S Vᵀ is decomposed by a thin SVD, or, when there are more
assets than dates, through the T × T matrix X Xᵀ (the same components for a fraction of the cost).
"""

from __future__ import annotations

import math
import warnings
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import DataWarning, InputError
from trimtab.model._arguments import is_whole_number
from trimtab.model._covariance import factor_covariance
from trimtab.model._covariance_settings import CovarianceSettings
from trimtab.model._factor_model import FactorModel
from trimtab.model._panel import (
    assemble_model,
    check_returns_panel,
    date_label,
    infer_periods_per_year,
    observed_at_least,
    per_asset_fit,
    settings_record,
    warn_dropped,
)
from trimtab.model._specific_variance import specific_variance

OWNER = "fit_statistical"

CRITERIA = ("IC_p1", "IC_p2", "IC_p3")
ROUTES = ("auto", "svd", "gram")

#: Fewest dates a principal-component fit accepts.
MIN_DATES = 3


def principal_components(X: np.ndarray, n_components: int, route: str = "auto") -> dict[str, Any]:
    """Leading principal components of a (demeaned, gap-free) T × N matrix.

    Parameters
    ----------
    X : (T, N) float64 array, no NaN.
    n_components : k ≤ min(T, N).
    route : "svd" (thin SVD of X), "gram" (eigendecomposition of the T × T matrix X Xᵀ, then
        V = Xᵀ U S⁻¹) or "auto" ("gram" when N > T, else "svd").

    Returns
    -------
    dict with ``singular_values`` (k), ``loadings`` V (N × k, orthonormal columns), ``scores``
    X V = U S (T × k), ``total`` ‖X‖²_F and ``route`` (the one used). Each loading vector is
    signed so that its entries sum to a non-negative number (the sign of a component is arbitrary).
    """
    n_dates, n_assets = X.shape
    if route == "auto":
        route = "gram" if n_assets > n_dates else "svd"
    if route == "svd":
        _, s, Vt = np.linalg.svd(X, full_matrices=False)
        s, V = s[:n_components], Vt[:n_components].T
    else:
        gram = X @ X.T
        eigenvalues, U = np.linalg.eigh(gram)
        order = np.argsort(eigenvalues)[::-1][:n_components]
        s = np.sqrt(np.clip(eigenvalues[order], 0.0, None))
        with np.errstate(divide="ignore", invalid="ignore"):
            V = np.where(s > 0, (X.T @ U[:, order]) / s, 0.0)
    sign = np.where(V.sum(axis=0) < 0, -1.0, 1.0)
    V = V * sign
    return {
        "singular_values": s,
        "loadings": V,
        "scores": X @ V,
        "total": float(np.einsum("ij,ij->", X, X)),
        "route": route,
    }


def information_criteria(singular_values: np.ndarray, total: float, n_dates: int, n_assets: int) -> pd.DataFrame:
    """Bai & Ng (2002) IC_p1, IC_p2, IC_p3 for k = 0 … len(singular_values).

    V(k) = (‖X‖² − Σ_{j≤k} s_j²) / (N T) is the mean squared residual of the rank-k fit, and with
    C² = min(N, T):

        IC_p1(k) = ln V(k) + k · (N + T)/(N T) · ln(N T/(N + T))
        IC_p2(k) = ln V(k) + k · (N + T)/(N T) · ln C²
        IC_p3(k) = ln V(k) + k · ln(C²)/C²
    """
    n, t = float(n_assets), float(n_dates)
    k = np.arange(len(singular_values) + 1, dtype=np.float64)
    explained = np.concatenate([[0.0], np.cumsum(singular_values**2)])
    mean_square = np.maximum(total - explained, total * 1e-300 + 1e-300) / (n * t)
    log_v = np.log(mean_square)
    c2 = min(n, t)
    frame = pd.DataFrame(
        {
            "V": mean_square,
            "IC_p1": log_v + k * (n + t) / (n * t) * np.log(n * t / (n + t)),
            "IC_p2": log_v + k * (n + t) / (n * t) * np.log(c2),
            "IC_p3": log_v + k * np.log(c2) / c2,
        },
        index=pd.Index(k.astype(np.int64), name="n_factors"),
    )
    return frame


def _check_arguments(n_factors: Any, max_factors: Any, criterion: Any, demean: Any, min_periods: Any) -> None:
    if n_factors is not None and (not is_whole_number(n_factors) or n_factors < 1):
        raise InputError(f"{OWNER}: n_factors must be a whole number >= 1 or None, got {n_factors!r}")
    if not is_whole_number(max_factors) or max_factors < 1:
        raise InputError(f"{OWNER}: max_factors must be a whole number >= 1, got {max_factors!r}")
    if criterion not in CRITERIA:
        raise InputError(f"{OWNER}: criterion must be one of {list_labels(CRITERIA)}, got {criterion!r}")
    if not isinstance(demean, bool):
        raise InputError(f"{OWNER}: demean must be True or False, got {demean!r}")
    if min_periods is not None and (not is_whole_number(min_periods) or min_periods < 2):
        raise InputError(f"{OWNER}: min_periods must be a whole number >= 2 or None, got {min_periods!r}")


def _clean_panel(returns: pd.DataFrame, min_periods: int | None) -> tuple[pd.DataFrame, pd.Series, list[Any], int]:
    """Drop empty dates and thin assets; returns the panel, dropped assets, dropped dates, min_periods."""
    empty_assets = returns.columns[returns.isna().all(axis=0).to_numpy()]
    if len(empty_assets):
        raise InputError(f"{OWNER}: asset_returns: no observations (all NaN) for assets: {list_labels(empty_assets)}")
    empty_rows = returns.isna().all(axis=1).to_numpy()
    dropped_dates = list(returns.index[empty_rows])
    returns = returns.loc[~empty_rows]
    n_dates = len(returns.index)
    if n_dates < MIN_DATES:
        raise InputError(f"{OWNER}: asset_returns: too few dates with returns: {n_dates}; need at least {MIN_DATES}")
    if min_periods is None:
        # Half the window: common practice (no source).
        min_periods = max(2, math.ceil(n_dates / 2))
    kept = observed_at_least(returns, min_periods)
    thin = returns.columns.difference(kept, sort=False)
    dropped = pd.Series(f"fewer than {min_periods} observations", index=thin, dtype=object, name="reason")
    return returns[kept], dropped, dropped_dates, int(min_periods)


def fit_statistical(
    asset_returns: pd.DataFrame,
    *,
    n_factors: int | None = None,
    max_factors: int = 20,
    criterion: str = "IC_p2",
    demean: bool = True,
    covariance: CovarianceSettings | None = None,
    periods_per_year: float | None = None,
    min_periods: int | None = None,
) -> FactorModel:
    """Fit a statistical factor model: principal components of the asset returns.

    Parameters
    ----------
    asset_returns : pandas.DataFrame
        Dates × assets per-period returns, dates increasing; NaN for a missing return.
    n_factors : int, optional
        k, at least 1 and at most min(T, N) − 1. None: chosen by ``criterion``.
    max_factors : int, default 20
        Largest k the criterion considers (capped at min(T, N) − 1).
    criterion : {"IC_p1", "IC_p2", "IC_p3"}, default "IC_p2"
        Bai & Ng (2002) information criterion.
    demean : bool, default True
        Subtract each asset's mean return before the decomposition.
    covariance : CovarianceSettings, optional
        Refinements for F and d; None gives the sample estimates.
    periods_per_year : float, optional
        Inferred from the median spacing of the dates when None.
    min_periods : int, optional
        Assets with fewer observed returns are left out; default half the number of dates.

    Returns
    -------
    FactorModel
        Factors ``pc1 … pck`` with exposures B = V_k (orthonormal loadings), factor returns the
        component scores X V_k, F from them (with default settings diag(s_j²/(T − 1)), the component
        variances) and d from the residuals of the rank-k reconstruction. The fit report's
        ``extra`` holds ``criterion`` (V(k) and the three criteria for every k considered),
        ``criterion_used``, ``n_factors``, ``selected_by``, ``route``, ``singular_values``,
        ``explained_variance``, ``explained_variance_ratio`` and ``filled_cells``.

    Raises
    ------
    InputError
        For duplicate or unsorted dates, duplicate assets, non-numeric columns, an asset with no
        observation at all, fewer than 3 dates, n_factors < 1 or > min(T, N) − 1, or fewer than two
        assets left after the min_periods rule.

    Warns
    -----
    DataWarning
        When dates with no return at all are dropped, assets with fewer than ``min_periods``
        observations are left out (listed in ``fit_report.dropped``), or gaps are filled.

    Notes
    -----
    Missing data: dates with no return are dropped; assets with fewer than ``min_periods`` returns
    are left out; each remaining asset is demeaned over its observed dates and its remaining gaps
    are set to 0 (its mean) before the decomposition. Residuals stay NaN on those cells.

    With X = U S Vᵀ (T × N, demeaned), the rank-k fit is X ≈ (U_k S_k) V_kᵀ: factor returns
    f_t = V_kᵀ x_t (the scores), exposures B = V_k with BᵀB = I — the convention of
    ``sklearn.decomposition.PCA`` (``components_`` = V_kᵀ, ``explained_variance_`` = s²/(T − 1)).
    The T × T route (eigenvalues of X Xᵀ are s², V = Xᵀ U S⁻¹) is used when N > T.

    Specific returns e = x − B f, and d = Σ_t e²/(T_i − dof) with dof = k (+1 when demeaned): each
    asset's loadings are its regression coefficients on the k scores, and the mean one more.

    The criteria, with V(k) = Σ e²/(N T) and C² = min(N, T):
    IC_p1 = ln V(k) + k (N+T)/(NT) ln(NT/(N+T)); IC_p2 = ln V(k) + k (N+T)/(NT) ln C²;
    IC_p3 = ln V(k) + k ln(C²)/C². k = argmin over 1 … max_factors (a DataWarning says so when
    k = 0 would score lower, and when k is max_factors itself, the top of the search range: the
    criterion may still fall beyond it).

    References
    ----------
    Bai, J. and Ng, S. (2002). Determining the number of factors in approximate factor models.
    Econometrica 70(1), 191–221.
    Connor, G. and Korajczyk, R. A. (1986). Performance measurement with the arbitrage pricing
    theory. Journal of Financial Economics 15(3), 373–394 (the T × T route, asymptotic PCA).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> rng = np.random.default_rng(0)
    >>> f = rng.normal(0, 0.01, (250, 2))
    >>> R = pd.DataFrame(f @ rng.normal(1, 0.5, (2, 40)) + rng.normal(0, 0.01, (250, 40)),
    ...                  index=pd.bdate_range("2024-01-01", periods=250))
    >>> fit_statistical(R, max_factors=8).n_factors
    2
    """
    _check_arguments(n_factors, max_factors, criterion, demean, min_periods)
    returns = check_returns_panel(asset_returns, OWNER)
    settings = settings_record(covariance, OWNER)
    ppy = infer_periods_per_year(returns.index, periods_per_year, OWNER)
    panel, dropped, dropped_dates, min_periods = _clean_panel(returns, min_periods)
    n_dates, n_assets = panel.shape
    if n_assets < 2:
        raise InputError(f"{OWNER}: fewer than 2 assets with at least {min_periods} observations")
    limit = min(n_dates, n_assets) - 1
    if n_factors is not None and n_factors > limit:
        raise InputError(
            f"{OWNER}: n_factors must be at most min(T, N) - 1 = {limit} (T = {n_dates} dates, "
            f"N = {n_assets} assets), got {n_factors}"
        )
    values = panel.to_numpy(dtype=np.float64)
    observed = np.isfinite(values)
    n_obs = observed.sum(axis=0)
    means = np.where(observed, values, 0.0).sum(axis=0) / n_obs if demean else np.zeros(n_assets)
    X = np.where(observed, values - means, 0.0)
    filled = int((~observed).sum())

    k_max = n_factors if n_factors is not None else min(max_factors, limit)
    pcs = principal_components(X, k_max)
    table = information_criteria(pcs["singular_values"], pcs["total"], n_dates, n_assets)
    if n_factors is None:
        scores = table[criterion].to_numpy()
        k = int(np.argmin(scores[1:])) + 1
        selected_by = criterion
        if scores[0] < scores[k]:
            warnings.warn(
                f"{OWNER}: {criterion} is lowest with no factor at all; using k = {k}, the best k >= 1",
                DataWarning,
                stacklevel=2,
            )
        if k == k_max and k_max < limit:
            # the criterion was still falling at the edge of its range: the choice is the range's, not the data's
            warnings.warn(
                f"{OWNER}: {criterion} picked k = {k}, the top of its search range (max_factors = {k_max}); "
                f"the criterion may fall further: raise max_factors (up to {limit}) or set n_factors",
                DataWarning,
                stacklevel=2,
            )
    else:
        k = n_factors
        selected_by = "given"

    factors = [f"pc{j + 1}" for j in range(k)]
    loadings = pcs["loadings"][:, :k]
    scores_k = pcs["scores"][:, :k]
    residual = X - scores_k @ loadings.T
    residual[~observed] = np.nan
    dof = k + int(demean)
    enough = n_obs > dof
    keep = panel.columns[enough]
    dropped = pd.concat(
        [dropped, pd.Series(f"no more than {dof} observations (the degrees of freedom)", index=panel.columns[~enough], dtype=object)]
    ).rename("reason")
    if dropped_dates:
        warnings.warn(
            f"{OWNER}: dropped {len(dropped_dates)} dates with no return at all: "
            f"{list_labels([date_label(d) for d in dropped_dates])}",
            DataWarning,
            stacklevel=2,
        )
    warn_dropped(dropped, OWNER)
    if filled:
        gappy = panel.columns[(~observed).any(axis=0)]
        warnings.warn(
            f"{OWNER}: filled {filled} missing returns with the asset's mean (0 after demeaning) before the "
            f"decomposition, for assets: {list_labels(gappy)}",
            DataWarning,
            stacklevel=2,
        )

    factor_returns = pd.DataFrame(scores_k, index=panel.index, columns=factors)
    residuals = pd.DataFrame(residual, index=panel.index, columns=panel.columns)
    F = factor_covariance(factor_returns, covariance)
    d = specific_variance(residuals[keep], dof, covariance)
    stats = per_asset_fit(np.where(observed, values, np.nan), residual)
    asset_table = pd.DataFrame(stats, index=panel.columns).loc[keep]
    explained = pcs["singular_values"] ** 2 / (n_dates - 1)
    record = {
        "n_factors": n_factors,
        "max_factors": max_factors,
        "criterion": criterion,
        "demean": demean,
        "min_periods": min_periods,
        "periods_per_year": ppy,
        "covariance": settings,
        "specific_dof": dof,
    }
    extra = {
        "criterion": table,
        "criterion_used": criterion,
        "n_factors": k,
        "selected_by": selected_by,
        "max_factors_considered": k_max,
        "route": pcs["route"],
        "singular_values": pd.Series(pcs["singular_values"], index=[f"pc{j + 1}" for j in range(k_max)]),
        "explained_variance": pd.Series(explained[:k], index=factors),
        "explained_variance_ratio": pd.Series(pcs["singular_values"][:k] ** 2 / pcs["total"], index=factors),
        "filled_cells": filled,
        "dropped_dates": pd.Index(dropped_dates),
    }
    exposures = pd.DataFrame(loadings, index=panel.columns, columns=factors).loc[keep]
    return assemble_model(
        "statistical", exposures, F, d, (asset_table, residuals, dropped, factor_returns), record, extra,
        periods_per_year=ppy, factor_groups=dict.fromkeys(factors, "statistical")
    )
