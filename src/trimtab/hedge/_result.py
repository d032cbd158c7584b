"""The overlay's frozen result: notionals, whole contracts, exposures and risk before and after."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd


@dataclass(frozen=True, eq=False)
class OverlayResult:
    """What :func:`trimtab.overlay` returns.

    Attributes
    ----------
    notional : pandas.Series
        Instrument → notional as a fraction of NAV before rounding (negative for short).
    contracts : pandas.Series
        Instrument → whole contracts to hold (nullable integers; missing for an instrument without
        contract terms, which trades at its notional). With contracts ``held`` today, ``trades``
        has the difference to trade.
    notional_after_rounding : pandas.Series
        contracts × price × multiplier / NAV, or the notional itself without contract terms.
    exposures : pandas.DataFrame
        Factors × (before, overlay, after, after_rounding, target): the exposures the overlay works
        on (active with a benchmark under ``minimize="active_risk"``, total otherwise).
    risk : pandas.DataFrame
        (before, after, after_rounding) × (total, total_factor, total_specific, active,
        active_factor, active_specific): annualised volatilities; a part is the volatility of that
        part alone (total² = factor² + specific²).
    added_specific_risk : float
        Annualised specific volatility of the overlay alone: √(ppy·(Σᵢdᵢ(Xh)ᵢ² + Σⱼsⱼhⱼ²)), at the
        rounded notionals.
    cost : float
        Cost of trading the rounded overlay, as a fraction of NAV (0 when no costs were given).
    instruments : pandas.DataFrame
        Per instrument: kind (basket or returns) and the exposure of one unit of notional.
    trades : pandas.DataFrame
        Per instrument: notional, contracts, notional after rounding, currency amount and cost.
    """

    notional: pd.Series
    contracts: pd.Series
    notional_after_rounding: pd.Series
    exposures: pd.DataFrame
    risk: pd.DataFrame
    added_specific_risk: float
    cost: float
    instruments: pd.DataFrame
    trades: pd.DataFrame
    minimize: str
    nav: float | None
    fit: pd.DataFrame
    notes: tuple[str, ...] = ()
    settings: dict[str, Any] = field(default_factory=dict)

    def summary(self) -> OverlaySummary:
        return OverlaySummary(self)

    def __str__(self) -> str:
        return self.summary().as_text()


def _exposure(value: float) -> str:
    return f"{round(float(value), 4) + 0.0:+.4f}"  # + 0.0: no "-0.0000"


class OverlaySummary:
    """Text and a one-row-per-instrument frame of an :class:`OverlayResult`."""

    def __init__(self, result: OverlayResult) -> None:
        self.result = result

    def to_frame(self) -> pd.DataFrame:
        return self.result.trades.copy()

    def as_text(self) -> str:
        r = self.result
        lines = [f"Hedge overlay ({r.minimize.replace('_', ' ')} minimised)", ""]
        trades = r.trades.copy()
        shown = pd.DataFrame(index=trades.index)
        shown["notional"] = trades["notional"].map(lambda v: f"{v:+.2%}")
        if trades["contracts"].notna().any():
            shown["contracts"] = trades["contracts"].map(lambda v: "" if pd.isna(v) else f"{int(v):+,d}")
            if "held" in trades:
                shown["held"] = trades["held"].map(lambda v: "" if pd.isna(v) else f"{int(v):+,d}")
                shown["to trade"] = trades["trade"].map(lambda v: "" if pd.isna(v) else f"{int(v):+,d}")
            shown["after rounding"] = trades["notional_after_rounding"].map(lambda v: f"{v:+.2%}")
        if "amount" in trades and trades["amount"].notna().any():
            shown["amount"] = trades["amount"].map(lambda v: "" if pd.isna(v) else f"{v:+,.0f}")
        lines.append(shown.to_string())
        lines += ["", "Exposures (before → after rounding)"]
        ex = r.exposures
        table = pd.DataFrame({
            "before": ex["before"].map(_exposure),
            "after": ex["after_rounding"].map(_exposure),
            "target": ex["target"].map(lambda v: "" if pd.isna(v) else _exposure(v)),
        })
        moved = (ex["before"] - ex["after_rounding"]).abs().sort_values(ascending=False)
        keep = list(dict.fromkeys([*ex.index[ex["target"].notna()], *moved.index[:8]]))
        lines.append(table.loc[keep].to_string())
        if len(keep) < len(ex):
            lines.append(f"({len(ex) - len(keep)} factors that moved least not shown)")
        risk = r.risk
        lines += ["", "Risk (annualised)      before    after"]
        for column in ("total", "active"):
            for part in ("", "_factor", "_specific"):
                name = column + part
                lines.append(f"  {name.replace('_', ' '):<20}{risk.loc['before', name]:>8.2%}{risk.loc['after_rounding', name]:>9.2%}")
        lines.append(f"  specific risk of the overlay on its own: {r.added_specific_risk:.2%}")
        if r.cost:
            lines.append(f"  cost of the trade: {r.cost:.4%} of NAV")
        lines += ["", *r.notes]
        return "\n".join(lines).rstrip()
