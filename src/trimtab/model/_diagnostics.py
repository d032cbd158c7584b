"""Model diagnostics: are the residuals uncorrelated across assets, and is forecast risk unbiased?

:func:`check_residuals` tests every pair of assets (or a reproducible sample of pairs) without ever
holding an N × N matrix: correlations are computed in block × block tiles and only counts and a
short list of the worst pairs are kept. :func:`bias_statistic` compares realised returns with the
volatility forecast for them.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_finite_frame, check_finite_series, check_unique, list_labels
from trimtab.errors import InputError
from trimtab.model._arguments import is_number, is_whole_number

__all__ = ["BiasResult", "ResidualCheck", "bias_statistic", "check_residuals"]

#: A pair needs this many common observations for the Fisher z (its variance is 1/(n − 3)).
MIN_COMMON_OBS = 4

#: Flag when the significant count exceeds this multiple of the count expected under independence.
FLAG_RATIO = 2.0

_WORST_COLUMNS = ["asset_a", "asset_b", "correlation", "n_obs", "z"]

# Largest |r| used in atanh, so a perfect correlation gives a large finite z instead of inf.
_R_MAX = float(np.nextafter(1.0, 0.0))


@dataclass(frozen=True, eq=False)
class ResidualCheck:
    """Result of :func:`check_residuals`.

    Attributes
    ----------
    pairs_tested : int
        Pairs of assets with at least four common observations and non-zero variance on them.
    pairs_significant : int
        Pairs whose Fisher z is beyond the two-sided critical value at ``alpha``.
    expected_significant : float
        alpha × pairs_tested: the count expected if residuals are independent across assets.
    p_value : float
        P(X ≥ pairs_significant) for X ~ Binomial(pairs_tested, alpha).
    flagged : bool
        True when pairs_significant > 2 × expected_significant and p_value < alpha.
    worst_pairs : pandas.DataFrame
        The pairs with the largest |z|, columns asset_a, asset_b, correlation, n_obs, z.
    method : str
        "all pairs, blockwise" or "sampled pairs".
    alpha : float
        Two-sided significance level of each pair's test.
    critical_z : float
        Φ⁻¹(1 − alpha/2).
    pairs_total : int
        Pairs among the usable assets (before sampling).
    n_assets : int
        Asset columns given.
    n_assets_used : int
        Assets with at least four observations and non-zero variance.
    n_periods : int
        Dates given.
    seed : int or None
        Seed of the pair sample (None when all pairs were tested).
    """

    pairs_tested: int
    pairs_significant: int
    expected_significant: float
    p_value: float
    flagged: bool
    worst_pairs: pd.DataFrame
    method: str
    alpha: float
    critical_z: float
    pairs_total: int
    n_assets: int
    n_assets_used: int
    n_periods: int
    seed: int | None = None
    excluded_assets: pd.Index = field(default_factory=lambda: pd.Index([]))

    @property
    def share_significant(self) -> float:
        """pairs_significant / pairs_tested (NaN when nothing was tested)."""
        return self.pairs_significant / self.pairs_tested if self.pairs_tested else float("nan")

    def summary(self) -> str:
        """A few lines in words: the count against its expectation, the verdict and the worst pairs."""
        scope = (
            f"{self.pairs_tested:,} of {self.pairs_total:,} pairs (sampled, seed {self.seed})"
            if self.method == "sampled pairs"
            else f"{self.pairs_tested:,} pairs (all pairs, blockwise)"
        )
        ratio = self.pairs_significant / self.expected_significant if self.expected_significant > 0 else float("nan")
        rule = (f"rule: flagged when the significant pairs exceed {FLAG_RATIO:g}× the expected count and the binomial "
                f"tail p < {self.alpha:g}; here {ratio:.2f}× expected, p = {self.p_value:.3g}")
        verdict = "FLAGGED: residuals look correlated across assets" if self.flagged else "not flagged"
        lines = [
            f"Residual cross-correlation check on {self.n_assets_used} assets × {self.n_periods} periods, {scope}",
            f"  {rule}: {verdict}",
            f"  significant at alpha={self.alpha:g} (|z| > {self.critical_z:.3f}): {self.pairs_significant:,}"
            f" vs {self.expected_significant:,.1f} expected under independence",
        ]
        if len(self.excluded_assets):
            lines.append(f"  not tested (under {MIN_COMMON_OBS} observations or constant): {list_labels(self.excluded_assets)}")
        for row in self.worst_pairs.head(5).itertuples(index=False):
            lines.append(f"  {row.asset_a} ~ {row.asset_b}: r = {row.correlation:+.3f}, n = {row.n_obs}, z = {row.z:+.2f}")
        return "\n".join(lines)


def _check_options(alpha: Any, max_pairs: Any, block_size: Any, seed: Any, n_worst: Any) -> None:
    owner = "check_residuals"
    whole = is_whole_number
    if not is_number(alpha) or not 0 < alpha < 1:
        raise InputError(f"{owner}: alpha must be a probability strictly between 0 and 1, got {alpha!r}")
    if max_pairs is not None and (not whole(max_pairs) or max_pairs < 1):
        raise InputError(f"{owner}: max_pairs must be a whole number >= 1 or None, got {max_pairs!r}")
    if not whole(block_size) or block_size < 1:
        raise InputError(f"{owner}: block_size must be a whole number >= 1, got {block_size!r}")
    if not whole(seed) or seed < 0:
        raise InputError(f"{owner}: seed must be a whole number >= 0, got {seed!r}")
    if not whole(n_worst) or n_worst < 0:
        raise InputError(f"{owner}: n_worst must be a whole number >= 0, got {n_worst!r}")


class _Tally:
    """Running count of tested and significant pairs plus the ``n_worst`` largest |z|."""

    def __init__(self, critical_z: float, n_worst: int) -> None:
        self.critical_z = critical_z
        self.n_worst = n_worst
        self.tested = 0
        self.significant = 0
        self.best: tuple[np.ndarray, ...] = tuple(np.empty(0, dtype=t) for t in (float, np.int64, np.int64, float, float))

    def add(self, i: np.ndarray, j: np.ndarray, r: np.ndarray, n: np.ndarray) -> None:
        z = np.arctanh(np.clip(r, -_R_MAX, _R_MAX)) * np.sqrt(n - 3.0)
        self.tested += len(z)
        self.significant += int(np.count_nonzero(np.abs(z) > self.critical_z))
        if self.n_worst == 0:
            return
        if len(z) > self.n_worst:
            keep = np.argpartition(-np.abs(z), self.n_worst - 1)[: self.n_worst]
            z, i, j, r, n = z[keep], i[keep], j[keep], r[keep], n[keep]
        merged = [np.concatenate(pair) for pair in zip(self.best, (z, i, j, r, n))]
        order = np.lexsort((merged[2], merged[1], -np.abs(merged[0])))[: self.n_worst]
        self.best = tuple(m[order] for m in merged)

    def worst(self, assets: pd.Index) -> pd.DataFrame:
        z, i, j, r, n = self.best
        return pd.DataFrame(
            {
                "asset_a": assets[i].to_numpy() if len(i) else np.empty(0, dtype=object),
                "asset_b": assets[j].to_numpy() if len(j) else np.empty(0, dtype=object),
                "correlation": r,
                "n_obs": n.astype(np.int64),
                "z": z,
            },
            columns=_WORST_COLUMNS,
        )


def _pair_correlations(
    sx: np.ndarray, sy: np.ndarray, sxx: np.ndarray, syy: np.ndarray, sxy: np.ndarray, n: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Pearson r from masked sums on common observations, and which entries are testable."""
    with np.errstate(divide="ignore", invalid="ignore"):
        cov = sxy - sx * sy / n
        var_x = sxx - sx * sx / n
        var_y = syy - sy * sy / n
        # Columns are standardised, so a variance this small on n points means a constant series there.
        tiny = 1e-12 * n
        valid = (n >= MIN_COMMON_OBS) & (var_x > tiny) & (var_y > tiny)
        r = np.where(valid, cov / np.sqrt(np.where(valid, var_x * var_y, 1.0)), 0.0)
    return r, valid


