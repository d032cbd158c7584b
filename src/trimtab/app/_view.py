"""What the page shows of one variant: its key figures (for the trail) and its sections as HTML.

The sections are rendered from the report's Jinja2 partials (:mod:`trimtab.report._templates`),
from the same :func:`trimtab.report.gather` content the report writers use. The view hands them
numbers with the filter each is printed with; the templates format them (the filters of
:mod:`trimtab.report._filters`) and escape every value.
"""

from __future__ import annotations

import time
from collections.abc import Mapping
from typing import Any

import pandas as pd

from trimtab.app._session import Variant
from trimtab.report._filters import number, piece
from trimtab.report._desk import breached_rows
from trimtab.report._html_desk import cash_card, verdict_section
from trimtab.report._templates import (
    binding_rows, exposure_rows, render_cards, render_trades, trade_rows, warning_rows,
)

#: Trades and binding limits listed on the page.
TOP_TRADES = 15
#: What the page says under the red box of orders not fit to send.
PAGE_NOTE = ("The portfolio below is the book these orders produce. Loosen a breached limit, or return to a "
             "variant in the trail; trimtab rebalance on this variant writes its orders as "
             "trades_not_fit_to_send.csv and exits with 6.")
#: Trades no larger than this (a fraction of NAV) are solver noise, not trades.
TRADE_TOLERANCE = 1e-8


def page_view(variant: Variant) -> dict[str, Any]:
    """The page's payload for one variant: status, figures, HTML sections, timing, and the limits its
    rounded orders breach (``breached``: name, kind, value, lower, upper, tolerance, excess; empty
    unless the status is ``orders not fit to send``)."""
    from trimtab.report import gather
    from trimtab.report._overlay_section import overlay_page_html
    from trimtab.report._relaxation import RELAXATION_NUMBERS, relaxation_rows, relaxation_sentence, unsolved
    from trimtab.report._templates import render

    started = time.perf_counter()
    if variant.error is not None:
        failure = unsolved(variant.error)
        columns, rows = relaxation_rows(failure.relaxation) if len(failure.relaxation) else ([], [])
        html = {
            "relaxation": render(
                "partials/relaxation.html.j2", status=failure.status, message=_message(failure),
                sentence=relaxation_sentence(failure.relaxation) if rows else "", rows=rows,
                conflict=[str(c) for c in getattr(failure, "conflict", ()) or ()],
                columns=columns, numbers=RELAXATION_NUMBERS,
                reasons=list(failure.reasons),
            )
        }
        figures: dict[str, Any] = {}
        breached: list[dict[str, Any]] = []
    else:
        content = gather(variant.result, top=TOP_TRADES)
        figures = key_figures(variant.result, content)
        breached = breached_rows(content.rounding)
        html = {
            "verdict": verdict_section(content.rounding, note=PAGE_NOTE),
            "headline": render_cards(headline_cards(figures, content) + cash_card(content.rounding)),
            "exposures": render("partials/exposures.html.j2", rows=exposure_rows(content.exposures)),
            "trades": _trades(content),
            "binding": render("partials/binding.html.j2", rows=binding_rows(content.binding_constraints)),
            "warnings": render("partials/warnings.html.j2", rows=warning_rows(variant.result)),
            "stress": _stress(content),
            "overlay": overlay_page_html(variant.result),
        }
    seconds = dict(variant.seconds)
    seconds["render"] = time.perf_counter() - started
    return {"status": variant.status, "changes": variant.changes, "figures": figures, "html": html, "seconds": seconds,
            "breached": breached}


