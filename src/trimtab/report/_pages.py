"""Charts (inline SVG) and one plain, printable HTML page for sweeps, frontiers and backtests.

The charts lay out tables computed elsewhere; they compute nothing but cumulative sums for display.
Drawn with matplotlib on an Agg canvas (no pyplot, no global state).
"""

from __future__ import annotations

import datetime as _dt
import html
import io
import re
from collections.abc import Mapping, Sequence
from importlib import resources
from pathlib import Path
from typing import TYPE_CHECKING, Any

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import PercentFormatter

from trimtab._version import __version__
from trimtab.report._content import CAUTION

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType

PALETTE = ("#2a6f77", "#d49a3a", "#6b4c9a", "#b23a3a", "#4d7f3a", "#8a939b", "#1d2125")
_STYLE: dict[RcKeyType, Any] = {
    "svg.fonttype": "none",
    "font.family": "sans-serif",
    "font.size": 10.5,
    "axes.edgecolor": "#8a939b",
    "axes.spines.top": False,
    "axes.spines.right": False,
}


def _figure(height_in: float = 3.4) -> tuple[Figure, Any]:
    fig = Figure(figsize=(9.3, height_in))
    FigureCanvasAgg(fig)
    return fig, fig.add_subplot()


def _svg(fig: Figure, name: str) -> str:
    """An inline <svg> element: no XML prolog, ids prefixed by ``name`` so charts can share a page."""
    buffer = io.StringIO()
    with matplotlib.rc_context({**_STYLE, "svg.hashsalt": f"trimtab-{name}"}):
        fig.tight_layout()
        fig.savefig(buffer, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None})
    text = buffer.getvalue()
    text = text[text.index("<svg") :]
    text = re.sub(r'\bid="([^"]+)"', rf'id="{name}-\1"', text)
    text = re.sub(r"url\(#([^)]+)\)", rf"url(#{name}-\1)", text)
    text = re.sub(r'href="#([^"]+)"', rf'href="#{name}-\1"', text)
    text = re.sub(r'<svg([^>]*?) width="[^"]*" height="[^"]*"', r'<svg\1 class="chart" role="img"', text, count=1)
    return text.replace("<svg", f'<svg aria-label="{html.escape(name.replace("-", " "))}"', 1)


def _percent(ax: Any, axis: str = "y") -> None:
    target = ax.yaxis if axis == "y" else ax.xaxis
    target.set_major_formatter(PercentFormatter(xmax=1.0))


def frontier_chart(table: pd.DataFrame, *, x: str = "tracking_error", y: str = "expected_alpha", name: str = "frontier") -> str:
    """Expected active return against ``x`` (tracking error or turnover), solved points only.

    Parameters
    ----------
    table : pandas.DataFrame
        A frontier or sweep table with columns ``x``, ``y`` and ``status``.
    x, y : str
        The columns on the axes (fractions, shown as percentages).
    name : str
        Prefix of the SVG ids (unique per page).

    Returns
    -------
    str
        An ``<svg>`` element.
    """
    fig, ax = _figure()
    solved = table[table["status"] == "solved"].sort_values(x)
    ax.plot(solved[x], solved[y], marker="o", color=PALETTE[0], linewidth=1.6)
    failed = table[table["status"] != "solved"]
    if "limit" in table.columns and len(failed):
        for value in failed["limit"]:
            ax.axvline(float(value), color=PALETTE[3], linestyle=":", linewidth=1)
    ax.set_xlabel(x.replace("_", " ") + (" (forecast, annualised)" if x == "tracking_error" else " (one-way)"))
    ax.set_ylabel("expected active return (annualised)")
    _percent(ax, "x")
    _percent(ax, "y")
    ax.grid(alpha=0.3)
    return _svg(fig, name)


_MIN_SPAN = 0.01  # a y-axis spans at least 0.01 (1 pp on a percent axis), so noise does not fill it


def _at_least_span(ax: Any, frames: list[pd.DataFrame], span: float) -> None:
    """Widen the y-axis around its data to ``span`` when the data barely move.

    A series held at its limit (turnover at a 25% cap) varies in its last digits; autoscaled, that
    noise fills the chart and every tick prints the same label.
    """
    values = np.concatenate([f.to_numpy(dtype=float).ravel() for f in frames])
    values = values[np.isfinite(values)]
    if values.size and values.max() - values.min() < span:
        middle = 0.5 * (values.max() + values.min())
        ax.set_ylim(middle - span / 2, middle + span / 2)


