"""Compact terminal tables with rich: key risk numbers first, then contributors, exposures, constraints."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import pandas as pd
from rich.console import Console, JustifyMethod
from rich.table import Table

from trimtab.attribution import compare_many, format_figure
from trimtab.report._overlay_section import print_overlay
from trimtab.report._stress import print_stress
from trimtab.report._content import (
    CAUTION,
    ReportContent,
    binding_assets_text,
    change_text,
    context_lines,
    display_unit,
    gather,
    gather_many,
    labelled,
    no_bound,
    rounding_lines,
)
from trimtab.report._desk import cash_line, verdict_lines
from trimtab.report._tolerance import tolerance_lines
from trimtab.report._relaxation import Unsolved, conflict_sentence, display_relaxation, relaxation_sentence, split_subjects, unsolved


def print_attribution(attr: Any, console: Console | None = None, *, top: int = 10) -> None:
    """Print a risk attribution: headline figures, factor groups, top factors and top positions.

    Parameters
    ----------
    attr : RiskAttribution
    console : rich.console.Console, optional
        Where to print; a new Console on standard output by default.
    top : int, default 10
        Rows in the contributor tables.

    Raises
    ------
    InputError
        If ``attr`` is not an attribution or a result carrying one.
    """
    content = gather(attr, top=top)
    out = console or Console()
    out.print(_headline_table(content, "Risk"))
    _print_body(out, content, top)
    out.print(f"[italic]{CAUTION}[/italic]")


def print_rebalance(result: Any, console: Console | None = None, top: int = 10) -> None:
    """Print a rebalance: status, key risk numbers before/after, top contributors, exposures that
    changed most, binding constraints and the trade summary.

    Parameters
    ----------
    result : RebalanceResult
        Any object with the agreed fields (read with defaults, so missing parts are skipped).
    console : rich.console.Console, optional
    top : int, default 10

    Raises
    ------
    InputError
        If ``result`` has no post-trade attribution.
    """
    content = gather(result, top=top)
    out = console or Console()
    if content.run:
        run = content.run
        bits = [f"status [bold]{run.get('status', 'unknown')}[/bold]"]
        if "solver" in run:
            bits.append(f"solver {run['solver']}")
        if isinstance(run.get("solve_time"), (int, float)):
            bits.append(f"solve {run['solve_time']:.3f} s")
        out.print("Rebalance: " + ", ".join(bits))
    for line in context_lines(content):
        out.print(line, markup=False, highlight=False)
    for line in verdict_lines(content):
        out.print(line, style="bold red", markup=False, highlight=False)
    if (cash := cash_line(content)) is not None:
        out.print(cash, style="bold", markup=False, highlight=False)
    if content.risk_budget is not None:
        budget = content.risk_budget
        out.print(
            f"Risk budget ({budget.name.replace('_', ' ')}{', hedged book' if content.overlay else ''}): "
            f"{format_figure(budget.post, 'fraction')} of "
            f"{format_figure(budget.cap, 'fraction')} cap, {format_figure(budget.used, 'fraction')} used"
        )
    if content.figures is not None:
        out.print(_figures_table(content.figures, "What the trades do"))
    for line in tolerance_lines(content.within_tolerance):
        out.print(line, markup=False, highlight=False)
    out.print(_headline_table(content, "Risk before and after" + (" (the cash book)" if content.overlay else "")))
    print_overlay(result, out, top)
    _print_body(out, content, top)
    print_stress(content, out)
    binding = content.binding_constraints
    if binding is not None:
        table = Table(title="Binding constraints", title_justify="left")
        for column in ("name", "value", "lower", "upper", "shadow_price"):
            if column in binding.columns:
                table.add_column(column.replace("_", " "), justify="left" if column == "name" else "right")
        table.add_column("assets at the limit")
        for _, row in binding.iterrows():
            table.add_row(
                *[str(row[c]) if c == "name" else "" if no_bound(row[c]) else format_figure(row[c], "limit")
                  for c in ("name", "value", "lower", "upper", "shadow_price") if c in binding.columns],
                binding_assets_text(row),
            )
        if len(binding) == 0:
            out.print("No binding constraints.")
        else:
            out.print(table)
    if content.trade_summary is not None:
        table = Table(title="Trades", title_justify="left", show_header=False)
        table.add_column("figure")
        table.add_column("value", justify="right")
        for _, row in content.trade_summary.iterrows():
            table.add_row(str(row["label"]), format_figure(row["value"], row["unit"]))
        out.print(table)
    if content.orders is not None and len(content.orders):
        out.print(_orders_table(content, top))
        for line in rounding_lines(content):
            out.print(line, markup=False, highlight=False)
    out.print(f"[italic]{CAUTION}[/italic]")


def print_warnings(warnings: Any, console: Console | None = None, *, name: str | None = None) -> None:
    """One line per warning, ``trimtab: warning: <message>`` (``warning [name]: …`` with a scenario name).

    Parameters
    ----------
    warnings : a result carrying ``warnings``, a list of RunWarning or ``{"kind", "message"}``
        mappings, or a mapping scenario name → such a result (a comparison: a warning several
        scenarios share is printed once, naming them all; an unsolved scenario has none)
    console : rich.console.Console, optional
        Typically the standard-error console.
    """
    from trimtab.report._content import warning_records

    if isinstance(warnings, Mapping):
        seen: dict[str, list[str]] = {}
        for scenario, subject in warnings.items():
            for record in warning_records(subject):
                seen.setdefault(record["message"], []).append(str(scenario))
        lines = [(", ".join(names), message) for message, names in seen.items()]
    else:
        lines = [(name or "", record["message"]) for record in warning_records(warnings)]
    out = console or Console(stderr=True)
    for where, message in lines:
        label = f" [{where}]" if where else ""
        out.print(f"trimtab: warning{label}: {message}", markup=False, highlight=False, soft_wrap=True)


def _figures_table(figures: pd.DataFrame, title: str) -> Table:
    """Desk figures: before, after and the change (percentage points for percentages)."""
    table = Table(title=title, title_justify="left")
    table.add_column("figure")
    for column in ("before", "after", "change"):
        table.add_column(column, justify="right")
    for key, row in figures.iterrows():
        unit = display_unit(key, str(row["unit"]))
        table.add_row(str(row["label"]), format_figure(row["pre"], unit), format_figure(row["post"], unit),
                      change_text(row["change"], unit))
    return table


def _orders_table(content: ReportContent, top: int) -> Table:
    orders = content.orders
    assert orders is not None
    shown = orders.head(top)
    in_shares = content.orders_in_shares
    what = "in shares" if in_shares else "in weights (no NAV or prices given)"
    table = Table(title=f"Largest {len(shown)} of {len(orders):,} orders, {what}", title_justify="left")
    columns: list[tuple[str, str, str]] = [("side", "side", "text")]
    if in_shares:
        columns += [("shares", "shares", "count"), ("price", "price", "price"), ("notional", "notional", "amount"),
                    ("cost_bp", "cost (bp)", "bp1"), ("adv_percent", "% of ADV", "pct1")]
    columns += [("weight_change", "weight change", "fraction")]
    table.add_column("asset")
    for column, header, _ in columns:
        if column in shown.columns:
            table.add_column(header, justify="left" if column == "side" else "right")
    for asset, row in shown.iterrows():
        table.add_row(str(asset), *[_order_cell(row[c], unit) for c, _, unit in columns if c in shown.columns])
    return table


def _order_cell(value: Any, unit: str) -> str:
    if unit == "text":
        return str(value)
    if value is None or (isinstance(value, float) and value != value):
        return "n/a"
    if unit == "price":
        return f"{float(value):,.2f}"
    if unit == "bp1":
        return f"{float(value):.1f}"
    if unit == "pct1":
        return f"{float(value):.1f}%"
    return format_figure(value, unit)


def print_comparison(results: Mapping[str, Any], console: Console | None = None) -> None:
    """Print the headline figures of several scenarios, one column each, with their risk-budget use.

    A scenario given as an ``InfeasibleError`` or ``SolverError`` has the status "infeasible" or
    "solver failure" and n/a figures; its relaxation table (or the solver's message) follows the table.

    Raises
    ------
    InputError
        If the mapping is empty or a value is neither an error nor a result with an attribution.
    """
    if not isinstance(results, Mapping) or not results:
        gather_many(results)  # raises the one-line error of an empty mapping
    from trimtab.report._files import comparison_table

    solved, failed = split_subjects(results)
    frame = comparison_table(results)
    names = [str(name) for name in results]
    out = console or Console()
    table = Table(title="Scenarios side by side (after trades; changes against the first scenario)", title_justify="left")
    table.add_column("figure")
    for name in names:
        table.add_column(name, justify="right")
    changes = [c for c in frame.columns if str(c).startswith("change: ")]
    for column in changes:
        table.add_column(f"{column.removeprefix('change: ')} − {names[0]}", justify="right")
    for key, row in frame.iterrows():
        unit = display_unit(key, str(row["unit"]))
        if key == "status":
            table.add_row("status", *[str(row[n]) for n in names], *["" for _ in changes])
            continue
        if unit == "text":
            table.add_row(str(row["label"]), *["n/a" if n in failed else str(row[n]) for n in names], *["" for _ in changes])
            continue
        table.add_row(
            str(row["label"]),
            *["n/a" if n in failed else format_figure(row[n], unit) for n in names],
            *[change_text(row[c], unit) for c in changes],
        )
    out.print(table)
    for name, failure in failed.items():
        if failure.status == "infeasible":
            print_relaxation(failure, out, name=name)
        else:
            out.print(f"[red]{name}: solver failure[/red]: {failure.message}", markup=True, highlight=False)
    out.print(f"[italic]{CAUTION}[/italic]")


def print_relaxation(error: Any, console: Console | None = None, *, name: str | None = None, max_rows: int = 20) -> None:
    """Print an infeasible scenario's relaxation table, numbers in each limit's unit, with one
    sentence naming the conflicting limits and how far each must move.

    Parameters
    ----------
    error : InfeasibleError
        Its ``relaxation`` table (raw units) is shown formatted: weights as % of NAV, annualised
        volatility as %.
    console : rich.console.Console, optional
    name : str, optional
        The scenario's name, shown in the title.
    max_rows : int, default 20
        Rows shown; the rest are counted in the caption.
    """
    failure = error if isinstance(error, Unsolved) else unsolved(error)
    out = console or Console()
    title = f"Scenario {name} cannot hold as written: how far each conflicting limit must move" if name else \
        "Infeasible: how far each conflicting limit must move"
    out.print(f"{f'{name}: ' if name else ''}{conflict_sentence(failure)}", markup=False, highlight=False)
    frame = failure.relaxation
    if frame.empty:
        out.print(f"[bold]{title}[/bold]: the optimizer gave no relaxation table")
        return
    shown = display_relaxation(frame)
    table = Table(title=title, title_justify="left", header_style="bold")
    headers = {"needed": "needed", "relax_by": "move by"}
    for column in shown.columns:
        table.add_column(headers.get(column, column), justify="left" if column in ("constraint", "kind", "side", "unit") else "right")
    for _, row in shown.head(max_rows).iterrows():
        table.add_row(*[str(v) for v in row])
    if len(shown) > max_rows:
        table.caption = f"{len(shown) - max_rows} more rows not shown"
    out.print(table)
    out.print(relaxation_sentence(frame), markup=False, highlight=False)


def _headline_table(content: ReportContent, title: str) -> Table:
    headline = content.headline
    columns = [c for c in ("pre", "post", "change") if c in headline.columns]
    names = {"pre": "before", "post": "after" if "pre" in columns else "value", "change": "change"}
    table = Table(title=title, title_justify="left")
    table.add_column("figure")
    for column in columns:
        table.add_column(names[column], justify="right")
    for _, row in headline.iterrows():
        table.add_row(str(row["label"]), *[change_text(row[c], row["unit"]) if c == "change" else format_figure(row[c], row["unit"])
                                           for c in columns])
    return table


def _print_body(out: Console, content: ReportContent, top: int) -> None:
    if content.post.is_zero_risk:
        out.print("Zero risk: contributions are undefined (shown as n/a).")
    groups = Table(title="Contribution by factor group", title_justify="left")
    groups.add_column("group")
    for column in content.groups.columns:
        groups.add_column("before" if column == "pre" else "after" if "pre" in content.groups else "contribution",
                          justify="right")
    for name, row in content.groups.iterrows():
        groups.add_row(str(name), *[format_figure(v, "fraction") for v in row])
    out.print(groups)

    for column, frame in content.asset_groups.items():
        table = Table(title=f"Contribution by {column.replace('_', ' ')}", title_justify="left")
        table.add_column(column.replace("_", " "))
        shown = [c for c in ("pre", "post", "percent") if c in frame.columns]
        for c in shown:
            table.add_column({"pre": "before", "post": "after" if "pre" in frame else "contribution",
                              "percent": "percent"}[c], justify="right")
        for name, row in frame.head(top).iterrows():
            table.add_row(str(name), *[format_figure(row[c], "percent" if c == "percent" else "fraction") for c in shown])
        out.print(table)

    assets = content.top_assets.head(top)
    weight = "active_weight" if "active_weight" in assets.columns else "weight"
    table = Table(title=f"Top {len(assets)} risk contributors" + (" (after)" if content.pre is not None else ""),
                  title_justify="left")
    columns: tuple[tuple[str, JustifyMethod], ...] = (
        ("asset", "left"), (weight.replace("_", " "), "right"), ("contribution", "right"), ("percent", "right")
    )
    for column, justify in columns:
        table.add_column(column, justify=justify)
    for name, row in assets.iterrows():
        table.add_row(str(name), format_figure(row[weight], "fraction"), format_figure(row["contribution"], "fraction"),
                      format_figure(row["percent"], "percent"))
    out.print(table)

    exposures = content.exposures.head(top)
    title = "Exposures that changed most" if "change" in exposures.columns else "Largest factor exposures"
    table = Table(title=title, title_justify="left")
    table.add_column("factor")
    for column in ("pre", "post", "change"):
        if column in exposures.columns:
            table.add_column({"pre": "before", "post": "after" if "pre" in exposures else "exposure",
                              "change": "change"}[column], justify="right")
    for name, row in exposures.iterrows():
        table.add_row(str(name), *[f"{row[c]:+.3f}" if pd.notna(row[c]) else "n/a" for c in
                                   ("pre", "post", "change") if c in exposures.columns])
    out.print(table)
