"""One self-contained HTML file: inline CSS, inline SVG charts, no scripts, no network."""

from __future__ import annotations

import datetime as _dt
import html
import json
from collections.abc import Mapping, Sequence
from importlib import resources
from pathlib import Path
from typing import Any

import pandas as pd

from trimtab._version import __version__
from trimtab.attribution import compare_many, format_figure
from trimtab.report import _charts
from trimtab.report import _html_desk as desk
from trimtab.report._content import (
    CAUTION,
    ReportContent,
    binding_assets_text,
    change_text,
    context_lines,
    flags,
    gather,
    gather_many,
    labelled,
    no_bound,
    rounding_lines,
)
from trimtab.report._alpha import alpha_html
from trimtab.report._overlay_section import overlay_html
from trimtab.report._stress import stress_html
from trimtab.report._tolerance import tolerance_lines
from trimtab.report._files import atomic_write_text
from trimtab.report._html_parts import _cell, _e, _figure, _header, _plain, _table
from trimtab.report._filters import piece
from trimtab.report._templates import render_cards
from trimtab.report._relaxation import (
    Unsolved,
    display_relaxation,
    is_unsolved,
    conflict_sentence,
    relaxation_sentence,
    split_subjects,
    unsolved,
)

#: Headline figures shown as cards at the top of each report, in order.
KEY_FIGURES = ("risk", "factor_percent", "beta", "value_at_risk_99_1d")

_TRADE_UNITS = {
    "initial_weight": "fraction",
    "target_weight": "fraction",
    "trade": "fraction",
    "shares": "count",
    "notional": "amount",
    "adv_fraction": "fraction",
    "cost": "bp",
}
_CONSTRAINT_UNITS = {
    "kind": "text",
    "value": "limit",
    "lower": "limit",
    "upper": "limit",
    "unit": "text",
    "slack": "limit",
    "shadow_price": "limit",
    "soft": "flag",
}
_ASSET_UNITS = {
    "weight": "fraction",
    "benchmark_weight": "fraction",
    "active_weight": "fraction",
    "marginal_contribution": "ratio",
    "contribution": "bp",
    "percent": "percent",
}


def write_html(
    subject: Any, path: str | Path, *, title: str = "Rebalance risk report", top: int = 10, max_trades: int = 25,
    notes: Sequence[str] = (), links: Mapping[str, str] | None = None,
) -> Path:
    """Write one self-contained HTML report (inline CSS and SVG charts; opens offline, prints cleanly).

    Parameters
    ----------
    subject : RebalanceResult, RiskAttribution, InfeasibleError, SolverError, or Mapping[str, any of them]
        One result, or several scenarios by name (a comparison table first, then one part each). A
        scenario that did not solve (an ``InfeasibleError`` or ``SolverError`` value) gets the status
        "infeasible" or "solver failure" in the comparison and a part with its relaxation table: which
        limits conflict and how far each must move, in each limit's unit.
    path : str or Path
        The file to write; written under a temporary name, then renamed.
    title : str
        The page title.
    top : int, default 10
        Rows in the top-contributor and exposure charts and tables.
    max_trades : int, default 25
        Largest trades listed (the full list goes to :func:`write_tables` / :func:`write_json`).
    notes : sequence of str, optional
        Lines stated under the title (for instance the NAV and cash a book's weights come from).
    links : Mapping[str, str], optional
        For several scenarios: name → the address of that scenario's own report, linked from the
        comparison in place of repeating the report (``trimtab compare`` writes one per folder).

    Returns
    -------
    Path
        The file written.

    Raises
    ------
    InputError
        If ``subject`` is not a result, an attribution or a non-empty mapping of them.
    """
    document = render_html(subject, title=title, top=top, max_trades=max_trades, notes=notes, links=links)
    return atomic_write_text(Path(path), document)


