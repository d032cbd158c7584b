"""The desk's view of a rebalance, gathered for every writer: the desk figures before and after, the
warnings, the run's context (description, NAV and cash, model date and coverage), the limits on the final
book, the settings as rows, and the small text helpers the writers share (changes in pp, amounts).

Read duck-typed from the result, like :mod:`trimtab.report._content`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab.attribution._desk_figures import DESK_FIGURES
from trimtab.report._alpha import alpha_context_line

if TYPE_CHECKING:
    from trimtab.attribution import RiskAttribution
    from trimtab.report._content import ReportContent

#: Trades no larger than this (a fraction of NAV) are solver noise and not counted as trades.
TRADE_TOLERANCE = 1e-8


def frame_or_none(value: Any) -> pd.DataFrame | None:
    """``value`` if it is a DataFrame, else None."""
    return value if isinstance(value, pd.DataFrame) else None


def plain_mapping(value: Any) -> dict[str, Any]:
    """A mapping with string keys (empty for anything else)."""
    return {str(k): v for k, v in value.items()} if isinstance(value, Mapping) else {}




#: How a desk figure is shown when its stored unit reads poorly (a cost of 0.000179 of NAV: 1.79 bp).
DISPLAY_UNITS = {"cost": "bp"}


def display_unit(key: Any, unit: str) -> str:
    """The unit a figure is shown in (:data:`DISPLAY_UNITS`, else its own)."""
    return DISPLAY_UNITS.get(str(key), unit)


def desk_table(subject: Any) -> pd.DataFrame | None:
    """The desk figures before and after with their change: index figure; label, unit, pre, post, change."""
    after = getattr(subject, "figures", None)
    if not isinstance(after, Mapping) or not after:
        return None
    before = getattr(subject, "figures_before", None)
    keys = [k for k in DESK_FIGURES if k in after]
    table = pd.DataFrame(
        {
            "label": [DESK_FIGURES[k][0] for k in keys],
            "unit": [DESK_FIGURES[k][1] for k in keys],
            "pre": [float(before.get(k, np.nan)) if isinstance(before, Mapping) else np.nan for k in keys],
            "post": [float(after[k]) for k in keys],
        },
        index=pd.Index(keys, name="figure"),
    )
    table["change"] = table["post"] - table["pre"]
    return table[table[["pre", "post"]].notna().any(axis=1)]


def warning_records(subject: Any) -> list[dict[str, Any]]:
    """The subject's warnings (or a list of warnings) as ``{"kind", "message", "details"}`` records
    (empty when it has none)."""
    items = subject if isinstance(subject, (list, tuple)) else getattr(subject, "warnings", None)
    if not isinstance(items, (list, tuple)):
        return []
    out = []
    for item in items:
        if hasattr(item, "as_dict"):
            out.append(item.as_dict())
        elif isinstance(item, Mapping):
            out.append({"kind": str(item.get("kind", "note")), "message": str(item.get("message", "")),
                        "details": dict(item.get("details", {}))})
    return out


def order_list(subject: Any, trades: pd.DataFrame | None) -> pd.DataFrame | None:
    """The subject's order list, else one made from its trade table: only the assets that trade,
    largest first, with side and the weight columns (and shares and notional when given)."""
    orders = frame_or_none(getattr(subject, "orders", None))
    if orders is not None or trades is None or "trade" not in trades.columns:
        return orders
    moved = trades[trades["trade"].astype(float).abs() > TRADE_TOLERANCE]
    frame = pd.DataFrame({"side": np.where(moved["trade"] > 0, "buy", "sell")}, index=moved.index)
    for column, source in (("shares", "shares"), ("notional", "notional")):
        if source in moved.columns:
            frame[column] = moved[source].abs()
    frame["weight_before"] = moved.get("initial_weight")
    frame["weight_after"] = moved.get("target_weight")
    frame["weight_change"] = moved["trade"]
    frame.index.name = "asset"
    return frame.iloc[np.argsort(-frame["weight_change"].abs().to_numpy(), kind="stable")]


def target_book(subject: Any, trades: pd.DataFrame | None) -> pd.DataFrame | None:
    """Every asset's weight before and after: the optimizer's columns, and with a trade list the orders
    as sent (``order_shares``, whole shares signed, 0 for no order) and ``weight_after_orders``, the
    rounded book the report's post-trade figures describe."""
    trade_list = getattr(subject, "trade_list", None)
    if trades is None or trade_list is None:
        return trades
    book = trades.copy()
    orders = trade_list.orders
    signed = orders["shares"].where(orders["side"] == "buy", -orders["shares"])
    book["order_shares"] = signed.reindex(book.index).fillna(0.0).to_numpy()
    book["weight_after_orders"] = trade_list.weights.reindex(book.index).to_numpy()
    return book


