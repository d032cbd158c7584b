"""Scenarios that did not solve: their status, and the relaxation table read in each limit's unit.

An :class:`~trimtab.errors.InfeasibleError` carries the conflict set (the key paths of the limits that
cannot all hold together), shown first, and a relaxation table: one row per limit to move, grouped in
numbered options that each restore feasibility alone (``together`` when only a joint move does):
option, constraint (key path), kind, side, limit, needed, relax_by, unit, numbers in the scenario's
own units (fractions of NAV, annualised volatility, fraction of ADV). A
:class:`~trimtab.errors.SolverError` carries only its message. The writers show the table formatted
by unit (weights as % of NAV, annualised volatility as %) and keep the raw numbers in CSV and JSON.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import pandas as pd

from trimtab._format import compact_limits
from trimtab.errors import InfeasibleError, SolverError

#: Columns of a relaxation table, in display order.
RELAXATION_COLUMNS = ("option", "constraint", "side", "limit", "needed", "relax_by", "unit")
#: Numeric columns of a relaxation table, all in the row's unit.
RELAXATION_NUMBERS = ("limit", "needed", "relax_by")
#: Conflicting limits named one by one in the sentence above the table; the rest are counted.
MAX_NAMED = 5


@dataclass(frozen=True, eq=False)
class Unsolved:
    """A scenario that ended in an infeasibility or a solver failure instead of a result."""

    status: str
    message: str
    relaxation: pd.DataFrame
    #: the conflict set: key paths of the limits that cannot all hold together
    conflict: tuple[str, ...] = ()
    #: one sentence per limit of the conflict set: how far it alone must move, or why that is not enough
    reasons: tuple[str, ...] = ()


def is_unsolved(value: Any) -> bool:
    """True for the errors a comparison may hold instead of a result."""
    return isinstance(value, (InfeasibleError, SolverError))


def unsolved(error: InfeasibleError | SolverError) -> Unsolved:
    """The status (``infeasible`` or ``solver failure``), message and relaxation table of an error."""
    table = getattr(error, "relaxation", None)
    table = table if isinstance(table, pd.DataFrame) else pd.DataFrame(columns=list(RELAXATION_COLUMNS))
    status = "infeasible" if isinstance(error, InfeasibleError) else "solver failure"
    text = str(error).strip().splitlines()[0] if str(error).strip() else status
    # The optimizer starts its message with the scenario file's path; a report names the scenario
    # itself, and the path may be a temporary folder that no longer exists.
    head, sep, rest = text.partition(": ")
    if sep and head.endswith((".yaml", ".yml")):
        text = rest
    conflict = tuple(getattr(error, "conflict", None) or ())
    reasons = tuple(getattr(error, "reasons", None) or ())
    return Unsolved(status=status, message=text, relaxation=table.reset_index(drop=True), conflict=conflict, reasons=reasons)


def conflict_sentence(failure: Unsolved | InfeasibleError) -> str:
    """``These limits cannot all hold: A, B.`` (the first line shown for an infeasible scenario)."""
    conflict = failure.conflict if isinstance(failure, Unsolved) else tuple(getattr(failure, "conflict", None) or ())
    if not conflict:
        return "The optimizer found no set of conflicting limits for this infeasible scenario."
    reasons = failure.reasons if isinstance(failure, Unsolved) else tuple(getattr(failure, "reasons", None) or ())
    why = (" " + " ".join(r.rstrip(".") + "." for r in reasons)) if reasons else ""
    return f"These limits cannot all hold: {compact_limits(conflict)}.{why}"


def split_subjects(subjects: Mapping[str, Any]) -> tuple[dict[str, Any], dict[str, Unsolved]]:
    """The solved subjects and the unsolved ones (by name, each in the mapping's order)."""
    solved: dict[str, Any] = {}
    failed: dict[str, Unsolved] = {}
    for name, value in subjects.items():
        if is_unsolved(value):
            failed[str(name)] = unsolved(value)
        else:
            solved[str(name)] = value
    return solved, failed


def format_in_unit(value: Any, unit: Any) -> str:
    """A relaxation number in its limit's unit.

    Weights (any unit starting with "weight") and shares of risk are fractions shown as percent of
    NAV with three decimals (-0.0006074 → "-0.061%"); an annualised volatility is shown as percent
    with three decimals; names and lots as whole numbers; exposures, beta and anything else with
    four significant digits. Missing or infinite values give "n/a".
    """
    try:
        number = float(value)
    except (TypeError, ValueError):
        return str(value)
    if not math.isfinite(number):
        return "n/a"
    kind = str(unit).lower()
    if kind.startswith("weight") or kind in ("share of risk", "annualised volatility", "volatility", "fraction", "fraction of adv"):
        text = f"{100.0 * number:.3f}%"
    elif kind in ("names", "lots", "count"):
        text = f"{number:,.0f}"
    else:
        text = f"{number:.4g}"
    # A negative number that rounds to zero reads as "-0.000%": drop the sign.
    if text.startswith("-") and not any(ch in "123456789" for ch in text.split("e")[0]):
        text = text[1:]
    return text


def unit_label(unit: Any) -> str:
    """How a formatted relaxation number reads: "% of NAV" for weights, "% a year" for volatility."""
    kind = str(unit).lower()
    if kind.startswith("weight"):
        return "% of NAV" + (kind[len("weight"):] and f" {kind[len('weight'):].strip()}")
    if kind in ("annualised volatility", "volatility"):
        return "% a year (volatility)"
    if kind == "share of risk":
        return "% of risk"
    if kind == "fraction of adv":
        return "% of daily volume"
    return str(unit)


def relaxation_rows(table: pd.DataFrame) -> tuple[list[str], list[dict[str, Any]]]:
    """The relaxation table's columns shown and its rows as raw values, each with its ``unit`` (the
    explore page's partial prints them with the ``in_unit``, ``unit_label`` and ``text`` filters, as
    :func:`display_relaxation` does)."""
    columns = [c for c in RELAXATION_COLUMNS if c in table.columns]
    units = table["unit"].tolist() if "unit" in table.columns else [""] * len(table)
    rows = [{**{c: record[c] for c in columns}, "unit": unit}
            for record, unit in zip(table.to_dict(orient="records"), units, strict=True)]
    return columns, rows


def display_relaxation(table: pd.DataFrame) -> pd.DataFrame:
    """The relaxation table as text, numbers in each row's unit (for the terminal and HTML)."""
    columns = [c for c in RELAXATION_COLUMNS if c in table.columns]
    out = pd.DataFrame(index=range(len(table)), columns=columns, dtype=object)
    units = table["unit"] if "unit" in table.columns else pd.Series([""] * len(table))
    for column in columns:
        values = table[column].tolist()
        if column in RELAXATION_NUMBERS:
            out[column] = [format_in_unit(v, u) for v, u in zip(values, units, strict=True)]
        elif column == "unit":
            out[column] = [unit_label(u) for u in values]
        else:
            out[column] = ["" if v is None or (isinstance(v, float) and math.isnan(v)) else str(v) for v in values]
    return out


_VERBS = {"upper": "raise", "max": "raise", "lower": "lower"}


def _option_text(rows: pd.DataFrame) -> str:
    """``raise constraints.turnover.max from 2.000% to 41.252%`` (per-asset options: the first few assets)."""
    first = rows.iloc[0]
    verb = _VERBS.get(str(first["side"]), "move")
    unit = first.get("unit", "")
    if len(rows) == 1:
        return f"{verb} {first['constraint']} from {format_in_unit(first['limit'], unit)} to {format_in_unit(first['needed'], unit)}"
    shown = [f"{r['constraint']} {format_in_unit(r['limit'], r.get('unit', ''))} → {format_in_unit(r['needed'], r.get('unit', ''))}"
             for _, r in rows.head(3).iterrows()]
    more = f" and {len(rows) - 3} more" if len(rows) > 3 else ""
    return f"move {len(rows)} limits ({'; '.join(shown)}{more})"


def relaxation_sentence(table: pd.DataFrame) -> str:
    """One sentence: the options that restore feasibility and how far each limit must move."""
    if table.empty or not {"constraint", "side", "limit", "needed"} <= set(table.columns):
        return "The optimizer gave no relaxation table for this infeasible scenario."
    if "option" not in table.columns:
        table = table.assign(option="together")
    options = list(dict.fromkeys(table["option"].astype(str)))
    texts = [_option_text(table[table["option"].astype(str) == o]) for o in options[:MAX_NAMED]]
    more = f"; or one of {len(options) - MAX_NAMED} more options in the table" if len(options) > MAX_NAMED else ""
    if options == ["together"]:
        return f"No single limit is enough; together: {texts[0]}."
    joint = ""
    if "together" in options:
        joint = f"; or all of them together: {_option_text(table[table['option'].astype(str) == 'together'])}"
        options = [o for o in options if o != "together"]
        texts = [_option_text(table[table["option"].astype(str) == o]) for o in options[:MAX_NAMED]]
    if len(options) == 1:
        return f"The smallest way out, every other limit as written: {texts[0]}{joint}."
    return "Any one of these alone restores feasibility, every other limit as written: " + "; or ".join(texts) + more + joint + "."
