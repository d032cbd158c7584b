"""Limits the rounded book holds only within its rounding tolerance, said in words.

Orders in whole lots move every limited quantity a little; the rounded book is held to each limit
plus a documented rounding tolerance (docs/construction.md, "Rounding to lots": 1 bp of NAV for
weights, 0.01 pp a year for risk, 0.001 for exposures and beta). A figure past its limit by less
than that tolerance — turnover 25.01% against a cap of 25% — holds, and a trader reading it must be
told so rather than left to think the limit is broken. The numbers are never changed.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

#: Columns of :func:`within_tolerance`.
COLUMNS = ["kind", "value", "lower", "upper", "breach", "tolerance"]


def within_tolerance(subject: Any) -> pd.DataFrame | None:
    """The limits the rounded book passes only within their rounding tolerance.

    A row of the trade list's verification whose value lies past its limit by more than the
    optimizer's own verification tolerance, max(1e-7, 1e-6·|limit|), and still passes (it is within
    max(that, the rounding tolerance of its kind)). Index ``limit``; columns kind, value, lower, upper,
    breach (how far past, in the limit's unit), tolerance. None without a trade list in shares.
    """
    trade_list = getattr(subject, "trade_list", None)
    table = getattr(trade_list, "verification", None)
    if not isinstance(table, pd.DataFrame) or not {"name", "breach", "tolerance", "ok"} <= set(table.columns):
        return None
    lower = pd.to_numeric(table["lower"], errors="coerce")
    upper = pd.to_numeric(table["upper"], errors="coerce")
    value = pd.to_numeric(table["value"], errors="coerce")
    nearer = np.where(value.to_numpy() > upper.fillna(np.inf).to_numpy(), upper, lower)
    verify_tol = np.maximum(1e-7, 1e-6 * np.abs(np.nan_to_num(nearer.astype(float))))
    breach = pd.to_numeric(table["breach"], errors="coerce").fillna(0.0)
    soft = table["soft"].fillna(False).astype(bool) if "soft" in table.columns else False
    keep = table["ok"].astype(bool) & (breach.to_numpy() > verify_tol) & ~soft
    out = table.loc[keep, ["name", *COLUMNS]].copy()
    out.index = pd.Index(out.pop("name").astype(str), name="limit")
    return out


def in_percent(kind: str) -> bool:
    """A limit whose value is a fraction of NAV or an annualised volatility (shown in %); exposures
    and beta are plain numbers."""
    return not ("exposure" in kind or "beta" in kind)


def tolerance_text(kind: str, tolerance: float) -> str:
    """The rounding tolerance in the limit's unit: "0.01 pp" for weights and risk, "0.001" otherwise."""
    return f"{100 * tolerance:.2g} pp" if in_percent(kind) else f"{tolerance:.2g}"


def status_text(kind: str, tolerance: float) -> str:
    """The limits table's check of such a row: ``ok (within rounding tolerance 0.01 pp)``."""
    return f"ok (within rounding tolerance {tolerance_text(kind, tolerance)})"


def tolerance_lines(rows: pd.DataFrame | None) -> list[str]:
    """One sentence per such limit whose value, as printed, reads past its limit (25.01% against
    25.00%), for the terminal and under the report's figures; the limits table marks every such row."""
    if rows is None or rows.empty:
        return []
    lines = []
    for name, row in rows.iterrows():
        kind = str(row["kind"])
        upper_side = np.isfinite(row["upper"]) and row["value"] > row["upper"]
        bound = row["upper"] if upper_side else row["lower"]
        word = "maximum" if upper_side else "minimum"
        pct = in_percent(kind)
        value, limit = (f"{100 * row['value']:.2f}%", f"{100 * bound:.2f}%") if pct else (f"{row['value']:.4g}", f"{bound:.4g}")
        if value == limit:  # past it only in digits nobody reads: the limits table says so
            continue
        past = f"{100 * row['breach']:.3f} pp" if pct else f"{row['breach']:.2g}"
        lines.append(
            f"{name} is {value} against a {word} of {limit}: {past} past it, within the "
            f"{tolerance_text(kind, float(row['tolerance']))} rounding tolerance for orders in whole lots, so the "
            "rounded book holds this limit (docs/construction.md, \"Rounding to lots\")."
        )
    return lines