def render_html(subject: Any, *, title: str = "Rebalance risk report", top: int = 10, max_trades: int = 25,
                notes: Sequence[str] = (), links: Mapping[str, str] | None = None) -> str:
    """The HTML document of :func:`write_html` as a string (``notes``: lines stated under the title,
    such as the NAV and cash a book's weights were derived with)."""
    if isinstance(subject, Mapping):
        if not subject:
            gather_many(subject)  # raises the one-line error of an empty mapping
        solved, failed = split_subjects(subject)
        names = [str(name) for name in subject]
        linked = links or {}
        shown = {n: r for n, r in solved.items() if str(n) not in linked}
        contents = gather_many(shown, top=max(top, max_trades)) if shown else {}
        parts = [_comparison_section(subject, failed, names)]
        for i, name in enumerate(names):
            inner = (
                _linked_body(name, linked[name], failed.get(name)) if name in linked
                else _unsolved_body(failed[name]) if name in failed
                else _report_body(contents[name], f"s{i}", top, max_trades, level=3)
            )
            parts.append(f'<article id="scenario-{i}"><h2 class="scenario">Scenario: {_e(name)}</h2>{inner}</article>')
        nav = _nav(
            [(f"scenario-{i}", f"Scenario: {name}" + (f" (status: {failed[name].status})" if name in failed else ""))
             for i, name in enumerate(names)],
            comparison=True,
        )
        body = "".join(parts)
    elif is_unsolved(subject):
        body = "<article>" + _unsolved_body(unsolved(subject)) + "</article>"
        nav = ""
    else:
        content = gather(subject, top=max(top, max_trades))
        body = "<article>" + _report_body(content, "r", top, max_trades, level=2) + "</article>"
        nav = ""
    created = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%d %H:%M UTC")
    css = resources.files("trimtab.report").joinpath("report.css").read_text(encoding="utf-8")
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{_e(title)}</title><style>{css}</style></head><body><main>"
        f"<header><h1>{_e(title)}</h1>"
        f'<p class="meta">Written by trimtab {_e(__version__)} on {created}.</p>'
        f'<p class="caution" id="caution"><strong>Caution.</strong> {_e(CAUTION)}</p>'
        + "".join(f'<p class="note">{_e(line)}</p>' for line in notes)
        + f"</header>{nav}{body}"
        f'<footer><p class="caution"><strong>Caution.</strong> {_e(CAUTION)}</p></footer>'
        "</main></body></html>\n"
    )


