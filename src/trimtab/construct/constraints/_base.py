"""What every constraint kind provides: rows ``lower ≤ value(w) ≤ upper`` in three forms.

A constraint turns its scenario options into one or more :class:`Rows`. Each Rows object carries

- ``expression(variables)``: the value as a cvxpy expression in factor form, times ``factor`` (the
  solver's units, e.g. per-period volatility for an annualised risk cap);
- ``evaluate(w)``: the same value with plain numpy, used by the verification;
- the limits, the unit and the scale (the size of one "unit of concern"; the infeasibility diagnosis
  measures a move against the limit itself, :mod:`trimtab.construct._elastic`).

Rows whose value is the weight itself minus a constant (``offset``) are *box rows*: the builder merges
all hard box rows into one pair of bounds on w, so N-long limits cost the solver one row per asset.

Two optional descriptions let the factor-form interior-point solver (:mod:`trimtab.construct._ipm`)
take a row without cvxpy: ``linear`` (the value as Aw·w + Ay·(Bᵀw) + at·Σ(buy + sell) + c) and
``risk`` (the value is an annualised volatility of w − b or w, factor and/or specific part). A row
with neither (and not a box row) sends the problem to the cvxpy path.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np

from trimtab.construct._data import ProblemData

if TYPE_CHECKING:
    import cvxpy as cp

    from trimtab.construct._spec import RebalanceSpec
    from trimtab.construct._variables import Variables

#: A breach up to max(ABS_TOL, REL_TOL·|limit|) in the limit's unit passes verification.
ABS_TOL = 1e-7
REL_TOL = 1e-6
#: A row is reported binding when its slack is at most BINDING_TOL·max(1, |limit|).
BINDING_TOL = 1e-6


@dataclass(frozen=True, eq=False)
class Linear:
    """value = Aw·w + Ay·(Bᵀw) + at·Σᵢ(buyᵢ + sellᵢ) + constant, row by row (None: no such term)."""

    w: Any = None
    y: np.ndarray | None = None
    traded: np.ndarray | None = None
    constant: np.ndarray | float = 0.0


@dataclass(frozen=True)
class Risk:
    """value = √(ppy·(factor part + specific part) of the variance of w − b (active) or w)."""

    active: bool
    factor: bool
    specific: bool


@dataclass(frozen=True, eq=False)
class Rows:
    """One block of limits ``lower ≤ value(w) ≤ upper`` (±inf for unbounded; lower == upper: equality)."""

    name: str
    kind: str
    unit: str
    labels: Sequence[Any]
    lower: np.ndarray
    upper: np.ndarray
    evaluate: Callable[[np.ndarray], np.ndarray]
    expression: Callable[[Variables], cp.Expression] | None = None
    factor: float = 1.0
    scale: float = 1.0
    soft: float | None = None
    per_asset: bool = False
    offset: np.ndarray | None = field(default=None, repr=False)
    convex: bool = False
    linear: Linear | None = field(default=None, repr=False)
    risk: Risk | None = None

    @property
    def box(self) -> bool:
        """Value is w − offset: merged into the bounds on w."""
        return self.offset is not None

    @property
    def size(self) -> int:
        return len(self.lower)

    def tolerance(self) -> np.ndarray:
        """Allowed breach per row: max(ABS_TOL, REL_TOL·|limit|)."""
        limit = np.fmax(np.where(np.isfinite(self.lower), np.abs(self.lower), 0.0),
                        np.where(np.isfinite(self.upper), np.abs(self.upper), 0.0))
        return np.maximum(ABS_TOL, REL_TOL * limit)

    def breach(self, value: np.ndarray) -> np.ndarray:
        """How far each value lies outside its limits (0 inside)."""
        with np.errstate(invalid="ignore"):
            out = np.fmax(value - self.upper, self.lower - value)
        return np.nan_to_num(np.maximum(out, 0.0), nan=0.0)

    def slack(self, value: np.ndarray) -> np.ndarray:
        """Distance to the nearer finite limit (inf when unbounded both ways)."""
        return np.fmin(self.upper - value, value - self.lower)


def box_rows(
    name: str, kind: str, lower: np.ndarray, upper: np.ndarray, labels: Sequence[Any],
    *, offset: np.ndarray | None = None, unit: str = "weight", soft: float | None = None,
) -> Rows:
    """Per-asset bounds lower ≤ w − offset ≤ upper."""
    off = np.zeros(len(lower)) if offset is None else np.asarray(offset, dtype=np.float64)
    return Rows(
        name=name, kind=kind, unit=unit, labels=labels,
        lower=np.asarray(lower, dtype=np.float64), upper=np.asarray(upper, dtype=np.float64),
        evaluate=lambda w: w - off, offset=off, soft=soft, per_asset=True,
    )


def merge_boxes(rows: Sequence[Rows], n: int) -> tuple[np.ndarray, np.ndarray]:
    """One lower and one upper bound on w from box rows: the tightest limit wins, asset by asset."""
    lo, hi = np.full(n, -np.inf), np.full(n, np.inf)
    for r in rows:
        lo, hi = np.fmax(lo, r.lower + r.offset), np.fmin(hi, r.upper + r.offset)
    return lo, hi


def split_box_duals(
    rows: Sequence[Rows], limits: tuple[np.ndarray, np.ndarray], up_all: np.ndarray, lo_all: np.ndarray,
) -> dict[int, tuple[np.ndarray, np.ndarray]]:
    """The merged bounds' duals given to the box rows whose limit is the merged one (id(rows) → (up, lo))."""
    lo_eff, hi_eff = limits
    return {id(r): (np.where((r.upper + r.offset) == hi_eff, up_all, 0.0),
                    np.where((r.lower + r.offset) == lo_eff, lo_all, 0.0)) for r in rows}


