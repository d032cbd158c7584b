"""The efficient frontier of a scenario: expected active return against tracking error, and
against turnover, with the scenario's other constraints in force.

Both are sweeps (:func:`trimtab.runs.sweep`): the problem is built once and re-solved per point.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError
from trimtab.model import FactorModel
from trimtab.runs._executors import Executor, Outcome
from trimtab.runs._sweep import apply_point, sweep

_COLUMNS = ["limit", "status", "tracking_error", "turnover", "expected_alpha", "n_holdings", "error"]


@dataclass(frozen=True, eq=False)
class FrontierResult:
    """Frontier tables.

    Attributes
    ----------
    tracking_error : pandas.DataFrame
        One row per tracking-error cap (``limit``): the solved point's forecast ``tracking_error``,
        ``turnover``, ``expected_alpha`` (αᵀ(w − b), annualised), ``status`` and ``error``.
    turnover : pandas.DataFrame or None
        The same against one-way turnover caps, when asked for.
    """

    tracking_error: pd.DataFrame
    turnover: pd.DataFrame | None = None

    def summary(self) -> str:
        """The frontier's range and, for the TE frontier, the slope (the information ratio)."""
        lines = []
        for name, table in (("tracking error", self.tracking_error), ("turnover", self.turnover)):
            if table is None:
                continue
            solved = table[table["status"] == "solved"]
            lines.append(
                f"Frontier against {name}: {len(solved)}/{len(table)} points solved"
                + (
                    f"; expected active return {solved['expected_alpha'].min():.2%} to {solved['expected_alpha'].max():.2%}"
                    if len(solved)
                    else ""
                )
            )
        return "\n".join(lines)

    def charts(self) -> dict[str, str]:
        """Inline SVG charts: expected active return against TE (and against turnover)."""
        from trimtab.report._pages import frontier_chart

        out = {"Expected active return against forecast tracking error": frontier_chart(self.tracking_error, name="frontier-te")}
        if self.turnover is not None:
            out["Expected active return against one-way turnover"] = frontier_chart(
                self.turnover, x="turnover", name="frontier-turnover"
            )
        return out


def _levels(values: Sequence[float] | None, name: str) -> list[float]:
    if values is None:
        return []
    levels = [float(v) for v in values]
    if not levels or any(not np.isfinite(v) or v <= 0 for v in levels):
        raise InputError(f"frontier: {name} must be a non-empty list of positive numbers, got {list(values)!r}")
    return sorted(set(levels))


def default_tracking_errors(scenario: Mapping[str, Any], n_points: int = 10, *, unbound: float | None = None) -> list[float]:
    """Caps from a quarter to twice the scenario's TE cap, or 0.5 % to 6 % without one; never beyond
    ``unbound``, the tracking error of the best book with no TE cap (above it the cap binds no more and
    every point would be the same book), rounded to 0.01 %."""
    cap = (scenario.get("constraints") or {}).get("tracking_error", {})
    cap = cap.get("max") if isinstance(cap, Mapping) else None
    low, high = (0.25 * float(cap), 2.0 * float(cap)) if cap else (0.005, 0.06)
    if unbound is not None and np.isfinite(unbound) and unbound > 0:
        high = min(high, float(unbound))
        low = min(low, 0.5 * high)
    return sorted({round(float(x), 4) for x in np.linspace(low, high, n_points)})


def _unbound_tracking_error(model: FactorModel, scenario: Mapping[str, Any], build: Callable[..., Any] | None,
                            **inputs: Any) -> float | None:
    """The tracking error of the scenario's best book without its TE cap (None when that does not solve)."""
    from trimtab.errors import TrimtabError

    free = apply_point(scenario, {})
    free["constraints"] = {k: v for k, v in dict(free.get("constraints") or {}).items() if k != "tracking_error"}
    from trimtab.construct import build_problem

    builder = build if build is not None else build_problem
    try:
        result = builder(model, free, **inputs).solve()
    except TrimtabError:
        return None
    return result.ex_ante.get("tracking_error")


