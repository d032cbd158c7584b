"""The immutable result of a rebalance: target weights, trades, constraint table, checks, provenance."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._version import __version__
from trimtab.construct._solve import SOLVER_SETTINGS
from trimtab.construct._verify import OBJECTIVE_TOL
from trimtab.construct.constraints._base import ABS_TOL, REL_TOL

if TYPE_CHECKING:
    from trimtab.attribution import RiskAttribution
    from trimtab.construct._problem import Outcome, RebalanceProblem
    from trimtab.model import FactorModel

CONSTRAINT_COLUMNS = ["name", "kind", "value", "lower", "upper", "slack", "binding", "shadow_price", "unit", "soft",
                      "asset", "n_binding"]


@dataclass(frozen=True, eq=False)
class RebalanceResult:
    """Target weights and trades of one rebalance, with the evidence that they respect every limit.

    Attributes
    ----------
    weights : pandas.Series
        Target weights of NAV by model asset.
    initial_weights : pandas.Series
        Weights before the trade (model assets, then any sold outside the optimizer).
    benchmark : pandas.Series or None
    trades : pandas.DataFrame
        Index asset; initial_weight, target_weight, trade (= target − initial), and when the inputs
        allow: notional (trade·NAV), shares (notional / price), adv_fraction (|shares| / ADV) and
        cost (estimated, fraction of NAV).
    constraints : pandas.DataFrame
        name, kind, value, lower, upper, slack, binding, shadow_price (objective gained per unit the
        limit is loosened), unit, soft; per-asset blocks are one row (their tightest asset, with
        ``asset`` and ``n_binding``).
    objective : Mapping[str, float]
        alpha, risk_penalty, costs, penalties, total (recomputed from the weights).
    status, solver : str
    iterations : int
    solve_time, build_time : float
        Seconds.
    verification : pandas.DataFrame
        Every check: name, kind, value, lower, upper, breach, tolerance, soft, ok.
    pre_trade, post_trade : RiskAttribution or None
        Risk attribution of the initial and target weights, against the benchmark when there is one
        (None when attribution is unavailable or the result carries no model). Computed on first
        access and kept: a sweep that never reads them does not pay for them.
    provenance : dict
        scenario_hash, version, solver, tolerances, attempts, notes.
    scenario : Mapping
        The validated, normalised scenario.
    """

    weights: pd.Series
    initial_weights: pd.Series
    benchmark: pd.Series | None
    trades: pd.DataFrame
    constraints: pd.DataFrame
    objective: Mapping[str, float]
    status: str
    solver: str
    iterations: int
    solve_time: float
    build_time: float
    verification: pd.DataFrame
    provenance: dict[str, Any] = field(default_factory=dict)
    scenario: Mapping[str, Any] = field(default_factory=dict)
    periods_per_year: float = 252.0
    ex_ante: Mapping[str, float] = field(default_factory=dict)
    # the inputs of the lazy pre/post attribution (the model's own factor groups apply)
    _model: FactorModel | None = field(default=None, repr=False, compare=False)
    _holdings: pd.Series | None = field(default=None, repr=False, compare=False)
    _attributes: pd.DataFrame | None = field(default=None, repr=False, compare=False)

    @cached_property
    def pre_trade(self) -> RiskAttribution | None:
        """Risk attribution of the holdings (model assets), active when there is a benchmark."""
        return self._attribution(self._holdings)

    @cached_property
    def post_trade(self) -> RiskAttribution | None:
        """Risk attribution of the target weights, active when there is a benchmark."""
        return self._attribution(self.weights)

    @cached_property
    def stress(self) -> pd.DataFrame | None:
        """Every shock of the scenario (stress_loss and stress), before and after the trade; see
        :func:`trimtab.construct._stress_table.stress_table`. None when the scenario has no shocks."""
        from trimtab.construct._stress_table import stress_table

        return stress_table(self._model, self._holdings, self.weights, self.benchmark, self.scenario)

    def _attribution(self, weights: pd.Series | None) -> RiskAttribution | None:
        # the seam to trimtab.attribution: absent module (or no model) → no pre/post attribution
        if self._model is None or weights is None:
            return None
        try:
            return self._model.attribute(weights, self.benchmark, attributes=self._attributes)
        except ImportError:
            return None

    @property
    def objective_breakdown(self) -> Mapping[str, float]:
        """Alias of :attr:`objective`."""
        return self.objective

    @property
    def turnover(self) -> float:
        """One-way turnover ½·Σ|trade|."""
        return 0.5 * float(self.trades["trade"].abs().sum())

    @property
    def n_names(self) -> int:
        """Assets held with |w| > 1e-8."""
        return int((self.weights.abs() > 1e-8).sum())

    @property
    def binding(self) -> pd.DataFrame:
        """The binding rows of the constraint table."""
        return self.constraints[self.constraints["binding"].astype(bool)]

    def summary(self) -> str:
        """A short text: status, solver, the objective, risk, turnover and the binding limits."""
        lines = [
            f"Rebalance: {self.status} ({self.solver}, {self.iterations} iterations, "
            f"build {self.build_time:.3f} s, solve {self.solve_time:.3f} s)",
            f"Assets {len(self.weights)}; names held {self.n_names}; one-way turnover {self.turnover:.2%}",
        ]
        for key, label in (("tracking_error", "Ex-ante tracking error"), ("total_risk", "Ex-ante total risk")):
            if key in self.ex_ante:
                lines.append(f"{label} (annualised): {self.ex_ante[key]:.2%}")
        lines.append("Objective: " + ", ".join(f"{k} {v:.6g}" for k, v in self.objective.items()))
        binding = self.binding
        if len(binding):
            lines.append("Binding constraints:")
            for r in binding.itertuples():
                price = "" if not np.isfinite(r.shadow_price) else f", shadow price {r.shadow_price:.4g}"
                lines.append(f"  {r.name}: {r.value:.6g} {r.unit}{price}")
        else:
            lines.append("Binding constraints: none")
        checks = self.verification
        lines.append(f"Verification: {int(checks['ok'].sum())} of {len(checks)} checks passed")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.summary()


def make_result(problem: RebalanceProblem, outcome: Outcome) -> RebalanceResult:
    """Assemble the result of a verified outcome."""
    data = problem.data
    assets = data.assets
    weights = pd.Series(outcome.weights, index=assets, name="weight")
    initial = pd.Series(data.holdings, index=assets, name="weight")
    trades = _trades(problem, outcome.weights)
    if len(data.sold_outside):
        initial = pd.concat([initial, data.sold_outside.rename("weight")])
    bench = None if data.benchmark is None else pd.Series(data.benchmark, index=assets, name="weight")
    table = _constraint_table(problem, outcome)
    objective = problem.objective.breakdown(outcome.weights, _penalty(outcome))
    return RebalanceResult(
        weights=weights,
        initial_weights=initial,
        benchmark=bench,
        trades=trades,
        constraints=table,
        objective=objective,
        status=outcome.status,
        solver=outcome.solver,
        iterations=outcome.iterations,
        solve_time=outcome.solve_time,
        build_time=outcome.build_time,
        verification=outcome.verification,
        provenance=_provenance(problem, outcome),
        scenario=problem.spec.mapping,
        periods_per_year=data.periods_per_year,
        ex_ante=_ex_ante(problem, outcome.weights),
        _model=problem.model,
        _holdings=pd.Series(data.holdings, index=assets),
        _attributes=data.attributes,
    )


def _penalty(outcome: Outcome) -> float:
    from trimtab.construct._verify import soft_penalty

    return soft_penalty(outcome.rows, outcome.weights)


def _trades(problem: RebalanceProblem, weights: np.ndarray) -> pd.DataFrame:
    data = problem.data
    trade = weights - data.holdings
    frame = pd.DataFrame({"initial_weight": data.holdings, "target_weight": weights, "trade": trade}, index=data.assets)
    if data.nav is not None:
        frame["notional"] = trade * data.nav
        attrs = data.attributes
        if attrs is not None and "price" in attrs.columns and pd.api.types.is_numeric_dtype(attrs["price"]):
            frame["shares"] = frame["notional"] / attrs["price"].to_numpy(dtype=np.float64)
            if "adv" in attrs.columns and pd.api.types.is_numeric_dtype(attrs["adv"]):
                with np.errstate(divide="ignore", invalid="ignore"):
                    frame["adv_fraction"] = frame["shares"].abs() / attrs["adv"].to_numpy(dtype=np.float64)
    rates = problem.objective.rates
    if rates.any:
        frame["cost"] = rates.cost(trade)
    if len(data.sold_outside):
        sold = data.sold_outside
        extra = pd.DataFrame({"initial_weight": sold, "target_weight": 0.0, "trade": -sold}, index=sold.index)
        if data.nav is not None:
            extra["notional"] = -sold * data.nav
        frame = pd.concat([frame, extra])
    frame.index.name = "asset"
    return frame


def _constraint_table(problem: RebalanceProblem, outcome: Outcome) -> pd.DataFrame:
    records: list[dict[str, Any]] = []
    for c in problem.constraints:
        records.extend(c.describe(outcome.weights, outcome.duals))
    known = {id(r) for c in problem.constraints for r in c.rows}
    from trimtab.construct.constraints._base import describe_rows

    for rows in outcome.rows:
        if id(rows) not in known:
            mu_up, mu_lo = outcome.duals.get(id(rows), (np.full(rows.size, np.nan),) * 2)
            records.extend(describe_rows(rows, rows.evaluate(outcome.weights), mu_up, mu_lo))
    return pd.DataFrame.from_records(records, columns=CONSTRAINT_COLUMNS)


def _ex_ante(problem: RebalanceProblem, weights: np.ndarray) -> dict[str, float]:
    from trimtab.construct._variables import variance_numpy

    data = problem.data
    ppy = data.periods_per_year
    out = {"total_risk": float(np.sqrt(ppy * sum(variance_numpy(data, weights, False))))}
    if data.benchmark is not None:
        out["tracking_error"] = float(np.sqrt(ppy * sum(variance_numpy(data, weights, True))))
    return out


def _provenance(problem: RebalanceProblem, outcome: Outcome) -> dict[str, Any]:
    return {
        "scenario_hash": problem.spec.scenario_hash,
        "version": __version__,
        "solver": outcome.solver,
        "solver_settings": dict(outcome.attempts[-1].settings) if outcome.attempts else dict(SOLVER_SETTINGS.get(outcome.solver, {})),
        "verification_tolerance": {"absolute": ABS_TOL, "relative": REL_TOL, "objective": OBJECTIVE_TOL},
        "attempts": [f"{a.solver}: {a.status} ({a.iterations} it, {a.seconds:.3f} s)" for a in outcome.attempts],
        "notes": list(outcome.notes),
        "model": repr(problem.model),
        "periods_per_year": problem.data.periods_per_year,
    }