def _tile(
    data: np.ndarray, mask: np.ndarray, dense: np.ndarray, a: slice, b: slice
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Correlations, common counts and validity for columns ``a`` × columns ``b``."""
    Za, Zb = data[:, a], data[:, b]
    if dense[a].all() and dense[b].all():
        # No missing values: n = T and one product gives Σxy; columns are centred on the same dates.
        n_periods = data.shape[0]
        sxy = Za.T @ Zb
        sxx = np.einsum("ij,ij->j", Za, Za)
        syy = np.einsum("ij,ij->j", Zb, Zb)
        n = np.full(sxy.shape, float(n_periods))
        zero = np.zeros(sxy.shape)
        r, valid = _pair_correlations(zero, zero, sxx[:, None] + zero, syy[None, :] + zero, sxy, n)
        return r, n, valid
    Ma, Mb = mask[:, a], mask[:, b]
    n = Ma.T @ Mb
    r, valid = _pair_correlations(Za.T @ Mb, Ma.T @ Zb, (Za * Za).T @ Mb, Ma.T @ (Zb * Zb), Za.T @ Zb, n)
    return r, n, valid


def _all_pairs(data: np.ndarray, mask: np.ndarray, dense: np.ndarray, block_size: int, tally: _Tally) -> None:
    n_cols = data.shape[1]
    for start_a in range(0, n_cols, block_size):
        a = slice(start_a, min(start_a + block_size, n_cols))
        for start_b in range(start_a, n_cols, block_size):
            b = slice(start_b, min(start_b + block_size, n_cols))
            r, n, valid = _tile(data, mask, dense, a, b)
            ii, jj = np.meshgrid(np.arange(a.start, a.stop), np.arange(b.start, b.stop), indexing="ij")
            keep = valid & (ii < jj)
            tally.add(ii[keep], jj[keep], r[keep], n[keep])


def _pair_from_index(k: np.ndarray, n_cols: int) -> tuple[np.ndarray, np.ndarray]:
    """Map k in [0, n(n−1)/2) to the k-th pair (i, j), i < j, in row-major upper-triangle order."""
    rows = np.arange(n_cols, dtype=np.int64)
    offsets = rows * n_cols - rows * (rows + 1) // 2
    i = np.searchsorted(offsets, k, side="right") - 1
    j = k - offsets[i] + i + 1
    return i, j


def _sampled_pairs(
    data: np.ndarray, mask: np.ndarray, n_pairs: int, total: int, seed: int, block_size: int, tally: _Tally
) -> None:
    rng = np.random.default_rng(seed)
    chosen = np.sort(rng.choice(total, size=n_pairs, replace=False).astype(np.int64))
    i_all, j_all = _pair_from_index(chosen, data.shape[1])
    for start in range(0, n_pairs, block_size):
        i, j = i_all[start : start + block_size], j_all[start : start + block_size]
        x, y, mx, my = data[:, i], data[:, j], mask[:, i], mask[:, j]
        n = (mx * my).sum(axis=0)
        r, valid = _pair_correlations(
            (x * my).sum(axis=0), (mx * y).sum(axis=0), (x * x * my).sum(axis=0), (mx * y * y).sum(axis=0),
            (x * y).sum(axis=0), n,
        )
        tally.add(i[valid], j[valid], r[valid], n[valid])


def check_residuals(
    residuals: pd.DataFrame,
    *,
    alpha: float = 0.01,
    max_pairs: int | None = None,
    block_size: int = 512,
    seed: int = 0,
    n_worst: int = 10,
) -> ResidualCheck:
    """Test whether model residuals are uncorrelated across assets, pair by pair.

    Parameters
    ----------
    residuals : pandas.DataFrame
        Dates × assets; NaN means not observed (pairs use their common dates).
    alpha : float, default 0.01
        Two-sided significance level of each pair's test.
    max_pairs : int, optional
        If the number of pairs exceeds it, test a reproducible random sample of this many pairs.
    block_size : int, default 512
        Assets per tile; memory is about (dates + 6 × block_size) × block_size floats besides the data.
    seed : int, default 0
        Seed of the pair sample.
    n_worst : int, default 10
        How many pairs to report in ``worst_pairs``.

    Returns
    -------
    ResidualCheck

    Raises
    ------
    InputError
        If ``residuals`` is not a DataFrame, has non-numeric columns, infinite values, duplicate
        assets, fewer than two assets, or an option is out of range.

    Notes
    -----
    For assets a, b with n ≥ 4 common dates and Pearson correlation r on them,
    z = atanh(r)·√(n − 3) is approximately N(0, 1) when the two are independent and normal (Fisher
    1915); the pair is significant when |z| > Φ⁻¹(1 − α/2). Under independence about α × pairs
    are significant. The p-value treats the count as Binomial(pairs, α); the pairs are not
    mutually independent (three pairs among three assets share data), so it is a guide, not an
    exact test; fat tails also widen z beyond N(0, 1). ``flagged`` is the rule "more than twice the
    expected count and binomial p-value below α" (our choice, no source).

    With the mask M (1 where observed) and zero-filled data X, the sums on common dates are
    n = MᵀM, Σx = XᵀM, Σy = MᵀX, Σx² = (X∘X)ᵀM, Σy² = Mᵀ(X∘X), Σxy = XᵀX, computed tile by tile;
    r = (Σxy − ΣxΣy/n)/√((Σx² − (Σx)²/n)(Σy² − (Σy)²/n)).

    References
    ----------
    Fisher, R. A. (1915). Frequency distribution of the values of the correlation coefficient in
    samples from an indefinitely large population. Biometrika 10(4), 507–521.

    Examples
    --------
    >>> import numpy as np, pandas as pd
    >>> e = pd.DataFrame(np.random.default_rng(0).normal(size=(120, 30)))
    >>> check_residuals(e).pairs_tested
    435
    """
    _check_options(alpha, max_pairs, block_size, seed, n_worst)
    owner = "check_residuals"
    if not isinstance(residuals, pd.DataFrame):
        raise InputError(f"{owner}: expected a DataFrame of dates × assets, got {type(residuals).__name__}")
    check_unique(residuals.columns, "assets", owner)
    check_finite_frame(residuals, owner, allow_nan=True)
    if residuals.shape[1] < 2:
        raise InputError(f"{owner}: need at least 2 asset columns, got {residuals.shape[1]}")

    values = residuals.to_numpy(dtype=np.float64)
    observed = np.isfinite(values)
    counts = observed.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        means = np.where(counts > 0, np.where(observed, values, 0.0).sum(axis=0) / np.maximum(counts, 1), 0.0)
        centred = np.where(observed, values - means, 0.0)
        scale = np.sqrt((centred * centred).sum(axis=0) / np.maximum(counts, 1))
    usable = (counts >= MIN_COMMON_OBS) & (scale > 0)
    assets = residuals.columns[usable]
    # Shift and scale do not change a correlation; they keep the masked sums well conditioned.
    data = centred[:, usable] / scale[usable]
    mask = observed[:, usable].astype(np.float64)
    dense = observed[:, usable].all(axis=0)

    from scipy import stats  # imported here: scipy.stats costs most of a second and only this check needs it

    critical_z = float(stats.norm.isf(alpha / 2.0))
    tally = _Tally(critical_z, n_worst)
    n_cols = data.shape[1]
    total = n_cols * (n_cols - 1) // 2
    sampled = max_pairs is not None and total > max_pairs
    if max_pairs is not None and sampled:
        _sampled_pairs(data, mask, int(max_pairs), total, seed, block_size, tally)
    else:
        _all_pairs(data, mask, dense, block_size, tally)

    expected = alpha * tally.tested
    p_value = float(stats.binom.sf(tally.significant - 1, tally.tested, alpha)) if tally.tested else 1.0
    flagged = bool(tally.tested and tally.significant > FLAG_RATIO * expected and p_value < alpha)
    return ResidualCheck(
        pairs_tested=tally.tested,
        pairs_significant=tally.significant,
        expected_significant=expected,
        p_value=p_value,
        flagged=flagged,
        worst_pairs=tally.worst(assets),
        method="sampled pairs" if sampled else "all pairs, blockwise",
        alpha=float(alpha),
        critical_z=critical_z,
        pairs_total=total,
        n_assets=residuals.shape[1],
        n_assets_used=n_cols,
        n_periods=residuals.shape[0],
        seed=seed if sampled else None,
        excluded_assets=residuals.columns[~usable],
    )


# ---------------------------------------------------------------------------------------------
# Bias statistic
# ---------------------------------------------------------------------------------------------


@dataclass(frozen=True, eq=False)
class BiasResult:
    """Result of :func:`bias_statistic`.

    Attributes
    ----------
    statistic : float
        b = sample standard deviation of zₜ = rₜ/σₜ.
    n_periods : int
        T.
    lower, upper : float
        1 ∓ √(2/T).
    inside : bool
        lower ≤ b ≤ upper.
    standardised : pandas.Series
        zₜ by period.
    """

    statistic: float
    n_periods: int
    lower: float
    upper: float
    inside: bool
    standardised: pd.Series

    def summary(self) -> str:
        """One line: the statistic, its band and what it says about the forecast."""
        if self.inside:
            verdict = "forecast risk consistent with realised"
        elif self.statistic > self.upper:
            verdict = "risk under-forecast"
        else:
            verdict = "risk over-forecast"
        return (
            f"Bias statistic {self.statistic:.3f} over {self.n_periods} periods; band "
            f"[{self.lower:.3f}, {self.upper:.3f}]: {verdict}"
        )


def _as_series(values: Any, name: str, owner: str) -> pd.Series:
    if isinstance(values, pd.DataFrame):
        raise InputError(f"{owner}: {name} must be a Series or 1-D array, got a DataFrame")
    if isinstance(values, pd.Series):
        series = values
    else:
        try:
            arr = np.asarray(values, dtype=np.float64)
        except (TypeError, ValueError) as err:
            raise InputError(f"{owner}: {name} must be numbers, could not convert: {err}") from err
        if arr.ndim != 1:
            raise InputError(f"{owner}: {name} must be 1-D, got {arr.ndim} dimensions")
        series = pd.Series(arr)
    check_unique(series.index, "periods", f"{owner} ({name})")
    check_finite_series(series, f"{owner} ({name})")
    return series.astype(np.float64)


def bias_statistic(realised_returns: pd.Series | Any, forecast_volatility: pd.Series | Any) -> BiasResult:
    """Bias statistic of a volatility forecast: the standard deviation of standardised returns.

    Parameters
    ----------
    realised_returns : pandas.Series or array_like
        rₜ, the realised return of one portfolio in each period.
    forecast_volatility : pandas.Series or array_like
        σₜ > 0, its volatility forecast made before period t, in the same period units as rₜ.
        Two Series are matched by label (they must have the same labels); otherwise by position.

    Returns
    -------
    BiasResult

    Raises
    ------
    InputError
        On NaN or infinite values, non-positive forecasts, mismatched labels or lengths, or
        fewer than 2 periods.

    Notes
    -----
    zₜ = rₜ/σₜ and b = √(Σ(zₜ − z̄)²/(T − 1)). A correct forecast gives b ≈ 1; b > 1 means risk was
    under-forecast. The band 1 ± √(2/T) is common practice, stated from memory (no source): for
    normal zₜ the standard error of b is about 1/√(2T), so the band is about ±2 standard errors,
    roughly 95 % coverage for large T.

    Examples
    --------
    >>> import numpy as np
    >>> r = np.random.default_rng(0).normal(scale=0.02, size=500)
    >>> bias_statistic(r, np.full(500, 0.02)).inside
    True
    """
    owner = "bias_statistic"
    returns = _as_series(realised_returns, "realised_returns", owner)
    volatility = _as_series(forecast_volatility, "forecast_volatility", owner)
    if isinstance(realised_returns, pd.Series) and isinstance(forecast_volatility, pd.Series):
        only_returns = returns.index.difference(volatility.index, sort=False)
        only_forecast = volatility.index.difference(returns.index, sort=False)
        if len(only_returns) or len(only_forecast):
            missing = only_returns if len(only_returns) else only_forecast
            side = "forecast_volatility" if len(only_returns) else "realised_returns"
            raise InputError(f"{owner}: periods missing from {side}: {list_labels(missing)}")
        volatility = volatility.reindex(returns.index)
    else:
        if len(returns) != len(volatility):
            raise InputError(
                f"{owner}: realised_returns has {len(returns)} periods but forecast_volatility has {len(volatility)}"
            )
        volatility = pd.Series(volatility.to_numpy(), index=returns.index)
    non_positive = volatility.to_numpy() <= 0
    if non_positive.any():
        raise InputError(
            f"{owner}: forecast_volatility must be > 0; not for periods: {list_labels(volatility.index[non_positive])}"
        )
    n_periods = len(returns)
    if n_periods < 2:
        raise InputError(f"{owner}: need at least 2 periods, got {n_periods}")
    standardised = (returns / volatility).rename("standardised_return")
    statistic = float(np.std(standardised.to_numpy(), ddof=1))
    half_width = float(np.sqrt(2.0 / n_periods))
    lower, upper = 1.0 - half_width, 1.0 + half_width
    return BiasResult(
        statistic=statistic,
        n_periods=n_periods,
        lower=lower,
        upper=upper,
        inside=bool(lower <= statistic <= upper),
        standardised=standardised,
    )