def _table(result: Any, key: str) -> pd.DataFrame:
    table = result.table.rename(columns={key: "limit"}).reset_index(drop=True)
    for column in _COLUMNS:
        if column not in table.columns:
            table[column] = np.nan
    return table[_COLUMNS]


def frontier(
    model: FactorModel,
    scenario: Mapping[str, Any],
    *,
    holdings: pd.Series,
    benchmark: pd.Series | None = None,
    alpha: pd.Series,
    attributes: pd.DataFrame | None = None,
    nav: float | None = None,
    tracking_errors: Sequence[float] | None = None,
    turnovers: Sequence[float] | None = None,
    n_points: int = 10,
    executor: Executor | None = None,
    build: Callable[..., Any] | None = None,
    progress: Callable[[Outcome], None] | None = None,
) -> FrontierResult:
    """Expected active return against tracking error (and turnover) under the scenario's other limits.

    Parameters
    ----------
    model, holdings, benchmark, alpha, attributes, nav
        As for :func:`trimtab.rebalance`; alpha is required (it is the return axis).
    scenario : Mapping
        The scenario whose constraints stay in force.
    tracking_errors : sequence of float, optional
        Annualised TE caps (default: ``n_points`` from a quarter to twice the scenario's cap).
    turnovers : sequence of float, optional
        One-way turnover caps for the second frontier (none by default).
    n_points : int, default 10
        Points of the default TE grid.
    executor : Executor, optional
        Where the points run.
    build : callable, optional
        The problem builder (default :func:`trimtab.construct.build_problem`), as for :func:`sweep`.
    progress : callable, optional
        Called with each chunk's outcome.

    Returns
    -------
    FrontierResult

    Raises
    ------
    InputError
        On bad caps or a missing alpha.

    Notes
    -----
    TE frontier: maximise αᵀw (less the scenario's trading costs, when it has them) subject to
    √(P·aᵀΣa) ≤ σ̄ and the scenario's other constraints, for each cap σ̄. With the budget as the only other constraint its solution is
    a = σ̄·Σ⁻¹α̃/√(P·α̃ᵀΣ⁻¹α̃), α̃ = α − γ1, a straight line of slope √(α̃ᵀΣ⁻¹α̃/P), the
    information ratio (Markowitz 1952; Grinold and Kahn, *Active Portfolio Management*, ch. 5).
    Turnover frontier: the scenario as written (its objective and TE cap) with turnover caps τ̄.
    """
    if alpha is None:
        raise InputError("frontier: alpha is required (expected active return is αᵀ(w − b))")
    if isinstance(n_points, bool) or not isinstance(n_points, int) or n_points < 2:
        raise InputError(f"frontier: n_points must be a whole number ≥ 2, got {n_points!r}")
    inputs = dict(holdings=holdings, benchmark=benchmark, alpha=alpha, attributes=attributes, nav=nav, executor=executor, build=build, progress=progress)
    alpha_only = apply_point(scenario, {})
    costs = {k: v for k, v in dict(scenario.get("objective") or {}).items() if k in ("cost_aversion", "costs")}
    alpha_only["objective"] = {"maximize": "alpha", **costs}  # trading costs stay in the objective
    levels = _levels(tracking_errors, "tracking_errors")
    if not levels:
        unbound = _unbound_tracking_error(model, alpha_only, build, holdings=holdings, benchmark=benchmark, alpha=alpha,
                                          attributes=attributes, nav=nav)
        levels = default_tracking_errors(scenario, n_points, unbound=unbound)
    te = sweep(model, alpha_only, {"tracking_error.max": levels}, **inputs)
    turnover = None
    caps = _levels(turnovers, "turnovers")
    if caps:
        turnover = _table(sweep(model, scenario, {"turnover.max": caps}, **inputs), "turnover.max")
    return FrontierResult(tracking_error=_table(te, "tracking_error.max"), turnover=turnover)
