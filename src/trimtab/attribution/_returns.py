"""Ex-post return attribution: a realised active return split by factor and linked over periods.

Per period t, with active weights aₜ = wₜ − bₜ held over the period, asset returns rₜ and factor
returns fₜ, the active return (w − b)ᵀr splits exactly into

    Σₖ xₜₖ·fₜₖ            factor k: active exposure xₜ = Bᵀaₜ times the factor's return
    aₜᵀα                   intercept (time-series models: the assets' fitted intercepts α)
    aₜᵀrₜ − xₜᵀfₜ − aₜᵀα   specific (stock picking, and whatever the factors did not explain)

and the per-period components are linked over the span (:mod:`trimtab.attribution._linking`).
Pure numerics: no files, no printing.
"""

from __future__ import annotations

import warnings
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import check_finite_frame, check_unique, list_labels
from trimtab.attribution._linking import check_linking, link
from trimtab.attribution._returns_result import ReturnAttribution
from trimtab.errors import DataWarning, InputError

if TYPE_CHECKING:
    from trimtab.model import FactorModel

OWNER = "attribute_returns"


def attribute_returns(
    model: FactorModel,
    weights: pd.DataFrame | pd.Series,
    asset_returns: pd.DataFrame,
    factor_returns: pd.DataFrame | None = None,
    *,
    benchmark: pd.DataFrame | pd.Series | None = None,
    linking: str = "carino",
) -> ReturnAttribution:
    """Split a realised active return into factor contributions and a remainder, period by period, and link them.

    Parameters
    ----------
    model : FactorModel
        Gives the exposures B (and, for a time-series fit, the asset intercepts α) and the factor
        covariance for the ex-ante risk shares.
    weights : pandas.DataFrame or pandas.Series
        Dates × assets: the weights held at the start of each period of ``asset_returns`` (a row for
        every date of it); or a Series held fixed.
    asset_returns : pandas.DataFrame
        Dates × assets: each period's return (0.01 is 1%). Columns of assets the model lacks are
        ignored; a missing return of a held asset counts as 0 (with a warning).
    factor_returns : pandas.DataFrame, optional
        Dates × factors over the same dates; default the model's own history
        (:attr:`FactorModel.factor_history`).
    benchmark : pandas.DataFrame or pandas.Series, optional
        Benchmark weights, as ``weights``; without one the whole return is attributed.
    linking : {"carino", "sum"}, default "carino"
        How periods are linked: Carino's (1999) logarithmic factors, or plain sums with the
        difference to the compounded active return shown as ``compounding``.

    Returns
    -------
    ReturnAttribution

    Raises
    ------
    InputError
        Unknown assets, missing dates or factors, non-finite numbers, a period return of −100%.

    Notes
    -----
    Per period: factor k contributes xₜₖfₜₖ with xₜ = Bᵀ(wₜ − bₜ); ``intercept`` is (wₜ − bₜ)ᵀα;
    ``specific`` is the rest, so the components sum to (wₜ − bₜ)ᵀrₜ exactly. Linked with Carino:
    component j gives Σₜ(kₜ/k)·cₜⱼ and the linked components sum to ∏(1 + Rₜ) − ∏(1 + Rbₜ).
    The ex-ante share of factor k in active risk over the span is Σₜxₜₖ(F·xₜ)ₖ / Σₜσₜ², with
    σₜ² = xₜᵀF·xₜ + Σᵢdᵢaₜᵢ².

    References
    ----------
    Carino, D. (1999). Combining attribution effects over time. Journal of Performance
    Measurement 3(4), 5–14.

    Examples
    --------
    >>> result = attribute_returns(model, weights, returns, benchmark=bench)  # doctest: +SKIP
    >>> result.linked.drop("total").sum() == result.linked["total"]  # doctest: +SKIP
    """
    check_linking(linking)
    returns = _dated(asset_returns, "asset_returns", allow_nan=True)
    dates = returns.index
    assets = model.assets
    W = _weights(model, weights, dates, "weights")
    Bw = _weights(model, benchmark, dates, "benchmark") if benchmark is not None else np.zeros_like(W)
    R = returns.reindex(columns=assets).to_numpy(dtype=np.float64)
    held = (W != 0) | (Bw != 0)
    gaps = np.isnan(R) & held
    if gaps.any():
        names = assets[gaps.any(axis=0)]
        warnings.warn(f"{OWNER}: asset_returns has no return for held assets on {int(gaps.sum())} asset-periods "
                      f"(counted as 0): {list_labels(names)}", DataWarning, stacklevel=2)
    R = np.nan_to_num(R, nan=0.0)
    history = factor_returns if factor_returns is not None else model.factor_history
    if history is None:
        raise InputError(f"{OWNER}: the model carries no factor-return history; pass factor_returns (dates × factors)")
    fr = _dated(history, "factor_returns", allow_nan=False, columns=list(model.factors), dates=dates)
    Fr = fr.to_numpy(dtype=np.float64)
    B, F, d = model._B, model._F, model._d
    A = W - Bw
    X = A @ B
    factors = pd.Index(model.factors, name="component")
    index = pd.Index(dates, name="date")
    components = pd.DataFrame(X * Fr, index=index, columns=factors)
    asset_total = A * R
    active = asset_total.sum(axis=1)
    remainder = ["specific"]
    alpha = _intercepts(model)
    if alpha is not None:
        components["intercept"] = A @ alpha
        remainder.insert(0, "intercept")
    components["specific"] = active - components.sum(axis=1).to_numpy()
    book = pd.Series((W * R).sum(axis=1), index=index, name="book")
    bench = pd.Series((Bw * R).sum(axis=1), index=index, name="benchmark")
    linked, scale = link(components, book, bench, linking)
    by_period = components.copy()
    by_period["total"] = active
    k = scale.to_numpy()[:, None]
    asset_factor = A * (Fr @ B.T)
    linked_total = (k * asset_total).sum(axis=0)
    linked_factor = (k * asset_factor).sum(axis=0)
    per_asset = pd.DataFrame({
        "mean_active_weight": A.mean(axis=0),
        "factor": linked_factor,
        "specific": linked_total - linked_factor,
        "total": linked_total,
    }, index=pd.Index(assets, name="asset"))
    per_asset = per_asset[held.any(axis=0)]
    FX = X @ F
    factor_var = (X * FX).sum(axis=0)
    specific_var = float(((A * A) @ d).sum())
    return ReturnAttribution(
        by_period=by_period,
        returns=pd.DataFrame({"book": book, "benchmark": bench, "active": book - bench}),
        linked=linked,
        link_factors=scale,
        exposures=pd.DataFrame(X, index=index, columns=pd.Index(model.factors, name="factor")),
        risk_share=_shares(pd.Series(factor_var, index=model.factors), specific_var),
        asset_contributions=per_asset,
        linking=linking,
        remainder=tuple(remainder),
    )


