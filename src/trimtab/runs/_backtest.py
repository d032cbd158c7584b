"""Walk-forward backtests: re-fit, rebalance, hold for one period, repeat, for several scenarios.

Each scenario path is sequential in time (today's trade starts from yesterday's drifted book); the
paths of different scenarios are independent and go through the executor in parallel. Every read
of dated data that feeds a decision goes through :class:`AsOf`, a view that cannot return a row
dated after its date, so a decision at date t can only use data up to and including t.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_finite_frame, check_unique, list_labels
from trimtab.errors import DataWarning, InfeasibleError, InputError, SolverError
from trimtab.model import FactorModel
from trimtab.runs._executors import Executor, InProcessExecutor, Outcome

FitFunction = Callable[[pd.DataFrame, "pd.DataFrame | None"], FactorModel]
FIT_METHODS = ("time_series", "statistical")


# ---------------------------------------------------------------------------------------------
# The as-of view
# ---------------------------------------------------------------------------------------------
class AsOf:
    """A read-only view of a dated table that only returns rows dated on or before ``date``.

    Parameters
    ----------
    frame : pandas.DataFrame
        Rows indexed by increasing dates.
    date : label
        The view's date; rows dated after it are out of reach.

    Examples
    --------
    >>> frame = pd.DataFrame({"x": [1.0, 2.0, 3.0]}, index=pd.to_datetime(["2024-01-01", "2024-01-02", "2024-01-03"]))
    >>> AsOf(frame, pd.Timestamp("2024-01-02")).tail(5)["x"].tolist()
    [1.0, 2.0]
    """

    __slots__ = ("_frame", "_end", "date")

    def __init__(self, frame: pd.DataFrame, date: Any) -> None:
        self._frame = frame
        self.date = date
        self._end = int(frame.index.searchsorted(date, side="right"))

    @property
    def n_rows(self) -> int:
        """How many rows are dated on or before the date."""
        return self._end

    def tail(self, n_rows: int) -> pd.DataFrame:
        """The last ``n_rows`` rows dated ≤ the date (a copy)."""
        return self._frame.iloc[max(0, self._end - n_rows) : self._end].copy()

    def last(self) -> pd.Series | None:
        """The latest row dated ≤ the date, or None when there is none."""
        return None if self._end == 0 else self._frame.iloc[self._end - 1].copy()


# ---------------------------------------------------------------------------------------------
# Result
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class BacktestResult:
    """The record of a walk-forward backtest, one row per scenario and rebalance date.

    Attributes
    ----------
    history : pandas.DataFrame
        Indexed by (scenario, date): ``status``, ``forecast_te`` (annualised ex-ante tracking error of
        the book held after the trade), ``forecast_period_vol`` (its forecast over the holding
        period, √h·σ), ``realised_active`` (the book's return minus the benchmark's over the holding
        period, before costs), ``book_return`` and ``benchmark_return`` (over the holding period), ``cost``, ``net_active`` (after costs), ``turnover`` (one-way,
        ½·Σ|trade|), ``expected_alpha`` (αᵀ(w − b), annualised), ``n_holdings``, ``n_periods`` (h).
    exposures : pandas.DataFrame
        Indexed by (scenario, date), one column per factor: active exposures Bᵀ(w − b).
    risk_contributions : pandas.DataFrame
        Indexed by (scenario, date): the Euler contributions of each factor and of ``specific`` to the
        annualised forecast tracking error (they sum to ``forecast_te``).
    weights : Mapping[str, pandas.DataFrame]
        Scenario → dates × assets, the book held after each trade.
    failures : Mapping[str, str]
        Scenario → error, for scenario paths that failed as a whole (the others are kept).
    settings : Mapping
        Window, rebalance dates, costs and fit settings used.
    """

    history: pd.DataFrame
    exposures: pd.DataFrame
    risk_contributions: pd.DataFrame
    weights: Mapping[str, pd.DataFrame]
    failures: Mapping[str, str]
    settings: Mapping[str, Any] = field(default_factory=dict)

    @property
    def scenarios(self) -> list[str]:
        """The scenarios that ran to the end."""
        return list(self.weights)

    @cached_property
    def bias(self) -> pd.DataFrame:
        """Per scenario: the bias statistic of realised active returns against their forecasts.

        b = std(rₜ/σₜ) over the holding periods with a realised return, with the band 1 ± √(2/T)
        (see :func:`trimtab.model.bias_statistic`). Columns statistic, lower, upper, inside,
        n_periods, verdict.
        """
        from trimtab.model import bias_statistic

        rows = {}
        for name in self.scenarios:
            part = self.history.loc[name]
            usable = part["realised_active"].notna() & (part["forecast_period_vol"] > 0)
            if usable.sum() < 2:
                continue
            result = bias_statistic(part.loc[usable, "realised_active"], part.loc[usable, "forecast_period_vol"])
            rows[name] = {
                "statistic": result.statistic,
                "lower": result.lower,
                "upper": result.upper,
                "inside": result.inside,
                "n_periods": result.n_periods,
                "verdict": result.summary().rsplit(": ", 1)[-1],
            }
        return pd.DataFrame.from_dict(rows, orient="index")

    @cached_property
    def totals(self) -> pd.DataFrame:
        """Per scenario: mean forecast TE, realised TE (annualised std of active returns), total
        active return before and after costs, total cost, mean turnover, dates solved."""
        rows = {}
        ppy = float(self.settings.get("periods_per_year", 252))
        for name in self.scenarios:
            part = self.history.loc[name]
            realised = part["realised_active"].dropna()
            per_year = ppy / max(float(part["n_periods"].mean()), 1.0)
            rows[name] = {
                "dates": int(len(part)),
                "solved": int((part["status"] == "solved").sum()),
                "mean_forecast_te": float(part["forecast_te"].mean()),
                "realised_te": float(realised.std(ddof=1) * np.sqrt(per_year)) if len(realised) > 1 else float("nan"),
                "active_return": float((1 + realised).prod() - 1),
                "net_active_return": float((1 + part["net_active"].dropna()).prod() - 1),
                "total_cost": float(part["cost"].sum()),
                "mean_turnover": float(part["turnover"].mean()),
            }
        return pd.DataFrame.from_dict(rows, orient="index")

    def summary(self) -> str:
        """A few lines per scenario: dates, realised against forecast TE, the bias verdict, costs."""
        lines = [f"Walk-forward backtest: {len(self.scenarios)} scenario(s), window {self.settings.get('window')} periods"]
        bias = self.bias
        for name, row in self.totals.iterrows():
            text = (
                f"  {name}: {int(row['solved'])}/{int(row['dates'])} dates solved; forecast TE {row['mean_forecast_te']:.2%}, "
                f"realised {row['realised_te']:.2%}; active {row['active_return']:.2%} before costs, "
                f"{row['net_active_return']:.2%} after; turnover {row['mean_turnover']:.1%} a rebalance"
            )
            if name in bias.index:
                b = bias.loc[name]
                text += f"; bias {b['statistic']:.2f} in [{b['lower']:.2f}, {b['upper']:.2f}]: {b['verdict']}"
            lines.append(text)
        for name, error in self.failures.items():
            lines.append(f"  {name}: failed: {error}")
        return "\n".join(lines)


# ---------------------------------------------------------------------------------------------
# One scenario path (runs where the executor puts it)
# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class PathTask:
    """What is one scenario path's own: its name and scenario."""

    name: str
    scenario: Mapping[str, Any]


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


