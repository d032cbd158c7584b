"""Historical replay: the factor returns of past windows applied to today's exposures.

For a window W of the factor-return history, the move is the cumulated factor return
m_W = Σ_{t∈W} f_t (factor returns add up in a linear model; compounding a long-short factor's
returns has no meaning of its own) and the book's replayed return is xᵀm_W with x = Bᵀw, today's
exposures. The k worst windows of a given length are found by a greedy search: the worst window,
then the worst one that overlaps no window already chosen, and so on. The specific part is not
replayed (today's names did not exist as today's book then); it is shown as a ±1σ band
√(L·Σᵢdᵢwᵢ²) over a window of L periods.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import check_unique, list_labels
from trimtab.units import check_book
from trimtab.errors import InputError

if TYPE_CHECKING:
    from trimtab.model import FactorModel


@dataclass(frozen=True, eq=False)
class ReplayResult:
    """Past windows replayed on today's book (fractions of NAV; negative is a loss).

    Attributes
    ----------
    windows : pandas.DataFrame
        One row per window (index ``window``): ``found`` (``chosen``, ``worst for book`` or
        ``worst for active``), ``start``, ``end``, ``n_periods``, ``book``, ``benchmark``, ``active``
        (xᵀm_W for w, b and w − b; NaN without a benchmark), ``specific_band_book`` and
        ``specific_band_active`` (one σ of the specific return over the window).
    factor_moves : pandas.DataFrame
        Window × factor: m_W, the summed factor returns.
    contributions, active_contributions : pandas.DataFrame
        Window × factor: xₖ·m_Wₖ for the book and for w − b (None without a benchmark); rows sum to
        ``book`` and ``active``.
    length : int or None
        The length of the automatically found windows, in periods.
    """

    windows: pd.DataFrame
    factor_moves: pd.DataFrame
    contributions: pd.DataFrame
    active_contributions: pd.DataFrame | None
    length: int | None

    def summary(self) -> ReplaySummary:
        return ReplaySummary(self)

    def __str__(self) -> str:
        return self.summary().as_text()


@dataclass(frozen=True, eq=False)
class ReplaySummary:
    """The replayed windows in brief."""

    result: ReplayResult

    def to_frame(self) -> pd.DataFrame:
        r = self.result
        contrib = r.active_contributions if r.active_contributions is not None else r.contributions
        frame = r.windows.copy()
        if contrib.shape[1]:
            frame["largest_loss_from"] = contrib.idxmin(axis=1)
            frame["largest_loss"] = contrib.min(axis=1)
        return frame

    def as_text(self) -> str:
        title = "Historical replay on today's exposures"
        lines = [title, "=" * len(title)]
        has_active = self.result.active_contributions is not None
        head = f"{'window':<22} {'found':<17} {'from':<10} {'to':<10} {'book':>8}" + (f" {'active':>8}" if has_active else "") + f" {'±1σ specific' + (' (active)' if has_active else ''):>22}"
        lines.append(head)
        for name, row in self.to_frame().iterrows():
            band = row["specific_band_active"] if has_active else row["specific_band_book"]
            text = f"{str(name)[:22]:<22} {row['found']:<17} {_day(row['start']):<10} {_day(row['end']):<10} {row['book']:>8.2%}"
            if has_active:
                text += f" {row['active']:>8.2%}"
            lines.append(text + f" {band:>22.2%}")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.as_text()


def _day(value: Any) -> str:
    stamp = pd.Timestamp(value) if not isinstance(value, (int, np.integer)) else None
    return str(stamp.date()) if stamp is not None and stamp == stamp.normalize() else str(value)


def factor_history(model: FactorModel, factor_returns: pd.DataFrame | None = None, owner: str = "replay") -> pd.DataFrame:
    """The dates × factors history to replay: ``factor_returns`` when given, else the model's own."""
    history = factor_returns if factor_returns is not None else model.factor_history
    if history is None:
        raise InputError(
            f"{owner}: the model carries no factor-return history (it was built by hand or saved before "
            "trimtab kept it); refit it, or pass the factor returns (dates × factors)"
        )
    if not isinstance(history, pd.DataFrame):
        raise InputError(f"{owner}: factor_returns: expected a DataFrame of dates × factors, got {type(history).__name__}")
    check_unique(history.index, "dates", f"{owner}: factor_returns")
    missing = [f for f in model.factors if f not in history.columns]
    if missing:
        raise InputError(f"{owner}: factor_returns has no column for factor(s) {list_labels(missing)}")
    frame = history[list(model.factors)].astype(np.float64).sort_index()
    if np.isinf(frame.to_numpy()).any():
        raise InputError(f"{owner}: factor_returns holds infinite values")
    if frame.empty:
        raise InputError(f"{owner}: factor_returns has no dates")
    return frame.fillna(0.0)


def worst_windows(returns: np.ndarray, length: int, k: int) -> list[int]:
    """Start positions of the k worst non-overlapping windows of ``length`` (greedy: worst first)."""
    n = len(returns)
    if length > n:
        return []
    csum = np.concatenate([[0.0], np.cumsum(returns)])
    sums = csum[length:] - csum[:-length]
    taken = np.zeros(n, dtype=bool)
    out: list[int] = []
    for j in np.argsort(sums, kind="stable"):
        if not taken[j : j + length].any():
            out.append(int(j))
            taken[j : j + length] = True
            if len(out) == k:
                break
    return out


