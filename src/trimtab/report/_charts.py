"""Charts as inline SVG strings, drawn with matplotlib on an Agg canvas (no pyplot, no global state).

Each chart takes a table from :mod:`trimtab.report._content` and lays it out; it computes nothing.
"""

from __future__ import annotations

import io
import re
from typing import TYPE_CHECKING, Any

import matplotlib
import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.figure import Figure
from matplotlib.ticker import PercentFormatter

if TYPE_CHECKING:  # the content tables come in as arguments: charts sit below _content, never import it
    from matplotlib.axes import Axes
    from matplotlib.typing import RcKeyType

    from trimtab.report._content import RiskBudget

BEFORE = "#a3acb5"
AFTER = "#2a6f77"
FACTOR = "#2a6f77"
SPECIFIC = "#d49a3a"
CAP = "#b23a3a"
INK = "#1d2125"
WIDTH_IN = 9.3

_STYLE: dict[RcKeyType, Any] = {
    "svg.fonttype": "none",
    "font.family": "sans-serif",
    "font.size": 10.5,
    "axes.edgecolor": "#8a939b",
    "axes.labelcolor": INK,
    "xtick.color": INK,
    "ytick.color": INK,
    "axes.spines.top": False,
    "axes.spines.right": False,
}


def _figure(height_in: float) -> tuple[Figure, Axes]:
    fig = Figure(figsize=(WIDTH_IN, height_in))
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    return fig, ax


def _svg(fig: Figure, salt: str) -> str:
    """Serialise to an inline <svg> element: no XML prolog, ids salted per chart, width fluid."""
    buffer = io.StringIO()
    with matplotlib.rc_context({**_STYLE, "svg.hashsalt": f"trimtab-{salt}"}):
        fig.savefig(buffer, format="svg", bbox_inches="tight", metadata={"Date": None, "Creator": None})
    text = buffer.getvalue()
    text = _prefix_ids(text[text.index("<svg") :], salt)
    text = re.sub(r'<svg([^>]*?) width="[^"]*" height="[^"]*"', r'<svg\1 class="chart" role="img"', text, count=1)
    return text.replace("<svg", f'<svg aria-label="{salt.replace("-", " ")}"', 1)


def _prefix_ids(svg: str, prefix: str) -> str:
    """Prefix every id and every reference to it, so several charts can share one HTML page."""
    svg = re.sub(r'\bid="([^"]+)"', rf'id="{prefix}-\1"', svg)
    svg = re.sub(r"url\(#([^)]+)\)", rf"url(#{prefix}-\1)", svg)
    return re.sub(r'href="#([^"]+)"', rf'href="#{prefix}-\1"', svg)


def _percent_axis(ax: Axes) -> None:
    ax.xaxis.set_major_formatter(PercentFormatter(xmax=1.0))


def _draw(values: pd.Series) -> np.ndarray:
    return np.nan_to_num(values.to_numpy(dtype=float), nan=0.0)


def risk_budget_chart(budget: RiskBudget, salt: str = "risk-budget") -> str:
    """Horizontal bars of the risk before and after, with the cap as a vertical line."""
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure(1.6)
        labels, values, colours = [], [], []
        if budget.pre is not None:
            labels.append("Before")
            values.append(budget.pre)
            colours.append(BEFORE)
        labels.append("After")
        values.append(budget.post)
        colours.append(AFTER)
        y = np.arange(len(values))[::-1]
        ax.barh(y, values, color=colours, height=0.55)
        ax.axvline(budget.cap, color=CAP, linewidth=1.6, linestyle="--")
        ax.text(budget.cap, y.max() + 0.45, f" cap {100 * budget.cap:.2f}%", color=CAP, va="bottom", ha="left")
        for yi, v in zip(y, values):
            ax.text(v, yi, f" {100 * v:.2f}%", va="center", ha="left", color=INK)
        ax.set_yticks(y, labels)
        ax.set_xlim(0, 1.25 * max(max(values), budget.cap))
        ax.set_ylim(-0.6, y.max() + 0.9)
        _percent_axis(ax)
        ax.set_xlabel(budget.name.replace("_", " ") + " (annualised)")
        return _svg(fig, salt)


