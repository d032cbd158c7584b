"""What a report shows, gathered once from a rebalance result or an attribution for every writer.

The writers (terminal, files, HTML) only lay out what this module hands them; the figures themselves
come from :mod:`trimtab.attribution` and from the rebalance result. Results are read duck-typed
(``getattr`` with defaults), so any object with the agreed fields of ``RebalanceResult`` works.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from trimtab.attribution import (
    HEADLINE_FIGURES,
    RiskAttribution,
    compare,
    contribution_changes,
    exposure_changes,
    figure_label,
)
from trimtab.errors import InputError

#: The caution printed by every writer: terminal, JSON and HTML.
CAUTION = (
    "These figures are model forecasts, not investment advice. Verify every trade before trading. "
    "Your firm's compliance rules and applicable regulation govern."
)

#: Constraint names (or kinds) read as the risk budget, in order of preference.
RISK_BUDGET_NAMES = ("tracking_error", "active_risk", "total_risk")

#: At most this many asset attributes (sector, country, …) get a section of their own.
MAX_GROUPINGS = 2
#: An attribute is a grouping when it is text with between 2 and this many distinct labels.
MAX_GROUP_LABELS = 40

#: Trades no larger than this (a fraction of NAV) are solver noise and not counted as trades.
TRADE_TOLERANCE = 1e-8

#: Columns of a constraint table, in display order.
CONSTRAINT_COLUMNS = ("name", "kind", "value", "lower", "upper", "unit", "slack", "binding", "shadow_price", "soft")


@dataclass(frozen=True, eq=False)
class RiskBudget:
    """The risk limit and its use before and after: ``used`` is post / cap."""

    name: str
    cap: float
    pre: float | None
    post: float
    used: float


@dataclass(frozen=True, eq=False)
class ReportContent:
    """Everything a writer shows about one rebalance result or one attribution."""

    kind: str
    pre: RiskAttribution | None
    post: RiskAttribution
    headline: pd.DataFrame
    risk_budget: RiskBudget | None
    exposures: pd.DataFrame
    contributions: pd.DataFrame
    groups: pd.DataFrame
    asset_groups: dict[str, pd.DataFrame]
    split: pd.DataFrame
    top_assets: pd.DataFrame
    run: dict[str, Any] = field(default_factory=dict)
    trade_summary: pd.DataFrame | None = None
    trades: pd.DataFrame | None = None
    top_trades: pd.DataFrame | None = None
    constraints: pd.DataFrame | None = None
    objective: pd.Series | None = None
    verification: pd.DataFrame | None = None
    provenance: dict[str, Any] = field(default_factory=dict)
    scenario: dict[str, Any] = field(default_factory=dict)
    caution: str = CAUTION
    figures: pd.DataFrame | None = None
    orders: pd.DataFrame | None = None
    orders_in_shares: bool = False
    rounding: dict[str, Any] | None = None
    warnings: list[dict[str, Any]] = field(default_factory=list)
    context: dict[str, Any] = field(default_factory=dict)
    checks: pd.DataFrame | None = None

    @property
    def is_rebalance(self) -> bool:
        return self.kind == "rebalance"

    @property
    def binding_constraints(self) -> pd.DataFrame | None:
        """Rows of the constraint table marked binding (None without a table)."""
        if self.constraints is None or "binding" not in self.constraints.columns:
            return None
        return self.constraints[flags(self.constraints["binding"])]


def gather(subject: Any, *, top: int = 10) -> ReportContent:
    """Collect the content of a report on a rebalance result or a :class:`RiskAttribution`.

    Raises
    ------
    InputError
        If ``subject`` is neither an attribution nor an object with a ``post_trade`` attribution (or
        ``weights`` and nothing to attribute them with).
    """
    if isinstance(subject, RiskAttribution):
        return _attribution_content(subject, top)
    post = getattr(subject, "post_trade", None)
    if not isinstance(post, RiskAttribution):
        raise InputError(
            "report: expected a RiskAttribution or a rebalance result with a post_trade attribution, "
            f"got {type(subject).__name__}"
        )
    pre = getattr(subject, "pre_trade", None)
    pre = pre if isinstance(pre, RiskAttribution) else None
    headline = _headline(pre, post)
    trades = _frame_or_none(getattr(subject, "trades", None))
    constraints = _constraints(getattr(subject, "constraints", None))
    scenario = _plain_mapping(getattr(subject, "scenario", None))
    return ReportContent(
        kind="rebalance",
        pre=pre,
        post=post,
        headline=headline,
        risk_budget=_risk_budget(constraints, scenario, pre, post),
        exposures=_exposures(pre, post),
        contributions=_contributions(pre, post),
        groups=_groups(pre, post),
        asset_groups=_asset_groups(pre, post, scenario),
        split=_split(pre, post),
        top_assets=post.top_assets(top),
        run=_run(subject),
        trade_summary=_trade_summary(trades),
        trades=trades,
        top_trades=_top_trades(trades, top),
        constraints=constraints,
        objective=_objective(getattr(subject, "objective", None)),
        verification=_frame_or_none(getattr(subject, "verification", None)),
        provenance=_plain_mapping(getattr(subject, "provenance", None)),
        scenario=scenario,
        figures=desk_table(subject),
        orders=_orders(subject, trades),
        orders_in_shares=getattr(subject, "trade_list", None) is not None,
        rounding=_rounding(getattr(subject, "trade_list", None)),
        warnings=warning_records(subject),
        context=_context(subject, post),
        checks=_checks(subject),
    )


def gather_many(subjects: Mapping[str, Any], *, top: int = 10) -> dict[str, ReportContent]:
    """:func:`gather` for each scenario of a mapping name → result, keeping its order."""
    if not isinstance(subjects, Mapping) or not subjects:
        raise InputError("report: expected a non-empty mapping scenario name → rebalance result or attribution")
    out: dict[str, ReportContent] = {}
    for name, subject in subjects.items():
        try:
            out[str(name)] = gather(subject, top=top)
        except InputError as err:
            raise InputError(f"report: scenario {name!r}: {str(err).removeprefix('report: ')}") from None
    return out


def labelled(headline: pd.DataFrame, kind: str) -> pd.DataFrame:
    """Add the reader's label and unit of each figure to a headline table."""
    out = headline.copy()
    out.insert(0, "unit", [HEADLINE_FIGURES[k][1] for k in out.index])
    out.insert(0, "label", [figure_label(k, kind) for k in out.index])
    return out