def run_path(task: PathTask, inputs: PathInputs) -> PathResult:
    """Walk one scenario forward through its rebalance dates (sequential in time).

    At each date t: fit on the trailing window of rows ≤ t; rebalance from the drifted book with
    the alpha and benchmark known at t; then hold through the rows after t up to the next date.
    """
    rebalance = inputs.rebalance
    if rebalance is None:
        from trimtab.construct import rebalance as default_rebalance

        rebalance = default_rebalance
    returns, dates = inputs.asset_returns, inputs.dates
    holdings: pd.Series | None = inputs.initial_holdings
    records, exposures, contributions, weights = [], [], [], {}
    for k, date in enumerate(dates):
        view = AsOf(returns, date)
        model = inputs.model_at(date)
        report = getattr(model, "fit_report", None)
        n_dropped = int(len(report.dropped)) if report is not None else 0
        assets = model.assets
        alpha_row = AsOf(inputs.alpha_history, date).last()
        alpha = (alpha_row if alpha_row is not None else pd.Series(0.0, index=assets)).reindex(assets).fillna(0.0)
        bench = None
        if inputs.benchmark is not None:
            row = AsOf(inputs.benchmark, date).last()
            if row is None:
                raise InputError(f"backtest: benchmark has no row dated on or before {date}")
            row = row.fillna(0.0)
            total = float(row.sum())
            bench = row.reindex(assets).fillna(0.0)
            if bench.sum() > 0:
                bench = bench * (total / float(bench.sum()))
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
        try:
            result = rebalance(model, dict(task.scenario), **kwargs)
            target, status = result.weights.reindex(assets).fillna(0.0).astype(np.float64), "solved"
        except InfeasibleError:
            target, status = start, "infeasible"
        except SolverError:
            target, status = start, "solver failure"
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
        end = dates[k + 1] if k + 1 < len(dates) else None
        held = returns.iloc[view.n_rows : (AsOf(returns, end).n_rows if end is not None else len(returns))]
        n_periods = len(held)
        realised = net = book_return = bench_return = float("nan")
        if n_periods:
            growth = _period_growth(held)
            holdings, book_return = _drift(target, growth)
            bench_return = 0.0
            if bench is not None:
                _, bench_return = _drift(bench, growth)
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
            }
        )
        exposures.append(pd.Series(x, index=model.factors, name=date))
        split = pd.Series(x * (model._F @ x) / sigma if sigma > 0 else np.zeros_like(x), index=model.factors)
        split["specific"] = specific_part
        contributions.append((split * annual).rename(date))
        weights[date] = target
    frame = pd.DataFrame(records).set_index("date")
    return PathResult(
        records=frame,
        exposures=pd.DataFrame(exposures).rename_axis("date"),
        risk_contributions=pd.DataFrame(contributions).rename_axis("date"),
        weights=pd.DataFrame(weights).T.rename_axis("date").fillna(0.0),
        periods_per_year=float(model.periods_per_year),
    )