def split_chart(rows: pd.DataFrame, salt: str = "factor-specific") -> str:
    """Stacked bars of the factor and specific contributions (they add up to the risk), per row."""
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure(0.55 * len(rows) + 1.0)
        y = np.arange(len(rows))[::-1]
        factor, specific = _draw(rows["factor"]), _draw(rows["specific"])
        ax.barh(y, factor, color=FACTOR, height=0.55, label="factor")
        ax.barh(y, specific, left=factor, color=SPECIFIC, height=0.55, label="specific")
        for yi, f, s in zip(y, factor, specific):
            total = f + s
            share = f"{100 * f / total:.0f}% factor" if total > 0 else "zero risk"
            ax.text(total, yi, f" {100 * total:.2f}%  ({share})", va="center", ha="left", color=INK)
        ax.set_yticks(y, [str(i) for i in rows.index])
        ax.set_xlim(0, 1.45 * max(float((factor + specific).max()), 1e-12))
        _percent_axis(ax)
        ax.set_xlabel("contribution to risk (annualised)")
        ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), frameon=False, ncols=2)
        return _svg(fig, salt)


def paired_bars(
    table: pd.DataFrame, *, xlabel: str, salt: str, percent: bool = False, max_rows: int = 12
) -> str:
    """Horizontal bars per row label for the columns ``pre`` (when present) and ``post``."""
    table = table.head(max_rows)
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure(0.32 * len(table) + 1.0)
        y = np.arange(len(table))[::-1]
        if "pre" in table.columns:
            ax.barh(y + 0.18, _draw(table["pre"]), height=0.36, color=BEFORE, label="before")
            ax.barh(y - 0.18, _draw(table["post"]), height=0.36, color=AFTER, label="after")
            ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), frameon=False, ncols=2)
        else:
            ax.barh(y, _draw(table["post"]), height=0.6, color=AFTER)
        ax.axvline(0, color="#5b636a", linewidth=0.8)
        ax.set_yticks(y, [str(i) for i in table.index])
        if percent:
            _percent_axis(ax)
        ax.set_xlabel(xlabel)
        return _svg(fig, salt)


def tradeoff_chart(points: pd.DataFrame, salt: str = "tradeoff") -> str:
    """Expected active return against tracking error, one labelled point per scenario.

    ``points``: index scenario name; columns ``tracking_error`` and ``expected_alpha`` (fractions).
    """
    with matplotlib.rc_context(_STYLE):
        fig, ax = _figure(3.2)
        x = points["tracking_error"].to_numpy(dtype=float)
        y = points["expected_alpha"].to_numpy(dtype=float)
        ax.scatter(x, y, s=46, color=AFTER, zorder=3)
        span_x = max(float(np.ptp(x)), 0.002)
        span_y = max(float(np.ptp(y)), 0.001)
        # scenarios that land on (nearly) the same point share one label instead of overprinting
        labels: list[tuple[float, float, list[str]]] = []
        for name, xi, yi in zip(points.index, x, y):
            near = next((lab for lab in labels if abs(lab[0] - xi) < 0.04 * span_x and abs(lab[1] - yi) < 0.06 * span_y), None)
            if near is None:
                labels.append((float(xi), float(yi), [str(name)]))
            else:
                near[2].append(str(name))
        for xi, yi, names in labels:
            ax.annotate(", ".join(names), (xi, yi), xytext=(6, 5), textcoords="offset points", color=INK)
        ax.set_xlim(max(0.0, x.min() - 0.25 * span_x), x.max() + 0.45 * span_x)
        ax.set_ylim(y.min() - 0.3 * span_y, y.max() + 0.35 * span_y)
        _percent_axis(ax)
        ax.yaxis.set_major_formatter(PercentFormatter(xmax=1.0))
        ax.set_xlabel("tracking error (forecast, annualised)")
        ax.set_ylabel("expected active return (annualised)")
        ax.grid(alpha=0.3)
        return _svg(fig, salt)