# ---------------------------------------------------------------------- sections
def _report_body(content: ReportContent, key: str, top: int, max_trades: int, *, level: int) -> str:
    h = f"h{level}"
    post, pre = content.post, content.pre
    parts = [_run_line(content) + desk.context_section(context_lines(content)) + desk.verdict_section(content.rounding),
             desk.desk_cards(content.figures, content.rounding) + _key_figures(content)]
    if content.is_rebalance:
        parts.append(desk.warnings_section(content.warnings, h, f"{key}-warnings"))
    if content.figures is not None:
        parts.append(f"<{h}>What the trades do</{h}>" + desk.figures_table(content.figures)
                     + "".join(f'<p class="note">{_e(line)}</p>' for line in tolerance_lines(content.within_tolerance)))
    if content.orders is not None and len(content.orders):
        parts.append(f'<{h} id="{key}-orders">Trade list</{h}>'
                     + desk.orders_section(content.orders, content.orders_in_shares, rounding_lines(content), max_trades,
                                           fit=content.rounding is None or content.rounding.get("fit_to_send", True)))
    parts.append(f"<{h}>Risk figures</{h}>" + _headline_table(content))
    if content.alpha_source is not None:
        parts.append(alpha_html(content.alpha_source, h, key))
    if content.risk_budget is not None:
        budget = content.risk_budget
        parts.append(
            f"<{h}>Risk budget</{h}>"
            f"<p>{_e(budget.name.replace('_', ' ').capitalize())} after the trades is "
            f"<strong>{format_figure(budget.post, 'fraction')}</strong> against a cap of "
            f"{format_figure(budget.cap, 'fraction')}: {format_figure(budget.used, 'fraction')} of the budget used.</p>"
            + _figure(_charts.risk_budget_chart(budget, salt=f"{key}-risk-budget"), "Risk before and after, and the cap.")
        )
    kind_word = "active" if post.kind == "active" else "total"
    parts.append(
        f"<{h}>Factor and specific risk</{h}>"
        + _figure(
            _charts.split_chart(content.split, salt=f"{key}-factor-specific"),
            f"Euler contributions to {kind_word} risk: the factor and specific parts add up to the risk.",
        )
    )
    exposure_title = "Active factor exposures" if post.kind == "active" else "Factor exposures"
    parts.append(
        f"<{h}>{exposure_title}</{h}>"
        + _figure(
            _charts.paired_bars(content.exposures, xlabel="exposure", salt=f"{key}-exposures", max_rows=top),
            "Largest changes first." if pre is not None else "Largest exposures first.",
        )
        + _table(
            content.exposures.head(top),
            {"group": "text", "pre": "exposure", "post": "exposure", "change": "exposure"},
            "Factor",
            headers=None if pre is not None else {"post": "exposure"},
        )
    )
    parts.append(
        f"<{h}>Risk contribution by factor group</{h}>"
        + _figure(
            _charts.paired_bars(content.groups, xlabel="contribution to risk", salt=f"{key}-groups", percent=True),
            "The groups and the specific row add up to the risk.",
        )
    )
    for column, table in content.asset_groups.items():
        label = column.replace("_", " ")
        units = {"pre": "bp", "post": "bp", "percent": "percent", "active_weight": "fraction", "weight": "fraction"}
        parts.append(
            f"<{h}>Risk contribution by {_e(label)}</{h}>"
            + _figure(
                _charts.paired_bars(table, xlabel="contribution to risk", salt=f"{key}-by-{column}", percent=True,
                                    max_rows=top),
                f"Sum of the position contributions in each {label} group; all groups add up to the risk.",
            )
            + _table(table.head(max(top, 15)), units, label.capitalize(),
                     headers={"pre": "before (bp)", "post": "after (bp)" if "pre" in table.columns else "contribution (bp)",
                              "percent": "percent (after)" if "pre" in table.columns else "percent",
                              "active_weight": "active weight (after)" if "pre" in table.columns else "active weight",
                              "weight": "weight (after)" if "pre" in table.columns else "weight"})
        )
    weight_units = {k: v for k, v in _ASSET_UNITS.items() if k in content.top_assets.columns}
    top_assets = content.top_assets.head(top)
    parts.append(
        f"<{h}>Largest risk contributions by position</{h}>"
        + _figure(
            _charts.paired_bars(
                top_assets[["contribution"]].rename(columns={"contribution": "post"}),
                xlabel="contribution to risk" + (", after" if pre is not None else ""),
                salt=f"{key}-positions",
                percent=True,
                max_rows=top,
            ),
            ("After the trades; c" if pre is not None else "C") + "ontributions of all positions add up to the risk.",
        )
        + _table(top_assets, weight_units, "Asset")
    )
    if content.trade_summary is not None:
        trades_table = ""
        if content.orders is None and content.top_trades is not None and len(content.top_trades):
            units = {k: v for k, v in _TRADE_UNITS.items() if k in content.top_trades.columns}
            trades_table = _table(
                content.top_trades.head(max_trades), units, "Asset",
                caption=f"Largest {min(max_trades, len(content.top_trades))} trades by size; the full list is in the table files.",
            )
        parts.append(
            f"<{h}>Trade summary</{h}>"
            + _table(content.trade_summary.set_index("label")[["value"]], {"value": "row"}, "",
                     units=list(content.trade_summary["unit"]))
            + trades_table
        )
    if content.stress is not None:
        parts.append(stress_html(content, h, key))
    if content.overlay is not None:
        parts.append(overlay_html(content.overlay, h, key, top))
    if content.constraints is not None:
        parts.append(f"<{h}>Constraints</{h}>" + _constraint_table(content.constraints))
    if content.checks is not None:
        parts.append(f'<{h} id="{key}-verification">Verification</{h}>' + desk.limits_section(content.checks, within=content.within_tolerance))
    if content.objective is not None:
        parts.append(
            f"<{h}>Objective</{h}>" + _table(content.objective.to_frame("value"), {"value": "ratio"}, "Term")
        )
    parts.append(f"<{h}>Provenance</{h}>" + _provenance(content))
    return "".join(f"<section>{p}</section>" for p in parts)


