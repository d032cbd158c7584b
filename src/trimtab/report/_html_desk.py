"""The report's desk sections as HTML: opening lines, warnings, headline cards, the order list, the
limits on the final book, the settings and the scenario comparison.

One function per section; each takes plain data (frames, mappings, lists) and returns an HTML string,
so another renderer (a template) can take the same data.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from trimtab.attribution import format_figure
from trimtab.report._content import change_text, display_unit, settings_rows
from trimtab.report._desk import cents, verdict_lines
from trimtab.report._html_parts import _e
from trimtab.report._filters import piece
from trimtab.report._templates import render_cards, render_trades

#: Desk figures shown as cards at the top of a rebalance report, in order.
DESK_CARDS = ("expected_alpha", "information_ratio", "tracking_error", "turnover", "cost", "names_bought", "names_sold")


def context_section(lines: Sequence[str]) -> str:
    """The scenario's description, the fund's NAV and cash, the model's date and coverage."""
    if not lines:
        return ""
    return '<div class="context">' + "".join(f"<p>{_e(line)}</p>" for line in lines) + "</div>"


def warnings_section(warnings: Sequence[Mapping[str, Any]], heading: str = "h2", anchor: str = "warnings") -> str:
    """Every warning of the run, its kind and message (none: says so)."""
    if not warnings:
        return f'<{heading} id="{anchor}">Warnings</{heading}><p class="note">None: no position dropped, no alpha set to 0, ' \
               f"no solver fall-back, no concentration above the alert thresholds.</p>"
    items = "".join(
        f'<li><span class="kind">{_e(str(w.get("kind", "")).replace("_", " "))}</span> {_e(w.get("message", ""))}</li>'
        for w in warnings
    )
    return f'<{heading} id="{anchor}">Warnings ({len(warnings)})</{heading}><ul class="warnings">{items}</ul>'


def cash_card(rounding: Mapping[str, Any] | None) -> list[dict[str, str]]:
    """The headline card of the cash after trades and costs (none for a list in weights); its note
    says when the orders are not fit to send."""
    if rounding is None:
        return []
    note = "NOT FIT TO SEND: a limit breached" if not rounding.get("fit_to_send", True) else f"before {cents(rounding['cash_before'])}"
    return [{"key": "cash_after_costs", "kind": "desk", "label": "Cash after trades and costs",
             "value": cents(rounding["cash_after_costs"]), "note": note}]


def verdict_section(content: Any) -> str:
    """A red box naming each limit the rounded book breaches, when the orders are not fit to send."""
    lines = verdict_lines(content)
    if not lines:
        return ""
    items = "".join(f"<li>{_e(line)}</li>" for line in lines[1:])
    return f'<div class="notfit"><p><strong>{_e(lines[0])}</strong></p><ul>{items}</ul></div>'


def desk_cards(figures: pd.DataFrame | None, rounding: Mapping[str, Any] | None = None) -> str:
    """Headline cards: expected alpha, information ratio, tracking error, turnover, cost, names bought
    and sold, each after the trades with its value before, then the cash after trades and costs (the
    headline partial the explore page uses)."""
    if figures is None:
        return render_cards(cash_card(rounding)) if rounding is not None else ""
    cards = []
    for key in DESK_CARDS:
        if key not in figures.index or pd.isna(figures.loc[key, "post"]):
            continue
        row = figures.loc[key]
        unit = display_unit(key, str(row["unit"]))
        was: list[Any] = []
        if pd.notna(row.get("pre")) and key not in ("turnover", "cost", "names_bought", "names_sold"):
            was = ["before ", piece(row["pre"], "figure", unit), " (", piece(row["change"], "change", unit), ")"]
        cards.append({"key": str(key), "kind": "desk", "label": str(row["label"]),
                      "value": row["post"], "format": ["figure", unit], "note": was})
    cards.extend(cash_card(rounding))
    return render_cards(cards) if cards else ""


def figures_table(figures: pd.DataFrame) -> str:
    """The desk figures before and after with their change (percentage points for percentages)."""
    rows = []
    for key, row in figures.iterrows():
        unit = display_unit(key, str(row["unit"]))
        rows.append(
            f"<tr><td>{_e(row['label'])}</td><td class=\"num\">{format_figure(row['pre'], unit)}</td>"
            f"<td class=\"num\">{format_figure(row['post'], unit)}</td><td class=\"num\">{change_text(row['change'], unit)}</td></tr>"
        )
    return (
        "<table><caption>Changes of percentages are in percentage points (pp). Expected active return is "
        "αᵀ(w − b) (annualised); information ratio is that over the tracking error.</caption>"
        '<thead><tr><th>Figure</th><th class="num">Before</th><th class="num">After</th><th class="num">Change</th></tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table>"
    )


_ORDER_COLUMNS = (
    ("side", "Side", "text"),
    ("shares", "Shares", "shares"),
    ("price", "Price", "price"),
    ("notional", "Notional", "amount"),
    ("cost_bp", "Cost (bp of notional)", "bp1"),
    ("cost", "Cost", "amount"),
    ("adv_percent", "% of daily volume", "pct1"),
    ("weight_change", "Weight change (pp of NAV)", "pp"),
)
#: Shown only for a list in weights (the share list has them in trades.csv).
_WEIGHT_COLUMNS = (("weight_before", "Weight before", "fraction"), ("weight_after", "Weight after", "fraction"))


def order_columns(orders: pd.DataFrame, in_shares: bool) -> list[tuple[str, str, str]]:
    """The order list's columns shown: (column, heading, unit), those with any value only."""
    candidates = _ORDER_COLUMNS if in_shares else (*_ORDER_COLUMNS[:1], *_WEIGHT_COLUMNS, *_ORDER_COLUMNS[1:])
    return [(c, h, u) for c, h, u in candidates if c in orders.columns and not orders[c].isna().all()]


