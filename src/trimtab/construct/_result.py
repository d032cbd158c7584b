"""The immutable result of a rebalance: target weights, trades, constraint table, checks, provenance."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._version import __version__
from trimtab.construct._alpha_factor import alpha_lines, alpha_provenance, alpha_warnings
from trimtab.construct._figures import desk_figures
from trimtab.construct._overlay_result import OverlayResult, overlay_result
from trimtab.construct._solve import SOLVER_SETTINGS
from trimtab.construct._orders import NOT_FIT_STATUS, rounding_notices, trade_list_for, weights_without_noise
from trimtab.construct._trade_list import TradeList, weight_orders
from trimtab.construct._warnings import (
    AlertSettings,
    RunWarning,
    concentration_warnings,
    heuristic_warnings,
    pinned_positions,
    solver_warnings,
)
from trimtab.construct._verify import OBJECTIVE_TOL
from trimtab.construct.constraints._base import ABS_TOL, REL_TOL

if TYPE_CHECKING:
    from trimtab.model._alpha import AlphaAlignment
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
    trade_list : TradeList or None
        The order-ready list (whole shares or lots, re-verified), when the fund's NAV and prices
        are known; :attr:`final_weights` are then the rounded book.
    alpha : pandas.Series or None
        The alpha the run used (annualised, model assets; assets without a score hold 0).
    notices : tuple of RunWarning
        Warnings of the run and its inputs (see :attr:`warnings`, which adds the concentration alerts).
    alerts : AlertSettings
        Thresholds of the concentration alerts.
    pinned : pandas.Series or None
        Assets at an upper weight limit (asset → limit name) in the final book.
    overlay : OverlayResult or None
        The hedge overlay sized with the book (scenario ``overlay:``): notionals, contracts, and
        the cash book, the overlay and the hedged book side by side. :attr:`weights`,
        :attr:`ex_ante` and the attributions are the cash book's.
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
    trade_list: TradeList | None = None
    alpha: pd.Series | None = None
    notices: tuple[RunWarning, ...] = ()
    alerts: AlertSettings = field(default_factory=AlertSettings)
    pinned: pd.Series | None = None
    nav: float | None = None
    cost_per_asset: pd.Series | None = None
    context: Mapping[str, Any] = field(default_factory=dict)
    overlay: OverlayResult | None = None
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
        """Risk attribution of the final book (the rounded one when there is a trade list), active
        when there is a benchmark."""
        return self._attribution(self.final_weights)

    @cached_property
    def alpha_alignment(self) -> AlphaAlignment | None:
        """How much of :attr:`alpha` the model's own factors span (before any alpha factor), or None
        without an alpha objective or a model; see :func:`trimtab.alpha_alignment`."""
        if self.alpha is None or self._model is None:
            return None
        from trimtab.model._alpha import alpha_alignment, without_alpha_factor

        return alpha_alignment(without_alpha_factor(self._model), self.alpha)

    @property
    def alpha_factor(self) -> Mapping[str, Any] | None:
        """The alpha factor the risk figures include (volatility, spanned share), or None."""
        return self.provenance.get("alpha_factor")

    @property
    def final_weights(self) -> pd.Series:
        """The book after the trades as they would be sent: rounded when there is a trade list."""
        return self.trade_list.weights if self.trade_list is not None else self.weights

    @property
    def orders(self) -> pd.DataFrame:
        """Only the assets that trade, largest first: the trade list in shares when prices and NAV
        are known (:class:`TradeList`), else in weights (fractions of NAV)."""
        if self.trade_list is not None:
            return self.trade_list.orders
        return weight_orders(self.trades)

    @cached_property
    def figures(self) -> dict[str, float]:
        """Expected active return, information ratio, tracking error, total risk, beta, turnover,
        estimated cost and names bought and sold of the final book (:data:`DESK_FIGURES`)."""
        return self._figures(self.final_weights)

    @cached_property
    def figures_before(self) -> dict[str, float]:
        """The same figures for the holdings (no trades: turnover and cost 0)."""
        return {} if self._holdings is None else self._figures(self._holdings, before=True)

    def _figures(self, weights: pd.Series, before: bool = False) -> dict[str, float]:
        if self._model is None or self._holdings is None:
            return {}
        model = self._model.subset(self.weights.index) if len(self._model.assets) != len(self.weights) else self._model
        # names sold outright that the model no longer covers; get_indexer hashes, where isin on an
        # arrow-string index iterates in Python (19 ms of a 70 ms page at 5,000 names)
        sold = self.trades.loc[self.weights.index.get_indexer(self.trades.index) < 0, "trade"]
        cost = None if self.cost_per_asset is None else self.cost_per_asset.to_numpy(dtype=np.float64)
        return desk_figures(
            model,
            weights.to_numpy(dtype=np.float64),
            self._holdings.to_numpy(dtype=np.float64),
            benchmark=None if self.benchmark is None else self.benchmark.to_numpy(dtype=np.float64),
            alpha=None if self.alpha is None else self.alpha.to_numpy(dtype=np.float64),
            cost=None if cost is None else (0.0 * cost if before else cost),
            nav=self.nav,
            sold_outside=0.0 if before else float(sold.abs().sum()),
            n_sold_outside=0 if before else int((sold.abs() > 0).sum()),
        )

    @cached_property
    def warnings(self) -> list[RunWarning]:
        """Everything the desk should see before trading: the run's notices (dropped positions,
        zeroed alpha, solver fall-backs, heuristics, rounding), then the concentration alerts of
        the final book under :attr:`alerts`."""
        return [*self.notices, *concentration_warnings(self.post_trade, self.pinned, self.alerts)]

    def with_context(
        self,
        *,
        notices: tuple[RunWarning, ...] = (),
        alerts: AlertSettings | None = None,
        context: Mapping[str, Any] | None = None,
    ) -> RebalanceResult:
        """A copy with ``notices`` put first (e.g. the input alignment's), other alert thresholds and
        ``context`` (description, NAV and cash, model date: what the reports state) merged in."""
        return replace(
            self,
            notices=(*notices, *self.notices),
            alerts=alerts if alerts is not None else self.alerts,
            context={**self.context, **(context or {})},
        )

    @cached_property
    def stress(self) -> pd.DataFrame | None:
        """Every shock of the scenario (stress_loss and stress), before and after the trade; see
        :func:`trimtab.construct._stress_table.stress_table`. None when the scenario has no shocks.
        Shocks and replays run on the model's own factors: an alpha factor has no history and, being
        uncorrelated with the others, no conditional move."""
        from trimtab.construct._alpha_factor import base_model
        from trimtab.construct._stress_table import stress_table

        model = None if self._model is None else base_model(self._model)
        return stress_table(model, self._holdings, self.weights, self.benchmark, self.scenario)

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
        """A short text: status, solver, risk, expected alpha and information ratio, turnover, the
        orders, the warnings, the objective and the binding limits."""
        lines = [
            f"Rebalance: {self.status} ({self.solver}, {self.iterations} iterations, "
            f"build {self.build_time:.3f} s, solve {self.solve_time:.3f} s)",
            f"Assets {len(self.weights)}; names held {self.n_names}; one-way turnover {self.turnover:.2%}",
        ]
        for key, label in (("tracking_error", "Ex-ante tracking error"), ("total_risk", "Ex-ante total risk")):
            if key in self.ex_ante:
                lines.append(f"{label} (annualised): {self.ex_ante[key]:.2%}")
        lines.extend(alpha_lines(self))
        figures = self.figures
        if figures and np.isfinite(figures.get("expected_alpha", np.nan)):
            lines.append(
                f"Expected active return {figures['expected_alpha']:.2%}, information ratio {figures['information_ratio']:.2f}; "
                f"{int(figures['names_bought'])} names bought, {int(figures['names_sold'])} sold"
                + (f"; estimated cost {1e4 * figures['cost']:.2f} bp of NAV" if np.isfinite(figures.get("cost", np.nan)) else "")
            )
        if self.trade_list is not None:
            tl = self.trade_list
            lines.append(f"Orders: {len(tl.orders)} in whole shares; cash after trades and costs {tl.cash_after_costs:,.2f}"
                         + ("" if tl.ok else " (NOT FIT TO SEND: the rounded book breaches a limit)"))
        for warning in self.warnings:
            lines.append(f"Warning: {warning.message}")
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
    trade_list, input_notices = trade_list_for(problem, outcome)
    if trade_list is None:
        cleaned, note = weights_without_noise(problem, outcome)
        if note is not None:
            outcome = replace(outcome, weights=cleaned, notes=[*outcome.notes, note])
            weights = pd.Series(outcome.weights, index=assets, name="weight")
            trades = _trades(problem, outcome.weights)
    table = _constraint_table(problem, outcome)
    objective = problem.objective.breakdown(outcome.weights, _penalty(outcome))
    final = outcome.weights if trade_list is None else trade_list.weights.to_numpy()
    rates = problem.objective.rates
    notices = [*input_notices, *solver_warnings(outcome.notes, outcome.skipped, outcome.solver), *heuristic_warnings(outcome.notes)]
    status = outcome.status
    if trade_list is not None:
        notices.extend(rounding_notices(trade_list))
        if not trade_list.ok:
            status = NOT_FIT_STATUS
    notices.extend(alpha_warnings(problem))
    return RebalanceResult(
        weights=weights,
        initial_weights=initial,
        benchmark=bench,
        trades=trades,
        constraints=table,
        objective=objective,
        status=status,
        solver=outcome.solver,
        iterations=outcome.iterations,
        solve_time=outcome.solve_time,
        build_time=outcome.build_time,
        verification=outcome.verification,
        provenance=_provenance(problem, outcome),
        scenario=problem.spec.mapping,
        periods_per_year=data.periods_per_year,
        ex_ante=_ex_ante(problem, outcome.weights),
        trade_list=trade_list,
        alpha=pd.Series(data.alpha, index=assets, name="alpha") if problem.objective.kind in ("utility", "alpha") else None,
        notices=tuple(notices),
        pinned=pinned_positions(outcome.rows, outcome.weights),  # the optimizer's: rounding moves them by < 1 lot
        nav=data.nav,
        cost_per_asset=pd.Series(rates.cost(final - data.holdings), index=assets, name="cost") if rates.any else None,
        overlay=None if outcome.overlay is None else overlay_result(data, outcome.weights, outcome.overlay),
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
    from trimtab.construct.constraints._base import BINDING_TOL, describe_rows

    for rows in outcome.rows:
        if id(rows) not in known:
            mu_up, mu_lo = outcome.duals.get(id(rows), (np.full(rows.size, np.nan),) * 2)
            records.extend(describe_rows(rows, rows.evaluate(outcome.weights), mu_up, mu_lo))
    table = pd.DataFrame.from_records(records, columns=CONSTRAINT_COLUMNS)
    table["binding_assets"] = table["name"].map(_binding_assets(list(outcome.rows), outcome.weights, BINDING_TOL))
    return _merge_same_binding(table)


def _merge_same_binding(table: pd.DataFrame) -> pd.DataFrame:
    """One row per binding per-asset limit: limits that bind the same assets at the same value (long_only
    and weight.min at 0, say) become one row named ``long_only = weight``; the merged bound's dual is
    given to each of them (``split_box_duals``), so the row keeps the largest, not the sum."""
    per_asset = table["asset"].notna() & table["binding"].astype(bool)
    if per_asset.sum() < 2:
        return table
    keys = table.loc[per_asset].apply(lambda r: (round(float(r["value"]), 12), int(r["n_binding"]), str(r["binding_assets"]),
                                                 str(r["unit"])), axis=1)
    drop = []
    for _, group in table.loc[per_asset].groupby(keys, sort=False):
        if len(group) < 2:
            continue
        first = group.index[0]
        table.loc[first, "name"] = " = ".join(group["name"].astype(str))
        table.loc[first, "shadow_price"] = float(group["shadow_price"].max())
        drop.extend(group.index[1:])
    return table.drop(index=drop).reset_index(drop=True)


def _binding_assets(rows: list[Any], weights: np.ndarray, tol: float) -> dict[str, str]:
    """Per-asset limit name → its binding assets (largest weight first, at most five named)."""
    from trimtab.construct._warnings import names

    out: dict[str, str] = {}
    for r in rows:
        if not r.per_asset or r.name in out or not r.size:
            continue
        value = np.asarray(r.evaluate(weights), dtype=np.float64)
        slack = r.slack(value)
        limit = np.fmax(np.where(np.isfinite(r.upper), np.abs(r.upper), 0.0), np.where(np.isfinite(r.lower), np.abs(r.lower), 0.0))
        binding = slack <= tol * np.maximum(1.0, limit)
        if binding.any():
            order = np.argsort(-np.abs(weights[: len(value)] if len(value) == len(weights) else value)[binding], kind="stable")
            out[r.name] = names(np.asarray(r.labels, dtype=object)[binding][order])
    return out


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
        **alpha_provenance(problem),
    }