# ---------------------------------------------------------------------- pieces
def _attribution_content(attr: RiskAttribution, top: int) -> ReportContent:
    return ReportContent(
        kind="attribution",
        pre=None,
        post=attr,
        headline=_headline(None, attr),
        risk_budget=None,
        exposures=_exposures(None, attr),
        contributions=_contributions(None, attr),
        groups=_groups(None, attr),
        asset_groups=_asset_groups(None, attr, {}),
        split=_split(None, attr),
        top_assets=attr.top_assets(top),
        provenance=_plain_mapping(getattr(attr.model, "provenance", None)),
    )


def _headline(pre: RiskAttribution | None, post: RiskAttribution) -> pd.DataFrame:
    if pre is None:
        table = post.headline().to_frame("post")
    else:
        table = compare(pre, post)
        # A change below rounding (1e-12 of the figure) reads as noise like 2.2e-16: show it as zero.
        scale = table[["pre", "post"]].abs().max(axis=1).clip(lower=1.0)
        table.loc[table["change"].abs() <= 1e-12 * scale, "change"] = 0.0
    table = table[table.notna().any(axis=1)]
    return labelled(table, post.kind)


def _exposures(pre: RiskAttribution | None, post: RiskAttribution) -> pd.DataFrame:
    if pre is None:
        table = post.by_factor[["group", "active_exposure"]].rename(columns={"active_exposure": "post"})
        return table.reindex(table["post"].abs().sort_values(ascending=False, kind="stable").index)
    return exposure_changes(pre, post)