def _comparison_section(subjects: Mapping[str, Any], failed: Mapping[str, Unsolved], names: Sequence[str]) -> str:
    """What each scenario gains and gives up, side by side with the change from the first, and expected
    alpha against tracking error as a chart; a scenario that did not solve shows its status only."""
    from trimtab.report._files import comparison_table

    table = comparison_table(subjects)
    note = ""
    if failed:
        note = (
            f" {_e(', '.join(failed))} did not solve: "
            + ("its report shows" if len(failed) == 1 else "their reports show")
            + " which limits conflict and how far each must move."
        )
    chart = ""
    if {"expected_alpha", "tracking_error"} <= set(table.index):
        points = pd.DataFrame({
            "tracking_error": pd.to_numeric(table.loc["tracking_error", [n for n in names if n not in failed]], errors="coerce"),
            "expected_alpha": pd.to_numeric(table.loc["expected_alpha", [n for n in names if n not in failed]], errors="coerce"),
        }).dropna()
        if len(points):
            chart = _figure(_charts.tradeoff_chart(points, salt="comparison-tradeoff"),
                            "Expected active return against tracking error, one point per scenario (after the trades, annualised).")
    return (
        '<section id="comparison"><h2>Scenarios side by side</h2>'
        f"<p>What each scenario gains and gives up after its trades, and the change from {_e(names[0])}.{note}</p>"
        f"{desk.comparison_rows(table, names, list(failed))}{chart}</section>"
    )


def _linked_body(name: str, address: str, failure: Unsolved | None) -> str:
    """A scenario's part as a link to its own report (what it shows), with its status."""
    status = failure.status if failure is not None else "solved"
    what = ("which limits conflict and how far each must move" if status == "infeasible"
            else "its status and message" if failure is not None
            else "its risk budget, trades, limits and risk before and after")
    return (f'<section><p class="meta">Status <span class="status{" bad" if failure is not None else ""}">{_e(status)}</span></p>'
            f'<p>Its full report, with {what}: <a href="{_e(address)}">{_e(address)}</a>.</p></section>')


def _unsolved_body(failure: Unsolved) -> str:
    """Status, message and (for an infeasible scenario) the relaxation table in each limit's unit."""
    parts = [f'<p class="meta">Status <span class="status bad">{_e(failure.status)}</span></p>']
    if failure.status == "infeasible":
        parts.append(f'<p class="relaxation"><strong>{_e(conflict_sentence(failure))}</strong></p>')
        parts.append(f'<p class="relaxation">{_e(relaxation_sentence(failure.relaxation))}</p>')
        if not failure.relaxation.empty:
            shown = display_relaxation(failure.relaxation)
            text_columns = {"option", "constraint", "kind", "side", "unit"}
            head = "".join(f'<th class="{"" if c in text_columns else "num"}">{_e(_header(c, _RELAXATION_HEADERS))}</th>'
                           for c in shown.columns)
            body = "".join(
                "<tr>" + "".join(
                    f'<td class="{"" if c in text_columns else "num"}">{_e(v).replace("[", "<wbr>[") if c == "constraint" else _e(v)}</td>'
                    for c, v in row.items()
                ) + "</tr>"
                for _, row in shown.iterrows()
            )
            parts.append(
                '<div class="wide"><table class="relaxation"><caption>How far each conflicting limit must move '
                "(each numbered option alone, every other limit as written; the CSV and JSON files keep the raw numbers).</caption>"
                f"<thead><tr>{head}</tr></thead><tbody>{body}</tbody></table></div>"
            )
    parts.append(f'<p class="note">{_e(failure.message)}</p>')
    return "".join(f"<section>{p}</section>" for p in parts)


_RELAXATION_HEADERS = {"needed": "value needed", "relax_by": "move by"}


def _nav(items: Sequence[tuple[str, str]], *, comparison: bool) -> str:
    links = ['<li><a href="#comparison">Scenarios side by side</a></li>'] if comparison else []
    links += [f'<li><a href="#{anchor}">{_e(text)}</a></li>' for anchor, text in items]
    return f"<nav><ol>{''.join(links)}</ol></nav>"


