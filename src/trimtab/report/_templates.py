"""The Jinja2 environment of the HTML views (templates shipped in this package, autoescaped), and
the rows its partials lay out.

Partials under ``templates/partials/`` lay out rows formatted here from the report's tables (top
trades, binding limits, factor exposures, warnings); the live what-if page (``trimtab explore``)
renders its sections from them. Numbers are formatted here; the templates escape every value.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping
from typing import Any

import pandas as pd

from jinja2 import Environment, PackageLoader, StrictUndefined


@functools.cache
def environment() -> Environment:
    """One environment per process: package templates, every value escaped, undefined names an error."""
    return Environment(
        loader=PackageLoader("trimtab.report", "templates"),
        autoescape=True,
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=False,
    )


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
            "pre": num(pre, 3), "post": num(post, 3), "change": num(number(row.get("change")), 3),
            "pre_bar": _bar(pre, scale), "post_bar": _bar(post, scale),
        })
    return rows


def trade_rows(table: pd.DataFrame | None) -> list[dict[str, str]]:
    """The largest trades: asset, side, weight before and after, trade, and shares when known."""
    if table is None or table.empty:
        return []
    rows = []
    for asset, row in table.iterrows():
        trade = number(row.get("trade")) or 0.0
        shares = number(row.get("shares"))
        rows.append({
            "asset": str(asset), "side": "buy" if trade > 0 else "sell",
            "before": pct(row.get("initial_weight")), "after": pct(row.get("target_weight")),
            "trade": pct(trade), "shares": "" if shares is None else f"{shares:,.0f}",
        })
    return rows


#: The page's trade columns: key, heading, numeric.
TRADE_COLUMNS = (("asset", "Asset", False), ("side", "Side", False), ("before", "Before", True),
                 ("after", "After", True), ("trade", "Trade", True), ("shares", "Shares", True))


def render_trades(rows: list[dict[str, str]], *, caption: str, columns: Any = TRADE_COLUMNS, empty: str | None = None,
                  css: str = "trades") -> str:
    """The top-trades partial: ``columns`` as (key, heading, numeric), ``rows`` of formatted text,
    ``css`` the table's class."""
    spec = [{"key": key, "label": label, "numeric": numeric} for key, label, numeric in columns]
    context: dict[str, Any] = {"rows": rows, "columns": spec, "caption": caption, "css": css}
    if empty is not None:
        context["empty"] = empty
    return render("partials/top_trades.html.j2", **context)


def render_cards(cards: list[dict[str, str]]) -> str:
    """The headline-cards partial: each card a label, a value and a note (key names the figure)."""
    return render("partials/headline.html.j2", cards=cards)


def binding_rows(table: pd.DataFrame | None) -> list[dict[str, str]]:
    """Binding limits: name, the value it binds at, how many rows bind and the shadow price."""
    if table is None or table.empty:
        return []
    rows = []
    for _, row in table.iterrows():
        unit = str(row.get("unit", ""))
        count = number(row.get("n_binding"))
        asset = row.get("asset")
        rows.append({
            "name": str(row.get("name", "")), "kind": str(row.get("kind", "")),
            "value": pct(row.get("value"), 3) if unit.startswith(("weight", "fraction")) or unit == "annualised volatility" else num(number(row.get("value")), 4),
            "where": "" if asset is None or (isinstance(asset, float) and math.isnan(asset)) else f"{asset}" + (f" and {int(count) - 1} more" if count and count > 1 else ""),
            "shadow_price": num(number(row.get("shadow_price")), 4),
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



# ---------------------------------------------------------------------- formatting
def pct(value: Any, digits: int = 2) -> str:
    """A fraction as a percentage (0.0312 → "3.12%"); "–" when missing."""
    x = number(value)
    return "–" if x is None else f"{100 * x:.{digits}f}%"


def bp(value: Any) -> str:
    """A fraction in basis points (0.000179 → "1.79 bp"); "–" when missing."""
    x = number(value)
    return "–" if x is None else f"{1e4 * x:.2f} bp"


def num(value: Any, digits: int = 4) -> str:
    """A number with ``digits`` decimals (0: whole, with thousands separators); "–" when missing."""
    x = number(value)
    if x is None:
        return "–"
    return f"{x:,.0f}" if digits == 0 else f"{x:.{digits}f}"


def number(value: Any) -> float | None:
    """A finite float, or None (missing, NaN, infinite or not a number)."""
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def _bar(value: float | None, scale: float) -> float:
    """A signed bar length in percent of half the cell (for the exposure table)."""
    if value is None or not scale:
        return 0.0
    return round(50.0 * value / scale, 2)
