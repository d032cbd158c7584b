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

from trimtab.report._stress import stress_frame
from trimtab.report._tolerance import within_tolerance
from trimtab.attribution import (
    HEADLINE_FIGURES,
    RiskAttribution,
    compare,
    contribution_changes,
    exposure_changes,
    figure_label,
)
from trimtab.errors import InputError
from trimtab.report._desk import (  # noqa: F401 - re-exported: the writers import them from here
    DESK_FIGURES,
    DISPLAY_UNITS,
    TRADE_TOLERANCE,
    amount_text,
    binding_assets_text,
    change_text,
    context_lines,
    desk_table,
    display_unit,
    final_limits,
    frame_or_none,
    order_list,
    plain_mapping,
    rounding_info,
    rounding_lines,
    run_context,
    settings_rows,
    target_book,
    warning_records,
)

#: The caution printed by every writer: terminal, JSON and HTML.
CAUTION = (
    "These figures are model forecasts, not investment advice. Verify every trade before trading. "
    "Your firm's compliance rules and applicable regulation govern."
)

#: The caution of pages that show realised (past) returns rather than forecasts: attribute-returns, backtests.
REALISED_CAUTION = (
    "These figures are past returns split by a risk model, not a forecast and not investment advice; the split "
    "depends on the model's exposures. Verify before acting on them. Your firm's compliance rules and applicable "
    "regulation govern."
)

#: Constraint names (or kinds) read as the risk budget, in order of preference.
RISK_BUDGET_NAMES = ("tracking_error", "active_risk", "total_risk")

#: At most this many asset attributes (sector, country, …) get a section of their own.
MAX_GROUPINGS = 2
#: An attribute is a grouping when it is text with between 2 and this many distinct labels.
MAX_GROUP_LABELS = 40


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
    #: every shock of the scenario before and after the trade (see trimtab.report._stress)
    stress: pd.DataFrame | None = None
    caution: str = CAUTION
    figures: pd.DataFrame | None = None
    orders: pd.DataFrame | None = None
    orders_in_shares: bool = False
    rounding: dict[str, Any] | None = None
    warnings: list[dict[str, Any]] = field(default_factory=list)
    context: dict[str, Any] = field(default_factory=dict)
    checks: pd.DataFrame | None = None
    #: limits the rounded book holds only within their rounding tolerance (trimtab.report._tolerance)
    within_tolerance: pd.DataFrame | None = None
    #: every asset before and after (the optimizer's columns, and the orders as sent when rounded)
    target_book: pd.DataFrame | None = None
    #: the result whose alpha_alignment and alpha_factor the alpha section shows (trimtab.report._alpha)
    alpha_source: Any = None
    #: the rebalance whose hedge overlay the overlay section shows (trimtab.report._overlay_section)
    overlay: Any = None

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
    trades = frame_or_none(getattr(subject, "trades", None))
    constraints = _constraints(getattr(subject, "constraints", None))
    scenario = plain_mapping(getattr(subject, "scenario", None))
    return ReportContent(
        kind="rebalance",
        pre=pre,
        post=post,
        headline=headline,
        risk_budget=_hedged_budget(_risk_budget(constraints, scenario, pre, post), getattr(subject, "overlay", None)),
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
        verification=frame_or_none(getattr(subject, "verification", None)),
        provenance=plain_mapping(getattr(subject, "provenance", None)),
        scenario=scenario,
        figures=desk_table(subject),
        orders=order_list(subject, trades),
        orders_in_shares=getattr(subject, "trade_list", None) is not None,
        rounding=rounding_info(getattr(subject, "trade_list", None)),
        warnings=warning_records(subject),
        context=run_context(subject, post),
        checks=final_limits(subject),
        within_tolerance=within_tolerance(subject),
        target_book=target_book(subject, trades),
        stress=stress_frame(subject),
        alpha_source=subject if getattr(subject, "alpha_alignment", None) is not None else None,
        overlay=subject if getattr(subject, "overlay", None) is not None else None,
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
        provenance=plain_mapping(getattr(attr.model, "provenance", None)),
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


def _hedged_budget(budget: RiskBudget | None, overlay: Any) -> RiskBudget | None:
    """With a hedge overlay the risk caps hold on the hedged book: its figure is the one used."""
    if budget is None or overlay is None:
        return budget
    figure = "total_risk" if budget.name == "total_risk" else "tracking_error"
    post = float(overlay.risk.loc["hedged", figure])
    return RiskBudget(name=budget.name, cap=budget.cap, pre=budget.pre, post=post, used=post / budget.cap)


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
    """Status, solver, iterations and times; with orders not fit to send, the one-line verdict as
    ``message`` (each breached limit with its value on the rounded book and its excess)."""
    keys = ("status", "solver", "iterations", "solve_time", "build_time")
    run = {k: getattr(subject, k) for k in keys if getattr(subject, k, None) is not None}
    trade_list = getattr(subject, "trade_list", None)
    if trade_list is not None and not trade_list.ok:
        from trimtab.construct._orders import not_fit_line

        run["message"] = not_fit_line(trade_list)
    return run


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
    table = frame_or_none(table)
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




