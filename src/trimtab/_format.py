"""Plain-text formatting of figures and DataFrames for the terminal (shared by the commands)."""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any

import numpy as np
import pandas as pd
from rich.table import Table


def format_percent(value: Any, digits: int = 2) -> str:
    """A fraction as a percentage (0.0312 → "3.12%"); "–" for NaN or infinite, str() for non-numbers."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    return "–" if not math.isfinite(v) else f"{100 * v:.{digits}f}%"


def format_number(value: Any, digits: int = 4) -> str:
    """A number to ``digits`` significant digits; "–" for NaN or infinite, str() for non-numbers."""
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    return "–" if not math.isfinite(v) else f"{v:.{digits}g}"


def frame_table(frame: pd.DataFrame, title: str, *, percent: Iterable[str] = (), max_rows: int = 20) -> Table:
    """A DataFrame as a rich table: float columns named in ``percent`` as percentages, other floats
    to four significant digits, everything else as text; the index is shown unless it is a RangeIndex."""
    percent = set(percent)
    table = Table(title=title, title_justify="left", show_lines=False, header_style="bold")
    show_index = not isinstance(frame.index, pd.RangeIndex)
    if show_index:
        table.add_column(str(frame.index.name or ""))
    for col in frame.columns:
        table.add_column(str(col), justify="right")
    for label, row in frame.head(max_rows).iterrows():
        cells = []
        for col in frame.columns:
            value = row[col]
            if isinstance(value, (float, np.floating)):
                cells.append(format_percent(value) if col in percent else format_number(value))
            else:
                cells.append(str(value))
        table.add_row(*([str(label)] if show_index else []), *cells)
    if len(frame) > max_rows:
        table.caption = f"{len(frame) - max_rows} more rows not shown"
    return table


def compact_limits(paths: Iterable[str], shown: int = 3) -> str:
    """Limit key paths joined with commas; bands from one ``default`` are folded into one entry.

    ``constraints.group.bounds.default (A)``, ``… (B)``, ``… (C)``, ``… (D)`` read as
    ``constraints.group.bounds.default (4 bands: A, B, C, …)``.
    """
    order: list[str] = []
    labels: dict[str, list[str]] = {}
    for path in paths:
        head, sep, rest = path.partition(" (")
        if sep and rest.endswith(")"):
            if head not in labels:
                order.append(head)
                labels[head] = []
            labels[head].append(rest[:-1])
        else:
            order.append(path)
    out = []
    for item in order:
        if item not in labels:
            out.append(item)
        elif len(labels[item]) == 1:
            out.append(f"{item} ({labels[item][0]})")
        else:
            names = labels[item]
            more = ", …" if len(names) > shown else ""
            out.append(f"{item} ({len(names)} bands: {', '.join(names[:shown])}{more})")
    return ", ".join(out)