# ---------------------------------------------------------------------------------------------
# The public entry point
# ---------------------------------------------------------------------------------------------
def _dated(frame: Any, name: str) -> pd.DataFrame:
    if not isinstance(frame, pd.DataFrame):
        raise InputError(f"backtest: {name} must be a DataFrame of dates × columns, got {type(frame).__name__}")
    if frame.empty:
        raise InputError(f"backtest: {name} is empty")
    check_unique(frame.index, "dates", f"backtest: {name}")
    check_unique(frame.columns, "columns", f"backtest: {name}")
    try:
        increasing = bool(frame.index.is_monotonic_increasing)
    except TypeError:
        increasing = False
    if not increasing:
        raise InputError(f"backtest: {name} dates must be increasing")
    check_finite_frame(frame, f"backtest: {name}", allow_nan=True)
    return frame.astype(np.float64)


def _schedule(index: pd.Index, window: int, rebalance_dates: Sequence[Any] | None, frequency: int | None) -> tuple[Any, ...]:
    if (rebalance_dates is None) == (frequency is None):
        raise InputError("backtest: give exactly one of rebalance_dates or frequency (every n-th row)")
    if isinstance(window, bool) or not isinstance(window, (int, np.integer)) or window < 2:
        raise InputError(f"backtest: window must be a whole number of rows ≥ 2, got {window!r}")
    if window > len(index):
        raise InputError(f"backtest: window {window} is longer than asset_returns ({len(index)} rows)")
    if frequency is not None:
        if isinstance(frequency, bool) or not isinstance(frequency, (int, np.integer)) or frequency < 1:
            raise InputError(f"backtest: frequency must be a whole number of rows ≥ 1, got {frequency!r}")
        return tuple(index[window - 1 :: int(frequency)])
    dates = list(rebalance_dates)  # type: ignore[arg-type]
    if not dates:
        raise InputError("backtest: rebalance_dates is empty")
    unknown = [d for d in dates if d not in index]
    if unknown:
        raise InputError(f"backtest: rebalance_dates not in asset_returns: {list_labels(_texts(unknown))}")
    positions = index.get_indexer(dates)
    if (np.diff(positions) <= 0).any():
        raise InputError("backtest: rebalance_dates must be increasing and distinct")
    early = [d for d, p in zip(dates, positions) if p + 1 < window]
    if early:
        raise InputError(f"backtest: rebalance_dates with fewer than window={window} rows up to them: {list_labels(_texts(early))}")
    return tuple(dates)