def linear_rows(
    name: str, kind: str, matrix: Any, lower: np.ndarray, upper: np.ndarray, labels: Sequence[Any],
    *, unit: str = "weight", soft: float | None = None, constant: np.ndarray | float = 0.0,
    scale: float = 1.0,
) -> Rows:
    """Rows lower ≤ A·w + c ≤ upper for a (sparse or dense) matrix A."""
    const = np.broadcast_to(np.asarray(constant, dtype=np.float64), (len(lower),)).copy()
    return Rows(
        name=name, kind=kind, unit=unit, labels=labels,
        lower=np.asarray(lower, dtype=np.float64), upper=np.asarray(upper, dtype=np.float64),
        evaluate=lambda w: np.asarray(matrix @ w).ravel() + const,
        expression=lambda v: matrix @ v.w + const,
        soft=soft, scale=scale, linear=Linear(w=matrix, constant=const),
    )


def scalar(value: float | None, default: float) -> np.ndarray:
    return np.array([default if value is None else float(value)])


class Constraint:
    """Base class: a scenario key's options turned into rows; adds, checks and describes itself.

    Subclasses set ``key`` (the scenario key) and ``kind`` and implement :meth:`make_rows`.
    """

    key: ClassVar[str] = ""
    kind: ClassVar[str] = ""
    #: True when the class needs a benchmark (raises at build time without one).
    needs_benchmark: ClassVar[bool] = False

    def __init__(self, options: Any, data: ProblemData, spec: RebalanceSpec) -> None:
        self.options = options
        self.data = data
        self.spec = spec
        self.path = spec.path("constraints", self.key)
        if self.needs_benchmark and data.benchmark is None:
            raise self.path.fail("needs a benchmark (pass benchmark=...)")

    @cached_property
    def rows(self) -> list[Rows]:
        """The limit blocks of this constraint (built once)."""
        return self.make_rows()

    def make_rows(self) -> list[Rows]:  # pragma: no cover - abstract
        raise NotImplementedError

    @property
    def soft_penalty(self) -> float | None:
        soft = self.options.get("soft") if isinstance(self.options, Mapping) else None
        return None if soft is None else float(soft["penalty"])

    # (a) add itself to the cvxpy problem (through the assembly, which merges box rows)
    def add(self, assembly: Any) -> None:
        for rows in self.rows:
            assembly.add(rows)

    # (b) check a weight vector with plain numpy
    def check(self, weights: np.ndarray) -> list[dict[str, Any]]:
        return [check_rows(rows, weights) for rows in self.rows]

    # (c) describe itself as rows of the constraint table
    def describe(self, weights: np.ndarray, duals: Mapping[int, tuple[np.ndarray, np.ndarray]]) -> list[dict[str, Any]]:
        out: list[dict[str, Any]] = []
        for rows in self.rows:
            mu_up, mu_lo = duals.get(id(rows), (np.full(rows.size, np.nan), np.full(rows.size, np.nan)))
            out.extend(describe_rows(rows, rows.evaluate(weights), mu_up, mu_lo))
        return out