def lines_chart(frame: pd.DataFrame, *, ylabel: str, name: str, percent: bool = True, dashed: pd.DataFrame | None = None) -> str:
    """One line per column against the index (dates); optional dashed companions of the same colour."""
    fig, ax = _figure()
    for i, column in enumerate(frame.columns):
        colour = PALETTE[i % len(PALETTE)]
        ax.plot(frame.index, frame[column].to_numpy(dtype=float), color=colour, linewidth=1.5, label=str(column))
        if dashed is not None and column in dashed.columns:
            ax.plot(dashed.index, dashed[column].to_numpy(dtype=float), color=colour, linewidth=1.2, linestyle="--", label=f"{column} (realised)")
    ax.set_ylabel(ylabel)
    _at_least_span(ax, [frame] if dashed is None else [frame, dashed], _MIN_SPAN)
    if percent:
        _percent(ax)
    ax.grid(alpha=0.3)
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=9)
    fig.autofmt_xdate()
    return _svg(fig, name)


def backtest_charts(result: Any, *, rolling: int = 12) -> dict[str, str]:
    """The backtest's charts: forecast against realised TE, cumulative active return after costs,
    turnover, and the first scenario's active factor exposures.

    Realised TE is the rolling standard deviation of the last ``rolling`` holding-period active
    returns, annualised with the mean holding period: a display aid, not a test.
    """
    history = result.history
    forecast = history["forecast_te"].unstack("scenario")
    per_year = float(result.settings.get("periods_per_year", 252)) / max(float(history["n_periods"].mean()), 1.0)
    realised = history["realised_active"].unstack("scenario").rolling(rolling, min_periods=max(3, rolling // 2)).std() * np.sqrt(per_year)
    cumulative = (1 + history["net_active"].unstack("scenario").fillna(0.0)).cumprod() - 1
    charts = {
        "Forecast (solid) and realised rolling (dashed) tracking error": lines_chart(
            forecast, ylabel="tracking error (annualised)", name="bt-te", dashed=realised
        ),
        "Cumulative active return after costs": lines_chart(cumulative, ylabel="active return", name="bt-cum"),
        "One-way turnover at each rebalance": lines_chart(history["turnover"].unstack("scenario"), ylabel="turnover", name="bt-turnover"),
    }
    first = result.scenarios[0]
    exposures = result.exposures.loc[first]
    top = exposures.abs().mean().sort_values(ascending=False).index[:6]
    charts[f"Active factor exposures ({first}; the six largest)"] = lines_chart(
        exposures[top], ylabel="active exposure", name="bt-exposures", percent=False
    )
    return charts


# ---------------------------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------------------------
def _css() -> str:
    try:
        return resources.files("trimtab.report").joinpath("report.css").read_text(encoding="utf-8")
    except (FileNotFoundError, ModuleNotFoundError):
        return "body{font-family:sans-serif;max-width:62rem;margin:auto;padding:1.5rem}"


def _cell(value: Any, column: str, percent_columns: Sequence[str]) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        if not np.isfinite(value):
            return "–"
        if column in percent_columns:
            return f"{100 * value:.2f}%"
        # shares, ADV and currency amounts print whole with separators (21,000), not as 2.1e+04
        return f"{value:,.0f}" if abs(value) >= 1e4 else f"{value:.4g}"
    return html.escape(str(value))


def _numeric(value: Any) -> bool:
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, (bool, np.bool_))


def _label(value: Any) -> str:
    if isinstance(value, pd.Timestamp) and value == value.normalize():
        return str(value.date())
    if isinstance(value, (float, np.floating)):
        return f"{float(value):.10g}"
    return str(value)


def html_table(frame: pd.DataFrame, *, percent_columns: Sequence[str] = (), max_rows: int = 200) -> str:
    """A plain HTML table of ``frame`` (index as the first column)."""
    index_name = " / ".join(str(n) for n in frame.index.names if n is not None)
    head = "".join(f"<th>{html.escape(str(c).replace('_', ' '))}</th>" for c in [index_name, *frame.columns])
    rows = []
    for label, row in frame.head(max_rows).iterrows():
        parts = label if isinstance(label, tuple) else (label,)
        names = list(frame.index.names)
        label_text = " / ".join(
            f"{100 * float(x):.2f}%" if names[i] in percent_columns and _numeric(x) else _label(x) for i, x in enumerate(parts)
        )
        cells = "".join(
            f'<td class="{_cell_class(row[c])}">{_cell(row[c], str(c), percent_columns)}</td>' for c in frame.columns
        )
        rows.append(f"<tr><th scope=\"row\">{html.escape(label_text)}</th>{cells}</tr>")
    more = f'<p class="note">{len(frame) - max_rows} more rows in the CSV file.</p>' if len(frame) > max_rows else ""
    return f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>{more}"


def _cell_class(value: Any) -> str:
    """``num`` for numbers; ``text``, and ``text long`` for a sentence (a reason, a list of limits),
    which gets a readable minimum width instead of a column a word wide."""
    if _numeric(value):
        return "num"
    return "text long" if len(str(value)) > 40 else "text"


def render_page(title: str, sections: Sequence[tuple[str, str]], *, notes: Sequence[str] = (), caution: str = CAUTION) -> str:
    """One self-contained page: title, caution (a forecast's, or ``REALISED_CAUTION`` for past returns),
    then (heading, HTML body) sections. No scripts."""
    when = _dt.datetime.now(_dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{html.escape(title)}</title>",
        f"<style>{_css()}\ntd.long {{ min-width: 14rem; overflow-wrap: anywhere; }}</style></head><body><main>",
        f"<h1>{html.escape(title)}</h1>",
        f'<p class="meta">trimtab {html.escape(__version__)} · written {when}</p>',
        f'<p class="caution">{html.escape(caution, quote=False)}</p>',
    ]
    parts += [f'<p class="note">{html.escape(n)}</p>' for n in notes]
    for heading, body in sections:
        parts.append(f"<section><h2>{html.escape(heading)}</h2>{body}</section>")
    parts.append("</main></body></html>")
    return "\n".join(parts)


def figure_block(charts: Mapping[str, str]) -> str:
    """Charts with captions, as <figure> elements."""
    return "".join(f"<figure>{svg}<figcaption>{html.escape(caption)}</figcaption></figure>" for caption, svg in charts.items())


def write_page(path: str | Path, title: str, sections: Sequence[tuple[str, str]], *, notes: Sequence[str] = (),
               caution: str = CAUTION) -> Path:
    """Write :func:`render_page` to ``path`` through a temporary file."""
    from trimtab._output import write_text_atomic

    target = Path(path)
    write_text_atomic(target, render_page(title, sections, notes=notes, caution=caution))
    return target


# ---------------------------------------------------------------------------------------------
# Output folders
# ---------------------------------------------------------------------------------------------
_PERCENT = ("tracking_error", "total_risk", "turnover", "expected_alpha", "limit", "forecast_te", "realised_te",
            "mean_forecast_te", "active_return", "net_active_return", "total_cost", "mean_turnover",
            "hedged_tracking_error", "hedged_total_risk", "overlay_gross")


def _write_tables(folder: Path, tables: Mapping[str, pd.DataFrame | None]) -> None:
    import json

    document = {}
    for name, table in tables.items():
        if table is None:
            continue
        table.to_csv(folder / f"{name}.csv")
        document[name] = json.loads(table.reset_index().to_json(orient="records", date_format="iso"))
    (folder / "result.json").write_text(json.dumps(document, indent=2), encoding="utf-8")


def sweep_charts(result: Any) -> dict[str, str]:
    """Expected active return against TE across the grid and, for one parameter, TE and turnover against it."""
    table = result.table
    charts = {"Expected active return against forecast tracking error, across the grid": frontier_chart(table, name="sweep-te")}
    if len(result.parameters) == 1:
        key = result.parameters[0]
        solved = table[table["status"] == "solved"]
        values = pd.to_numeric(solved[key], errors="coerce")
        if values.notna().all() and len(solved):
            frame = pd.DataFrame({"tracking error": solved["tracking_error"].to_numpy(), "turnover": solved["turnover"].to_numpy(),
                                  "expected alpha": solved["expected_alpha"].to_numpy()}, index=values.to_numpy())
            fig, ax = _figure()
            for i, column in enumerate(frame.columns):
                ax.plot(frame.index, frame[column], marker="o", color=PALETTE[i], label=column)
            ax.set_xlabel(key)
            _percent(ax)
            ax.grid(alpha=0.3)
            ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=9)
            charts[f"Tracking error, turnover and expected alpha against {key}"] = _svg(fig, "sweep-param")
    return charts


