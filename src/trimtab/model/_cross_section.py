"""The fundamental (cross-sectional) factor model: one weighted regression of returns on exposures per date.

Each date t solves r_t = X_t f_t + u_t by weighted least squares, with X_t = [market, industry
dummies, style scores]. When both the market and a full set of industry dummies are present their
columns are collinear; the industry factor returns are then tied by Σ_j c_j f_j = 0 with c_j the
total regression weight of industry j on that date, imposed exactly through a restriction matrix.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp

from trimtab._validation import list_labels
from trimtab.errors import DataWarning, InputError
from trimtab.model._covariance import factor_covariance
from trimtab.model._covariance_settings import CovarianceSettings
from trimtab.model._cross_section_input import OWNER, Snapshot, parse_exposures
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

#: Relative size of the smallest eigenvalue of the (diagonally scaled) normal matrix below which a
#: date's exposures count as collinear.
_COLLINEAR_TOL = 1e-10

CONSTRAINT_TEXT = (
    "sum_j c_j f_j = 0 over the industry factors on every date, c_j = total regression weight of "
    "industry j on that date (imposed as f = R g; the pivot industry is the one with the largest c_j)"
)


# ---------------------------------------------------------------------------------------------
# The restricted weighted least squares core (ndarray in, ndarray out)
# ---------------------------------------------------------------------------------------------


def restriction_matrix(industry_weight: np.ndarray, n_before: int, n_styles: int) -> tuple[np.ndarray, int]:
    """R (p × p−1) with f = R g satisfying Σ_j c_j f_j = 0, and the pivot industry's position.

    The industry columns sit at ``n_before … n_before + J − 1``. The pivot industry J* (largest c_j)
    is expressed through the others, f_J* = −Σ_{j≠J*} (c_j / c_J*) f_j; every other factor return is
    a free parameter.
    """
    n_industries = len(industry_weight)
    p = n_before + n_industries + n_styles
    pivot = n_before + int(np.argmax(industry_weight))
    keep = [i for i in range(p) if i != pivot]
    R = np.eye(p)[:, keep]
    industry_cols = [keep.index(n_before + j) for j in range(n_industries) if n_before + j != pivot]
    others = [j for j in range(n_industries) if n_before + j != pivot]
    R[pivot, industry_cols] = -industry_weight[others] / industry_weight[pivot - n_before]
    return R, pivot


@dataclasses.dataclass(frozen=True, eq=False)
class _BlockFit:
    factor_returns: np.ndarray  # p × T_g
    residuals: np.ndarray  # n × T_g
    t_stats: np.ndarray  # p × T_g
    r_squared: np.ndarray  # T_g
    industry_weight: np.ndarray  # J


def _dense(product: Any) -> np.ndarray:
    return product.toarray() if sp.issparse(product) else np.asarray(product)


def restricted_wls(
    styles: np.ndarray,
    codes: np.ndarray,
    n_industries: int,
    weight: np.ndarray,
    Y: np.ndarray,
    market: bool,
) -> _BlockFit:
    """Weighted cross-sectional regressions sharing one design, for a block of dates.

    Parameters
    ----------
    styles : (n, S) style scores; codes : (n,) industry codes in 0..J−1 (ignored when J = 0);
    weight : (n,) positive regression weights; Y : (n, T_g) returns, one column per date;
    market : whether a column of ones leads the design.

    The normal matrix G = XᵀWX is assembled blockwise, with the industry dummies as a sparse
    matrix (their block of G is diag(c)), so the cost is O(n·S² + n·T_g·(S + 1)), not O(n·p²).
    """
    n, n_styles = styles.shape
    m = int(market)
    parts: list[Any] = [np.ones((n, 1))] if market else []
    if n_industries:
        parts.append(sp.csr_matrix((np.ones(n), (np.arange(n), codes)), shape=(n, n_industries)))
    if n_styles:
        parts.append(styles)
    weighted = [sp.csr_matrix(part.multiply(weight[:, None])) if sp.issparse(part) else weight[:, None] * part for part in parts]
    G = np.block([[_dense(a.T @ b) for b in weighted] for a in parts])
    wY = weight[:, None] * Y
    b = np.vstack([_dense(a.T @ wY) for a in parts])
    c = np.bincount(codes, weights=weight, minlength=n_industries) if n_industries else np.zeros(0)
    p = G.shape[0]
    if m and n_industries:
        R, _ = restriction_matrix(c, m, n_styles)
    else:
        R = np.eye(p)
    q = R.shape[1]
    G_r = R.T @ G @ R
    scale = 1.0 / np.sqrt(np.diag(G_r))
    G_scaled = G_r * np.outer(scale, scale)
    values, vectors = np.linalg.eigh(G_scaled)
    if values[0] <= _COLLINEAR_TOL * values[-1]:
        raise np.linalg.LinAlgError("collinear")
    inverse = (vectors / values) @ vectors.T * np.outer(scale, scale)
    g = inverse @ (R.T @ b)
    f = R @ g
    fitted = styles @ f[m + n_industries:]
    if m:
        fitted += f[0]
    if n_industries:
        fitted += f[m:m + n_industries][codes]
    u = Y - fitted
    ssr = (weight[:, None] * u * u).sum(axis=0)
    s2 = ssr / (n - q)
    cov_diag = np.einsum("ij,jk,ik->i", R, inverse, R)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_stats = f / np.sqrt(np.outer(cov_diag, s2))
        if m or n_industries:
            mean = wY.sum(axis=0) / weight.sum()
            tss = (weight[:, None] * (Y - mean) ** 2).sum(axis=0)
        else:
            tss = (wY * Y).sum(axis=0)
        r_squared = 1.0 - ssr / tss
    return _BlockFit(f, u, t_stats, r_squared, c)


# ---------------------------------------------------------------------------------------------
# The public estimator
# ---------------------------------------------------------------------------------------------


def _date_blocks(
    returns: np.ndarray, dates: pd.Index, snapshots: list[Snapshot], columns: list[np.ndarray]
) -> tuple[dict[tuple[int, bytes], list[int]], list[Any]]:
    """Group the dates that share a design: the same snapshot and the same assets with a return."""
    blocks: dict[tuple[int, bytes], list[int]] = {}
    skipped: list[Any] = []
    if snapshots[0].date is None:
        snap_of = np.zeros(len(dates), dtype=np.int64)
    else:
        snap_dates = np.array([s.date for s in snapshots], dtype=object)
        try:
            snap_of = np.searchsorted(pd.Index(list(snap_dates)), dates, side="left") - 1
        except TypeError as err:
            raise InputError(f"{OWNER}: exposures: dates cannot be compared with the return dates: {err}") from err
    for t in range(len(dates)):
        s = int(snap_of[t])
        if s < 0:
            skipped.append(dates[t])
            continue
        cols = columns[s]
        present = cols >= 0
        present[present] = np.isfinite(returns[t, cols[present]])
        if not present.any():
            skipped.append(dates[t])
            continue
        blocks.setdefault((s, np.packbits(present).tobytes()), []).append(t)
    return blocks, skipped


def _check_blocks(
    blocks: dict[tuple[int, bytes], list[int]],
    snapshots: list[Snapshot],
    dates: pd.Index,
    industries: list[Any],
    styles: list[Any],
    market: bool,
    min_assets: int,
    n_free: int,
) -> dict[tuple[int, bytes], np.ndarray]:
    """Rows of each block's regression; raises on too few assets or constant styles (an industry with
    no member on a date is left out of that date's regression, see :func:`_fit_block`)."""
    rows_of: dict[tuple[int, bytes], np.ndarray] = {}
    few: list[Any] = []
    constant: dict[Any, list[Any]] = {}
    for key, ts in blocks.items():
        snap = snapshots[key[0]]
        present = np.unpackbits(np.frombuffer(key[1], dtype=np.uint8), count=len(snap.assets)).astype(bool)
        rows = np.flatnonzero(present)
        rows_of[key] = rows
        on = [dates[t] for t in ts]
        if len(rows) < min_assets:
            few.extend(on)
            continue
        if (market or industries) and len(styles):
            spread = np.ptp(snap.styles[rows], axis=0)
            for k in np.flatnonzero(spread == 0):
                constant.setdefault(styles[k], []).extend(on)
    if few:
        raise InputError(
            f"{OWNER}: fewer assets with a return and exposures than min_assets={min_assets} "
            f"(the regression has {n_free} free factor returns) on dates: {list_labels([date_label(d) for d in sorted(few)])}"
        )
    if constant:
        name, where = next(iter(constant.items()))
        raise InputError(
            f"{OWNER}: style column {name!r} is constant across assets (collinear with the market or industry "
            f"factors) on dates: {list_labels([date_label(d) for d in sorted(where)])}"
        )
    return rows_of