def _run_line(content: ReportContent) -> str:
    if not content.run:
        what = "Active risk" if content.post.kind == "active" else "Total risk"
        return f'<p class="meta">{what} attribution of one portfolio (no rebalance).</p>'
    run = content.run
    status = str(run.get("status", "unknown"))
    css = "ok" if status.lower().startswith("optimal") else "bad"
    bits = [f'Status <span class="status {css}">{_e(status)}</span>']
    if "solver" in run:
        bits.append(f"solver {_e(run['solver'])}")
    if "iterations" in run:
        bits.append(f"{_e(run['iterations'])} iterations")
    for key, label in (("build_time", "build"), ("solve_time", "solve")):
        if isinstance(run.get(key), (int, float)):
            bits.append(f"{label} {run[key]:.3f} s")
    return f'<p class="meta">{" · ".join(bits)}</p>'


def _key_figures(content: ReportContent) -> str:
    headline = content.headline
    cards = []
    for key in KEY_FIGURES:
        if key not in headline.index:
            continue
        row = headline.loc[key]
        was = ["before ", piece(row["pre"], "figure", row["unit"])] if "pre" in headline.columns else ""
        cards.append({"key": key, "label": str(row["label"]), "value": row["post"], "format": ["figure", row["unit"]],
                      "note": was})
    if content.risk_budget is not None:
        budget = content.risk_budget
        cards.insert(1, {"key": "risk_budget_used", "label": "Risk budget used", "value": budget.used,
                         "format": ["figure", "fraction"], "note": ["cap ", piece(budget.cap, "figure", "fraction")]})
    note = ""
    if content.post.is_zero_risk:
        note = '<p class="note">The portfolio has zero risk: contributions are undefined and shown as n/a.</p>'
    return render_cards(cards) + note


def _headline_table(content: ReportContent) -> str:
    table = content.headline
    columns = [c for c in ("pre", "post", "change") if c in table.columns]
    names = {"pre": "Before", "post": "After" if "pre" in columns else "Value", "change": "Change"}
    head = "".join(f'<th class="num">{names[c]}</th>' for c in columns)
    rows = []
    for _, row in table.iterrows():
        cells = "".join(
            f'<td class="num">{change_text(row[c], row["unit"]) if c == "change" else format_figure(row[c], row["unit"])}</td>'
            for c in columns
        )
        rows.append(f"<tr><td>{_e(row['label'])}</td>{cells}</tr>")
    note = ""
    if "change" in columns:
        note = '<caption>Changes of percentages are in percentage points (pp).</caption>'
    return f"<table>{note}<thead><tr><th>Figure</th>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"


def _constraint_table(table: pd.DataFrame) -> str:
    columns = [c for c in _CONSTRAINT_UNITS if c in table.columns]
    head = "<th>Constraint</th>" + "".join(
        f'<th class="{"num" if _CONSTRAINT_UNITS[c] in ("limit", "count") else ""}">{_e(_header(c))}</th>' for c in columns
    ) + "<th>Binding</th>"
    rows = []
    for i, row in table.iterrows():
        binding = bool(flags(pd.Series([row.get("binding", False)], dtype=object)).iloc[0])
        name = row["name"] if "name" in table.columns else i
        cells = "".join(
            "<td></td>" if _CONSTRAINT_UNITS[c] == "limit" and no_bound(row[c]) else _cell(row[c], _CONSTRAINT_UNITS[c])
            for c in columns
        )
        flag = "<td>yes</td>" if binding else "<td></td>"
        at_limit = binding_assets_text(row) if binding else ""
        if at_limit:
            name = f"{name} ({at_limit})"
        rows.append(f'<tr class="{"binding" if binding else ""}"><td>{_e(name).replace("[", "<wbr>[")}</td>{cells}{flag}</tr>')
    return (
        '<div class="wide"><table class="constraints"><caption>Binding constraints first (shaded). '
        "Shadow price: objective given up per unit of limit.</caption>"
        f"<thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table></div>"
    )


def _provenance(content: ReportContent) -> str:
    items = [("package", f"trimtab {__version__}")]
    items += [(str(k), v) for k, v in content.provenance.items()]
    entries = "".join(f"<dt>{_e(k)}</dt><dd>{_e(_plain(v))}</dd>" for k, v in items)
    scenario = ""
    if content.scenario:
        scenario = "<h3>Scenario settings</h3>" + desk.settings_section(content.scenario)
    return f'<dl class="provenance">{entries}</dl>{scenario}'