def attribute_backtest_returns(
    result: Any,
    factor_returns: pd.DataFrame,
    *,
    scenario: str | None = None,
    linking: str = "carino",
) -> ReturnAttribution:
    """Attribute a walk-forward backtest's realised active return by factor, from its stored history.

    Parameters
    ----------
    result : BacktestResult
        As :func:`trimtab.backtest` returns it (or any object with its ``history``, ``exposures`` and
        ``risk_contributions`` tables, indexed by scenario and date).
    factor_returns : pandas.DataFrame
        Dates × factors, the per-row factor returns of the backtest's span (the time-series fit's
        factor returns).
    scenario : str, optional
        Which scenario path (required when the backtest ran several).
    linking : {"carino", "sum"}, default "carino"

    Returns
    -------
    ReturnAttribution
        One period per holding period. The remainder is ``specific``: the realised active return
        (after drift within the period, before costs) minus the factor part, so it also holds the
        assets' intercepts and the compounding within a holding period. No asset-level table.

    Notes
    -----
    Holding period t (the rows after rebalance date t up to the next) has active exposure xₜ (the
    backtest's ``exposures``, from the model fitted at t) and factor move Σ_{s∈t} f_s; the risk share
    of factor k weighs each period's Euler contribution cₜₖ to the annualised forecast TE σₜ by its
    length hₜ: Σₜhₜcₜₖσₜ / Σₜhₜσₜ².
    """
    check_linking(linking)
    history, exposures, contributions = (_scenario_part(result, name, scenario) for name in ("history", "exposures", "risk_contributions"))
    usable = history["realised_active"].notna() & (history["n_periods"] > 0)
    history = history[usable]
    if history.empty:
        raise InputError(f"{OWNER}: the backtest has no holding period with a realised return")
    factors = list(exposures.columns)
    fr = _dated(factor_returns, "factor_returns", allow_nan=False, columns=factors)
    moves = []
    for date, row in history.iterrows():
        start = int(fr.index.searchsorted(date, side="right"))
        n = int(row["n_periods"])
        if start + n > len(fr.index):
            raise InputError(f"{OWNER}: factor_returns ends before the holding period after {_day(date)} ({n} rows)")
        moves.append(fr.iloc[start : start + n].sum(axis=0).to_numpy())
    index = pd.Index(history.index, name="date")
    X = exposures.loc[history.index, factors].to_numpy(dtype=np.float64)
    components = pd.DataFrame(X * np.array(moves), index=index, columns=pd.Index(factors, name="component"))
    active = history["realised_active"].to_numpy(dtype=np.float64)
    components["specific"] = active - components.sum(axis=1).to_numpy()
    book = pd.Series(history["book_return"].to_numpy(dtype=np.float64), index=index, name="book")
    bench = pd.Series(history["benchmark_return"].to_numpy(dtype=np.float64), index=index, name="benchmark")
    linked, scale = link(components, book, bench, linking)
    by_period = components.copy()
    by_period["total"] = active
    h = history["n_periods"].to_numpy(dtype=np.float64)
    sigma = history["forecast_te"].to_numpy(dtype=np.float64)
    parts = contributions.loc[history.index]
    weighted = parts.mul(h * sigma, axis=0).sum(axis=0)
    total_var = float((h * sigma * sigma).sum())
    share = weighted / total_var if total_var > 0 else weighted * np.nan
    return ReturnAttribution(
        by_period=by_period,
        returns=pd.DataFrame({"book": book, "benchmark": bench, "active": book - bench}),
        linked=linked,
        link_factors=scale,
        exposures=pd.DataFrame(X, index=index, columns=pd.Index(factors, name="factor")),
        risk_share=share.rename("risk_share"),
        asset_contributions=None,
        linking=linking,
        remainder=("specific",),
    )