def _fit_block(styles: np.ndarray, codes: np.ndarray, n_industries: int, weight: np.ndarray, Y: np.ndarray,
               market: bool) -> tuple[_BlockFit, np.ndarray]:
    """:func:`restricted_wls` on the industries with a member in this block; the others' factor
    returns are not identified there (NaN, t NaN, weight 0). Returns the fit and the absent industries."""
    if not n_industries:
        return restricted_wls(styles, codes, 0, weight, Y, market), np.zeros(0, dtype=bool)
    absent = np.bincount(codes, minlength=n_industries) == 0
    if not absent.any():
        return restricted_wls(styles, codes, n_industries, weight, Y, market), absent
    present = np.flatnonzero(~absent)
    renumber = np.full(n_industries, -1)
    renumber[present] = np.arange(len(present))
    fit = restricted_wls(styles, renumber[codes], len(present), weight, Y, market)
    m = int(market)
    keep = np.r_[np.arange(m), m + present, np.arange(m + n_industries, m + n_industries + styles.shape[1])]

    def widen(values: np.ndarray) -> np.ndarray:
        out = np.full((m + n_industries + styles.shape[1], values.shape[1]), np.nan)
        out[keep] = values
        return out

    weights = np.zeros(n_industries)
    weights[present] = fit.industry_weight
    return _BlockFit(widen(fit.factor_returns), fit.residuals, widen(fit.t_stats), fit.r_squared, weights), absent


