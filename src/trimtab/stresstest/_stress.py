"""Stress tests: a book's return under named factor shocks, on today's exposures.

The return of weights w under the full factor move m (and specific moves e, when given) is
wᵀ(B·m + e) = xᵀm + wᵀe with x = Bᵀw: only the K exposures of the book enter, never an N×N matrix.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError
from trimtab.units import check_book
from trimtab.stresstest._entries import split_shocks
from trimtab.stresstest._moves import checked_horizon, full_moves, plausibility, shock_set

if TYPE_CHECKING:
    from trimtab.model import FactorModel

RETURN_COLUMNS = ("book", "benchmark", "active")


@dataclass(frozen=True, eq=False)
class StressResult:
    """A book's returns under shocks (fractions of NAV; negative is a loss).

    Attributes
    ----------
    returns : pandas.DataFrame
        One row per shock; columns ``book`` (wᵀ(B·m + e)), ``benchmark`` (bᵀ(B·m + e)) and
        ``active`` (their difference). Without a benchmark the last two are NaN.
    factor_moves : pandas.DataFrame
        Shock × factor: the full move m applied (named moves and, with ``conditional``, the others'
        conditional expectations).
    named_moves : pandas.DataFrame
        Shock × factor: the moves as given (NaN where a factor was not named).
    contributions : pandas.DataFrame
        Shock × factor: xₖ·mₖ for the book (x = Bᵀw), plus a ``specific`` column wᵀe; each row sums
        to ``returns.book``.
    active_contributions : pandas.DataFrame or None
        The same for w − b (rows sum to ``returns.active``); None without a benchmark.
    plausibility : pandas.DataFrame
        Shock × (n_shocked, mahalanobis D² = sᵀ(h·F_SS)⁻¹s, tail_probability P(χ²_|S| ≥ D²),
        sigma_equivalent: the two-sided normal move as likely).
    specific_band : pandas.Series
        One standard deviation of the specific return over the horizon, √(h·Σᵢdᵢwᵢ²) for ``book`` and
        √(h·Σᵢdᵢ(wᵢ − bᵢ)²) for ``active``: the shocks move factors only, and the book's own names can
        add about this much either way.
    horizon : float
        h, in the model's periods.
    conditional : bool
    """

    returns: pd.DataFrame
    factor_moves: pd.DataFrame
    named_moves: pd.DataFrame
    contributions: pd.DataFrame
    active_contributions: pd.DataFrame | None
    plausibility: pd.DataFrame
    specific_band: pd.Series
    horizon: float
    conditional: bool
    periods_per_year: float = field(default=252.0, repr=False)

    @property
    def shocks(self) -> list[str]:
        return [str(s) for s in self.returns.index]

    def table(self) -> pd.DataFrame:
        """One row per shock: returns, plausibility and the specific band, for reports and files."""
        out = self.returns.copy()
        out["specific_band_book"] = self.specific_band["book"]
        if "active" in self.specific_band.index:
            out["specific_band_active"] = self.specific_band["active"]
        return out.join(self.plausibility)

    def summary(self) -> StressSummary:
        return StressSummary(self)

    def __str__(self) -> str:
        return self.summary().as_text()


@dataclass(frozen=True, eq=False)
class StressSummary:
    """The shocks in brief: returns, the largest contributing factors and plausibility."""

    result: StressResult

    def to_frame(self) -> pd.DataFrame:
        """One row per shock: book, benchmark, active returns, the worst factor and the χ² tail probability."""
        r = self.result
        contrib = r.active_contributions if r.active_contributions is not None else r.contributions
        factors = contrib.drop(columns="specific")
        worst = factors.idxmin(axis=1) if factors.shape[1] else pd.Series(index=factors.index, dtype=object)
        frame = r.returns.copy()
        frame["largest_loss_from"] = worst
        frame["largest_loss"] = factors.min(axis=1)
        frame["tail_probability"] = r.plausibility["tail_probability"]
        return frame

    def as_text(self) -> str:
        r = self.result
        months = r.horizon / (r.periods_per_year / 12.0)
        title = f"Stress test ({'conditional' if r.conditional else 'named factors only'}; plausibility over {r.horizon:g} period{'' if r.horizon == 1 else 's'} ≈ {months:.3g} month{'' if months == 1 else 's'})"
        lines = [title, "=" * len(title)]
        has_active = r.active_contributions is not None
        head = f"{'shock':<24} {'book':>9}" + (f" {'benchmark':>10} {'active':>9}" if has_active else "") + f"  {'largest loss from':<32} {'P(χ²≥D²)':>10}"
        lines.append(head)
        for name, row in self.to_frame().iterrows():
            text = f"{str(name)[:24]:<24} {row['book']:>9.2%}"
            if has_active:
                text += f" {row['benchmark']:>10.2%} {row['active']:>9.2%}"
            worst = f"{row['largest_loss_from']} ({row['largest_loss']:.2%})" if pd.notna(row["largest_loss_from"]) else "–"
            text += f"  {worst[:32]:<32} {row['tail_probability']:>10.2g}"
            lines.append(text)
        band = r.specific_band
        lines.append("")
        lines.append(
            f"Specific returns are not shocked: ±1σ over the horizon is {band['book']:.2%} for the book"
            + (f", {band['active']:.2%} active." if "active" in band.index else ".")
        )
        implausible = r.plausibility.index[r.plausibility["tail_probability"] < 1e-4]
        if len(implausible):
            lines.append(f"Implausible under the model (tail probability below 1e-4): {list_labels(implausible)}")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.as_text()


def stress(
    model: FactorModel,
    holdings: Any,
    shocks: Any,
    *,
    benchmark: Any = None,
    conditional: bool = True,
    horizon: float | None = None,
    specific: Mapping[str, Mapping[Any, float]] | None = None,
    groups: pd.Series | None = None,
) -> StressResult:
    """The book's return under each named shock, with the other factors moving as the model says.

    Parameters
    ----------
    model : FactorModel
    holdings : pandas.Series or array
        Weights of NAV by asset (assets the Series lacks hold 0).
    shocks : Mapping[str, Mapping[str, float]] or pandas.DataFrame
        Shock name → {factor: move}, a return over the shock as a fraction (0.10 is +10%; a move of
        100% or more is refused as a likely percentage); or name → {factors: {factor: move},
        specific: {...}, description: ...} as shock files write it; or a shock × factor DataFrame
        with NaN for factors not named.
    benchmark : pandas.Series or array, optional
        Benchmark weights; gives the ``benchmark`` and ``active`` columns.
    conditional : bool, default True
        Move every factor not named by its conditional expectation F_US·F_SS⁻¹·s (Kupiec 1998);
        with False only the named factors move.
    horizon : float, optional
        The shock's length in the model's periods, for the plausibility and the specific band;
        default one month (periods_per_year / 12).
    specific : Mapping[str, Mapping], optional
        Shock name → {asset or group label: return}, added on top of the factor moves for those
        assets (a group label moves every asset of the group).
    groups : pandas.Series, optional
        Asset → group label, for group labels in ``specific``.

    Returns
    -------
    StressResult

    Raises
    ------
    InputError
        Unknown factors, assets, groups or shock names; non-finite moves or moves of 100% or more;
        a bad horizon; a book that is not weights of NAV (:func:`trimtab.units.check_book`).
    ModelError
        When the covariance of a shock's named factors is singular and conditioning needs it.

    Notes
    -----
    With S the named factors of a shock and s their moves, m_S = s and m_U = F_US·F_SS⁻¹·s (or 0).
    The book's return is xᵀm + wᵀe with x = Bᵀw; xₖmₖ is factor k's contribution. D² = sᵀ(h·F_SS)⁻¹s
    and P(χ²_|S| ≥ D²) measure how far out the shock is under the model over h periods.

    References
    ----------
    Kupiec, P. (1998). Stress testing in a value at risk framework. Journal of Derivatives 6(1).

    Examples
    --------
    >>> import pandas as pd
    >>> from trimtab import FactorModel
    >>> B = pd.DataFrame({"market": [1.0, 1.2], "value": [0.5, -0.5]}, index=["AAA", "BBB"])
    >>> F = pd.DataFrame([[4e-4, 1e-4], [1e-4, 1e-4]], index=B.columns, columns=B.columns)
    >>> model = FactorModel(B, F, pd.Series([1e-4, 1e-4], index=B.index), periods_per_year=12)
    >>> result = stress(model, pd.Series({"AAA": 0.5, "BBB": 0.5}), {"crash": {"market": -0.10}})
    >>> round(result.factor_moves.loc["crash", "value"], 4)
    -0.025
    """
    if not isinstance(conditional, (bool, np.bool_)):
        raise InputError(f"stress: conditional must be True or False, got {conditional!r}")
    h = checked_horizon(horizon, model.periods_per_year)
    w = model.weights_array(holdings, name="holdings")
    check_book(w, "stress", "holdings")
    b = model.weights_array(benchmark, name="benchmark") if benchmark is not None else None
    if b is not None:
        check_book(b, "stress", "benchmark")
    shock, moves, extra = shock_moves(model, shocks, conditional=bool(conditional), specific=specific, groups=groups)
    names = shock.names
    named = shock.named.to_numpy(dtype=np.float64)
    F, B = model._F, model._B
    factors = list(model.factors)
    x = B.T @ w
    book_contrib = moves * x[None, :]
    book_specific = extra @ w if extra is not None else np.zeros(len(names))
    index = pd.Index(names, name="shock")
    columns = pd.Index(factors, name="factor")
    contributions = pd.DataFrame(book_contrib, index=index, columns=columns)
    contributions["specific"] = book_specific
    book = contributions.sum(axis=1).to_numpy()
    d = model._d
    band = {"book": float(np.sqrt(h * (d @ (w * w))))}
    active_contrib = None
    bench = active = np.full(len(names), np.nan)
    if b is not None:
        a = w - b
        active_contrib = pd.DataFrame(moves * (B.T @ a)[None, :], index=index, columns=columns)
        active_contrib["specific"] = extra @ a if extra is not None else 0.0
        active = active_contrib.sum(axis=1).to_numpy()
        bench = book - active
        band["active"] = float(np.sqrt(h * (d @ (a * a))))
    returns = pd.DataFrame({"book": book, "benchmark": bench, "active": active}, index=index)
    return StressResult(
        returns=returns,
        factor_moves=pd.DataFrame(moves, index=index, columns=columns),
        named_moves=shock.named.rename_axis(index="shock", columns="factor"),
        contributions=contributions,
        active_contributions=active_contrib,
        plausibility=plausibility(F, named, h, names, factors),
        specific_band=pd.Series(band, name="specific_band"),
        horizon=h,
        conditional=bool(conditional),
        periods_per_year=model.periods_per_year,
    )


def shock_moves(model: FactorModel, shocks: Any, *, conditional: bool,
                specific: Mapping[str, Mapping[Any, float]] | None = None,
                groups: pd.Series | None = None) -> tuple[Any, np.ndarray, np.ndarray | None]:
    """The checked shocks, their full factor moves (shock × factor) and the specific moves
    (shock × asset, or None): what :func:`stress` applies, and all it can refuse in its inputs."""
    shocks, inline = split_shocks(shocks)
    if inline:
        if specific is not None and not isinstance(specific, Mapping):
            raise InputError(f"stress: specific: expected a mapping shock → {{asset or group: move}}, got {type(specific).__name__}")
        specific = {**inline, **(specific or {})}
    shock = shock_set(shocks, model.factors)
    named = shock.named.to_numpy(dtype=np.float64)
    moves = full_moves(model._F, named, conditional=conditional, names=shock.names, factors=list(model.factors))
    return shock, moves, _specific_matrix(model, specific, groups, shock.names)


def _specific_matrix(model: FactorModel, specific: Mapping[str, Mapping[Any, float]] | None, groups: pd.Series | None,
                   names: list[str]) -> np.ndarray | None:
    """Shock × asset specific returns e from {shock: {asset or group: move}} (None when none given)."""
    if specific is None:
        return None
    if not isinstance(specific, Mapping):
        raise InputError(f"stress: specific: expected a mapping shock → {{asset or group: move}}, got {type(specific).__name__}")
    unknown = [k for k in specific if k not in names]
    if unknown:
        raise InputError(f"stress: specific: unknown shock(s) {list_labels(unknown)}; the shocks are {list_labels(names)}")
    assets = model.assets
    pos = model._asset_pos
    labels = None
    if groups is not None:
        if not isinstance(groups, pd.Series):
            raise InputError(f"stress: groups: expected a Series asset → group label, got {type(groups).__name__}")
        labels = groups.reindex(assets)
    out = np.zeros((len(names), len(assets)))
    for j, name in enumerate(names):
        for label, move in dict(specific.get(name) or {}).items():
            if isinstance(move, bool) or not isinstance(move, (int, float, np.integer, np.floating)) or not np.isfinite(move):
                raise InputError(f"stress: specific: {name}.{label}: expected a finite number (a return), got {move!r}")
            in_group = labels is not None and bool((labels == label).any())
            if label in pos and in_group:
                raise InputError(f"stress: specific: {name}.{label}: is both an asset and a group label; rename the group")
            if label in pos:
                out[j, pos[label]] += float(move)
            elif in_group:
                assert labels is not None
                out[j, (labels == label).to_numpy()] += float(move)
            else:
                where = " or a group label" if labels is not None else " (pass groups= for group labels)"
                raise InputError(f"stress: specific: {name}.{label}: not an asset of the model{where}")
    return out
