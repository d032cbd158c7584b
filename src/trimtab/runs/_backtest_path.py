"""One scenario path of a walk-forward backtest: fit, rebalance, hold, drift, date after date.

Each path is sequential in time (today's trade starts from yesterday's drifted book); the paths of
different scenarios are independent and run where the executor puts them. Every dated read goes
through :class:`~trimtab.runs._asof.AsOf`.

A date that does not solve as written follows the scenario's policy (``backtest.when_infeasible``):

- ``relax`` (default): trade at the minimally relaxed limits (the first option of the
  infeasibility diagnosis: one limit moved as little as possible, every other as written);
  status ``relaxed``, the moves in ``relaxed``. When no relaxation solves, the book is held.
- ``hold``: keep the drifted book; status ``held``, the conflicting limits in ``reason``.
- ``stop``: end the path at that date; status ``stopped``.

A solver failure holds the book (status ``failed``). Benchmark weights drift with their assets'
returns between the dates of the benchmark table, as the benchmark's own return is computed
(buy and hold over the holding period); a new row of the table replaces them.
"""

from __future__ import annotations

import functools
import warnings
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from trimtab._format import compact_limits
from trimtab.errors import DataWarning, InfeasibleError, InputError, SolverError
from trimtab.model import FactorModel
from trimtab.runs._asof import AsOf

FitFunction = Callable[[pd.DataFrame, "pd.DataFrame | None"], FactorModel]
#: What a path does on a date that does not solve as written.
POLICIES = ("relax", "hold", "stop")
#: Statuses of a date: solved as written, traded at relaxed limits, book held, solver failure, path stopped.
STATUSES = ("solved", "relaxed", "held", "failed", "stopped")


@dataclass(frozen=True, eq=False)
class PathTask:
    """What is one scenario path's own: its name, scenario and policy for a date that does not
    solve as written (``relax``, ``hold`` or ``stop``, see :data:`POLICIES`)."""

    name: str
    scenario: Mapping[str, Any]
    when_infeasible: str = "relax"
    #: constraint keys this scenario changed from the one it varies (named first in a conflict)
    changed: tuple[str, ...] = ()


@dataclass(frozen=True, eq=False)
class PathInputs:
    """What every scenario path of a backtest reads alike (sent once to each worker)."""

    asset_returns: pd.DataFrame
    factor_returns: pd.DataFrame | None
    alpha_history: pd.DataFrame
    benchmark: pd.DataFrame | None
    initial_holdings: pd.Series | None
    attributes: pd.DataFrame | None
    nav: float | None
    dates: tuple[Any, ...]
    window: int
    fit: FitFunction | Mapping[str, Any] | None
    costs: pd.Series
    impact: pd.Series
    rebalance: Callable[..., Any] | None
    #: models fitted so far by the paths run in this process (in process, or on one worker): every
    #: path fits the same windows, so each date is fitted once. Only for trimtab's own estimators
    #: (deterministic), up to MODEL_CACHE_BYTES; never pickled.
    cache: dict[Any, FactorModel] = field(default_factory=dict, repr=False)

    def __getstate__(self) -> dict[str, Any]:
        return {**self.__dict__, "cache": {}}

    def model_at(self, date: Any) -> FactorModel:
        """The model fitted on the trailing window ending at ``date`` (once per process, where it can be)."""
        known = self.cache.get(date)
        if known is not None:
            return known
        window_returns = AsOf(self.asset_returns, date).tail(self.window)
        window_factors = None
        if self.factor_returns is not None:
            window_factors = AsOf(self.factor_returns, date).tail(self.window).reindex(window_returns.index)
        with warnings.catch_warnings():
            # assets the estimator drops (too few returns in the window) are counted in n_dropped,
            # not warned about once per date
            warnings.simplefilter("ignore", DataWarning)
            model = fit_window(self.fit, window_returns, window_factors)
        # a callable fit need not be deterministic: only trimtab's own estimators are cached
        if not callable(self.fit) and sum(map(_model_bytes, self.cache.values())) + _model_bytes(model) <= MODEL_CACHE_BYTES:
            self.cache[date] = model
        return model


#: Memory the fitted models of one backtest may hold in one process.
MODEL_CACHE_BYTES = 256 * 2**20


def _model_bytes(model: FactorModel) -> int:
    n, k = model.n_assets, model.n_factors
    return 8 * (n * k + k * k + n)


@dataclass(frozen=True, eq=False)
class PathResult:
    """One scenario path's records."""

    records: pd.DataFrame
    exposures: pd.DataFrame
    risk_contributions: pd.DataFrame
    weights: pd.DataFrame
    periods_per_year: float


def fit_window(fit: FitFunction | Mapping[str, Any] | None, returns: pd.DataFrame, factors: pd.DataFrame | None) -> FactorModel:
    """Fit the risk model on one trailing window, by a callable or by estimator settings."""
    if callable(fit):
        return fit(returns, factors)
    settings = dict(fit or {})
    method = settings.pop("method", "time_series" if factors is not None else "statistical")
    if method == "time_series":
        from trimtab.model import fit_time_series

        if factors is None:
            raise InputError("backtest: fit method time_series needs factor_returns (dates × factors)")
        return fit_time_series(returns, factors, **settings)
    from trimtab.model import fit_statistical

    return fit_statistical(returns, **settings)


