"""The hedge overlay section of a rebalance report (scenario ``overlay:``): the notionals and contracts,
and the cash book, the overlay and the hedged book side by side, as table files, JSON, HTML and on
the terminal. Lays out ``RebalanceResult.overlay`` (computed in :mod:`trimtab.construct._overlay_result`)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import pandas as pd
from rich.console import Console
from rich.table import Table

from trimtab.attribution import format_figure
from trimtab.report._html_parts import _e, _figure, _table
from trimtab.report._stress_pages import bars_chart

#: Display names of the books (columns of the exposure table, rows of the risk table).
BOOK_NAMES = {"cash_book": "cash book", "overlay": "overlay", "hedged": "hedged book",
              "hedged_after_rounding": "hedged, whole contracts"}
RISK_NAMES = {"total_risk": "total risk", "tracking_error": "tracking error", "factor_risk": "factor part",
              "specific_risk": "specific part"}
NOTE = ("The overlay is sized in the same problem as the book: the tracking-error, exposure, beta and stress "
        "limits and the objective's risk read the hedged book (cash book + overlay); the budget, long-only, "
        "position, group, turnover and liquidity limits read the cash book. Notionals are fractions of NAV "
        "(negative: short); every limit was verified on them before contract rounding. The other sections of this "
        "report (risk figures, attribution, stress tests, trades) are the cash book's.")


def overlay_of(subject: Any) -> Any:
    """The subject's OverlayResult, or None."""
    return getattr(subject, "overlay", None)


def _risk_display(part: Any) -> pd.DataFrame:
    """figure × book (annualised volatilities); the overlay's tracking error is its own volatility."""
    frame = part.risk.T.rename(index=RISK_NAMES, columns=BOOK_NAMES)
    frame.index.name = "figure"
    return frame


def _exposure_display(part: Any, top: int) -> pd.DataFrame:
    """The factors the overlay moves most (and every one the hedged book is far from the cash book)."""
    frame = part.exposures
    order = frame["overlay"].abs().sort_values(ascending=False).index
    return frame.loc[order[:top]].rename(columns=BOOK_NAMES)


def overlay_tables(subject: Any) -> dict[str, pd.DataFrame]:
    """overlay.csv (instrument notionals and contracts), overlay_exposures.csv, overlay_risk.csv."""
    part = overlay_of(subject)
    if part is None:
        return {}
    return {"overlay": part.table, "overlay_exposures": part.exposures, "overlay_risk": part.risk}


def overlay_comparison_rows(subjects: Mapping[str, Any]) -> list[tuple[str, str, str, dict[str, Any]]]:
    """Rows of the comparison table for scenarios with an overlay (none when no scenario has one):
    the hedged book's tracking error and total risk, and the overlay's gross notional."""
    parts = {name: overlay_of(subject) for name, subject in subjects.items()}
    if all(p is None for p in parts.values()):
        return []
    nan = float("nan")

    def figure(book: str, column: str) -> dict[str, Any]:
        # a scenario without an overlay is its own hedged book
        return {n: float(getattr(subjects[n], "figures", {}).get(column, nan)) if p is None
                else float(p.risk.loc[book, column]) for n, p in parts.items()}

    return [
        ("hedged_tracking_error", "Tracking error, hedged book (cash book + overlay)", "fraction",
         figure("hedged", "tracking_error")),
        ("hedged_total_risk", "Total risk, hedged book", "fraction", figure("hedged", "total_risk")),
        ("overlay_gross", "Overlay gross notional (Σ|notional|, of NAV)", "fraction",
         {n: 0.0 if p is None else float(p.notional.abs().sum()) for n, p in parts.items()}),
    ]


def overlay_document(subject: Any) -> dict[str, Any] | None:
    """result.json ``overlay``: instruments, exposures and risk by book, or None."""
    part = overlay_of(subject)
    return None if part is None else {**part.to_dict(), "note": NOTE}


def _tables_html(part: Any) -> str:
    units = {"notional": "fraction", "contracts": "count", "notional_after_rounding": "fraction"}
    risk = _risk_display(part)
    return (
        _table(part.table, units, "Instrument", headers={"notional_after_rounding": "notional, whole contracts"})
        + _table(risk, {c: "fraction" for c in risk.columns}, "Figure",
                 caption="Annualised volatility of each book; active against the benchmark except for the overlay alone.")
    )


def overlay_page_html(subject: Any, top: int = 8) -> str:
    """The explore page's overlay box: the notionals, the three books' risk and exposures ('' without one)."""
    part = overlay_of(subject)
    if part is None:
        return ""
    exposures = _exposure_display(part, top)
    return _tables_html(part) + _table(exposures, {c: "exposure" for c in exposures.columns}, "Factor",
                                       caption="The factors the overlay moves most.")


def overlay_html(subject: Any, h: str, key: str, top: int = 10) -> str:
    """The HTML section: notionals, risk of the three books, and the exposure chart and table."""
    part = overlay_of(subject)
    if part is None:
        return ""
    exposures = _exposure_display(part, top)
    shown = exposures.head(6)[[BOOK_NAMES[b] for b in ("cash_book", "overlay", "hedged")]]
    chart = bars_chart(shown, xlabel="exposure (the model's units)", name=f"{key}-overlay-exposures", percent=False)
    return (
        f'<{h} id="{key}-overlay">Hedge overlay</{h}><p>{_e(NOTE)}</p>'
        + _tables_html(part)
        + _figure(chart, "Factor exposures of the cash book, the overlay and the hedged book (active for the books "
                         "when there is a benchmark); the six factors the overlay moves most.")
        + _table(exposures, {c: "exposure" for c in exposures.columns}, "Factor")
    )


def print_overlay(subject: Any, console: Console, top: int = 10) -> None:
    """The overlay on the terminal (nothing without one)."""
    part = overlay_of(subject)
    if part is None:
        return
    console.print("With the hedge overlay, the figures before and after the trades and the attribution are the "
                  "cash book's; the hedged book's are here.", markup=False, highlight=False)
    table = Table(title="Hedge overlay (sized with the book; notional as a fraction of NAV, negative short)",
                  title_justify="left")
    frame = part.table
    table.add_column("instrument")
    for column in frame.columns:
        table.add_column(column.replace("_", " "), justify="right")
    for name, row in frame.iterrows():
        table.add_row(str(name), *[("–" if pd.isna(v) else f"{int(v):,}") if c == "contracts"
                                   else format_figure(v, "fraction") for c, v in row.items()])
    console.print(table)
    risk = _risk_display(part)
    table = Table(title="Cash book, overlay and together (annualised)", title_justify="left")
    table.add_column("figure")
    for column in risk.columns:
        table.add_column(str(column), justify="right")
    for name, row in risk.iterrows():
        table.add_row(str(name), *[format_figure(v, "fraction") for v in row])
    console.print(table)
    exposures = _exposure_display(part, top)
    table = Table(title="Exposures the overlay moves most", title_justify="left")
    table.add_column("factor")
    for column in exposures.columns:
        table.add_column(str(column), justify="right")
    for name, row in exposures.iterrows():
        table.add_row(str(name), *[f"{v:+.3f}" for v in row])
    console.print(table)