def _scenario_part(result: Any, name: str, scenario: str | None) -> pd.DataFrame:
    table = getattr(result, name, None)
    if not isinstance(table, pd.DataFrame):
        raise InputError(f"{OWNER}: expected a backtest result with a {name} table")
    if isinstance(table.index, pd.MultiIndex):
        names = list(dict.fromkeys(table.index.get_level_values(0)))
        if scenario is None:
            if len(names) != 1:
                raise InputError(f"{OWNER}: the backtest ran {len(names)} scenarios; name one of {list_labels(names)}")
            scenario = names[0]
        if scenario not in names:
            raise InputError(f"{OWNER}: scenario {scenario!r} is not in the backtest; it ran {list_labels(names)}")
        table = table.xs(scenario, level=0)
    return table


def _shares(factor_var: pd.Series, specific_var: float) -> pd.Series:
    total = float(factor_var.sum()) + specific_var
    out = pd.concat([factor_var, pd.Series({"specific": specific_var})])
    return (out / total if total > 0 else out * np.nan).rename("risk_share")


def _intercepts(model: FactorModel) -> np.ndarray | None:
    """The assets' fitted intercepts (per period) of a time-series fit, else None."""
    report = model.fit_report
    if report is None or report.method != "time_series" or "intercept" not in report.assets.columns:
        return None
    values = report.assets["intercept"].reindex(model.assets)
    return values.fillna(0.0).to_numpy(dtype=np.float64)


def _dated(frame: Any, name: str, *, allow_nan: bool, columns: list[Any] | None = None,
           dates: pd.Index | None = None) -> pd.DataFrame:
    if not isinstance(frame, pd.DataFrame):
        raise InputError(f"{OWNER}: {name} must be a DataFrame of dates × columns, got {type(frame).__name__}")
    check_unique(frame.index, "dates", f"{OWNER}: {name}")
    check_unique(frame.columns, "columns", f"{OWNER}: {name}")
    if columns is not None:
        missing = [c for c in columns if c not in frame.columns]
        if missing:
            raise InputError(f"{OWNER}: {name} has no column for factor(s) {list_labels(missing)}")
        frame = frame[columns]
    if dates is not None:
        missing_dates = dates.difference(frame.index)
        if len(missing_dates):
            raise InputError(f"{OWNER}: {name} has no row for {len(missing_dates)} date(s): {list_labels(_day(d) for d in missing_dates)}")
        frame = frame.loc[dates]
    if frame.empty:
        raise InputError(f"{OWNER}: {name} is empty")
    check_finite_frame(frame, f"{OWNER}: {name}", allow_nan=allow_nan)
    return frame.astype(np.float64)


def _weights(model: FactorModel, weights: Any, dates: pd.Index, name: str) -> np.ndarray:
    """T × N weights aligned to the model's assets: a Series repeated, or a DataFrame row per date."""
    if isinstance(weights, pd.Series):
        w = model.weights_array(weights, name=f"{OWNER}: {name}")
        return np.tile(w, (len(dates), 1))
    if not isinstance(weights, pd.DataFrame):
        raise InputError(f"{OWNER}: {name} must be a DataFrame (dates × assets) or a Series by asset, got {type(weights).__name__}")
    check_unique(weights.index, "dates", f"{OWNER}: {name}")
    check_unique(weights.columns, "asset ids", f"{OWNER}: {name}")
    unknown = weights.columns.difference(model.assets)
    if len(unknown):
        raise InputError(f"{OWNER}: {name}: assets not in the risk model: {list_labels(unknown)}")
    missing = dates.difference(weights.index)
    if len(missing):
        raise InputError(f"{OWNER}: {name} has no row for {len(missing)} date(s) of asset_returns: {list_labels(_day(d) for d in missing)}")
    frame = weights.loc[dates].reindex(columns=model.assets).fillna(0.0)
    check_finite_frame(weights.loc[dates], f"{OWNER}: {name}")
    return frame.to_numpy(dtype=np.float64)


def _day(value: Any) -> str:
    if isinstance(value, pd.Timestamp) and value == value.normalize():
        return str(value.date())
    return str(value)