def _period_growth(returns: pd.DataFrame) -> pd.Series:
    """Π(1 + rₜ) over the holding period, per asset; a missing return counts as 0."""
    return (1.0 + returns.fillna(0.0)).prod(axis=0)


def _drift(weights: pd.Series, growth: pd.Series) -> tuple[pd.Series, float]:
    """Buy-and-hold over the period: new weights of NAV and the period return (cash earns 0)."""
    grown = weights * growth.reindex(weights.index).fillna(1.0)
    value = float(1.0 - weights.sum() + grown.sum())
    return grown / value, value - 1.0


def _euler(model: FactorModel, active: np.ndarray) -> tuple[np.ndarray, float, float]:
    """Active exposures x = Bᵀa and the Euler split of σ = √(xᵀFx + Σdᵢaᵢ²) into factor parts
    xₖ(Fx)ₖ/σ and the specific part Σdᵢaᵢ²/σ (they sum to σ)."""
    x = model._B.T @ active
    fx = model._F @ x
    specific = float(model._d @ (active * active))
    variance = float(x @ fx) + specific
    sigma = float(np.sqrt(max(variance, 0.0)))
    if sigma == 0.0:
        return x, 0.0, 0.0
    return x, sigma, specific / sigma


def _benchmark_at(inputs: PathInputs, date: Any, assets: pd.Index, carried: tuple[Any, pd.Series] | None) -> tuple[pd.Series | None, Any]:
    """Benchmark weights at ``date`` on the model's assets: the latest row dated ≤ date drifted with
    its assets' returns from its date to ``date`` (``carried``: already drifted to the last date)."""
    if inputs.benchmark is None:
        return None, None
    view = AsOf(inputs.benchmark, date)
    row, row_date = view.last(), view.last_date()
    if row is None:
        raise InputError(f"backtest: benchmark has no row dated on or before {date}")
    if carried is not None and carried[0] == row_date:
        row = carried[1].reindex(row.index).fillna(0.0)
    else:
        returns = AsOf(inputs.asset_returns, date).tail(len(inputs.asset_returns))
        since = returns.loc[returns.index > row_date]
        if len(since):
            # buy and hold from the row's date: bᵢ·gᵢ scaled back to the row's total
            row = row.fillna(0.0)
            grown = row * _period_growth(since).reindex(row.index).fillna(1.0)
            row = grown * (float(row.sum()) / float(grown.sum())) if float(grown.sum()) > 0 else row
    row = row.fillna(0.0)
    total = float(row.sum())
    bench = row.reindex(assets).fillna(0.0)
    if bench.sum() > 0:
        bench = bench * (total / float(bench.sum()))
    return bench, row_date


def _moves_text(table: Any) -> str:
    """``constraints.tracking_error.max 3% → 3.12%`` for each move of the first relaxation option."""
    if not isinstance(table, pd.DataFrame) or table.empty:
        return ""
    first = table[table["option"] == table["option"].iloc[0]]
    parts = [f"{r.constraint} {r.limit:.6g} → {r.needed:.6g}" for r in first.head(5).itertuples()]
    more = f" and {len(first) - 5} more" if len(first) > 5 else ""
    return "; ".join(parts) + more


def risk_model(model: FactorModel, scenario: Mapping[str, Any], alpha: pd.Series, solved: Any = None) -> FactorModel:
    """The model a scenario's risk is forecast on: with its ``alpha_factor`` of ``alpha``, if it has
    one (``solved``: the model the optimizer used, when it returned a book: the same, already built)."""
    options = scenario.get("alpha_factor")
    if not isinstance(options, Mapping):
        return model
    if isinstance(solved, FactorModel) and "alpha_factor" in solved.factors:
        return solved
    return model.with_alpha_factor(alpha, float(options["volatility"]))


def _decide(rebalance: Callable[..., Any], model: FactorModel, task: PathTask, kwargs: dict[str, Any]) -> tuple[Any, str, str, str]:
    """(result or None, status, reason, relaxed) for one date under the path's policy."""
    try:
        return rebalance(model, dict(task.scenario), **kwargs), "solved", "", ""
    except InfeasibleError as err:
        reason = "these limits cannot all hold: " + compact_limits(err.conflict) if err.conflict else str(err)
        if task.when_infeasible == "stop":
            return None, "stopped", reason, ""
        if task.when_infeasible == "hold" or err.relaxed is None:
            return None, "held", reason + ("" if task.when_infeasible == "hold" else "; no relaxation solved"), ""
        try:
            return err.relaxed(), "relaxed", reason, _moves_text(err.relaxation)
        except (InfeasibleError, SolverError) as again:
            return None, "held", f"{reason}; at the relaxed limits: {again}", ""
    except SolverError as err:
        return None, "failed", str(err), ""