def _dropped_assets(
    returned: pd.Index, exposed: pd.Index, latest: pd.Index, enough: pd.Index, keep: pd.Index
) -> pd.Series:
    """Asset → reason for every asset seen in the inputs but not in the model (first reason that applies)."""
    universe = returned.append(exposed.difference(returned, sort=False))
    out = universe[~universe.isin(keep)]
    reasons = np.select(
        [~out.isin(exposed), ~out.isin(returned), ~out.isin(latest)],
        ["no exposures", "no returns", "no exposures on the latest exposure date"],
        default="fewer than 2 specific returns",
    )
    return pd.Series(reasons, index=out, dtype=object, name="reason")


def fit_cross_section(
    asset_returns: pd.DataFrame,
    exposures: pd.DataFrame,
    *,
    industry: pd.Series | str | None = None,
    weights: pd.Series | str | None = None,
    market: bool = True,
    covariance: CovarianceSettings | None = None,
    min_assets: int | None = None,
    periods_per_year: float | None = None,
    factor_groups: Mapping[str, str] | None = None,
) -> FactorModel:
    """Fit a fundamental factor model by weighted cross-sectional regression, date by date.

    Parameters
    ----------
    asset_returns : pandas.DataFrame
        Dates × assets per-period returns, dates increasing; NaN where an asset has no return (the
        asset is left out of that date's regression).
    exposures : pandas.DataFrame
        Either static exposures, assets × style factors (index = asset ids), used on every date; or
        a long table with columns ``date``, ``asset`` and one column per style factor, of exposures
        as known at the close of ``date``.
    industry : pandas.Series, str or None
        Asset → industry label, or the name of a column of ``exposures`` holding it (time-varying in
        the long form). Each label becomes a 0/1 industry factor. None: no industry factors.
    weights : pandas.Series, str or None
        Asset → positive regression weight (or a column of ``exposures``). Common practice (no
        source): the square root of market capitalisation, which down-weights the noisy small
        stocks. None: equal weights (ordinary least squares).
    market : bool, default True
        Lead the design with a column of ones, the market factor.
    covariance : CovarianceSettings, optional
        Refinements for F and d (:func:`trimtab.model.factor_covariance`,
        :func:`trimtab.model.specific_variance`); None gives the sample estimates.
    min_assets : int, optional
        Fewest assets a date's regression may use; default (and minimum) the number of free factor
        returns plus one.
    periods_per_year : float, optional
        Inferred from the median spacing of the dates when None.
    factor_groups : Mapping[str, str], optional
        Factor → group; default ``market`` → "market", styles → "style", industries → "industry".

    Returns
    -------
    FactorModel
        Exposures of the latest snapshot (market = 1, industry dummies, style scores), F from the
        estimated factor returns, d from the specific returns, and a :class:`FitReport` with
        ``factor_returns``, ``residuals`` (specific returns), per-asset ``n_observations``,
        ``residual_volatility`` and ``r_squared`` = 1 − var(u_i)/var(r_i), and ``extra`` holding
        ``r_squared_by_date``, ``t_stats_by_date``, ``industry_weights`` (c_j by date),
        ``constraint`` and ``skipped_dates``.

    Raises
    ------
    InputError
        For duplicate dates or assets, non-numeric or NaN exposures, asset ids that do not match
        between exposures and returns, missing industry labels or weights, a style column that is
        constant across assets, collinear exposures, or fewer
        assets than ``min_assets`` on a date.

    Warns
    -----
    DataWarning
        When assets are left out (no exposures, no returns, too few specific returns; all listed in
        ``fit_report.dropped``), dates are skipped (no returns, or no exposures known before them), or
        an industry has no member with a return on some dates: its factor is left out of those dates'
        regressions and its factor return taken as 0 there (t-statistic NaN, weight 0).

    Notes
    -----
    On each date t, with W_t = diag(w) over the assets that have a return and exposures,

        f̂_t = argmin (r_t − X_t f)ᵀ W_t (r_t − X_t f),   X_t = [1, D_t, S_t].

    When ``market`` and industries are both present, 1 = D_t·1 and the industry returns are
    identified by Σ_j c_j f_j = 0 with c_j = Σ_{i ∈ j} w_i (the weighted industry returns net out
    and the market factor is the weighted mean return). It is imposed exactly: f = R g with R
    expressing the largest industry through the others, ĝ = (RᵀXᵀWXR)⁻¹RᵀXᵀWr, f̂ = Rĝ. This is
    restricted least squares (Greene, ch. 5); the fitted values and residuals equal those of the
    unconstrained regression with one industry dummy dropped (same column space).

    Lag convention: the return of date t (from the close of t−1 to the close of t) is regressed on
    the exposures known at the start of the period — with static exposures, the given ones; with a
    long table, those of the latest exposure date strictly before t. Dates before the first
    exposure date are skipped (reported).

    Specific returns u_it feed :func:`specific_variance` with dof = 0: they are residuals of
    cross-sectional regressions, which spend q parameters on n_t assets per date, not of per-asset
    time-series fits, so no per-asset degrees of freedom are lost. Industry labels of the latest
    snapshot are the groups for specific-variance shrinkage.

    Per-date t-statistics use s²_t = Σ w u²/(n_t − q) and cov(f̂) = s²_t R(RᵀXᵀWXR)⁻¹Rᵀ.
    ``r_squared_by_date`` is the weighted R², centred when the market or industries are present.

    References
    ----------
    Greene, W. H. (2012). Econometric Analysis, 7th ed., section 5.3 (restricted least squares).
    Fama, E. F. and MacBeth, J. D. (1973). Risk, return, and equilibrium: empirical tests. Journal
    of Political Economy 81(3), 607–636 (period-by-period cross-sectional regressions).

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> rng = np.random.default_rng(0)
    >>> assets = [f"A{i}" for i in range(30)]
    >>> X = pd.DataFrame({"size": rng.normal(size=30)}, index=assets)
    >>> R = pd.DataFrame(rng.normal(0, 0.01, (60, 30)), columns=assets,
    ...                  index=pd.bdate_range("2024-01-01", periods=60))
    >>> model = fit_cross_section(R, X, industry=pd.Series(["a", "b"] * 15, index=assets))
    >>> list(model.factors)
    ['market', 'a', 'b', 'size']
    """
    returns = check_returns_panel(asset_returns, OWNER)
    if not isinstance(market, bool):
        raise InputError(f"{OWNER}: market must be True or False, got {market!r}")
    settings = settings_record(covariance, OWNER)
    ppy = infer_periods_per_year(returns.index, periods_per_year, OWNER)
    snapshots, industries, styles, described = parse_exposures(exposures, industry, weights, returns.index)
    industry_names = [str(j) for j in industries]
    factors = (["market"] if market else []) + industry_names + [str(s) for s in styles]
    if len(set(factors)) != len(factors):
        clash = pd.Index(factors)[pd.Index(factors).duplicated()]
        raise InputError(f"{OWNER}: factor names used twice (market, industry labels and style columns): {list_labels(clash)}")
    if not factors:
        raise InputError(f"{OWNER}: no factors: give style columns, an industry or market=True")
    n_free = len(factors) - int(market and len(industries) > 0)
    if min_assets is None:
        min_assets = n_free + 1
    elif not isinstance(min_assets, (int, np.integer)) or isinstance(min_assets, bool) or min_assets < n_free + 1:
        raise InputError(f"{OWNER}: min_assets must be a whole number >= {n_free + 1} (free factor returns + 1), got {min_assets!r}")

    all_exposed = pd.Index(pd.unique(np.concatenate([s.assets.to_numpy(dtype=object) for s in snapshots])))
    common = returns.columns.intersection(all_exposed, sort=False)
    if len(common) == 0:
        raise InputError(
            f"{OWNER}: asset ids do not match between exposures ({list_labels(all_exposed)}) and "
            f"asset_returns ({list_labels(returns.columns)})"
        )
    values = returns.to_numpy()
    columns = [returns.columns.get_indexer(s.assets) for s in snapshots]
    blocks, skipped = _date_blocks(values, returns.index, snapshots, columns)
    if not blocks:
        raise InputError(f"{OWNER}: no date has both returns and exposures known before it")
    rows_of = _check_blocks(
        blocks, snapshots, returns.index, industries, styles, market, int(min_assets), n_free
    )

    n_dates, n_factors, n_industries = len(returns.index), len(factors), len(industries)
    f_all = np.full((n_dates, n_factors), np.nan)
    t_all = np.full((n_dates, n_factors), np.nan)
    r2_all = np.full(n_dates, np.nan)
    c_all = np.full((n_dates, n_industries), np.nan)
    u_all = np.full(values.shape, np.nan)
    used = np.zeros(n_dates, dtype=bool)
    unidentified: dict[str, list[Any]] = {}  # industry → dates on which it had no member with a return
    for key, ts in blocks.items():
        snap, rows = snapshots[key[0]], rows_of[key]
        cols = columns[key[0]][rows]
        codes = snap.codes[rows] if n_industries else snap.codes
        try:
            fit, absent = _fit_block(snap.styles[rows], codes, n_industries, snap.weight[rows], values[np.ix_(ts, cols)].T, market)
        except np.linalg.LinAlgError:
            raise InputError(
                f"{OWNER}: exposures are collinear on date {date_label(returns.index[ts[0]])}: some style "
                f"columns {list_labels(styles)} are linear combinations of the others or of the industry dummies"
            ) from None
        f_all[ts] = fit.factor_returns.T
        t_all[ts] = fit.t_stats.T
        r2_all[ts] = fit.r_squared
        if n_industries:
            c_all[ts] = fit.industry_weight
        u_all[np.ix_(ts, cols)] = fit.residuals.T
        used[ts] = True
        for j in np.flatnonzero(absent):
            unidentified.setdefault(industry_names[j], []).extend(returns.index[ts])

    used_dates = returns.index[used]
    if used.sum() < 2:
        raise InputError(f"{OWNER}: need at least 2 dates with a regression, got {int(used.sum())}")
    if skipped:
        warnings.warn(
            f"{OWNER}: skipped {len(skipped)} dates with no returns or no exposures known before them: "
            f"{list_labels([date_label(d) for d in skipped])}",
            DataWarning,
            stacklevel=2,
        )
    for name, where in unidentified.items():
        # not estimable there: its factor return is taken as 0 on those dates (F needs complete rows)
        f_all[returns.index.isin(where), factors.index(name)] = 0.0
        warnings.warn(
            f"{OWNER}: industry {name!r} has no member with a return on {len(where)} dates; its factor is left out "
            f"of those dates' regressions and its return taken as 0 there: {list_labels([date_label(d) for d in sorted(where)])}",
            DataWarning,
            stacklevel=2,
        )
    factor_returns = pd.DataFrame(f_all[used], index=used_dates, columns=factors)
    fitted_assets = returns.columns[np.isfinite(u_all[used]).any(axis=0)]
    residuals = pd.DataFrame(u_all[used], index=used_dates, columns=returns.columns)[fitted_assets]

    latest = snapshots[-1]
    enough = observed_at_least(residuals, 2)
    keep = latest.assets[latest.assets.isin(enough)]
    dropped = _dropped_assets(returns.columns, all_exposed, latest.assets, enough, keep)
    warn_dropped(dropped, OWNER)
    if len(keep) == 0:
        raise InputError(f"{OWNER}: no asset has both exposures on the latest date and at least 2 specific returns")

    pos = latest.assets.get_indexer(keep)
    B = np.zeros((len(keep), n_factors))
    if market:
        B[:, 0] = 1.0
    if n_industries:
        B[np.arange(len(keep)), int(market) + latest.codes[pos]] = 1.0
    B[:, int(market) + n_industries:] = latest.styles[pos]
    model_exposures = pd.DataFrame(B, index=keep, columns=factors)
    groups = pd.Series(np.asarray(industries, dtype=object)[latest.codes[pos]], index=keep) if n_industries else None
    F = factor_covariance(factor_returns, covariance)
    d = specific_variance(residuals[keep], 0, covariance, groups=groups)

    stats = per_asset_fit(returns[fitted_assets].to_numpy()[used], residuals.to_numpy())
    asset_table = pd.DataFrame(stats, index=fitted_assets).loc[keep]
    if factor_groups is None:
        factor_groups = {**({"market": "market"} if market else {}), **dict.fromkeys(industry_names, "industry"),
                         **dict.fromkeys([str(s) for s in styles], "style")}
    record = {
        "market": market,
        "min_assets": int(min_assets),
        "periods_per_year": ppy,
        "covariance": settings,
        "specific_dof": 0,
        "lag": "exposures known at the start of each period",
        "exposure_date": None if latest.date is None else date_label(latest.date),
        **described,
    }
    extra = {
        "r_squared_by_date": pd.Series(r2_all[used], index=used_dates, name="r_squared"),
        "t_stats_by_date": pd.DataFrame(t_all[used], index=used_dates, columns=factors),
        "industry_weights": pd.DataFrame(c_all[used], index=used_dates, columns=industry_names),
        "constraint": CONSTRAINT_TEXT if (market and n_industries) else "none",
        "skipped_dates": pd.Index(skipped),
    }
    return assemble_model(
        "cross_section", model_exposures, F, d, (asset_table, residuals, dropped, factor_returns), record, extra,
        periods_per_year=ppy, factor_groups=factor_groups
    )