def _contributions(pre: RiskAttribution | None, post: RiskAttribution) -> pd.DataFrame:
    if pre is None:
        table = post.by_factor[["group", "contribution"]].rename(columns={"contribution": "post"})
        return table.reindex(table["post"].abs().sort_values(ascending=False, kind="stable").index)
    return contribution_changes(pre, post)


def _groups(pre: RiskAttribution | None, post: RiskAttribution) -> pd.DataFrame:
    table = pd.DataFrame({"post": post.by_factor_group["contribution"]})
    if pre is not None:
        table.insert(0, "pre", pre.by_factor_group["contribution"])
    table.index.name = "group"
    return table


def group_columns(attr: RiskAttribution, scenario: Mapping[str, Any] | None = None) -> list[str]:
    """Asset attributes to sum contributions by: those the scenario's group limits name first, then
    other text columns with 2 to :data:`MAX_GROUP_LABELS` labels; at most :data:`MAX_GROUPINGS`."""
    attributes = attr.attributes
    if attributes is None:
        return []
    named: list[str] = []
    section = (scenario or {}).get("constraints", {})
    entries = section.get("group") if isinstance(section, Mapping) else None
    for entry in entries if isinstance(entries, list) else [entries]:
        if isinstance(entry, Mapping) and isinstance(entry.get("by"), str):
            named.append(entry["by"])
    candidates = named + [c for c in attributes.columns if c not in named]
    out: list[str] = []
    for column in candidates:
        if column not in attributes.columns or not isinstance(column, str):
            continue
        values = attributes[column]
        if pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
            continue
        if 2 <= values.nunique(dropna=True) <= MAX_GROUP_LABELS:
            out.append(column)
        if len(out) == MAX_GROUPINGS:
            break
    return out


def _asset_groups(
    pre: RiskAttribution | None, post: RiskAttribution, scenario: Mapping[str, Any]
) -> dict[str, pd.DataFrame]:
    """Contribution to risk by each grouping attribute: columns pre (when known), post, weight, percent."""
    out = {}
    for column in group_columns(post, scenario):
        after = post.by_group(column)
        weight = "active_weight" if "active_weight" in after.columns else "weight"
        table = pd.DataFrame({"post": after["contribution"], "percent": after["percent"], weight: after[weight]})
        if pre is not None and pre.attributes is not None and column in pre.attributes.columns:
            table.insert(0, "pre", pre.by_group(column)["contribution"].reindex(table.index))
        order = table["post"].abs().sort_values(ascending=False, kind="stable").index
        out[column] = table.loc[order]
    return out


def _split(pre: RiskAttribution | None, post: RiskAttribution) -> pd.DataFrame:
    """Factor and specific Euler contributions (they add up to the risk), one row per state."""
    states = [("Before", pre), ("After", post)] if pre is not None else [("Portfolio", post)]
    return pd.DataFrame(
        {
            "factor": [a.factor_contribution for _, a in states],
            "specific": [a.specific_contribution for _, a in states],
            "risk": [a.risk for _, a in states],
        },
        index=pd.Index([name for name, _ in states], name="state"),
    )


def _risk_budget(
    constraints: pd.DataFrame | None, scenario: Mapping[str, Any], pre: RiskAttribution | None, post: RiskAttribution
) -> RiskBudget | None:
    """The tracking-error (or total-risk) cap from the constraint table, else from the scenario."""
    for name in RISK_BUDGET_NAMES:
        cap = _cap_from_table(constraints, name)
        if cap is None:
            cap = _cap_from_scenario(scenario, name)
        if cap is None or not np.isfinite(cap) or cap <= 0:
            continue
        if name == "total_risk":
            pre_value = None if pre is None else pre.portfolio_risk
            post_value = post.portfolio_risk
        else:
            pre_value = None if pre is None else pre.risk
            post_value = post.risk
        return RiskBudget(name=name, cap=float(cap), pre=pre_value, post=post_value, used=post_value / cap)
    return None


