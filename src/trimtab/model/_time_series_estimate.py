"""The regression passes of the time-series estimator, and the history of rolling exposures.

Array core (no labels except where the exposure history is assembled): factor returns X (T×K),
asset returns Y (T×N, NaN where not observed), date weights w (T,).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from trimtab.model._covariance import ewma_weights
from trimtab.model._regression import BatchedFit, batched_least_squares

#: Date variances v̂ₜ of the GLS step are floored at this fraction of their mean (a date whose
#: residuals are all zero would otherwise get an infinite weight).
DATE_VARIANCE_FLOOR = 1e-8


@dataclass(frozen=True, eq=False)
class Estimate:
    """The final regression pass and what went into it."""

    fit: BatchedFit
    weights: np.ndarray
    usable: np.ndarray
    date_variance: np.ndarray | None = None


def usable_columns(fit: BatchedFit) -> np.ndarray:
    """Columns with a full-rank design on their dates and returns that are not constant."""
    usable = fit.estimable.copy()
    if fit.total_sum_of_squares is not None:
        usable &= fit.total_sum_of_squares > 0
    return usable


def normalised_residual_variance(fit: BatchedFit, weights: np.ndarray, residuals: np.ndarray) -> np.ndarray:
    """σ̂ᵢ² = [Σₜ wₜ eᵢₜ² / Σₜ wₜ] · nᵢ/(nᵢ − p) over each column's observed dates (weights ``weights``)."""
    squares = np.square(residuals)
    np.copyto(squares, 0.0, where=np.isnan(squares))
    observed = ~np.isnan(residuals)
    n_obs = fit.n_observations
    with np.errstate(divide="ignore", invalid="ignore"):
        return (weights @ squares) / (weights @ observed) * n_obs / (n_obs - fit.n_coefficients)


def date_variance(residuals: np.ndarray, variance: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """v̂ₜ = mean over usable assets observed on date t of eᵢₜ² / σ̂ᵢ² (1 on dates with none)."""
    standardised = np.square(residuals[:, usable]) / variance[usable]
    observed = ~np.isnan(standardised)
    np.copyto(standardised, 0.0, where=~observed)
    counts = observed.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        v = standardised.sum(axis=1) / counts
    v[counts == 0] = 1.0
    return np.maximum(v, DATE_VARIANCE_FLOOR * float(v[counts > 0].mean()))


def estimate(
    factors: np.ndarray,
    returns: np.ndarray,
    half_life: float | None,
    *,
    gls: bool,
    coefficients_only: bool = False,
) -> Estimate:
    """OLS (or exponentially weighted LS), then optionally the date-weighted GLS second pass.

    First pass weights wₜ = 0.5^((T−1−t)/h) (all equal without a half-life). With ``gls`` the
    second pass uses wₜ / v̂ₜ, v̂ₜ from :func:`date_variance` of the first-pass residuals.
    """
    weights = ewma_weights(factors.shape[0], half_life)
    first = batched_least_squares(factors, returns, weights, coefficients_only=coefficients_only and not gls)
    if not gls:
        return Estimate(first, weights, usable_columns(first))
    usable = usable_columns(first)
    residuals = first.residuals
    assert residuals is not None  # gls forces residuals on the first pass
    variance = normalised_residual_variance(first, weights, residuals)
    v = date_variance(residuals, variance, usable)
    del first, residuals
    gls_weights = weights / v
    second = batched_least_squares(factors, returns, gls_weights, coefficients_only=coefficients_only)
    return Estimate(second, gls_weights, usable & usable_columns(second), v)


def exposure_history(
    dates: pd.Index,
    factors: np.ndarray,
    returns: np.ndarray,
    assets: pd.Index,
    factor_names: pd.Index,
    *,
    rolling_window: int | None,
    half_life: float | None,
    step: int,
    min_periods: int,
    gls: bool,
) -> pd.DataFrame:
    """Betas re-estimated at every ``step``-th date, ending at the last one: a long table.

    At evaluation date τ the regressions use dates τ−W+1…τ (``rolling_window`` W, weights
    0.5^((τ−t)/h) if ``half_life`` is given) or, without a window, every date up to τ with weights
    0.5^((τ−t)/h). Assets with fewer than ``min_periods`` returns in that span, or a rank-deficient
    design there, have no row for τ.
    """
    n_dates = len(dates)
    first_end = (rolling_window if rolling_window is not None else min_periods) - 1
    ends = np.arange(n_dates - 1, first_end - 1, -step)[::-1]
    observed = ~np.isnan(returns)
    blocks: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
    for end in ends:
        start = 0 if rolling_window is None else end - rolling_window + 1
        rows = slice(start, end + 1)
        columns = np.flatnonzero(observed[rows].sum(axis=0) >= min_periods)
        if len(columns) == 0:
            continue
        result = estimate(factors[rows], returns[rows, columns], half_life, gls=gls, coefficients_only=True)
        keep = result.fit.estimable
        betas = result.fit.coefficients[1:, keep]  # (K, n) without the intercept
        blocks.append((np.full(betas.size, end), np.repeat(columns[keep], betas.shape[0]), betas.T.ravel()))
    n_factors = len(factor_names)
    if not blocks:
        return pd.DataFrame(
            {"date": dates[:0], "asset": pd.Categorical([], categories=assets),
             "factor": pd.Categorical([], categories=factor_names), "exposure": np.empty(0)}
        )
    date_pos = np.concatenate([b[0] for b in blocks])
    asset_pos = np.concatenate([b[1] for b in blocks])
    values = np.concatenate([b[2] for b in blocks])
    factor_pos = np.tile(np.arange(n_factors), len(values) // n_factors)
    return pd.DataFrame(
        {
            "date": dates[date_pos],
            "asset": pd.Categorical.from_codes(asset_pos, categories=assets),
            "factor": pd.Categorical.from_codes(factor_pos, categories=factor_names),
            "exposure": values,
        }
    )