def _texts(dates: Sequence[Any]) -> list[str]:
    """Dates as plain text for messages (2024-01-31, not Timestamp(...))."""
    return [str(d.date()) if isinstance(d, pd.Timestamp) and d == d.normalize() else str(d) for d in dates]


def backtest(
    asset_returns: pd.DataFrame,
    alpha_history: pd.DataFrame,
    scenarios: Mapping[str, Mapping[str, Any]],
    *,
    window: int,
    rebalance_dates: Sequence[Any] | None = None,
    frequency: int | None = None,
    factor_returns: pd.DataFrame | None = None,
    fit: FitFunction | Mapping[str, Any] | None = None,
    benchmark: pd.Series | pd.DataFrame | None = None,
    initial_holdings: pd.Series | None = None,
    attributes: pd.DataFrame | None = None,
    nav: float | None = None,
    costs: float | pd.Series = 0.0,
    impact: float | pd.Series = 0.0,
    executor: Executor | None = None,
    rebalance: Callable[..., Any] | None = None,
    progress: Callable[[Outcome], None] | None = None,
) -> BacktestResult:
    """Walk-forward backtest of one or more scenarios on a return history.

    Parameters
    ----------
    asset_returns : pandas.DataFrame
        Dates × assets, per-period returns, dates increasing; the row at t is the return over the
        period ending at t. NaN: no return that period (counts as 0 when a position is held).
    alpha_history : pandas.DataFrame
        Dates × assets, annualised alpha; at date t the latest row dated ≤ t is used. NaN or a
        missing asset means no view (alpha 0).
    scenarios : Mapping[str, Mapping]
        Name → scenario mapping (``objective`` and ``constraints``, as :func:`trimtab.rebalance` takes).
    window : int
        Rows in the trailing estimation window, ending at (and including) the rebalance date.
    rebalance_dates : sequence, optional
        Dates of ``asset_returns`` on which to rebalance (each with ≥ ``window`` rows up to it).
    frequency : int, optional
        Instead of ``rebalance_dates``: every ``frequency``-th row, from the first full window.
    factor_returns : pandas.DataFrame, optional
        Dates × factors, for time-series fits; read through the same as-of view.
    fit : callable or Mapping, optional
        ``fit(window_returns, window_factor_returns) -> FactorModel``, or estimator settings
        ``{"method": "time_series" | "statistical", **keywords}``. Default: a time-series fit when
        ``factor_returns`` is given, else a statistical one. For ``processes`` it must be a
        module-level function.
    benchmark : pandas.Series or pandas.DataFrame, optional
        Benchmark weights: fixed (a Series) or by date (dates × assets, as of each date). Without
        one, risk is total risk and "active" means absolute.
    initial_holdings : pandas.Series, optional
        The book before the first rebalance (default: the benchmark, else equal weights).
    attributes : pandas.DataFrame, optional
        Asset attributes passed to every rebalance.
    nav : float, optional
        Passed to every rebalance.
    costs : float or pandas.Series, default 0
        Linear cost per unit of NAV traded (half-spread plus commission), one rate or by asset.
    impact : float or pandas.Series, default 0
        Market-impact coefficient m in m·|trade|^{3/2}, one value or by asset.
    executor : Executor, optional
        Where the scenario paths run (default: in this process).
    rebalance : callable, optional
        The optimizer, with :func:`trimtab.rebalance`'s signature (default: it).
    progress : callable, optional
        Called with each scenario path's :class:`Outcome` as it completes.

    Returns
    -------
    BacktestResult

    Raises
    ------
    InputError
        On bad tables, settings or dates (naming which), or when every scenario path failed.

    Notes
    -----
    At each rebalance date t, with h rows until the next date:

    1. fit the model on rows (t − window, t] only (the :class:`AsOf` view cannot read later rows);
    2. rebalance from the drifted book w₀ with αₜ and bₜ; an infeasible date or a solver failure
       keeps w₀ and is recorded in ``status``;
    3. pay costs Σ cᵢ|wᵢ − w₀ᵢ| + mᵢ|wᵢ − w₀ᵢ|^{3/2} (fractions of NAV);
    4. hold: rᵖ = Σwᵢgᵢ + (1 − Σwᵢ) − 1 with gᵢ = Π(1 + rᵢₛ) over the h rows, likewise for the
       benchmark; the realised active return is rᵖ − rᵇ, and the book drifts to wᵢgᵢ/(1 + rᵖ).

    The forecast for that period is √h·σ with σ² = aᵀ(BFBᵀ + D)a, a = w − b (i.i.d. periods),
    and the bias statistic compares the two (:attr:`BacktestResult.bias`).

    Examples
    --------
    >>> result = backtest(returns, alpha, {"base": scenario}, window=250, frequency=21,
    ...                   factor_returns=factors, benchmark=bench)  # doctest: +SKIP
    >>> print(result.summary())  # doctest: +SKIP
    """
    returns = _dated(asset_returns, "asset_returns")
    alpha = _dated(alpha_history, "alpha_history")
    factors = None if factor_returns is None else _dated(factor_returns, "factor_returns")
    if not isinstance(scenarios, Mapping) or not scenarios:
        raise InputError("backtest: scenarios must be a non-empty mapping of name → scenario mapping")
    bad = [name for name, spec in scenarios.items() if not isinstance(spec, Mapping) or "objective" not in spec]
    if bad:
        raise InputError(f"backtest: scenarios without an objective section: {list_labels(bad)}")
    if fit is not None and not callable(fit):
        if not isinstance(fit, Mapping) or fit.get("method", "time_series") not in FIT_METHODS:
            raise InputError(f"backtest: fit must be a callable or settings with method in {', '.join(FIT_METHODS)}, got {fit!r}")
    dates = _schedule(returns.index, window, rebalance_dates, frequency)
    bench_frame = None
    if benchmark is not None:
        if isinstance(benchmark, pd.Series):
            bench_frame = pd.DataFrame([benchmark.astype(np.float64)], index=returns.index[:1])
        else:
            bench_frame = _dated(benchmark, "benchmark")
    tasks = [PathTask(name=str(name), scenario=spec) for name, spec in scenarios.items()]
    inputs = PathInputs(
        asset_returns=returns, factor_returns=factors, alpha_history=alpha, benchmark=bench_frame,
        initial_holdings=initial_holdings, attributes=attributes, nav=nav, dates=dates, window=int(window), fit=fit,
        costs=_rates(costs, "costs", returns.columns), impact=_rates(impact, "impact", returns.columns),
        rebalance=rebalance,
    )
    runner = executor if executor is not None else InProcessExecutor()
    done: dict[str, PathResult] = {}
    failures: dict[str, str] = {}
    for outcome in runner.map(run_path, tasks, labels=[t.name for t in tasks], progress=progress, shared=inputs):
        if outcome.ok:
            done[outcome.label] = outcome.value
        else:
            failures[outcome.label] = str(outcome.error)
    if not done:
        first = next(iter(failures.items()))
        raise InputError(f"backtest: every scenario failed; {first[0]}: {first[1]}")
    order = [t.name for t in tasks if t.name in done]

    def stack(part: str) -> pd.DataFrame:
        return pd.concat({name: getattr(done[name], part) for name in order}, names=["scenario", "date"])

    return BacktestResult(
        history=stack("records"),
        exposures=stack("exposures"),
        risk_contributions=stack("risk_contributions"),
        weights={name: done[name].weights for name in order},
        failures=failures,
        settings={
            "window": int(window),
            "rebalance_dates": list(dates),
            "costs": costs if not isinstance(costs, pd.Series) else "by asset",
            "impact": impact if not isinstance(impact, pd.Series) else "by asset",
            "fit": fit if isinstance(fit, Mapping) or fit is None else getattr(fit, "__name__", "callable"),
            "periods_per_year": done[order[0]].periods_per_year,
        },
    )


def _rates(value: float | pd.Series, name: str, assets: pd.Index) -> pd.Series:
    """A per-asset rate (a single number applies to every asset)."""
    if isinstance(value, pd.Series):
        check_unique(value.index, "assets", f"backtest: {name}")
        numbers = pd.to_numeric(value, errors="coerce").to_numpy(dtype=float)
        bad = value.index[~np.isfinite(numbers) | (numbers < 0)]
        if len(bad):
            raise InputError(f"backtest: {name} must be finite and ≥ 0; not for assets: {list_labels(bad)}")
        return pd.Series(numbers, index=value.index)
    try:
        number = float(value)
    except (TypeError, ValueError):
        number = float("nan")
    if isinstance(value, bool) or not np.isfinite(number) or number < 0:
        raise InputError(f"backtest: {name} must be a finite number ≥ 0 (a fraction of the amount traded), got {value!r}")
    return pd.Series(number, index=assets)
