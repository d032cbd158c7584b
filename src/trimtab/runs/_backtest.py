"""Walk-forward backtests: re-fit, rebalance, hold for one period, repeat, for several scenarios.

The public entry point :func:`backtest` checks its inputs and hands one task per scenario to the
executor; one path's walk is :func:`trimtab.runs._backtest_path.run_path`, its record
:class:`~trimtab.runs._backtest_result.BacktestResult`. Every read of dated data that feeds a
decision goes through :class:`~trimtab.runs._asof.AsOf`, so a decision at date t can only use data
up to and including t.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_finite_frame, check_unique, list_labels
from trimtab.errors import InputError
from trimtab.runs._asof import AsOf
from trimtab.runs._backtest_path import POLICIES, FitFunction, PathInputs, PathResult, PathTask, fit_window, run_path
from trimtab.runs._backtest_result import BacktestResult
from trimtab.runs._executors import Executor, InProcessExecutor, Outcome

FIT_METHODS = ("time_series", "statistical")

__all__ = ["AsOf", "BacktestResult", "FIT_METHODS", "POLICIES", "backtest", "fit_settings_mapping", "fit_window"]


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
    changed_limits: Mapping[str, Sequence[str]] | None = None,
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
        Name → scenario mapping (``objective`` and ``constraints``, as :func:`trimtab.rebalance` takes),
        optionally with ``backtest: {"when_infeasible": "relax" | "hold" | "stop"}``: what a date
        that does not solve as written does (default ``relax``: trade at the minimally relaxed
        limits; ``hold``: keep the drifted book; ``stop``: end that scenario's path).
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
    changed_limits : mapping, optional
        Scenario name → the constraint keys that scenario changed from the one it varies: a date
        that does not solve as written names them first (``trimtab backtest`` takes them from each
        file's ``extends:``). Used with the default optimizer.
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
    2. rebalance from the drifted book w₀ with αₜ and bₜ (benchmark weights drift with their
       assets between the rows of the benchmark table); a date that does not solve as written
       follows the scenario's ``when_infeasible`` policy, a solver failure keeps w₀, and each is
       recorded in ``status``, ``relaxed`` and ``reason``;
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
            # fixed weights are the benchmark at the first rebalance date; they drift from there
            bench_frame = pd.DataFrame([benchmark.astype(np.float64)], index=[dates[0]])
        else:
            bench_frame = _dated(benchmark, "benchmark")
    changed = dict(changed_limits or {})
    tasks = [_task(str(name), spec, tuple(changed.get(name, ()))) for name, spec in scenarios.items()]
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
            "alpha_rows_used": _alpha_rows_used(alpha, dates),
            "alpha_factor": {t.name: float(t.scenario["alpha_factor"]["volatility"]) for t in tasks
                             if t.name in done and isinstance(t.scenario.get("alpha_factor"), Mapping)},
        },
    )


def _alpha_rows_used(alpha: pd.DataFrame, dates: Sequence[Any]) -> int:
    """How many distinct rows of the alpha history the rebalance dates read (1: one vector reused)."""
    positions = {AsOf(alpha, date).n_rows for date in dates}
    return len(positions - {0})


def fit_settings_mapping(settings: Any) -> dict[str, Any]:
    """Estimator keywords from validated fit settings (a fit config's ``FitSettings``), for a per-window re-fit."""
    if settings.method not in ("time_series", "statistical"):
        raise InputError(f"fit method {settings.method}: the backtest re-fits time_series or statistical models only")
    out: dict[str, Any] = {"method": settings.method, "periods_per_year": settings.periods_per_year}
    for name in ("half_life", "min_periods", "factor_groups"):
        if getattr(settings, name) is not None:
            out[name] = getattr(settings, name)
    if settings.method == "statistical" and settings.n_factors is not None:
        out["n_factors"] = settings.n_factors
    out.update(settings.options)
    return out


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


def _task(name: str, spec: Mapping[str, Any], changed: tuple[str, ...] = ()) -> PathTask:
    """A path task; the scenario's optional ``backtest`` section gives its policy (checked here)."""
    settings = spec.get("backtest") or {}
    if not isinstance(settings, Mapping):
        raise InputError(f"backtest: scenario {name}: backtest must be a mapping, got {settings!r}")
    unknown = [k for k in settings if k != "when_infeasible"]
    if unknown:
        raise InputError(f"backtest: scenario {name}: backtest: unknown key(s) {list_labels(unknown)}; allowed: when_infeasible")
    policy = settings.get("when_infeasible", "relax")
    if policy not in POLICIES:
        raise InputError(f"backtest: scenario {name}: backtest.when_infeasible must be one of {', '.join(POLICIES)}, got {policy!r}")
    scenario = {k: v for k, v in spec.items() if k != "backtest"}
    return PathTask(name=name, scenario=scenario, when_infeasible=policy, changed=changed)