def _cap_from_table(constraints: pd.DataFrame | None, name: str) -> float | None:
    if constraints is None or "upper" not in constraints.columns:
        return None
    for column in ("name", "kind"):
        if column in constraints.columns:
            rows = constraints[constraints[column].astype(str).str.lower() == name]
            if len(rows):
                return float(rows["upper"].iloc[0])
    return None


def _cap_from_scenario(scenario: Mapping[str, Any], name: str) -> float | None:
    section = scenario.get("constraints", {})
    entry = section.get(name) if isinstance(section, Mapping) else None
    if isinstance(entry, Mapping) and isinstance(entry.get("max"), (int, float)):
        return float(entry["max"])
    return None


def _run(subject: Any) -> dict[str, Any]:
    keys = ("status", "solver", "iterations", "solve_time", "build_time")
    return {k: getattr(subject, k) for k in keys if getattr(subject, k, None) is not None}


def _trade_summary(trades: pd.DataFrame | None) -> pd.DataFrame | None:
    """Counts and sums over the trade list; turnover is one-way, ½·Σ|trade|."""
    if trades is None or "trade" not in trades.columns:
        return None
    trade = trades["trade"].astype(float)
    trade = trade.where(trade.abs() > TRADE_TOLERANCE, 0.0)
    rows: list[tuple[str, str, float]] = [
        ("Assets traded", "count", float((trade != 0).sum())),
        ("Buys", "count", float((trade > 0).sum())),
        ("Sells", "count", float((trade < 0).sum())),
        ("Weight bought", "fraction", float(trade[trade > 0].sum())),
        ("Weight sold", "fraction", float(-trade[trade < 0].sum())),
        ("Turnover, one-way (½·Σ|trade|)", "fraction", 0.5 * float(trade.abs().sum())),
        ("Largest single trade", "fraction", float(trade.abs().max()) if len(trade) else 0.0),
    ]
    if "notional" in trades.columns:
        rows.append(("Notional traded (Σ|notional|)", "amount", float(trades["notional"].abs().sum())))
    if "cost" in trades.columns:
        rows.append(("Estimated cost (of NAV)", "fraction", float(trades["cost"].sum())))
    if "adv_fraction" in trades.columns:
        rows.append(("Largest fraction of daily volume", "fraction", float(trades["adv_fraction"].abs().max())))
    return pd.DataFrame(rows, columns=["label", "unit", "value"])


def _top_trades(trades: pd.DataFrame | None, top: int) -> pd.DataFrame | None:
    if trades is None or "trade" not in trades.columns:
        return None
    moved = trades[trades["trade"].abs() > TRADE_TOLERANCE]
    order = moved["trade"].abs().sort_values(ascending=False, kind="stable").index
    return moved.loc[order[:top]]


def _constraints(table: Any) -> pd.DataFrame | None:
    """The constraint table with binding rows first (stable otherwise) and known columns in order."""
    table = _frame_or_none(table)
    if table is None:
        return None
    columns = [c for c in CONSTRAINT_COLUMNS if c in table.columns] + [
        c for c in table.columns if c not in CONSTRAINT_COLUMNS
    ]
    table = table[columns]
    if "binding" in table.columns:
        table = table.iloc[np.argsort(~flags(table["binding"]).to_numpy(), kind="stable")]
    return table.reset_index(drop="name" in table.columns)


def no_bound(value: Any) -> bool:
    """True for a missing or infinite number: a bound that is not there."""
    try:
        return not np.isfinite(float(value))
    except (TypeError, ValueError):
        return value is None


def flags(values: pd.Series) -> pd.Series:
    """A column of yes/no values as booleans; missing values count as no."""
    return values.map(lambda v: False if v is None or (isinstance(v, float) and np.isnan(v)) else bool(v)).astype(bool)


def _objective(value: Any) -> pd.Series | None:
    if isinstance(value, Mapping) and value:
        return pd.Series({str(k): v for k, v in value.items()}, name="value")
    return None