def replay(
    model: FactorModel,
    holdings: Any,
    *,
    benchmark: Any = None,
    windows: Mapping[str, tuple[Any, Any]] | None = None,
    length: int | None = None,
    k: int = 5,
    factor_returns: pd.DataFrame | None = None,
) -> ReplayResult:
    """Replay past factor returns on today's exposures: chosen date ranges and the worst windows.

    Parameters
    ----------
    model : FactorModel
        Its factor-return history (kept by the estimators, saved with the model) is replayed unless
        ``factor_returns`` is given.
    holdings, benchmark : pandas.Series or array
        Today's weights (and the benchmark's).
    windows : Mapping[str, (start, end)], optional
        Named date ranges, both ends included.
    length : int, optional
        Find the ``k`` worst non-overlapping windows of this many periods for the book and, with a
        benchmark, for the active book.
    k : int, default 5
    factor_returns : pandas.DataFrame, optional
        Dates × factors to replay instead of the model's own history.

    Returns
    -------
    ReplayResult

    Raises
    ------
    InputError
        No history, unknown factors, a date range with no dates, neither ``windows`` nor ``length``.

    Notes
    -----
    m_W = Σ_{t∈W} f_t; book return xᵀm_W, x = Bᵀw; specific band √(L·Σᵢdᵢwᵢ²). See the module
    docstring for the greedy search.
    """
    if windows is None and length is None:
        raise InputError("replay: give windows (named date ranges), length (to find the worst windows), or both")
    history = factor_history(model, factor_returns)
    w = model.weights_array(holdings, name="holdings")
    check_book(w, "replay", "holdings")
    b = model.weights_array(benchmark, name="benchmark") if benchmark is not None else None
    if b is not None:
        check_book(b, "replay", "benchmark")
    B, d = model._B, model._d
    f = history.to_numpy()
    dates = history.index
    x = B.T @ w
    xa = B.T @ (w - b) if b is not None else None
    picked: list[tuple[str, str, int, int]] = []  # name, found, first row, last row
    for name, bounds in (windows or {}).items():
        if not isinstance(bounds, (tuple, list)) or len(bounds) != 2:
            raise InputError(f"replay: windows: {name}: expected (start, end), got {bounds!r}")
        start, end = _position(dates, bounds[0], name, "start", side="left"), _position(dates, bounds[1], name, "end", side="right") - 1
        if end < start:
            raise InputError(f"replay: windows: {name}: no dates of the history between {bounds[0]} and {bounds[1]}")
        picked.append((str(name), "chosen", start, end))
    if length is not None:
        if isinstance(length, bool) or not isinstance(length, (int, np.integer)) or length < 1:
            raise InputError(f"replay: length must be a whole number of periods ≥ 1, got {length!r}")
        if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
            raise InputError(f"replay: k must be a whole number ≥ 1, got {k!r}")
        if length > len(dates):
            raise InputError(f"replay: length {length} is longer than the history ({len(dates)} periods)")
        targets = [("book", x)] + ([("active", xa)] if xa is not None else [])
        for label, exposure in targets:
            for rank, j in enumerate(worst_windows(f @ exposure, int(length), int(k)), start=1):
                picked.append((f"worst {label} #{rank}", f"worst for {label}", j, j + int(length) - 1))
    if not picked:
        raise InputError("replay: no window to replay")
    csum = np.vstack([np.zeros(f.shape[1]), np.cumsum(f, axis=0)])
    moves = np.array([csum[e + 1] - csum[s] for _, _, s, e in picked])
    index = pd.Index([p[0] for p in picked], name="window")
    columns = pd.Index(model.factors, name="factor")
    contrib = pd.DataFrame(moves * x[None, :], index=index, columns=columns)
    n_periods = np.array([e - s + 1 for _, _, s, e in picked], dtype=np.int64)
    table = pd.DataFrame({
        "found": [p[1] for p in picked],
        "start": [dates[s] for _, _, s, _ in picked],
        "end": [dates[e] for _, _, _, e in picked],
        "n_periods": n_periods,
        "book": contrib.sum(axis=1).to_numpy(),
    }, index=index)
    active_contrib = None
    if b is not None and xa is not None:
        a = w - b
        active_contrib = pd.DataFrame(moves * xa[None, :], index=index, columns=columns)
        table["active"] = active_contrib.sum(axis=1).to_numpy()
        table["benchmark"] = table["book"] - table["active"]
        table["specific_band_active"] = np.sqrt(n_periods * float(d @ (a * a)))
    else:
        table["active"] = table["benchmark"] = np.nan
        table["specific_band_active"] = np.nan
    table["specific_band_book"] = np.sqrt(n_periods * float(d @ (w * w)))
    table = table[["found", "start", "end", "n_periods", "book", "benchmark", "active", "specific_band_book", "specific_band_active"]]
    return ReplayResult(table, pd.DataFrame(moves, index=index, columns=columns), contrib, active_contrib,
                        int(length) if length is not None else None)


def _position(dates: pd.Index, value: Any, name: str, which: str, *, side: str) -> int:
    try:
        key = pd.Timestamp(value) if isinstance(dates, pd.DatetimeIndex) else value
    except (TypeError, ValueError):
        raise InputError(f"replay: windows: {name}: {which} {value!r} is not a date") from None
    return int(dates.searchsorted(key, side=side))  # type: ignore[call-overload]
