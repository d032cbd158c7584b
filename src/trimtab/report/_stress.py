"""The pre- and post-trade stress section of a rebalance report: JSON records, table file, HTML, terminal.

Lays out ``RebalanceResult.stress`` (computed in :mod:`trimtab.construct._stress_table`); computes
nothing but the display order.
"""

from __future__ import annotations

import html
import math
from typing import Any

import pandas as pd
from rich.console import Console
from rich.table import Table

from trimtab._format import format_percent
from trimtab.report._filters import probability

NOTE = (
    "Return of the book against its benchmark under each shock (negative is a loss), before and after the trade. "
    "Unnamed factors move by their conditional expectation under the model; specific returns are not shocked "
    "(±1σ over a month shown). A tail probability below 1e-4 marks a shock the model finds implausible."
)


def stress_frame(subject: Any) -> pd.DataFrame | None:
    """The subject's stress table (index shock), or None when it has none."""
    frame = getattr(subject, "stress", None)  # the scenario's shocks were checked when it was built
    return frame if isinstance(frame, pd.DataFrame) and len(frame) else None


def stress_records(subject: Any) -> list[dict[str, Any]] | None:
    """result.json ``stress``: one record per shock (NaN → None), or None."""
    frame = stress_frame(subject)
    if frame is None:
        return None
    records = frame.reset_index().to_dict(orient="records")
    return [{k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in r.items()} for r in records]


def stress_html(subject: Any, heading: str, salt: str) -> str:
    """A <section> with a before/after bar chart and the table; '' without shocks."""
    frame = stress_frame(subject)
    if frame is None:
        return ""
    from trimtab.report import _charts
    from trimtab.report._templates import render

    column = "active" if frame["post_active"].notna().any() else "book"
    bars = pd.DataFrame({"pre": frame[f"pre_{column}"], "post": frame[f"post_{column}"]})
    chart = _charts.paired_bars(bars, xlabel=f"{column} return under the shock", salt=f"{salt}-stress", percent=True,
                                max_rows=len(bars))
    table = render("partials/stress.html.j2", **stress_table(frame))
    return (f"<{heading}>Stress tests before and after the trade</{heading}>"
            f"<figure>{chart}<figcaption>{html.escape(NOTE)}</figcaption></figure>{table}")


def stress_table(frame: pd.DataFrame, brief: bool = False) -> dict[str, Any]:
    """Context of ``partials/stress.html.j2``: which return is shown (active, or book without a
    benchmark), column headings and rows of numbers (the template formats them). ``brief`` (the
    explore page) keeps the shock, before, after, limit and tail probability."""
    column = "active" if frame["post_active"].notna().any() else "book"
    rows = []
    for name, row in frame.iterrows():
        named = isinstance(row["limit_on"], str)
        rows.append({
            "shock": str(name), "source": str(row["source"]),
            "pre": row[f"pre_{column}"], "post": row[f"post_{column}"],
            "limit": row["limit"], "limit_on": row["limit_on"] if named and not brief else None,
            "band": row["specific_band_active"], "tail": row["tail_probability"],
            "description": str(row["description"] or ""),
        })
    return {"column": column, "rows": rows, "brief": brief}


def print_stress(subject: Any, console: Console) -> None:
    """The stress table on the terminal (nothing without shocks)."""
    frame = stress_frame(subject)
    if frame is None:
        return
    column = "active" if frame["post_active"].notna().any() else "book"
    table = Table(title=f"Stress tests ({column} return under each shock; negative is a loss)", title_justify="left")
    for name in ("shock", "before", "after", "limit (loss)", "tail prob."):
        table.add_column(name, justify="left" if name == "shock" else "right")
    for name, row in frame.iterrows():
        limit = format_percent(row["limit"]) if isinstance(row["limit_on"], str) else ""
        table.add_row(str(name), format_percent(row[f"pre_{column}"]), format_percent(row[f"post_{column}"]), limit,
                      probability(row["tail_probability"]))
    console.print(table)