def _frame_or_none(value: Any) -> pd.DataFrame | None:
    return value if isinstance(value, pd.DataFrame) else None


def _plain_mapping(value: Any) -> dict[str, Any]:
    return {str(k): v for k, v in value.items()} if isinstance(value, Mapping) else {}




# ---------------------------------------------------------------------- desk views
#: Desk figure key → (label, unit); the same keys as :data:`trimtab.construct._figures.DESK_FIGURES`
#: (repeated here so the report does not import the optimizer).
DESK_FIGURES: dict[str, tuple[str, str]] = {
    "expected_alpha": ("Expected active return (alpha)", "fraction"),
    "information_ratio": ("Information ratio", "ratio"),
    "tracking_error": ("Tracking error", "fraction"),
    "total_risk": ("Total risk", "fraction"),
    "beta": ("Beta", "ratio"),
    "turnover": ("Turnover (one-way)", "fraction"),
    "cost": ("Estimated cost (of NAV)", "fraction"),
    "cost_amount": ("Estimated cost (currency)", "amount"),
    "names_bought": ("Names bought", "count"),
    "names_sold": ("Names sold", "count"),
    "names_held": ("Names held", "count"),
}


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
    """The subject's warnings as ``{"kind", "message", "details"}`` records (empty when it has none)."""
    items = getattr(subject, "warnings", None)
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


def _orders(subject: Any, trades: pd.DataFrame | None) -> pd.DataFrame | None:
    """The subject's order list, else one made from its trade table: only the assets that trade,
    largest first, with side and the weight columns (and shares and notional when given)."""
    orders = _frame_or_none(getattr(subject, "orders", None))
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


def _rounding(trade_list: Any) -> dict[str, Any] | None:
    if trade_list is None:
        return None
    return {
        "nav": float(trade_list.nav),
        "cash_before": float(trade_list.cash_before),
        "cash_optimal": float(trade_list.cash_optimal),
        "cash_after": float(trade_list.cash_after),
        "largest_changes": trade_list.moves,
    }


def _context(subject: Any, post: RiskAttribution) -> dict[str, Any]:
    """Description, NAV and cash, and the model's date and coverage, for the report's opening lines."""
    out = dict(_plain_mapping(getattr(subject, "context", None)))
    model = getattr(post, "model", None)
    provenance = _plain_mapping(getattr(model, "provenance", None))
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


def _checks(subject: Any) -> pd.DataFrame | None:
    """Every limit on the final book: limit, kind, value, lower, upper, slack (to the nearer bound), ok.

    From the rounded book's verification when there is a trade list, else the optimizer's."""
    trade_list = getattr(subject, "trade_list", None)
    table = _frame_or_none(getattr(trade_list, "verification", None)) if trade_list is not None else None
    if table is None:
        table = _frame_or_none(getattr(subject, "verification", None))
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
    return lines


def rounding_lines(content: ReportContent) -> list[str]:
    """What rounding the trades to whole shares moved: cash left and the largest weight changes."""
    r = content.rounding
    if r is None:
        if content.orders is not None and not content.orders_in_shares:
            return ["The trade list is in weights (fractions of NAV): give the fund's NAV and prices for shares."]
        return []
    lines = [
        f"Trades rounded to whole shares (to the lot where a lot size is given) and re-verified against every "
        f"limit; the figures after the trades are those of the rounded book. Cash: {amount_text(r['cash_before'])} "
        f"before, {amount_text(r['cash_after'])} after (the unrounded book: {amount_text(r['cash_optimal'])})."
    ]
    moves = r["largest_changes"]
    if isinstance(moves, pd.DataFrame) and len(moves):
        shown = ", ".join(f"{asset} {1e4 * change:+.3f} bp" for asset, change in moves["change"].head(3).items())
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
    if unit == "bp":
        text = f"{1e4 * number:+.2f} bp"
    elif unit == "fraction":
        text = f"{100 * number:+.2f} pp"
    elif unit == "percent":
        text = f"{number:+.1f} pp"
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
