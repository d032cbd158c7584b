"""What the page shows of one variant: its key figures (for the trail) and its sections as HTML.

The sections are rendered from the report's Jinja2 partials (:mod:`trimtab.report._templates`),
from the same :func:`trimtab.report.gather` content the report writers use; numbers are formatted
here, the templates only lay them out (and escape every value).
"""

from __future__ import annotations

import math
import time
from collections.abc import Mapping
from typing import Any

import pandas as pd

from trimtab.app._session import Variant

#: Trades and binding limits listed on the page.
TOP_TRADES = 15
#: Trades no larger than this (a fraction of NAV) are solver noise, not trades.
TRADE_TOLERANCE = 1e-8


def page_view(variant: Variant) -> dict[str, Any]:
    """The page's payload for one variant: status, figures, HTML sections and timing."""
    from trimtab.report import gather
    from trimtab.report._relaxation import display_relaxation, relaxation_sentence, unsolved
    from trimtab.report._templates import render

    started = time.perf_counter()
    if variant.error is not None:
        failure = unsolved(variant.error)
        rows = display_relaxation(failure.relaxation).to_dict(orient="records") if len(failure.relaxation) else []
        html = {
            "relaxation": render(
                "partials/relaxation.html.j2", status=failure.status, message=_message(failure),
                sentence=relaxation_sentence(failure.relaxation) if rows else "", rows=rows,
                conflict=[str(c) for c in getattr(failure, "conflict", ()) or ()],
                columns=list(rows[0]) if rows else [],
            )
        }
        figures: dict[str, Any] = {}
    else:
        content = gather(variant.result, top=TOP_TRADES)
        figures = key_figures(variant.result, content)
        html = {
            "headline": render("partials/headline.html.j2", cards=headline_cards(figures, content)),
            "exposures": render("partials/exposures.html.j2", rows=exposure_rows(content)),
            "trades": render("partials/top_trades.html.j2", rows=trade_rows(content.top_trades), total=_count(content.trades)),
            "binding": render("partials/binding.html.j2", rows=binding_rows(content.binding_constraints)),
            "warnings": render("partials/warnings.html.j2", rows=warning_rows(variant.result)),
        }
    seconds = dict(variant.seconds)
    seconds["render"] = time.perf_counter() - started
    return {"status": variant.status, "changes": variant.changes, "figures": figures, "html": html, "seconds": seconds}


# ---------------------------------------------------------------------- figures
def key_figures(result: Any, content: Any) -> dict[str, float | None]:
    """Expected active alpha, tracking error, information ratio, one-way turnover, cost (fractions
    of NAV, annualised where they are rates), names held, bought and sold, and the risk cap.

    The result's own desk figures (``result.figures``) are used when it has them; otherwise they are
    read from the report content (the objective's alpha and cost, the trade table).
    """
    cap = _number(content.risk_budget.cap) if content.risk_budget is not None else None
    desk = getattr(result, "figures", None)
    if isinstance(desk, Mapping) and desk:
        return {
            "alpha": _number(desk.get("expected_alpha")),
            "tracking_error": _number(desk.get("tracking_error")),
            "information_ratio": _number(desk.get("information_ratio")),
            "turnover": _number(desk.get("turnover")),
            "cost": _number(desk.get("cost")),
            "names": _number(desk.get("names_held")),
            "bought": _number(desk.get("names_bought")),
            "sold": _number(desk.get("names_sold")),
            "cap": cap,
        }
    headline = content.headline
    te = _number(content.risk_budget.post) if content.risk_budget is not None else _cell(headline, "risk", "post")
    objective = content.objective if content.objective is not None else pd.Series(dtype=float)
    alpha = _number(objective.get("alpha"))
    trades = content.trades
    turnover = _number(getattr(result, "turnover", None))
    if turnover is None and trades is not None and "trade" in trades.columns:
        turnover = 0.5 * float(trades["trade"].abs().sum())
    costs = _number(objective.get("costs"))
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


def headline_cards(figures: dict[str, float | None], content: Any) -> list[dict[str, str]]:
    """Label, value and a note under it, for each key figure the result has."""
    te_note = f"cap {pct(figures['cap'])}" if figures.get("cap") is not None else ""
    pre_te = _cell(content.headline, "risk", "pre")
    if pre_te is not None:
        te_note = f"before {pct(pre_te)}" + (f" · {te_note}" if te_note else "")
    cards = [
        ("alpha", "Expected active alpha", pct(figures["alpha"]), "a year, model forecast"),
        ("information_ratio", "Information ratio", num(figures["information_ratio"], 2), "alpha ÷ tracking error"),
        ("tracking_error", "Tracking error", pct(figures["tracking_error"]), te_note),
        ("turnover", "Turnover (one-way)", pct(figures["turnover"], 1), "of NAV"),
        ("cost", "Estimated cost", bp(figures["cost"]), "of NAV, once"),
        ("names", "Names held", num(figures["names"], 0), _traded(figures)),
    ]
    return [{"key": k, "label": label, "value": value, "note": note} for k, label, value, note in cards
            if figures.get(k) is not None]