def rounding_info(trade_list: Any) -> dict[str, Any] | None:
    if trade_list is None:
        return None
    breached = trade_list.breached
    return {
        "nav": float(trade_list.nav),
        "cash_before": float(trade_list.cash_before),
        "cash_optimal": float(trade_list.cash_optimal),
        "cash_after": float(trade_list.cash_after),
        "buys": float(trade_list.buys),
        "sells": float(trade_list.sells),
        "costs": float(trade_list.costs),
        "cash_after_costs": float(trade_list.cash_after_costs),
        "min_cash": float(trade_list.min_cash),
        "one_lot": None if trade_list.one_lot is None else float(trade_list.one_lot),
        "fit_to_send": bool(trade_list.ok),
        "breached": breached[["name", "kind", "value", "lower", "upper", "tolerance", "excess"]].reset_index(drop=True),
        "largest_changes": trade_list.moves,
    }


def verdict_lines(content: ReportContent) -> list[str]:
    """Orders not fit to send: one line per limit the rounded book breaches beyond its tolerance
    (its value and excess); empty when the orders hold every limit."""
    r = content.rounding
    if r is None or r.get("fit_to_send", True):
        return []
    lines = ["ORDERS NOT FIT TO SEND: no book in whole lots holds every limit within its rounding tolerance. "
             "The orders are written for inspection only (trades_not_fit_to_send.csv)."]
    for row in r["breached"].itertuples():
        lines.append(f"{row.name}: {row.value:.6g} on the rounded book against {_bounds_text(row.lower, row.upper)}, "
                     f"{row.excess:.3g} beyond the tolerance {row.tolerance:.1g}")
    return lines


def _bounds_text(lower: float, upper: float) -> str:
    lo, hi = np.isfinite(lower), np.isfinite(upper)
    if lo and hi:
        return f"{lower:.6g}" if lower == upper else f"[{lower:.6g}, {upper:.6g}]"
    return f"at most {upper:.6g}" if hi else f"at least {lower:.6g}"


def cash_line(content: ReportContent) -> str | None:
    """Cash after trades and costs (the headline figure), with the identity it comes from."""
    r = content.rounding
    if r is None:
        return None
    residual = f"; fully invested: at most one lot ({cents(r['one_lot'])}) above that" if r.get("one_lot") is not None else ""
    return (f"Cash after trades and costs: {cents(r['cash_after_costs'])} = {cents(r['cash_before'])} before "
            f"− buys {cents(r['buys'])} + sells {cents(r['sells'])} − estimated costs {cents(r['costs'])} "
            f"(minimum {cents(r['min_cash'])}{residual}).")


def cents(value: Any) -> str:
    """A sum of money to the cent, with thousands separators."""
    try:
        return f"{float(value):,.2f}"
    except (TypeError, ValueError):
        return "n/a"


def run_context(subject: Any, post: RiskAttribution) -> dict[str, Any]:
    """Description, NAV and cash, and the model's date and coverage, for the report's opening lines."""
    out = dict(plain_mapping(getattr(subject, "context", None)))
    model = getattr(post, "model", None)
    provenance = plain_mapping(getattr(model, "provenance", None))
    window = provenance.get("window")
    if isinstance(window, (list, tuple)) and len(window) == 2:
        out.setdefault("model_as_of", str(window[1]))
        out.setdefault("model_window", [str(window[0]), str(window[1])])
    if model is not None:
        out.setdefault("model_assets", int(model.n_assets))
        out.setdefault("model_factors", int(model.n_factors))
    nav = getattr(subject, "nav", None)
    if nav is not None:
        out.setdefault("nav", float(nav))
    return out


def final_limits(subject: Any) -> pd.DataFrame | None:
    """Every limit on the final book: limit, kind, value, lower, upper, slack (to the nearer bound), ok.

    From the rounded book's verification when there is a trade list, else the optimizer's."""
    trade_list = getattr(subject, "trade_list", None)
    table = frame_or_none(getattr(trade_list, "verification", None)) if trade_list is not None else None
    if table is None:
        table = frame_or_none(getattr(subject, "verification", None))
    if table is None or not {"name", "kind", "value", "lower", "upper", "ok"} <= set(table.columns):
        return None
    table = table[~table["name"].isin(["weights_finite", "objective"])].copy()
    value = pd.to_numeric(table["value"], errors="coerce")
    lower = pd.to_numeric(table["lower"], errors="coerce")
    upper = pd.to_numeric(table["upper"], errors="coerce")
    slack = pd.concat([(upper - value), (value - lower)], axis=1).min(axis=1, skipna=True)
    out = pd.DataFrame({"kind": table["kind"], "value": value, "lower": lower, "upper": upper, "slack": slack,
                        "ok": table["ok"].astype(bool)})
    out.index = pd.Index(table["name"].astype(str), name="limit")
    return out


