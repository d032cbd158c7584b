"""The time-series factor model: regress each asset's returns on observed factor returns."""

from __future__ import annotations

import warnings
from collections.abc import Mapping
from dataclasses import asdict
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import DataWarning, InputError
from trimtab.model._arguments import is_positive_number, is_whole_number
from trimtab.model._covariance import ewma_weights, factor_covariance
from trimtab.model._covariance_settings import CovarianceSettings
from trimtab.model._factor_model import FactorModel
from trimtab.model._panel import assemble_model, infer_periods_per_year
from trimtab.model._specific_variance import specific_variance
from trimtab.model._time_series_estimate import estimate, exposure_history, normalised_residual_variance
from trimtab.model._time_series_input import OWNER, check_factor_rank, validated_returns


def fit_time_series(
    asset_returns: pd.DataFrame,
    factor_returns: pd.DataFrame,
    *,
    half_life: float | None = None,
    min_periods: int | None = None,
    gls: bool = False,
    covariance: CovarianceSettings | Mapping[str, Any] | None = None,
    rolling_window: int | None = None,
    exposure_half_life: float | None = None,
    exposure_step: int | None = None,
    periods_per_year: float | None = None,
    factor_groups: Mapping[str, str] | None = None,
) -> FactorModel:
    """Fit a factor model by regressing each asset's returns on observed (traded) factor returns.

    Parameters
    ----------
    asset_returns : pandas.DataFrame
        Dates × assets, per-period returns (excess of the risk-free rate when the factors are
        excess returns), dates increasing. NaN marks a date an asset has no return (ragged
        histories: late listings, delistings, gaps).
    factor_returns : pandas.DataFrame
        Dates × factors. Must have a finite value for every factor on every date on which any asset
        has a return; its other dates are ignored.
    half_life : float, optional
        Weight the regressions by wₜ = 0.5^((T−1−t)/h), t = 0…T−1 over the estimation dates (the
        newest date has the largest weight). None: ordinary least squares.
    min_periods : int, optional
        Assets with fewer returns in the window are dropped (and reported). Default
        max(24, 3(K+1)); at least K+2.
    gls : bool, default False
        Add a second, date-weighted pass (a feasible GLS step, see Notes).
    covariance : CovarianceSettings or Mapping, optional
        Refinements of the factor covariance F and specific variances d (a mapping is read with
        ``CovarianceSettings.from_mapping``). Default: the sample estimates, EWMA-weighted with
        ``half_life`` when one is given.
    rolling_window : int, optional
        Re-estimate the exposures on trailing windows of this many dates, every ``exposure_step``
        dates; the model is the fit on the last window (see Notes).
    exposure_half_life : float, optional
        Re-estimate the exposures at every ``exposure_step``-th date from all earlier dates with
        weights 0.5^((τ−t)/h); the model is the fit at the last date (same as ``half_life=h``).
    exposure_step : int, optional
        Dates between re-estimations of the exposure history; default about one month
        (round(periods_per_year / 12), at least 1).
    periods_per_year : float, optional
        Inferred from the median date spacing when None (daily 252, weekly 52, monthly 12,
        quarterly 4, annual 1).
    factor_groups : Mapping, optional
        Factor → group label, passed to the model.

    Returns
    -------
    FactorModel
        Exposures B (the slopes), factor covariance F, specific variances d, all per period, with a
        :class:`FitReport` (``method="time_series"``) and provenance.

    Raises
    ------
    InputError
        On bad input (naming the table, column and date): empty tables, non-numeric columns,
        duplicate or unsorted dates, duplicate assets or factors, infinite asset returns, missing or
        non-finite factor returns on a date with asset returns, no dates in common, fewer dates than
        regressors, constant or collinear factors, invalid parameters, or every asset dropped.

    Warns
    -----
    DataWarning
        When assets are dropped (too few returns, constant returns, collinear factors on their own
        dates); the reasons are in ``fit_report.dropped``.

    Notes
    -----
    For each asset i over the dates Tᵢ where it has a return,

        rᵢₜ = αᵢ + βᵢᵀ fₜ + eᵢₜ,   (α̂ᵢ, β̂ᵢ) = argmin Σ_{t∈Tᵢ} wₜ (rᵢₜ − αᵢ − βᵢᵀ fₜ)².

    With equal weights this is OLS with an intercept; the model's exposures are β̂ᵢ. The regression
    statistics are the weighted least-squares ones: t-statistics θ̂ⱼ / √(s² [(XᵀWX)⁻¹]ⱼⱼ) with
    s² = Σ wₜeₜ²/(nᵢ − K − 1), R² = 1 − Σ wₜeₜ² / Σ wₜ(rₜ − r̄_w)². The reported residual
    volatility is √σ̂ᵢ² with

        σ̂ᵢ² = [Σ wₜ eᵢₜ² / Σ wₜ] · nᵢ/(nᵢ − K − 1)      (SSRᵢ/(nᵢ − K − 1) without a half-life).

    The model's d and F come from :func:`trimtab.model.specific_variance` (residuals, dof K+1) and
    :func:`trimtab.model.factor_covariance` (the factor returns over the window) with ``covariance``;
    by default that is σ̂ᵢ² above and the sample covariance (divisor T−1), or with ``half_life`` the
    EWMA covariance with the same half-life (bias factor 1/(1 − Σw̃²), w̃ normalised weights).

    GLS step: the errors are taken as eᵢₜ ~ (0, σᵢ² vₜ), a date-level variance multiplier vₜ
    shared by all assets (turbulent dates). From the first pass,
    v̂ₜ = mean over assets observed on t of eᵢₜ²/σ̂ᵢ², floored at 10⁻⁸ of its mean (1 on a date
    where no kept asset has a return: its weight does not matter), and the second
    pass re-weights the dates by wₜ/v̂ₜ: a feasible weighted least squares that down-weights
    turbulent dates. Coefficients, t-statistics and R² are those of the second pass; d and the
    reported residual volatility use its residuals with the ``half_life`` weights only, so they
    stay average per-period variances. It needs a broad cross-section to estimate vₜ.

    Rolling exposures: at every ``exposure_step``-th date τ (always including the last) the betas
    are re-estimated on that window; ``fit_report.exposure_history`` holds them as a long table
    (date, asset, factor, exposure). The model is the estimate at the last date: with
    ``rolling_window`` W the regressions, residuals, d and F use the last W dates only. Cost grows
    with the number of re-estimations times the window length.

    ``fit_report.extra["factor_means"]`` holds the (weighted) mean factor returns over the window:
    the risk premia of traded factors.

    References
    ----------
    Black, F., Jensen, M. C. and Scholes, M. (1972). The capital asset pricing model: some empirical
    tests. In Jensen (ed.), Studies in the Theory of Capital Markets, 79–121 (time-series
    regressions on traded factors).
    Greene, W. H. (2012). Econometric Analysis, 7th ed., ch. 9 (weighted and feasible generalised
    least squares).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> rng = np.random.default_rng(0)
    >>> dates = pd.date_range("2020-01-31", periods=60, freq="ME")
    >>> f = pd.DataFrame({"market": rng.normal(0.005, 0.04, 60)}, index=dates)
    >>> r = pd.DataFrame({"AAA": 1.2 * f["market"] + rng.normal(0, 0.02, 60)}, index=dates)
    >>> model = fit_time_series(r, f)
    >>> model.periods_per_year, model.n_assets
    (12.0, 1)
    """
    returns, factors = validated_returns(asset_returns, factor_returns)
    n_factors = factors.shape[1]
    settings = _checked_settings(
        n_factors,
        len(returns.index),
        half_life=half_life,
        min_periods=min_periods,
        gls=gls,
        covariance=covariance,
        rolling_window=rolling_window,
        exposure_half_life=exposure_half_life,
        exposure_step=exposure_step,
        periods_per_year=periods_per_year,
    )
    settings["periods_per_year"] = infer_periods_per_year(returns.index, settings["periods_per_year"], OWNER)
    if settings["exposure_step"] is None:
        settings["exposure_step"] = max(1, int(round(settings["periods_per_year"] / 12)))
    regression_half_life = half_life if half_life is not None else exposure_half_life
    if covariance is None:
        cov_settings = CovarianceSettings(volatility_half_life=regression_half_life)
    elif isinstance(covariance, CovarianceSettings):
        cov_settings = covariance
    else:
        cov_settings = CovarianceSettings.from_mapping(covariance, owner=f"{OWNER}: covariance")
    settings["covariance"] = asdict(cov_settings)
    min_obs = settings["min_periods"]

    full_dates = returns.index
    full_factors = factors.to_numpy()
    window = slice(len(full_dates) - rolling_window, None) if rolling_window is not None else slice(None)
    dates = full_dates[window]
    X = full_factors[window]
    check_factor_rank(X, factors.columns, len(dates))

    Y_all = returns.to_numpy()[window]
    n_obs_all = (~np.isnan(Y_all)).sum(axis=0)
    reasons: dict[Any, str] = {}
    span = f"the last {rolling_window} dates" if rolling_window is not None else "the window"
    for pos in np.flatnonzero(n_obs_all < min_obs):
        reasons[returns.columns[pos]] = f"{n_obs_all[pos]} returns in {span}, fewer than min_periods={min_obs}"
    constant = np.fmax.reduce(Y_all, axis=0) == np.fmin.reduce(Y_all, axis=0)
    for pos in np.flatnonzero(constant & (n_obs_all >= min_obs)):
        reasons[returns.columns[pos]] = "constant returns (zero variance) on its dates"
    candidates = np.flatnonzero((n_obs_all >= min_obs) & ~constant)
    Y = Y_all if len(candidates) == Y_all.shape[1] else Y_all[:, candidates]
    del Y_all

    result = estimate(X, Y, regression_half_life, gls=gls) if len(candidates) else None
    if result is not None:
        for pos in np.flatnonzero(~result.usable):
            asset = returns.columns[candidates[pos]]
            if not result.fit.estimable[pos]:
                reasons[asset] = f"factors collinear on its {result.fit.n_observations[pos]} dates"
            else:
                reasons[asset] = "constant returns (zero variance) on its dates"
    dropped = pd.Series(reasons, dtype=object, name="reason")
    dropped.index.name = "asset"
    if result is None or not result.usable.any():
        raise InputError(
            f"{OWNER}: every one of the {returns.shape[1]} assets was dropped: "
            f"{list_labels(f'{a} ({r})' for a, r in reasons.items())}"
        )
    if len(dropped):
        warnings.warn(
            f"{OWNER}: dropped {len(dropped)} of {returns.shape[1]} assets "
            f"(reasons in fit_report.dropped): {list_labels(dropped.index)}",
            DataWarning,
            stacklevel=2,
        )

    keep = np.flatnonzero(result.usable)
    kept_assets = returns.columns[candidates[keep]]
    fit = result.fit
    assert fit.residuals is not None  # estimate() keeps residuals unless coefficients_only=True
    residual_values = fit.residuals if len(keep) == fit.residuals.shape[1] else fit.residuals[:, keep]
    residuals = pd.DataFrame(residual_values, index=dates, columns=kept_assets, copy=False)
    coefficients = fit.coefficients[:, keep]
    exposures = pd.DataFrame(coefficients[1:].T, index=kept_assets, columns=factors.columns)
    window_factors = factors.iloc[window]
    dof = n_factors + 1
    d = specific_variance(residuals, dof, cov_settings)
    F = factor_covariance(window_factors, cov_settings)

    base_weights = ewma_weights(len(dates), regression_half_life)
    residual_variance = normalised_residual_variance(fit, base_weights, residual_values) if gls else None
    table = _asset_table(fit, keep, kept_assets, factors.columns, residual_variance, base_weights)

    history = None
    if rolling_window is not None or exposure_half_life is not None:
        history = exposure_history(
            full_dates,
            full_factors,
            returns.to_numpy()[:, candidates[keep]],
            kept_assets,
            factors.columns,
            rolling_window=rolling_window,
            half_life=regression_half_life,
            step=settings["exposure_step"],
            min_periods=min_obs,
            gls=gls,
        )

    normalised = base_weights / base_weights.sum()
    extra: dict[str, Any] = {
        "factor_means": pd.Series(normalised @ window_factors.to_numpy(), index=factors.columns, name="mean"),
        "date_weights": pd.Series(result.weights, index=dates, name="weight"),
    }
    if result.date_variance is not None:
        extra["date_variance"] = pd.Series(result.date_variance, index=dates, name="date_variance")
    return assemble_model(
        "time_series",
        exposures,
        F,
        d,
        (table, residuals, dropped, window_factors),
        settings,
        extra,
        periods_per_year=settings["periods_per_year"],
        factor_groups=factor_groups,
        exposure_history=history,
        estimator="fit_time_series",
        provenance={"n_dropped": len(dropped)},
    )


