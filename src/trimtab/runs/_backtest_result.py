"""The record of a walk-forward backtest: history by scenario and date, totals, bias, summary."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
import pandas as pd

#: Below this share of dates solved as written a backtest says it is no evidence about its scenario.
EVIDENCE_SHARE = 0.5


def _day(date: Any) -> str:
    return str(date.date()) if isinstance(date, pd.Timestamp) and date == date.normalize() else str(date)


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
        ½·Σ|trade|), ``expected_alpha`` (αᵀ(w − b), annualised), ``n_holdings``, ``n_periods`` (h),
        ``n_dropped`` (assets the fit dropped), ``n_passive_breaches`` (positions the market carried
        beyond a per-asset limit, traded back as far as trading limits allow), ``status``
        (``solved`` as written, ``relaxed``, ``held``, ``failed``, ``stopped``), ``relaxed`` (the limits
        moved and to what, on a relaxed date) and ``reason`` (why a date did not solve as written).
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
        Window, rebalance dates, costs and fit settings used; ``alpha_rows_used`` (distinct rows of the
        alpha history the dates read: 1 means one vector reused at every date) and ``alpha_factor``
        (scenario → the alpha factor's volatility, for scenarios that price it).
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
            used = part.index[usable]
            rows[name] = {
                "statistic": result.statistic,
                "lower": result.lower,
                "upper": result.upper,
                "inside": result.inside,
                "n_periods": result.n_periods,
                "first_date": _day(used[0]),
                "last_date": _day(used[-1]),
                "as_written_periods": int((part.loc[usable, "status"] == "solved").sum()),
                "verdict": result.summary().rsplit(": ", 1)[-1],
            }
        return pd.DataFrame.from_dict(rows, orient="index")

    @cached_property
    def totals(self) -> pd.DataFrame:
        """Per scenario: dates and how they ended (solved as written, relaxed, held, failed,
        stopped), mean forecast TE, realised TE (annualised std of active returns), total active
        return before and after costs, total cost, mean turnover."""
        rows = {}
        ppy = float(self.settings.get("periods_per_year", 252))
        for name in self.scenarios:
            part = self.history.loc[name]
            realised = part["realised_active"].dropna()
            per_year = ppy / max(float(part["n_periods"].mean()), 1.0)
            rows[name] = {
                "dates": int(len(part)),
                "solved": int((part["status"] == "solved").sum()),
                "relaxed": int((part["status"] == "relaxed").sum()),
                "held": int((part["status"] == "held").sum()),
                "failed": int((part["status"] == "failed").sum()),
                "stopped": int((part["status"] == "stopped").sum()),
                "mean_forecast_te": float(part["forecast_te"].mean()),
                "realised_te": float(realised.std(ddof=1) * np.sqrt(per_year)) if len(realised) > 1 else float("nan"),
                "active_return": float((1 + realised).prod() - 1),
                "net_active_return": float((1 + part["net_active"].dropna()).prod() - 1),
                "total_cost": float(part["cost"].sum()),
                "mean_turnover": float(part["turnover"].mean()),
            }
        return pd.DataFrame.from_dict(rows, orient="index")

    def summary(self) -> str:
        """Per scenario: how many dates solved as written, relaxed, held or failed first; then realised
        against forecast TE, the bias verdict with the dates it used, costs."""
        n_dates = len(self.settings.get("rebalance_dates", ()))
        lines = [f"Walk-forward backtest: {len(self.scenarios)} scenario(s), {n_dates} rebalance dates, "
                 f"window {self.settings.get('window')} periods"]
        bias = self.bias
        if self.settings.get("alpha_rows_used") == 1 and n_dates > 1:
            lines.append("  note: one alpha vector is reused at every date (no alpha history): the value added says "
                         "nothing about the alpha's skill; give an alpha by date (--alpha-history)")
        priced = self.settings.get("alpha_factor") or {}
        for name, row in self.totals.iterrows():
            counts = (f"{int(row['solved'])} of {int(row['dates'])} dates solved as written, {int(row['relaxed'])} relaxed, "
                      f"{int(row['held'])} held, {int(row['failed'])} failed")
            if row["stopped"]:
                stop = self.history.loc[name]
                counts += f"; stopped at {_day(stop.index[stop['status'] == 'stopped'][0])} (when_infeasible: stop)"
            part = self.history.loc[name]
            if "n_passive_breaches" in part.columns and part["n_passive_breaches"].sum():
                counts += (f"; on {int((part['n_passive_breaches'] > 0).sum())} dates "
                           f"{int(part['n_passive_breaches'].sum())} positions the market had carried beyond a per-asset limit "
                           "were traded back as far as the trading limits allow")
            lines.append(f"  {name}: {counts}")
            if name in priced:
                lines.append(f"    risk forecast on the model with the alpha factor (volatility {priced[name]:.2%} a year)")
            if row["dates"] and row["solved"] < EVIDENCE_SHARE * row["dates"]:
                lines.append(f"    most dates did not solve as written: this backtest is not evidence about scenario {name}")
            lines.append(
                f"    forecast TE {row['mean_forecast_te']:.2%}, realised {row['realised_te']:.2%}; active "
                f"{row['active_return']:.2%} before costs, {row['net_active_return']:.2%} after; turnover "
                f"{row['mean_turnover']:.1%} a rebalance"
            )
            if name in bias.index:
                b = bias.loc[name]
                lines.append(
                    f"    bias {b['statistic']:.2f} in [{b['lower']:.2f}, {b['upper']:.2f}] over {int(b['n_periods'])} holding "
                    f"periods from {b['first_date']} to {b['last_date']} ({int(b['as_written_periods'])} after dates solved "
                    f"as written): {b['verdict']}"
                )
        for name, error in self.failures.items():
            lines.append(f"  {name}: failed: {error}")
        return "\n".join(lines)
