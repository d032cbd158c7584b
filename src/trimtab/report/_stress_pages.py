"""Output folders of ``trimtab stress``, ``trimtab replay`` and ``trimtab attribute-returns``:
CSV tables, one result.json and a self-contained report.html with inline SVG charts.

Lays out results computed in :mod:`trimtab.stresstest` and :mod:`trimtab.attribution`; computes only
cumulative sums for display. Every folder is written under a temporary name and renamed.
"""

from __future__ import annotations

import html
import json
import math
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab.report._content import REALISED_CAUTION
from trimtab.report._pages import PALETTE, _figure, _percent, _svg, figure_block, html_table, lines_chart, write_page
from trimtab._output import output_folder

_PERCENT = ("book", "benchmark", "active", "specific_band_book", "specific_band_active", "contribution", "share_of_return",
            "share_of_risk", "factor", "specific", "total", "mean_active_weight", "largest_loss")


def _records(frame: pd.DataFrame) -> list[dict[str, Any]]:
    rows = json.loads(frame.reset_index().to_json(orient="records", date_format="iso"))
    return [{k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in r.items()} for r in rows]


def _write(folder: Path, tables: Mapping[str, pd.DataFrame], document: Mapping[str, Any]) -> list[str]:
    written = []
    for name, table in tables.items():
        table.to_csv(folder / f"{name}.csv")
        written.append(f"{name}.csv")
    body = {**document, **{name: _records(table) for name, table in tables.items()}}
    (folder / "result.json").write_text(json.dumps(body, indent=2, default=str), encoding="utf-8")
    return [*written, "result.json", "report.html"]


def _plain_dates(frame: pd.DataFrame) -> pd.DataFrame:
    """Timestamp columns at midnight as YYYY-MM-DD text, for display."""
    out = frame.copy()
    for column in out.columns:
        if pd.api.types.is_datetime64_any_dtype(out[column]) and (out[column] == out[column].dt.normalize()).all():
            out[column] = out[column].dt.strftime("%Y-%m-%d")
    return out


def bars_chart(frame: pd.DataFrame, *, xlabel: str, name: str, percent: bool = True) -> str:
    """Horizontal bars per row, one colour per column (fractions shown as percentages unless not ``percent``)."""
    rows = len(frame)
    fig, ax = _figure(0.42 * rows * max(1, len(frame.columns)) ** 0.5 + 1.2)
    y = np.arange(rows)[::-1]
    width = 0.8 / max(len(frame.columns), 1)
    for i, column in enumerate(frame.columns):
        ax.barh(y + (len(frame.columns) - 1 - 2 * i) * width / 2, frame[column].to_numpy(dtype=float), height=width,
                color=PALETTE[i % len(PALETTE)], label=str(column))
    ax.set_yticks(y, [str(v) for v in frame.index])
    ax.axvline(0.0, color="#1d2125", linewidth=0.8)
    ax.set_xlabel(xlabel)
    if percent:
        _percent(ax, "x")
    ax.grid(axis="x", alpha=0.3)
    if len(frame.columns) > 1:
        ax.legend(loc="lower left", bbox_to_anchor=(0.0, 1.0), frameon=False, ncols=len(frame.columns))
    return _svg(fig, name)


def write_stress(result: Any, target: Path, inputs: Sequence[Path], *, settings: Mapping[str, Any]) -> list[str]:
    """shocks.csv, factor_moves.csv, contributions.csv (and active_contributions.csv), result.json, report.html."""
    tables = {"shocks": result.table(), "factor_moves": result.factor_moves, "contributions": result.contributions}
    if result.active_contributions is not None:
        tables["active_contributions"] = result.active_contributions
    with output_folder(target, inputs) as tmp:
        files = _write(tmp, tables, {"document": "trimtab.stress", "settings": dict(settings)})
        columns = ["book", "active"] if result.active_contributions is not None else ["book"]
        contrib = result.active_contributions if result.active_contributions is not None else result.contributions
        top = contrib.abs().max().sort_values(ascending=False).index[:8]
        charts = {
            "Return under each shock (negative is a loss)": bars_chart(result.returns[columns], xlabel="return under the shock", name="st-returns"),
            f"Largest factor contributions ({'active' if len(columns) > 1 else 'book'})": bars_chart(
                contrib[top].T, xlabel="contribution to the return", name="st-contrib"),
        }
        notes = [
            f"Moves over {result.horizon:g} periods; {'unnamed factors move by their conditional expectation F_US·F_SS⁻¹·s' if result.conditional else 'only the named factors move'}. "
            "Plausibility: D² = sᵀ(h·F_SS)⁻¹s and P(χ² ≥ D²); specific returns are not shocked (±1σ band shown).",
        ]
        sections = [
            ("Summary", f"<pre>{html.escape(result.summary().as_text())}</pre>"),
            ("Charts", figure_block(charts)),
            ("Shocks", html_table(result.table(), percent_columns=_PERCENT)),
            ("Full factor moves", html_table(result.factor_moves.T, percent_columns=tuple(result.factor_moves.index))),
        ]
        write_page(tmp / "report.html", "Stress test", sections, notes=notes)
    return files