def write_sweep(result: Any, target: str | Path, *, inputs: Sequence[str | Path] = (), title: str = "Sweep") -> Path:
    """sweep.csv, result.json and report.html into ``target`` (a temporary folder, then renamed)."""
    from trimtab._output import output_folder

    with output_folder(Path(target), inputs) as tmp:
        _write_tables(tmp, {"sweep": result.table})
        sections = [
            ("Summary", f"<p>{html.escape(result.summary())}</p>"),
            ("Charts", figure_block(sweep_charts(result))),
            ("Points", html_table(result.table.drop(columns=[c for c in ("seconds",) if c in result.table.columns]), percent_columns=_PERCENT)),
        ]
        write_page(tmp / "report.html", title, sections, notes=["Figures recomputed from each point's weights; turnover is one-way, ½·Σ|trade|."])
    return Path(target)


def write_frontier(result: Any, target: str | Path, *, inputs: Sequence[str | Path] = (), title: str = "Frontier") -> Path:
    """frontier_te.csv (and frontier_turnover.csv), result.json and report.html into ``target``."""
    from trimtab._output import output_folder

    with output_folder(Path(target), inputs) as tmp:
        _write_tables(tmp, {"frontier_te": result.tracking_error, "frontier_turnover": result.turnover})
        sections = [("Summary", f"<p>{html.escape(result.summary())}</p>"), ("Charts", figure_block(result.charts()))]
        sections.append(("Against tracking error", html_table(result.tracking_error.set_index("limit").rename_axis("tracking-error cap"),
                                                              percent_columns=(*_PERCENT, "tracking-error cap"))))
        if result.turnover is not None:
            sections.append(("Against turnover", html_table(result.turnover.set_index("limit").rename_axis("turnover cap"),
                                                            percent_columns=(*_PERCENT, "turnover cap"))))
        write_page(tmp / "report.html", title, sections, notes=["Each point maximises expected active return with the other limits in force."])
    return Path(target)


