"""The output folder of ``trimtab overlay``: CSV tables, result.json and a short report.html.

Lays out an :class:`~trimtab.hedge.OverlayResult`; computes nothing but display rounding.
"""

from __future__ import annotations

import html
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import pandas as pd

from trimtab._output import output_folder
from trimtab.report._pages import figure_block, html_table, write_page
from trimtab.report._stress_pages import _write, bars_chart

_PERCENT = ("notional", "notional_after_rounding", "cost", "total", "total_factor", "total_specific", "active",
            "active_factor", "active_specific", "residual_volatility")


def write_overlay(result: Any, target: Path, inputs: Sequence[Path], *, settings: Mapping[str, Any]) -> list[str]:
    """trades.csv, exposures.csv, risk.csv, instruments.csv (and fit.csv), result.json, report.html."""
    tables = {"trades": result.trades, "exposures": result.exposures, "risk": result.risk, "instruments": result.instruments}
    if len(result.fit):
        tables["fit"] = result.fit
    document = {"document": "trimtab.overlay", "settings": dict(settings), "added_specific_risk": result.added_specific_risk,
                "cost": result.cost, "notes": list(result.notes)}
    with output_folder(target, inputs) as tmp:
        files = _write(tmp, tables, document)
        ex = result.exposures
        moved = (ex["before"] - ex["after_rounding"]).abs().sort_values(ascending=False)
        shown = list(dict.fromkeys([*ex.index[ex["target"].notna()], *moved.index[:10]]))
        chart = ex.loc[shown, ["before", "after_rounding"]].rename(columns={"after_rounding": "after the overlay"})
        charts = {"Exposures before and after the overlay (rounded contracts; largest moves and every target)":
                  bars_chart(chart, xlabel="exposure (the model's units: beta for market, score units for styles)",
                             name="ov-exposures", percent=False)}
        risk = result.risk.rename(index={"after_rounding": "after rounding"})
        sections = [
            ("Trades", html_table(_trades_display(result.trades), percent_columns=_PERCENT)),
            ("Charts", figure_block(charts)),
            ("Risk (annualised volatility)", html_table(risk, percent_columns=_PERCENT)),
            ("Exposures", html_table(ex.round(4) + 0.0, percent_columns=())),
            ("Instruments (exposure per unit of notional)",
             html_table(_rounded(result.instruments.drop(columns="kind").T.rename_axis("factor")), percent_columns=())),
            ("Summary", f"<pre>{html.escape(result.summary().as_text())}</pre>"),
        ]
        if len(result.fit):
            sections.insert(4, ("Instruments fitted from returns", html_table(result.fit, percent_columns=_PERCENT)))
        notes = [
            "The hedged book is w + X·h (X the basket weights, h the notionals as fractions of NAV); its risk is "
            "(Bᵀa + E·h)ᵀF(Bᵀa + E·h) + Σᵢdᵢ(aᵢ + (Xh)ᵢ)² + Σⱼsⱼhⱼ², so a basket's overlap with the book counts.",
            *result.notes,
        ]
        write_page(tmp / "report.html", "Hedge overlay", sections, notes=notes)
    return files


def _trades_display(trades: Any) -> Any:
    """Whole contracts and currency amounts as integers, the cost in basis points of NAV."""
    shown = trades.copy()
    shown["amount"] = shown["amount"].round().astype("Int64")
    for column in ("contracts", "held", "trade", "amount"):
        if column in shown:  # whole numbers with thousands separators, "–" where there are none
            shown[column] = pd.Series([float("nan") if pd.isna(v) else int(v) for v in shown[column]], index=shown.index,
                                      dtype=object)
    shown["cost"] = shown["cost"] * 1e4
    return shown.rename(columns={"amount": "amount (currency)", "cost": "cost (bp of NAV)"})


def _rounded(frame: Any) -> Any:
    numbers = frame.select_dtypes("number").columns
    return frame.assign(**{str(c): frame[c].round(4) + 0.0 for c in numbers})
