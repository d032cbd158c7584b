"""Specific (residual) variances d of the factor risk model, with EWMA weights, shrinkage and a floor.

Every estimator calls :func:`specific_variance` on its residuals with its own degrees of
freedom; with no settings it returns the textbook SSR/(T − dof) per asset.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError
from trimtab.model._arguments import is_number
from trimtab.model._covariance_settings import CovarianceSettings, settings_or_default
from trimtab.model._panel import check_date_frame

__all__ = ["specific_variance"]


def _dof_vector(dof: Any, assets: pd.Index, owner: str) -> np.ndarray:
    if isinstance(dof, pd.Series):
        missing = assets.difference(dof.index, sort=False)
        if len(missing):
            raise InputError(f"{owner}: dof has no value for assets: {list_labels(missing)}")
        values = dof.reindex(assets)
        if not pd.api.types.is_numeric_dtype(values):
            raise InputError(f"{owner}: dof must be numbers, got dtype {values.dtype}")
        arr = values.to_numpy(dtype=np.float64)
        bad = ~np.isfinite(arr) | (arr < 0)
        if bad.any():
            raise InputError(f"{owner}: dof must be finite and >= 0; bad for assets: {list_labels(assets[bad])}")
        return arr
    if not is_number(dof) or not np.isfinite(dof) or dof < 0:
        raise InputError(f"{owner}: dof must be a number >= 0 or a Series by asset, got {dof!r}")
    return np.full(len(assets), float(dof))


def _group_means(values: np.ndarray, assets: pd.Index, groups: Any, owner: str) -> np.ndarray:
    """Mean of ``values`` over each asset's group (or over all assets when ``groups`` is None)."""
    if groups is None:
        return np.full(len(values), values.mean())
    labels = pd.Series(groups) if not isinstance(groups, pd.Series) else groups
    missing = assets.difference(labels.index, sort=False)
    if len(missing):
        raise InputError(f"{owner}: groups has no group for assets: {list_labels(missing)}")
    aligned = labels.reindex(assets)
    if aligned.isna().any():
        raise InputError(f"{owner}: groups has a missing group for assets: {list_labels(assets[aligned.isna().to_numpy()])}")
    means = pd.Series(values, index=assets).groupby(aligned.to_numpy()).transform("mean")
    return means.to_numpy(dtype=np.float64)


def specific_variance(
    residuals: pd.DataFrame,
    dof: pd.Series | int = 0,
    settings: CovarianceSettings | None = None,
    *,
    groups: pd.Series | Mapping[Any, Any] | None = None,
) -> pd.Series:
    """Specific (residual) variance per asset, with the EWMA, shrinkage and floor in ``settings``.

    Parameters
    ----------
    residuals : pandas.DataFrame
        Dates × assets, dates increasing; NaN means the asset was not observed that date.
    dof : int or pandas.Series, default 0
        Degrees of freedom used per asset (a Series by asset, or one number for all); a
        time-series OLS with K factors and an intercept passes K + 1.
    settings : CovarianceSettings, optional
        Uses ``volatility_half_life``, ``specific_shrinkage``, ``specific_floor`` and
        ``specific_floor_mode``.
    groups : pandas.Series or Mapping, optional
        Asset → group label; the shrinkage target is then the mean specific variance of the
        asset's group instead of all assets.

    Returns
    -------
    pandas.Series
        Specific variances dᵢ ≥ 0 per period, indexed by asset (name ``specific_variance``).

    Raises
    ------
    InputError
        On non-numeric columns, infinite values, duplicate or unsorted dates, duplicate assets, a
        bad ``dof``, an asset with no more observations than degrees of freedom, or assets missing
        from ``groups``.
    ScenarioError
        If ``settings`` is not a CovarianceSettings.

    Notes
    -----
    With Tᵢ observed dates of asset i and EWMA weights wₜ (:func:`ewma_weights` over all dates;
    equal without a half-life), residuals not demeaned (they come from fits with an intercept):

        dᵢ = [Σₜ wₜ eᵢₜ² / Σₜ wₜ] × Tᵢ/(Tᵢ − dofᵢ)      (sums over observed dates)

    which is SSRᵢ/(Tᵢ − dofᵢ) with equal weights. Then shrinkage with intensity κ toward the
    group mean d̄_g, dᵢ ← (1 − κ) dᵢ + κ d̄_g(i), and the floor dᵢ ← max(dᵢ, floor) (absolute) or
    max(dᵢ, floor × median(d)) (relative). Shrinking specific variances toward a cross-sectional
    mean is common practice (no source).

    Examples
    --------
    >>> import pandas as pd
    >>> e = pd.DataFrame({"AAA": [0.01, -0.02, 0.01], "BBB": [0.02, None, -0.02]})
    >>> specific_variance(e, dof=1).round(6).tolist()
    [0.0003, 0.0008]
    """
    owner = "specific_variance"
    check_date_frame(residuals, owner, "assets", allow_nan=True)
    config = settings_or_default(settings, owner)
    assets = residuals.columns
    if len(assets) == 0:
        raise InputError(f"{owner}: no asset columns")
    dof_values = _dof_vector(dof, assets, owner)
    values = residuals.to_numpy(dtype=np.float64)
    observed = np.isfinite(values)
    n_obs = observed.sum(axis=0).astype(np.float64)
    short = n_obs <= dof_values
    if short.any():
        raise InputError(
            f"{owner}: assets with no more observations than degrees of freedom: {list_labels(assets[short])}; "
            "need more dates than dof"
        )
    filled = np.where(observed, values, 0.0)
    if config.volatility_half_life is None:
        mean_square = (filled * filled).sum(axis=0) / n_obs
    else:
        # Weights relative to each asset's newest observation (the ratio is scale-free), so an asset
        # that stopped long ago does not underflow to 0/0: 0.5^((last_i − t)/h) ≤ 1, equal to 1 at last_i.
        position = np.arange(len(residuals.index), dtype=np.float64)[:, None]
        last = (len(residuals.index) - 1 - np.argmax(observed[::-1], axis=0)).astype(np.float64)
        relative = np.where(observed, np.exp2(np.minimum(position - last, 0.0) / config.volatility_half_life), 0.0)
        mean_square = (relative * filled * filled).sum(axis=0) / relative.sum(axis=0)
    variance = mean_square * n_obs / (n_obs - dof_values)
    if config.specific_shrinkage > 0:
        target = _group_means(variance, assets, groups, owner)
        variance = (1.0 - config.specific_shrinkage) * variance + config.specific_shrinkage * target
    elif groups is not None:
        _group_means(variance, assets, groups, owner)
    if config.specific_floor is not None:
        level = config.specific_floor
        if config.specific_floor_mode == "relative":
            level = config.specific_floor * float(np.median(variance))
        variance = np.maximum(variance, level)
    return pd.Series(variance, index=assets, name="specific_variance")