def _alpha_factor_note(settings: Any) -> str:
    """Which scenarios forecast on the model with the alpha factor (docs/model.md), as a note."""
    priced = dict(settings.get("alpha_factor") or {})
    if not priced:
        return ""
    names = ", ".join(f"{name} (volatility {sigma:.2%} a year)" for name, sigma in priced.items())
    return ('<p class="note">' + html.escape(
        f"Forecast on the model augmented with the alpha factor, the part of each date's alpha the factors do not "
        f"span priced as one more factor: {names}. The other scenarios' forecasts price that part as specific risk.") + "</p>")


def write_backtest(result: Any, target: str | Path, *, inputs: Sequence[str | Path] = (), title: str = "Backtest") -> Path:
    """history.csv, exposures.csv, risk_contributions.csv, bias.csv, totals.csv, result.json and
    report.html into ``target``."""
    from trimtab._output import output_folder

    with output_folder(Path(target), inputs) as tmp:
        _write_tables(tmp, {
            "history": result.history, "exposures": result.exposures, "risk_contributions": result.risk_contributions,
            "bias": result.bias, "totals": result.totals,
        })
        failures = "".join(f"<li>{html.escape(k)}: {html.escape(v)}</li>" for k, v in result.failures.items())
        history = result.history
        unsolved = history.loc[history["status"] != "solved", [c for c in ("status", "relaxed", "reason") if c in history.columns]] \
            if "status" in history.columns else history.iloc[:0]
        sections = [
            ("Summary", f"<pre>{html.escape(result.summary())}</pre>" + (f"<p>Failed:</p><ul>{failures}</ul>" if failures else "")),
            ("Dates that did not solve as written",
             html_table(unsolved) if len(unsolved) else "<p>Every date solved with its limits as written.</p>"),
            ("Realised against forecast risk", html_table(result.bias)
             + '<p class="note">Bias statistic b = std(rₜ/σₜ) over the holding periods; inside 1 ± √(2/T) the forecasts held.</p>'
             + _alpha_factor_note(result.settings)),
            ("Totals", html_table(result.totals, percent_columns=_PERCENT)),
            ("Charts", figure_block(backtest_charts(result))),
        ]
        write_page(tmp / "report.html", title, sections, notes=[
            "Each date: the model re-fitted on the trailing window only, the book rebalanced from its drifted weights, "
            "then held to the next date with realised returns and costs.",
        ])
    return Path(target)