def run_path(task: PathTask, inputs: PathInputs) -> PathResult:
    """Walk one scenario forward through its rebalance dates (sequential in time).

    At each date t: fit on the trailing window of rows ≤ t; rebalance from the drifted book with
    the alpha and benchmark known at t (by the path's policy when it does not solve as written);
    then hold through the rows after t up to the next date.
    """
    rebalance = inputs.rebalance
    if rebalance is None:
        from trimtab.construct import rebalance as default_rebalance

        rebalance = functools.partial(default_rebalance, changed_limits=task.changed)
    returns, dates = inputs.asset_returns, inputs.dates
    holdings: pd.Series | None = inputs.initial_holdings
    records, exposures, contributions, weights = [], [], [], {}
    carried: tuple[Any, pd.Series] | None = None  # (benchmark row date, its weights drifted to the last date)
    for k, date in enumerate(dates):
        view = AsOf(returns, date)
        model = inputs.model_at(date)
        report = getattr(model, "fit_report", None)
        n_dropped = int(len(report.dropped)) if report is not None else 0
        assets = model.assets
        alpha_row = AsOf(inputs.alpha_history, date).last()
        alpha = (alpha_row if alpha_row is not None else pd.Series(0.0, index=assets)).reindex(assets).fillna(0.0)
        bench, row_date = _benchmark_at(inputs, date, assets, carried)
        if holdings is None:
            holdings = bench.copy() if bench is not None else pd.Series(1.0 / len(assets), index=assets)
        # positions the model cannot see (dropped by the fit) are sold before the rebalance
        before = holdings.reindex(assets.union(holdings.index)).fillna(0.0)
        start = holdings.reindex(assets).fillna(0.0)
        kwargs: dict[str, Any] = {"holdings": start, "benchmark": bench, "alpha": alpha}
        if inputs.attributes is not None:
            kwargs["attributes"] = inputs.attributes.reindex(assets)
        if inputs.nav is not None:
            kwargs["nav"] = inputs.nav
        result, status, reason, relaxed = _decide(rebalance, model, task, kwargs)
        # the forecast is the one the optimizer worked to: with the scenario's alpha factor, if any
        model = risk_model(model, task.scenario, alpha, getattr(result, "_model", None))
        target = start if result is None else result.weights.reindex(assets).fillna(0.0).astype(np.float64)
        notes = list(getattr(result, "provenance", {}).get("notes", [])) if result is not None else []
        passive = sum(str(n).startswith("passive breach") for n in notes)
        trade = target.reindex(before.index).fillna(0.0) - before
        abs_trade = trade.abs()
        cost = float(
            (inputs.costs.reindex(abs_trade.index).fillna(0.0) * abs_trade).sum()
            + (inputs.impact.reindex(abs_trade.index).fillna(0.0) * abs_trade**1.5).sum()
        )
        active = target.to_numpy() - (bench.to_numpy() if bench is not None else 0.0)
        x, sigma, specific_part = _euler(model, active)
        annual = float(np.sqrt(model.periods_per_year))
        # the holding period: rows after t up to and including the next rebalance date (or the end)
        end = dates[k + 1] if k + 1 < len(dates) and status != "stopped" else None
        held = returns.iloc[view.n_rows : (AsOf(returns, end).n_rows if end is not None else len(returns))]
        n_periods = len(held) if status != "stopped" else 0
        realised = net = book_return = bench_return = float("nan")
        if n_periods:
            growth = _period_growth(held)
            holdings, book_return = _drift(target, growth)
            bench_return = 0.0
            if bench is not None:
                drifted, bench_return = _drift(bench, growth)
                carried = (row_date, drifted)
            realised = book_return - bench_return
            net = (1.0 - cost) * (1.0 + book_return) - 1.0 - bench_return
        else:
            holdings = target
        records.append(
            {
                "date": date,
                "status": status,
                "forecast_te": sigma * annual,
                "forecast_period_vol": sigma * np.sqrt(max(n_periods, 1)),
                "realised_active": realised,
                "book_return": book_return,
                "benchmark_return": bench_return,
                "cost": cost,
                "net_active": net,
                "turnover": 0.5 * float(abs_trade.sum()),
                "expected_alpha": float(alpha.to_numpy() @ active),
                "n_holdings": int((target.abs() > 1e-8).sum()),
                "n_periods": n_periods,
                "n_dropped": n_dropped,
                "n_passive_breaches": passive,
                "relaxed": relaxed,
                "reason": reason,
            }
        )
        exposures.append(pd.Series(x, index=model.factors, name=date))
        split = pd.Series(x * (model._F @ x) / sigma if sigma > 0 else np.zeros_like(x), index=model.factors)
        split["specific"] = specific_part
        contributions.append((split * annual).rename(date))
        weights[date] = target
        if status == "stopped":
            break
    frame = pd.DataFrame(records).set_index("date")
    return PathResult(
        records=frame,
        exposures=pd.DataFrame(exposures).rename_axis("date"),
        risk_contributions=pd.DataFrame(contributions).rename_axis("date"),
        weights=pd.DataFrame(weights).T.rename_axis("date").fillna(0.0),
        periods_per_year=float(model.periods_per_year),
    )
