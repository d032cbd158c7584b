"""Number formatting of the HTML views as Jinja2 filters, registered once on the shared environment.

The report's content builders and the explore page's view hand the templates numbers; a template
formats each one where it prints it, ``{{ row.trade|pct }}``. The filters wrap the formatting
functions the terminal and the files use (:mod:`trimtab._format`, :func:`trimtab.attribution.format_figure`,
:func:`trimtab.report._desk.change_text`), so a figure reads the same everywhere.

=============  ===================================================  =========================
filter         prints                                               example
=============  ===================================================  =========================
pct            a fraction in percent, ``–`` when missing            ``0.0312|pct`` → 3.12%
percent        a fraction in percent (:func:`format_percent`)       ``-0.05|percent`` → -5.00%
bp             a fraction in basis points, ``–`` when missing       ``0.000179|bp`` → 1.79 bp
num            fixed decimals (0: whole, thousands separated)       ``0.5|num(2)`` → 0.50
sig            significant digits (:func:`format_number`)           ``1234.5|sig(3)`` → 1.23e+03
count          a whole number with thousands separators             ``1183|count`` → 1,183
amount         a sum of money in the fund's currency (no sign)      ``2.5e6|amount`` → 2,500,000
figure         a figure in its unit (:func:`format_figure`)         ``0.0123|figure("fraction")``
change         a signed change, percentages in pp                   ``0.004|change("fraction")`` → +0.40 pp
probability    a tail probability, two significant digits           ``0.0123|probability`` → 0.012
order          a cell of the order list in its unit                 ``1234|order("shares")``
in_unit        a relaxation number in its limit's unit              ``0.0006|in_unit("weight")`` → 0.060%
unit_label     how such a number reads                              ``"weight"|unit_label`` → % of NAV
text           a value as text, "" when missing                     ``nan|text`` → ""
formatted      the filter a spec names: ``[name, *arguments]``      ``x|formatted(["pct", 1])``
=============  ===================================================  =========================

``formatted`` serves generic partials whose columns or cards differ per caller (the top-trades table,
the headline cards): the caller says how each value is printed, the template prints it. A value
whose spec is empty prints as it is (text). :func:`piece` builds one such value for a card's note.

Adding a filter: write (or import) the function here, taking the value first and its options after,
and add it to :data:`FILTERS`; every template of :func:`trimtab.report._templates.environment` then
has it. Test it in ``tests/report/test_filters.py``. A module imported here must not import
:mod:`._templates` (no import circle).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from typing import Any

from trimtab._format import format_number, format_percent
from trimtab.attribution import format_figure
from trimtab.report._desk import amount_text, change_text
from trimtab.report._relaxation import format_in_unit, unit_label


def number(value: Any) -> float | None:
    """A finite float, or None (missing, NaN, infinite or not a number)."""
    try:
        x = float(value)
    except (TypeError, ValueError):
        return None
    return x if math.isfinite(x) else None


def pct(value: Any, digits: int = 2) -> str:
    """A fraction as a percentage (0.0312 → "3.12%"); "–" when missing."""
    x = number(value)
    return "–" if x is None else f"{100 * x:.{digits}f}%"


def bp(value: Any) -> str:
    """A fraction in basis points (0.000179 → "1.79 bp"); "–" when missing."""
    x = number(value)
    return "–" if x is None else f"{1e4 * x:.2f} bp"


def num(value: Any, digits: int = 4) -> str:
    """A number with ``digits`` decimals (0: whole, with thousands separators); "–" when missing."""
    x = number(value)
    if x is None:
        return "–"
    return f"{x:,.0f}" if digits == 0 else f"{x:.{digits}f}"


def count(value: Any, missing: str = "–") -> str:
    """A whole number with thousands separators (1183 → "1,183"); ``missing`` when there is none."""
    x = number(value)
    return missing if x is None else f"{x:,.0f}"


def text(value: Any) -> str:
    """A value as text; "" when missing (None or NaN)."""
    return "" if value is None or (isinstance(value, float) and math.isnan(value)) else str(value)


def probability(value: Any) -> str:
    """A tail probability to two significant digits; "–" where there is none (a replayed window)."""
    return f"{value:.2g}" if isinstance(value, (int, float)) and math.isfinite(value) else "–"


def order_text(value: Any, unit: str) -> str:
    """A cell of the order list: text as it is, shares, prices and amounts with separators, cost in
    bp of notional, share of daily volume, weight change in pp; other units by :func:`format_figure`."""
    if unit == "text":
        return "" if value is None else str(value)
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    x = float(value)
    return {
        "shares": f"{x:,.0f}",
        "price": f"{x:,.2f}",
        "amount": f"{x:,.0f}",
        "bp1": f"{x:.1f}",
        "pct1": f"{x:.1f}%",
        "pp": f"{100 * x:+.3f}",
    }.get(unit) or format_figure(x, unit)


#: The filters every template of the shared environment has, by name.
FILTERS: dict[str, Callable[..., str]] = {
    "pct": pct,
    "percent": format_percent,
    "bp": bp,
    "num": num,
    "sig": format_number,
    "count": count,
    "amount": amount_text,
    "figure": format_figure,
    "change": change_text,
    "probability": probability,
    "order": order_text,
    "in_unit": format_in_unit,
    "unit_label": unit_label,
    "text": text,
}


def formatted(value: Any, spec: Sequence[Any] | None) -> str:
    """``value`` through the filter ``spec`` names (``[name, *arguments]``); as text without a spec."""
    if not spec:
        return "" if value is None else str(value)
    name, *arguments = spec
    return FILTERS[name](value, *arguments)


def piece(value: Any, *spec: Any) -> dict[str, Any]:
    """One number of a card's note with the filter that prints it: ``piece(0.03, "pct")``."""
    return {"value": value, "format": list(spec)}


def register(environment: Any) -> None:
    """Add :data:`FILTERS` and ``formatted`` to a Jinja2 environment (done once, by its builder)."""
    environment.filters.update(FILTERS)
    environment.filters["formatted"] = formatted