# ---------------------------------------------------------------------- figures
def key_figures(result: Any, content: Any) -> dict[str, float | None]:
    """Expected active alpha, tracking error, information ratio, one-way turnover, cost (fractions
    of NAV, annualised where they are rates), names held, bought and sold, and the risk cap.

    The result's own desk figures (``result.figures``) are used when it has them; otherwise they are
    read from the report content (the objective's alpha and cost, the trade table).
    """
    cap = number(content.risk_budget.cap) if content.risk_budget is not None else None
    desk = getattr(result, "figures", None)
    if isinstance(desk, Mapping) and desk:
        return {
            "alpha": number(desk.get("expected_alpha")),
            "tracking_error": number(desk.get("tracking_error")),
            "information_ratio": number(desk.get("information_ratio")),
            "turnover": number(desk.get("turnover")),
            "cost": number(desk.get("cost")),
            "names": number(desk.get("names_held")),
            "bought": number(desk.get("names_bought")),
            "sold": number(desk.get("names_sold")),
            "cap": cap,
        }
    headline = content.headline
    te = number(content.risk_budget.post) if content.risk_budget is not None else _cell(headline, "risk", "post")
    objective = content.objective if content.objective is not None else pd.Series(dtype=float)
    alpha = number(objective.get("alpha"))
    trades = content.trades
    turnover = number(getattr(result, "turnover", None))
    if turnover is None and trades is not None and "trade" in trades.columns:
        turnover = 0.5 * float(trades["trade"].abs().sum())
    costs = number(objective.get("costs"))
    cost = -costs if costs is not None else None
    if cost is None and trades is not None and "cost" in trades.columns:
        cost = float(trades["cost"].sum())
    moved = trades["trade"] if trades is not None and "trade" in trades.columns else pd.Series(dtype=float)
    return {
        "alpha": alpha,
        "tracking_error": te,
        "information_ratio": alpha / te if alpha is not None and te else None,
        "turnover": turnover,
        "cost": cost,
        "names": _cell(headline, "n_positions", "post"),
        "bought": float((moved > TRADE_TOLERANCE).sum()),
        "sold": float((moved < -TRADE_TOLERANCE).sum()),
        "cap": cap,
    }


def headline_cards(figures: dict[str, float | None], content: Any) -> list[dict[str, Any]]:
    """Label, value (with the filter that prints it) and a note under it, for each key figure the result has."""
    te_note: list[Any] = ["cap ", piece(figures["cap"], "pct")] if figures.get("cap") is not None else []
    pre_te = _cell(content.headline, "risk", "pre")
    if pre_te is not None:
        te_note = ["before ", piece(pre_te, "pct")] + ([" · ", *te_note] if te_note else [])
    cards = [
        ("alpha", "Expected active alpha", ["pct"], "a year, model forecast"),
        ("information_ratio", "Information ratio", ["num", 2], "alpha ÷ tracking error"),
        ("tracking_error", "Tracking error", ["pct"], te_note),
        ("turnover", "Turnover (one-way)", ["pct", 1], "of NAV"),
        ("cost", "Estimated cost", ["bp"], "of NAV, once"),
        ("names", "Names held", ["num", 0], _traded(figures)),
    ]
    return [{"key": k, "label": label, "value": figures[k], "format": spec, "note": note}
            for k, label, spec, note in cards if figures.get(k) is not None]


def _traded(figures: dict[str, float | None]) -> list[Any]:
    bought, sold = figures.get("bought"), figures.get("sold")
    return [] if bought is None or sold is None else [piece(bought, "count"), " bought · ", piece(sold, "count"), " sold"]


def _message(failure: Any) -> str:
    """The failure's message without its status repeated and without pointers meant for Python users."""
    text = str(failure.message)
    if text.lower().startswith(f"{failure.status}: "):
        text = text[len(failure.status) + 2:]
    return text.replace(" (see .relaxation for how far each must move)", "")


# ---------------------------------------------------------------------- sections
def _cell(table: pd.DataFrame | None, row: str, column: str) -> float | None:
    if table is None or row not in table.index or column not in table.columns:
        return None
    return number(table.loc[row, column])


def _trades(content: Any) -> str:
    """The report's order list (the same partial and rows) when the content has one, else the top trades."""
    orders = getattr(content, "orders", None)
    if orders is not None and len(orders):
        from trimtab.report._html_desk import order_columns, order_rows, table_columns

        shown = orders.head(TOP_TRADES)
        columns = order_columns(shown, bool(getattr(content, "orders_in_shares", False)))
        return render_trades(order_rows(shown, columns), caption=f"The {len(shown)} largest of {len(orders):,} orders",
                             css="orders", columns=table_columns(columns))
    return render_trades(trade_rows(content.top_trades), caption=_trades_caption(content))


def _stress(content: Any) -> str:
    """The report's stress table (same partial, rows and figures), brief; '' when the scenario has no shocks."""
    from trimtab.report._stress import stress_table
    from trimtab.report._templates import render

    return "" if content.stress is None else render("partials/stress.html.j2", **stress_table(content.stress, brief=True))


def _trades_caption(content: Any) -> str:
    shown = 0 if content.top_trades is None else len(content.top_trades)
    return f"The {shown} largest of {_count(content.trades):,} trades (% of NAV)"


def _count(table: pd.DataFrame | None) -> int:
    if table is None or "trade" not in table.columns:
        return 0
    return int((table["trade"].abs() > TRADE_TOLERANCE).sum())