def _asset_table(
    fit: Any,
    keep: np.ndarray,
    assets: pd.Index,
    factors: pd.Index,
    residual_variance: np.ndarray | None,
    weights: np.ndarray,
) -> pd.DataFrame:
    """Per-asset statistics: intercept, R², residual volatility, n, t-statistics."""
    if residual_variance is None:
        # σ̂² = [Σ wₜeₜ² / Σ wₜ] · n/(n − p), with the regression's own weights
        n = fit.n_observations
        residual_variance = fit.ssr / fit.weight_sum * n / (n - fit.n_coefficients)
    t_values = fit.t_values[:, keep]
    columns: dict[str, Any] = {
        "intercept": fit.coefficients[0, keep],
        "r_squared": fit.r_squared[keep],
        "residual_volatility": np.sqrt(residual_variance[keep]),
        "n_observations": fit.n_observations[keep].astype(np.int64),
        "t_intercept": t_values[0],
    }
    for k, name in enumerate(factors):
        columns[f"t_{name}"] = t_values[k + 1]
    return pd.DataFrame(columns, index=assets)


def _checked_settings(n_factors: int, n_dates: int, **given: Any) -> dict[str, Any]:
    """Validate the keyword parameters; return them as a settings dict with min_periods resolved."""
    for name in ("half_life", "exposure_half_life", "periods_per_year"):
        value = given[name]
        if value is not None and not is_positive_number(value):
            raise InputError(f"{OWNER}: {name} must be a positive number of periods or None, got {value!r}")
    if not isinstance(given["gls"], (bool, np.bool_)):
        raise InputError(f"{OWNER}: gls must be True or False, got {given['gls']!r}")
    covariance = given["covariance"]
    if covariance is not None and not isinstance(covariance, (CovarianceSettings, Mapping)):
        raise InputError(
            f"{OWNER}: covariance must be a CovarianceSettings, a mapping of its fields or None, "
            f"got {type(covariance).__name__}"
        )
    floor = n_factors + 2
    min_periods = given["min_periods"]
    if min_periods is None:
        min_periods = max(24, 3 * (n_factors + 1))
    elif not is_whole_number(min_periods) or min_periods < floor:
        raise InputError(
            f"{OWNER}: min_periods must be a whole number >= {floor} (K + 2 for {n_factors} factors), got {min_periods!r}"
        )
    rolling_window = given["rolling_window"]
    if rolling_window is not None:
        if not is_whole_number(rolling_window) or rolling_window < min_periods:
            raise InputError(
                f"{OWNER}: rolling_window must be a whole number of dates >= min_periods={min_periods}, "
                f"got {rolling_window!r}"
            )
        if rolling_window > n_dates:
            raise InputError(f"{OWNER}: rolling_window={rolling_window} exceeds the {n_dates} dates with returns")
    if given["exposure_half_life"] is not None and (rolling_window is not None or given["half_life"] is not None):
        raise InputError(
            f"{OWNER}: exposure_half_life cannot be combined with rolling_window or half_life; "
            "use rolling_window with half_life for weighted trailing windows"
        )
    step = given["exposure_step"]
    if step is not None and (not is_whole_number(step) or step < 1):
        raise InputError(f"{OWNER}: exposure_step must be a whole number >= 1, got {step!r}")
    settings = {k: v for k, v in given.items() if k != "covariance"}
    settings["gls"] = bool(given["gls"])
    settings["min_periods"] = int(min_periods)
    if settings["periods_per_year"] is not None:
        settings["periods_per_year"] = float(settings["periods_per_year"])
    return settings