def warning_rows(result: Any) -> list[dict[str, str]]:
    """The result's warnings (when it carries any) as kind and message."""
    items = getattr(result, "warnings", None)
    if not isinstance(items, (list, tuple)):
        return []
    rows = []
    for item in items:
        record = item.as_dict() if hasattr(item, "as_dict") else item if isinstance(item, Mapping) else {"message": str(item)}
        rows.append({"kind": str(record.get("kind", "note")), "message": str(record.get("message", ""))})
    return rows


def _traded(figures: dict[str, float | None]) -> str:
    bought, sold = figures.get("bought"), figures.get("sold")
    return "" if bought is None or sold is None else f"{bought:,.0f} bought · {sold:,.0f} sold"


def exposure_rows(content: Any) -> list[dict[str, Any]]:
    """Active factor exposures before and after, largest after-trade magnitude first."""
    table = content.exposures
    if table is None or table.empty:
        return []
    order = table["post"].abs().sort_values(ascending=False).index
    scale = float(table[["pre", "post"]].abs().max().max()) if "pre" in table.columns else float(table["post"].abs().max())
    rows = []
    for factor in order:
        row = table.loc[factor]
        pre = _number(row.get("pre"))
        post = _number(row.get("post"))
        rows.append({
            "factor": str(factor), "group": str(row.get("group", "")),
            "pre": num(pre, 3), "post": num(post, 3), "change": num(_number(row.get("change")), 3),
            "pre_bar": _bar(pre, scale), "post_bar": _bar(post, scale),
        })
    return rows


def trade_rows(table: pd.DataFrame | None) -> list[dict[str, str]]:
    """The largest trades: asset, side, weight before and after, trade, and shares when known."""
    if table is None or table.empty:
        return []
    rows = []
    for asset, row in table.iterrows():
        trade = _number(row.get("trade")) or 0.0
        shares = _number(row.get("shares"))
        rows.append({
            "asset": str(asset), "side": "buy" if trade > 0 else "sell",
            "before": pct(row.get("initial_weight")), "after": pct(row.get("target_weight")),
            "trade": pct(trade), "shares": "" if shares is None else f"{shares:,.0f}",
        })
    return rows


def binding_rows(table: pd.DataFrame | None) -> list[dict[str, str]]:
    """Binding limits: name, the value it binds at, how many rows bind and the shadow price."""
    if table is None or table.empty:
        return []
    rows = []
    for _, row in table.iterrows():
        unit = str(row.get("unit", ""))
        count = _number(row.get("n_binding"))
        asset = row.get("asset")
        rows.append({
            "name": str(row.get("name", "")), "kind": str(row.get("kind", "")),
            "value": pct(row.get("value"), 3) if unit.startswith("weight") or unit in ("fraction", "annualised volatility") else num(_number(row.get("value")), 4),
            "where": "" if asset is None or (isinstance(asset, float) and math.isnan(asset)) else f"{asset}" + (f" and {int(count) - 1} more" if count and count > 1 else ""),
            "shadow_price": num(_number(row.get("shadow_price")), 4),
        })
    return rows


def _message(failure: Any) -> str:
    """The failure's message without its status repeated and without pointers meant for Python users."""
    text = str(failure.message)
    if text.lower().startswith(f"{failure.status}: "):
        text = text[len(failure.status) + 2:]
    return text.replace(" (see .relaxation for how far each must move)", "")


# ---------------------------------------------------------------------- formatting
def pct(value: Any, digits: int = 2) -> str:
    number = _number(value)
    return "–" if number is None else f"{100 * number:.{digits}f}%"


def bp(value: Any) -> str:
    number = _number(value)
    return "–" if number is None else f"{1e4 * number:.2f} bp"


def num(value: Any, digits: int = 4) -> str:
    number = _number(value)
    if number is None:
        return "–"
    return f"{number:,.0f}" if digits == 0 else f"{number:.{digits}f}"


def _number(value: Any) -> float | None:
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None
    return number if math.isfinite(number) else None


def _cell(table: pd.DataFrame | None, row: str, column: str) -> float | None:
    if table is None or row not in table.index or column not in table.columns:
        return None
    return _number(table.loc[row, column])


def _bar(value: float | None, scale: float) -> float:
    """A signed bar length in percent of half the cell (for the exposure table)."""
    if value is None or not scale:
        return 0.0
    return round(50.0 * value / scale, 2)


def _count(table: pd.DataFrame | None) -> int:
    if table is None or "trade" not in table.columns:
        return 0
    return int((table["trade"].abs() > TRADE_TOLERANCE).sum())
