"""A hedge overlay inside the rebalance: basket instruments as extra variables of the factor-form problem.

With X the N × M basket weights and h the overlay notionals (fractions of NAV, negative for short),
the hedged book is v = w + X·h. The risk rows (tracking error, total/factor/specific risk, factor
exposure, beta, stress loss) and the objective's alpha and risk terms read v; the cash rows
(budget, long-only, weights, groups, turnover, trades, liquidity, costs) keep reading w. In cvxpy
the exposure variable becomes y = Bᵀ(w + Xh) and the specific term Σ dᵢ(wᵢ + (Xh)ᵢ − bᵢ)², so the
problem stays in factor form (X has M ≪ N columns). The overlay's own limits are Σ|hⱼ| ≤ max_gross
and per-instrument notional bounds.

Verification reads the same vectors: after a solve, :class:`HedgeState` holds the notionals h that
leave with the result, and every wrapped risk row re-evaluates from w + X·h with plain numpy.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.construct.constraints._base import Rows, scalar
from trimtab.errors import InputError

if TYPE_CHECKING:
    from trimtab.construct._variables import Variables
    from trimtab.model import FactorModel

#: Constraint keys whose rows read the hedged book w + X·h (all others read the cash book w).
RISK_KEYS = frozenset({"tracking_error", "total_risk", "factor_risk", "specific_risk", "factor_exposure",
                       "beta", "stress_loss"})
KEYS = ("instruments", "contracts", "max_gross", "notional")


@dataclass(frozen=True, eq=False)
class Overlay:
    """Basket instruments aligned to the model's assets, with the overlay's own limits.

    Attributes
    ----------
    names : tuple of str
        Instrument names, in input order.
    baskets : numpy.ndarray
        X, N × M basket weights in model order (an asset a basket leaves out has weight 0).
    max_gross : float or None
        Σⱼ|hⱼ| ≤ max_gross (fraction of NAV).
    lower, upper : numpy.ndarray
        Per-instrument notional bounds (±inf when unbounded).
    contracts : pandas.DataFrame or None
        Contract terms by instrument (price, multiplier, optional cost and held).
    """

    names: tuple[str, ...]
    baskets: np.ndarray
    max_gross: float | None
    lower: np.ndarray
    upper: np.ndarray
    contracts: pd.DataFrame | None = None

    @property
    def size(self) -> int:
        return len(self.names)


def make_overlay(value: Any, model: FactorModel) -> Overlay:
    """Check the ``overlay`` argument (a mapping with the keys of :data:`KEYS`) against the model."""
    if isinstance(value, Overlay):
        return value
    if not isinstance(value, Mapping):
        raise InputError(f"overlay: expected a mapping with keys {', '.join(KEYS)}, got {type(value).__name__}")
    unknown = [k for k in value if k not in KEYS]
    if unknown:
        raise InputError(f"overlay: unknown key(s) {list_labels(unknown)}; allowed: {', '.join(KEYS)}")
    instruments = value.get("instruments")
    if not isinstance(instruments, Mapping) or not instruments:
        raise InputError("overlay.instruments: expected a mapping name → basket weights by asset (pandas Series)")
    names: list[str] = []
    columns: list[np.ndarray] = []
    for name, basket in instruments.items():
        where = f"overlay.instruments.{name}"
        if not isinstance(basket, pd.Series):
            raise InputError(f"{where}: expected a pandas Series of basket weights by asset, got {type(basket).__name__}")
        if isinstance(basket.index, pd.DatetimeIndex):
            raise InputError(f"{where}: a return-series instrument cannot join the rebalance yet (only baskets); "
                             "size it after the rebalance with trimtab overlay")
        if basket.index.has_duplicates:
            raise InputError(f"{where}: assets listed twice: {list_labels(basket.index[basket.index.duplicated()].unique())}")
        values = pd.to_numeric(basket, errors="coerce").to_numpy(dtype=np.float64)
        if not np.isfinite(values).all():
            raise InputError(f"{where}: weights must be finite numbers")
        pos = model.assets.get_indexer(basket.index)
        if (pos < 0).any():
            raise InputError(f"{where}: assets not in the risk model: {list_labels(basket.index[pos < 0])}")
        column = np.zeros(model.n_assets)
        column[pos] = values
        if not np.any(column):
            raise InputError(f"{where}: the basket has no non-zero weight")
        names.append(str(name))
        columns.append(column)
    max_gross = value.get("max_gross")
    if max_gross is not None and (isinstance(max_gross, bool) or not isinstance(max_gross, (int, float))
                                  or not np.isfinite(max_gross) or max_gross <= 0):
        raise InputError(f"overlay.max_gross: expected a positive number (fraction of NAV), got {max_gross!r}")
    lower, upper = np.full(len(names), -np.inf), np.full(len(names), np.inf)
    for name, bounds in (value.get("notional") or {}).items():
        where = f"overlay.notional.{name}"
        if name not in names:
            raise InputError(f"{where}: unknown instrument; the overlay has {list_labels(names)}")
        if (not isinstance(bounds, (list, tuple)) or len(bounds) != 2
                or not all(b is None or (isinstance(b, (int, float)) and not isinstance(b, bool) and np.isfinite(b))
                           for b in bounds)):
            raise InputError(f"{where}: expected [lower, upper] (null for unbounded), got {bounds!r}")
        lo, hi = (-np.inf if bounds[0] is None else float(bounds[0])), (np.inf if bounds[1] is None else float(bounds[1]))
        if lo > hi:
            raise InputError(f"{where}: lower {lo:g} is above upper {hi:g}")
        lower[names.index(name)], upper[names.index(name)] = lo, hi
    contracts = value.get("contracts")
    if contracts is not None:
        if not isinstance(contracts, pd.DataFrame):
            raise InputError(f"overlay.contracts: expected a DataFrame by instrument, got {type(contracts).__name__}")
        extra = contracts.index.difference(pd.Index(names))
        if len(extra):
            raise InputError(f"overlay.contracts: instruments not in overlay.instruments: {list_labels(extra)}")
    return Overlay(tuple(names), np.column_stack(columns), None if max_gross is None else float(max_gross),
                   lower, upper, contracts)


class HedgeState:
    """The overlay notionals h of the candidate being checked (zeros before any solve)."""

    def __init__(self, overlay: Overlay) -> None:
        self.overlay = overlay
        self.h = np.zeros(overlay.size)

    def hedged(self, weights: np.ndarray) -> np.ndarray:
        """v = w + X·h."""
        return weights + self.overlay.baskets @ self.h


def take_notionals(problem: Any, variables: Variables) -> None:
    """After a cvxpy solve of ``problem``'s rows: the rows' numpy checks read the notionals it found
    (a diagnosis measures each limit on that point's w + X·h, as the solve saw it)."""
    hedge = getattr(problem, "hedge", None)
    if hedge is not None and variables.h is not None and variables.h.value is not None:
        hedge.h = np.asarray(variables.h.value, dtype=np.float64)


class _Hedged:
    """The variables as a risk row sees them: ``w`` is the hedged book w + X·h."""

    def __init__(self, variables: Variables) -> None:
        self._v = variables

    @property
    def w(self) -> Any:
        return self._v.hedged

    def __getattr__(self, name: str) -> Any:
        return getattr(self._v, name)


def wrap(rows: Rows, state: HedgeState) -> Rows:
    """The same limits read on the hedged book, in numpy and in cvxpy (no FACTOR_IPM form)."""
    inner_eval, inner_expr = rows.evaluate, rows.expression
    return replace(
        rows,
        evaluate=lambda w: inner_eval(state.hedged(w)),
        expression=None if inner_expr is None else (lambda v: inner_expr(_Hedged(v))),
        linear=None, risk=None,
    )


def overlay_rows(state: HedgeState) -> list[Rows]:
    """The overlay's own limits: gross notional and per-instrument notional bounds (read from h)."""
    overlay = state.overlay
    out: list[Rows] = []
    if overlay.max_gross is not None:
        out.append(Rows(
            name="overlay.max_gross", kind="overlay_gross", unit="weight (notional)", labels=["overlay.max_gross"],
            lower=np.array([-np.inf]), upper=scalar(overlay.max_gross, np.inf),
            evaluate=lambda _w: np.array([float(np.abs(state.h).sum())]),
            expression=lambda v: v.cp_norm1_h(), scale=max(overlay.max_gross, 0.01), convex=True,
        ))
    bounded = np.isfinite(overlay.lower) | np.isfinite(overlay.upper)
    if bounded.any():
        idx = np.flatnonzero(bounded)
        out.append(Rows(
            name="overlay.notional", kind="overlay_notional", unit="weight (notional)",
            labels=[overlay.names[i] for i in idx], lower=overlay.lower[idx], upper=overlay.upper[idx],
            evaluate=lambda _w: state.h[idx].copy(), expression=lambda v: v.h[idx],
        ))
    return out