def context_lines(content: ReportContent) -> list[str]:
    """The report's opening lines: the scenario's description, the fund's NAV and cash, the model's
    date and coverage."""
    ctx = content.context
    lines = []
    if ctx.get("description"):
        lines.append(f"Scenario {ctx.get('scenario', '')}: {ctx['description']}".replace("Scenario : ", "Scenario: "))
    if ctx.get("nav") is not None:
        cash = ctx.get("cash")
        held = f"; cash {amount_text(cash)}" if cash is not None else ""
        source = " (Σ shares·price + cash)" if ctx.get("holdings_kind") == "shares" and ctx.get("nav_given") is False else ""
        lines.append(f"NAV {amount_text(ctx['nav'])}{source}{held}; weights are fractions of NAV")
    if ctx.get("model_assets") is not None:
        when = f", fitted to {ctx['model_as_of']}" if ctx.get("model_as_of") else ""
        cover = ""
        if ctx.get("holdings_coverage") is not None:
            cover = f"; {ctx['holdings_coverage']:.1%} of the held weight is in the model"
        lines.append(f"Risk model: {ctx['model_assets']:,} assets × {ctx.get('model_factors', '?')} factors{when}{cover}")
    return lines + alpha_context_line(content.alpha_source)


def rounding_lines(content: ReportContent) -> list[str]:
    """What rounding the trades to whole shares moved: cash left and the largest weight changes."""
    r = content.rounding
    if r is None:
        if content.orders is not None and not content.orders_in_shares:
            return ["The trade list is in weights (fractions of NAV): give the fund's NAV and prices for shares."]
        return []
    lines = [
        f"Trades rounded to whole shares (to the lot where a lot size is given), repaired lot by lot until every "
        f"limit holds within its rounding tolerance, and re-verified; the figures after the trades are those of the "
        f"rounded book.", *filter(None, [cash_line(content)]),
    ]
    moves = r["largest_changes"]
    if isinstance(moves, pd.DataFrame) and len(moves):
        shown = ", ".join(f"{asset} {1e4 * change:+.3g} bp" for asset, change in moves["change"].head(3).items())
        lines.append(f"Largest weight changes from rounding: {shown} of NAV.")
    return lines


def binding_assets_text(row: Mapping[str, Any] | pd.Series) -> str:
    """For a per-asset limit: ``1,183 assets: A, B, C and 1,178 more``; empty for other limits."""
    n: Any = row.get("n_binding")
    names = row.get("binding_assets")
    asset: Any = row.get("asset")
    if asset is None or (isinstance(asset, float) and np.isnan(asset)):
        return ""
    try:
        count = int(n)
    except (TypeError, ValueError):
        return ""
    listed = names if isinstance(names, str) and names else str(row.get("asset"))
    return f"{count:,} asset{'s' if count != 1 else ''}: {listed}"


def change_text(value: Any, unit: str) -> str:
    """A change in its unit, signed: fractions and percents as percentage points (``+0.40 pp``)."""
    from trimtab.attribution import format_figure

    try:
        number = float(value)
    except (TypeError, ValueError):
        return "n/a"
    if not np.isfinite(number):
        return "n/a"
    if abs(number) < 5e-7 and unit not in ("count", "amount"):
        return "0"  # below what the figures are shown to: rounding noise
    scaled = {"bp": (1e4, 2, "bp"), "fraction": (100.0, 2, "pp"), "percent": (1.0, 1, "pp")}.get(unit)
    if scaled is not None:
        factor, places, label = scaled
        # a small change keeps its sign and first digit (-0.004 pp), instead of rounding to a bare 0
        while places < 4 and round(abs(factor * number), places) == 0:
            places += 1
        text = f"{factor * number:+.{places}f} {label}"
    elif unit in ("count", "amount"):
        text = f"{number:+,.0f}"
    else:
        text = format_figure(number, unit)
        text = text if text.startswith("-") else "+" + text
    return "0" if text.lstrip("+-").replace("0", "").replace(".", "").strip() in ("pp", "") else text


def amount_text(value: Any) -> str:
    """A sum of money in the fund's currency, with thousands separators (no currency sign: the
    fund's currency is that of its NAV and prices)."""
    try:
        return f"{float(value):,.0f}"
    except (TypeError, ValueError):
        return "n/a"


def settings_rows(mapping: Mapping[str, Any], prefix: str = "") -> list[tuple[str, str]]:
    """A nested scenario mapping as (key path, value) rows: ``constraints.weight.max → 0.03``."""
    rows: list[tuple[str, str]] = []
    for key, value in mapping.items():
        path = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, Mapping) and value:
            rows.extend(settings_rows(value, path))
        elif isinstance(value, list) and value and all(isinstance(v, Mapping) for v in value):
            for i, item in enumerate(value):
                rows.extend(settings_rows(item, f"{path}[{i}]"))
        else:
            rows.append((path, _setting_text(value)))
    return rows


def _setting_text(value: Any) -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_setting_text(v) for v in value) + "]"
    if isinstance(value, Mapping):
        return "{}"
    return str(value)


def holdings_line(kind: str, nav: float | None, cash: float, nav_given: bool) -> str:
    """How a book's weights were found: given as weights, or shares·price over the NAV stated."""
    if kind != "shares" or nav is None:
        return "Holdings read as weights (fractions of NAV); NAV and cash play no part."
    found = "as given (--nav)" if nav_given else f"Σ shares·price + cash {cash:,.0f} (--cash)"
    return f"Holdings read as shares: weights = shares·price / NAV, NAV {nav:,.0f} = {found}."