def check_rows(rows: Rows, weights: np.ndarray) -> dict[str, Any]:
    """The worst element of a block: value, its limits, the breach and whether it passes."""
    value = np.asarray(rows.evaluate(weights), dtype=np.float64)
    breach = rows.breach(value)
    tol = rows.tolerance()
    if not rows.size:
        i = 0
    elif (breach > 0).any():
        i = int(np.argmax(breach - tol))
    else:
        slack = rows.slack(value)
        i = int(np.argmin(np.where(np.isfinite(slack), slack, np.inf)))
    label = rows.labels[i] if rows.per_asset or rows.size > 1 or rows.labels[0] != rows.name else None
    ok = bool(np.all(breach <= tol)) and bool(np.isfinite(value).all())
    return {
        "name": rows.name if label is None else f"{rows.name}[{label}]",
        "kind": rows.kind,
        "value": float(value[i]),
        "lower": _finite_or_nan(rows.lower[i]),
        "upper": _finite_or_nan(rows.upper[i]),
        "breach": float(breach[i]),
        "tolerance": float(tol[i]),
        "soft": rows.soft is not None,
        "ok": ok or rows.soft is not None,
    }


def describe_rows(rows: Rows, value: np.ndarray, mu_up: np.ndarray, mu_lo: np.ndarray) -> list[dict[str, Any]]:
    """Table rows: one per label, or one summary row (the tightest asset) for per-asset blocks."""
    slack = rows.slack(value)
    limit = np.where(np.isfinite(rows.upper), np.abs(rows.upper), 0.0)
    limit = np.fmax(limit, np.where(np.isfinite(rows.lower), np.abs(rows.lower), 0.0))
    binding = slack <= BINDING_TOL * np.maximum(1.0, limit)
    price = np.nan_to_num(mu_up, nan=0.0) + np.nan_to_num(mu_lo, nan=0.0)
    if np.isnan(mu_up).all() and np.isnan(mu_lo).all():
        price = np.full(rows.size, np.nan)

    def row(i: int, name: str, extra: Mapping[str, Any]) -> dict[str, Any]:
        return {
            "name": name, "kind": rows.kind, "value": float(value[i]),
            "lower": _finite_or_nan(rows.lower[i]), "upper": _finite_or_nan(rows.upper[i]),
            "slack": float(slack[i]) if np.isfinite(slack[i]) else np.nan,
            "binding": bool(binding[i]), "shadow_price": float(price[i]),
            "unit": rows.unit, "soft": rows.soft is not None, **extra,
        }

    if rows.per_asset:
        if rows.size == 0:
            return []
        i = int(np.argmin(np.where(np.isfinite(slack), slack, np.inf)))
        j = int(np.nanargmax(price)) if np.isfinite(price).any() else i
        return [row(j if binding[j] else i, rows.name, {
            "asset": rows.labels[j if binding[j] else i], "n_binding": int(binding.sum()),
        })]
    named = rows.size > 1 or rows.labels[0] != rows.name
    return [row(i, f"{rows.name}[{rows.labels[i]}]" if named else rows.name, {"asset": None, "n_binding": int(binding[i])})
            for i in range(rows.size)]


def _finite_or_nan(x: float) -> float:
    return float(x) if np.isfinite(x) else np.nan


def interval_arrays(items: Sequence[Sequence[float | None]]) -> tuple[np.ndarray, np.ndarray]:
    """[[lower, upper], ...] with None → (lower array with −inf, upper array with +inf)."""
    lower = np.array([-np.inf if lo is None else lo for lo, _ in items], dtype=np.float64)
    upper = np.array([np.inf if hi is None else hi for _, hi in items], dtype=np.float64)
    return lower, upper