def write_replay(result: Any, target: Path, inputs: Sequence[Path], *, cumulative: pd.DataFrame, settings: Mapping[str, Any]) -> list[str]:
    """windows.csv, factor_moves.csv, contributions.csv, result.json, report.html (with the replayed path)."""
    tables = {"windows": result.windows, "factor_moves": result.factor_moves, "contributions": result.contributions}
    if result.active_contributions is not None:
        tables["active_contributions"] = result.active_contributions
    with output_folder(target, inputs) as tmp:
        files = _write(tmp, tables, {"document": "trimtab.replay", "settings": dict(settings)})
        columns = ["book", "active"] if result.active_contributions is not None else ["book"]
        charts = {
            "Replayed return of each window on today's exposures": bars_chart(result.windows[columns], xlabel="replayed return", name="rp-windows"),
            "Today's exposures through the whole history (cumulated; factor part only)": lines_chart(
                cumulative, ylabel="cumulated replayed return", name="rp-path"),
        }
        sections = [
            ("Summary", f"<pre>{html.escape(result.summary().as_text())}</pre>"),
            ("Charts", figure_block(charts)),
            ("Windows", html_table(_plain_dates(result.windows), percent_columns=_PERCENT)),
        ]
        notes = ["Move of a window: the sum of its factor returns, applied to today's exposures Bᵀw; the worst windows "
                 "are found greedily and do not overlap. Specific returns are shown as a ±1σ band √(L·Σdᵢwᵢ²)."]
        write_page(tmp / "report.html", "Historical replay", sections, notes=notes)
    return files


def write_return_attribution(result: Any, target: Path, inputs: Sequence[Path], *, settings: Mapping[str, Any]) -> list[str]:
    """by_period.csv, linked.csv (the factor table), returns.csv, exposures.csv (and assets.csv),
    result.json, report.html."""
    table = result.factor_table()
    tables = {"linked": table, "by_period": result.by_period, "returns": result.returns, "exposures": result.exposures}
    if result.asset_contributions is not None:
        tables["assets"] = result.asset_contributions.sort_values("total")
    with output_folder(target, inputs) as tmp:
        files = _write(tmp, tables, {"document": "trimtab.return_attribution", "linking": result.linking,
                                     "total": float(result.linked["total"]), "settings": dict(settings)})
        components = result.by_period.drop(columns="total").mul(result.link_factors, axis=0)
        order = result.linked.drop(["total", *result.remainder], errors="ignore").abs().sort_values(ascending=False).index[:4]
        shown = [c for c in [*order, *result.remainder] if c in components.columns]
        path = components[shown].cumsum()
        path["total"] = components.sum(axis=1).cumsum()
        charts = {
            "Linked active return by component": bars_chart(table[["contribution"]].rename(columns={"contribution": "return"}),
                                                            xlabel="linked contribution to the active return", name="ra-linked"),
            "Return earned against risk taken (share of the active return and of ex-ante active variance)": bars_chart(
                table.loc[[*order, *[r for r in result.remainder if r in table.index]], ["share_of_return", "share_of_risk"]].fillna(0.0)
                .rename(columns={"share_of_return": "share of the active return", "share_of_risk": "share of ex-ante active variance"}),
                xlabel="share", name="ra-shares"),
            "Cumulated linked contributions through the span": lines_chart(path, ylabel="active return", name="ra-path"),
        }
        sections = [
            ("Summary", f"<pre>{html.escape(result.summary().as_text())}</pre>"),
            ("Charts", figure_block(charts)),
            ("By component", html_table(table, percent_columns=_PERCENT)),
        ]
        if result.asset_contributions is not None:
            sections.append(("Largest stock-picking contributions", html_table(result.top_assets(15), percent_columns=_PERCENT)))
        notes = [f"Per period: factor k = active exposure × factor return; the remainder ({', '.join(result.remainder)}) makes each "
                 f"period sum to (w − b)ᵀr. Periods linked with {result.linking} linking, so the components add up to "
                 "∏(1 + R_t) − ∏(1 + Rb_t) exactly."]
        write_page(tmp / "report.html", "Active return attribution", sections, notes=notes, caution=REALISED_CAUTION)
    return files
