"""Small HTML builders shared by the report's sections: escaping, cells, tables, figures."""

from __future__ import annotations

import html
import json
from collections.abc import Mapping, Sequence
from typing import Any

import pandas as pd

from trimtab.attribution import format_figure


def _figure(svg: str, caption: str) -> str:
    return f"<figure>{svg}<figcaption>{_e(caption)}</figcaption></figure>"


def _table(
    frame: pd.DataFrame,
    columns: Mapping[str, str],
    index_label: str,
    *,
    caption: str | None = None,
    units: Sequence[str] | None = None,
    headers: Mapping[str, str] | None = None,
) -> str:
    """A table of ``frame``'s index and ``columns`` (name → unit; unit "row" takes it from ``units``)."""
    shown = [c for c in columns if c in frame.columns]
    head = f"<th>{_e(index_label)}</th>" + "".join(
        f'<th class="{"" if columns[c] == "text" else "num"}">{_e(_header(c, headers)) if columns[c] != "row" else ""}</th>'
        for c in shown
    )
    rows = []
    for position, (label, row) in enumerate(frame.iterrows()):
        cells = "".join(
            _cell(row[c], units[position] if columns[c] == "row" and units is not None else columns[c]) for c in shown
        )
        rows.append(f"<tr><td>{_e(label)}</td>{cells}</tr>")
    cap = f"<caption>{_e(caption)}</caption>" if caption else ""
    return f"<table>{cap}<thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"


def _header(column: str, headers: Mapping[str, str] | None = None) -> str:
    text = (headers or {}).get(column) or _HEADERS.get(column, column.replace("_", " "))
    return text[:1].upper() + text[1:]


_HEADERS = {
    "pre": "before",
    "post": "after",
    "adv_fraction": "of daily volume",
    "marginal_contribution": "marginal",
    "contribution": "contribution (bp)",
}


def _cell(value: Any, unit: str) -> str:
    if unit == "text":
        return f"<td>{_e('' if value is None or (isinstance(value, float) and value != value) else value)}</td>"
    if unit == "flag":
        return f"<td>{'soft' if bool(value) and pd.notna(value) else 'hard'}</td>"
    try:
        return f'<td class="num">{format_figure(value, unit)}</td>'
    except (TypeError, ValueError):
        return f"<td>{_e(value)}</td>"


def _plain(value: Any) -> str:
    if isinstance(value, (Mapping, list, tuple)):
        return json.dumps(value, default=str, sort_keys=True)
    return str(value)


def _e(value: Any) -> str:
    return html.escape(str(value), quote=True)