def table_columns(columns: Sequence[tuple[str, str, str]]) -> list[tuple[str, str, bool, list[str]]]:
    """The top-trades partial's columns for an order list: asset, then each column (numeric unless
    text), printed by the ``order`` filter in its unit."""
    return [("asset", "Asset", False, []), *((c, h, u != "text", ["order", u]) for c, h, u in columns)]


def order_rows(orders: pd.DataFrame, columns: Sequence[tuple[str, str, str]]) -> list[dict[str, Any]]:
    """The orders as rows of values: asset, each column, and side (the row's class)."""
    rows = []
    for asset, row in orders.iterrows():
        cells = {c: row[c] for c, _, _ in columns}
        rows.append({"asset": str(asset), **cells, "side": str(row.get("side", ""))})
    return rows


def orders_section(orders: pd.DataFrame | None, in_shares: bool, rounding_lines: Sequence[str], max_rows: int,
                   fit: bool = True) -> str:
    """The largest orders as a desk would send them (the top-trades partial the explore page uses),
    and what rounding to whole shares moved; orders not fit to send are captioned so."""
    if orders is None:
        return ""
    shown = orders.head(max_rows)
    columns = order_columns(shown, in_shares)
    what = "in whole shares" if in_shares else "in weights (no NAV or prices given: fractions of NAV)"
    caption = (
        f"The largest {len(shown)} of {len(orders):,} orders by size, {what}; trades.csv holds every order "
        "and target_book.csv every asset's weight before and after."
    ) if fit else (
        f"NOT FIT TO SEND (a limit breached on the rounded book): the largest {len(shown)} of {len(orders):,} orders, "
        f"{what}, for inspection only; trades_not_fit_to_send.csv holds every one."
    )
    table = render_trades(order_rows(shown, columns), caption=caption, css="orders", columns=table_columns(columns))
    notes = "".join(f'<p class="note">{_e(line)}</p>' for line in rounding_lines)
    return f'<div class="wide">{table}</div>{notes}'


def limits_section(checks: pd.DataFrame | None, units: Mapping[str, str] | None = None) -> str:
    """Every limit on the final book: value, lower and upper limit, slack to the nearer one, and whether it holds."""
    if checks is None or checks.empty:
        return ""
    rows = []
    for name, row in checks.iterrows():
        cells = "".join(
            '<td class="num"></td>' if pd.isna(row[c]) else f'<td class="num">{format_figure(row[c], "limit")}</td>'
            for c in ("value", "lower", "upper", "slack")
        )
        ok = '<td><span class="status ok">holds</span></td>' if bool(row["ok"]) else '<td><span class="status bad">breached</span></td>'
        rows.append(f"<tr><td>{_e(name).replace('[', '<wbr>[')}</td><td>{_e(row['kind'])}</td>{cells}{ok}</tr>")
    n_ok = int(checks["ok"].astype(bool).sum())
    return (
        f'<p>{n_ok} of {len(checks)} checks hold on the final book, recomputed with numpy from its weights '
        "(for a block of limits, per asset or per group, the one closest to its limit; limits.csv has the same rows).</p>"
        '<div class="wide"><table class="limits"><thead><tr><th>Limit</th><th>Kind</th><th class="num">Value</th>'
        '<th class="num">Lower</th><th class="num">Upper</th><th class="num">Slack</th><th>Check</th></tr></thead>'
        f"<tbody>{''.join(rows)}</tbody></table></div>"
    )


def settings_section(scenario: Mapping[str, Any]) -> str:
    """The scenario's settings as a two-column table (key path, value)."""
    rows = settings_rows(scenario)
    if not rows:
        return ""
    body = "".join(f"<tr><td><code>{_e(key)}</code></td><td>{_e(value)}</td></tr>" for key, value in rows)
    return f"<table class=\"settings\"><thead><tr><th>Setting</th><th>Value</th></tr></thead><tbody>{body}</tbody></table>"


def comparison_rows(table: pd.DataFrame, names: Sequence[str], failed: Sequence[str]) -> str:
    """The comparison table (from :func:`trimtab.report.comparison_table`) as HTML rows with change columns."""
    changes = [c for c in table.columns if str(c).startswith("change: ")]
    head = "<th>Figure</th>" + "".join(f'<th class="num">{_e(n)}</th>' for n in names) + "".join(
        f'<th class="num">{_e(c.removeprefix("change: "))} − {_e(names[0])}</th>' for c in changes
    )
    rows = []
    for key, row in table.iterrows():
        unit = display_unit(key, str(row["unit"]))
        if key == "status":
            cells = "".join(
                f'<td class="num"><span class="status {"bad" if n in failed else "ok"}">{_e(row[n])}</span></td>' for n in names
            )
            rows.append(f"<tr><td>Status</td>{cells}{'<td></td>' * len(changes)}</tr>")
            continue
        if unit == "text":
            cells = "".join(f"<td>{'n/a' if n in failed else _e(row[n])}</td>" for n in names)
        else:
            cells = "".join(
                f'<td class="num">{"n/a" if n in failed else format_figure(row[n], unit)}</td>' for n in names
            )
        deltas = "".join(
            f'<td class="num">{"" if unit == "text" else change_text(row[c], unit)}</td>' for c in changes
        )
        rows.append(f"<tr><td>{_e(row['label'])}</td>{cells}{deltas}</tr>")
    return f'<div class="wide"><table class="comparison"><thead><tr>{head}</tr></thead><tbody>{"".join(rows)}</tbody></table></div>'
