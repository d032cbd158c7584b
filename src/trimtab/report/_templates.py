"""The Jinja2 environment of the HTML views (templates shipped in this package, autoescaped), and
the rows its partials lay out.

Partials under ``templates/partials/`` lay out rows taken from the report's tables (top trades,
binding limits, factor exposures, warnings); the live what-if page (``trimtab explore``) renders its
sections from them. The rows hold numbers; the templates format them with the filters of
:mod:`trimtab.report._filters` (registered once, in :func:`environment`) and escape every value.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping
from typing import Any

import pandas as pd

from jinja2 import Environment, PackageLoader, StrictUndefined

from trimtab.report._filters import bp, num, number, pct, register

__all__ = ["binding_rows", "bp", "environment", "exposure_rows", "num", "number", "pct", "render", "render_cards",
           "render_trades", "trade_rows", "warning_rows"]


@functools.cache
def environment() -> Environment:
    """One environment per process, shared by the HTML report and the explore page: package templates,
    every value escaped, undefined names an error, and the number filters of :mod:`._filters`."""
    env = Environment(
        loader=PackageLoader("trimtab.report", "templates"),
        autoescape=True,
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=False,
    )
    register(env)
    return env


def render(name: str, **context: Any) -> str:
    """Render the template ``name`` (a path under ``templates/``) with ``context``."""
    return environment().get_template(name).render(**context)


# ---------------------------------------------------------------------- rows for the partials
def exposure_rows(table: pd.DataFrame | None) -> list[dict[str, Any]]:
    """Factor exposures before and after (columns group, pre, post, change), largest after first."""
    if table is None or table.empty:
        return []
    order = table["post"].abs().sort_values(ascending=False).index
    scale = float(table[["pre", "post"]].abs().max().max()) if "pre" in table.columns else float(table["post"].abs().max())
    rows = []
    for factor in order:
        row = table.loc[factor]
        pre = number(row.get("pre"))
        post = number(row.get("post"))
        rows.append({
            "factor": str(factor), "group": str(row.get("group", "")),
            "pre": pre, "post": post, "change": number(row.get("change")),
            "pre_bar": _bar(pre, scale), "post_bar": _bar(post, scale),
        })
    return rows


def trade_rows(table: pd.DataFrame | None) -> list[dict[str, Any]]:
    """The largest trades: asset, side, weight before and after, trade, and shares when known
    (numbers; :data:`TRADE_COLUMNS` says how each is printed)."""
    if table is None or table.empty:
        return []
    rows = []
    for asset, row in table.iterrows():
        trade = number(row.get("trade")) or 0.0
        rows.append({
            "asset": str(asset), "side": "buy" if trade > 0 else "sell",
            "before": row.get("initial_weight"), "after": row.get("target_weight"),
            "trade": trade, "shares": number(row.get("shares")),
        })
    return rows


#: The page's trade columns: key, heading, numeric, and the filter that prints the value (:mod:`._filters`).
TRADE_COLUMNS = (("asset", "Asset", False), ("side", "Side", False), ("before", "Before", True, ["pct"]),
                 ("after", "After", True, ["pct"]), ("trade", "Trade", True, ["pct"]),
                 ("shares", "Shares", True, ["count", ""]))


def render_trades(rows: list[dict[str, Any]], *, caption: str, columns: Any = TRADE_COLUMNS, empty: str | None = None,
                  css: str = "trades") -> str:
    """The top-trades partial: ``columns`` as (key, heading, numeric[, filter spec]), ``rows`` keyed by
    column (values printed through the column's filter spec, ``[name, *arguments]``; as they are
    without one), ``css`` the table's class."""
    spec = [{"key": key, "label": label, "numeric": numeric, "format": list(rest[0]) if rest else None}
            for key, label, numeric, *rest in columns]
    context: dict[str, Any] = {"rows": rows, "columns": spec, "caption": caption, "css": css}
    if empty is not None:
        context["empty"] = empty
    return render("partials/top_trades.html.j2", **context)


def render_cards(cards: list[dict[str, Any]]) -> str:
    """The headline-cards partial: each card a label, a value and a note (key names the figure).

    A card's ``format`` is the filter spec its value is printed with (``["pct", 1]``; none: the value
    is text); its ``note`` is text or a list of text and :func:`trimtab.report._filters.piece` numbers."""
    return render("partials/headline.html.j2", cards=cards)


def binding_rows(table: pd.DataFrame | None) -> list[dict[str, Any]]:
    """Binding limits: name, the value it binds at (with the filter spec for its unit: percent with three
    decimals for weights and fractions, else four decimals), how many rows bind and the shadow price."""
    if table is None or table.empty:
        return []
    rows = []
    for _, row in table.iterrows():
        unit = str(row.get("unit", ""))
        count = number(row.get("n_binding"))
        asset = row.get("asset")
        rows.append({
            "name": str(row.get("name", "")), "kind": str(row.get("kind", "")),
            "value": row.get("value"),
            "value_format": ["pct", 3] if unit.startswith(("weight", "fraction")) or unit == "annualised volatility" else ["num", 4],
            "where": "" if asset is None or (isinstance(asset, float) and math.isnan(asset)) else f"{asset}" + (f" and {int(count) - 1} more" if count and count > 1 else ""),
            "shadow_price": row.get("shadow_price"),
        })
    return rows


def warning_rows(result: Any) -> list[dict[str, str]]:
    """The result's warnings (when it carries any) as kind and message."""
    items = getattr(result, "warnings", None)
    if not isinstance(items, (list, tuple)):
        return []
    rows = []
    for item in items:
        record = item.as_dict() if hasattr(item, "as_dict") else item if isinstance(item, Mapping) else {"message": str(item)}
        rows.append({"kind": str(record.get("kind", "note")).replace("_", " "), "message": str(record.get("message", ""))})
    return rows



def _bar(value: float | None, scale: float) -> float:
    """A signed bar length in percent of half the cell (for the exposure table)."""
    if value is None or not scale:
        return 0.0
    return round(50.0 * value / scale, 2)
