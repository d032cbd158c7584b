"""The number filters of the HTML views (#25): registered once on the shared environment, each printing
exactly what the formatting function it wraps prints, so moving the formatting from the view and the
report builders into the templates changed no printed string.

The expected strings are written out by hand from Python's format mini-language (``f"{x:.2f}"``) and
the documented units of ``format_figure`` and ``change_text``.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pandas as pd
import pytest

from trimtab._format import format_number, format_percent
from trimtab.attribution import format_figure
from trimtab.report._desk import amount_text, change_text
from trimtab.report._filters import FILTERS, formatted, piece
from trimtab.report._relaxation import RELAXATION_NUMBERS, display_relaxation, relaxation_rows
from trimtab.report._stress import stress_table
from trimtab.report._templates import environment, render, render_cards

VALUES = [0.0312, -0.0000001, 0.0, 1234.5, -2.5, np.float64(0.125), None, math.nan, math.inf, "x"]


def _printed(template: str, **context: object) -> str:
    return environment().from_string(template).render(**context)


def test_every_filter_is_registered_once_on_the_shared_environment() -> None:
    env = environment()
    assert env is environment()  # one environment per process, for the report and the page alike
    for name, function in FILTERS.items():
        assert env.filters[name] is function, name
    assert env.filters["formatted"] is formatted
    # the wrapped functions are the project's own, not copies
    assert (FILTERS["percent"], FILTERS["sig"], FILTERS["figure"], FILTERS["change"], FILTERS["amount"]) == (
        format_percent, format_number, format_figure, change_text, amount_text)


@pytest.mark.parametrize("value", VALUES, ids=[repr(v) for v in VALUES])
@pytest.mark.parametrize("name, arguments", [("pct", ()), ("pct", (1,)), ("percent", ()), ("bp", ()), ("num", (3,)),
                                             ("num", (0,)), ("sig", (3,)), ("count", ()), ("probability", ()),
                                             ("text", ()), ("in_unit", ("weight",)), ("in_unit", ("names",))],
                         ids=lambda x: str(x))
def test_a_template_prints_what_the_function_returns(name: str, arguments: tuple, value: object) -> None:
    call = f"{name}({', '.join(map(repr, arguments))})" if arguments else name
    assert _printed(f"{{{{ v|{call} }}}}", v=value) == FILTERS[name](value, *arguments)


@pytest.mark.parametrize("value, spec, text", [
    (0.0312, ["pct"], "3.12%"),
    (0.0312, ["pct", 1], "3.1%"),
    (None, ["pct"], "–"),
    (0.000179, ["bp"], "1.79 bp"),
    (1183.0, ["count"], "1,183"),
    (None, ["count", ""], ""),
    (2.5e6, ["amount"], "2,500,000"),
    (0.0123, ["figure", "fraction"], "1.23%"),
    (-0.00001, ["figure", "fraction"], "0.00%"),   # format_figure drops the sign of a rounded zero
    (0.004, ["change", "fraction"], "+0.40 pp"),
    (0.00001, ["change", "fraction"], "+0.001 pp"),  # a small change keeps its first digit
    (math.nan, ["change", "fraction"], "n/a"),
    (1234.0, ["order", "shares"], "1,234"),
    (0.0004, ["order", "pp"], "+0.040"),
    (math.nan, ["order", "price"], "n/a"),
    (0.0123, ["probability"], "0.012"),
    (-0.0006074, ["in_unit", "weight"], "-0.061%"),   # the example of format_in_unit's docstring
    (-0.0000001, ["in_unit", "weight"], "0.000%"),
    ("weight", ["unit_label"], "% of NAV"),
    (math.nan, ["text"], ""),
    ("text & more", [], "text & more"),
    (None, None, ""),
], ids=lambda x: repr(x))
def test_formatted_applies_the_named_filter(value: object, spec: list | None, text: str) -> None:
    assert formatted(value, spec) == text


def test_cards_print_values_and_notes_through_their_filters() -> None:
    html = render_cards([
        {"key": "te", "label": "Tracking error", "value": 0.0294, "format": ["pct"],
         "note": ["before ", piece(0.0288, "figure", "fraction"), " (", piece(0.0006, "change", "fraction"), ")"]},
        {"key": "text", "label": "Status", "value": "<optimal>", "note": "as written"},
        {"key": "none", "label": "No note", "value": 3.0, "format": ["num", 0], "note": []},
    ])
    assert '<div class="value">2.94%</div>' in html and '<div class="was">before 2.88% (+0.06 pp)</div>' in html
    assert '<div class="value">&lt;optimal&gt;</div>' in html and '<div class="was">as written</div>' in html
    assert html.count('class="was"') == 2  # an empty note prints no line


def test_the_stress_partial_prints_percent_and_the_named_limit() -> None:
    frame = pd.DataFrame({
        "source": ["shock", "replay"], "pre_active": [-0.0312, 0.01], "post_active": [-0.025, math.nan],
        "limit": [0.04, math.nan], "limit_on": ["active", math.nan], "specific_band_active": [0.0051, 0.0],
        "tail_probability": [0.000123, math.nan], "description": ["rates up", ""],
    }, index=pd.Index(["rates <up>", "2008"], name="shock"))
    full = render("partials/stress.html.j2", **stress_table(frame))
    cells = [re.findall(r"<td[^>]*>(.*?)</td>", row) for row in re.findall(r"<tr>(.*?)</tr>", full.split("<tbody>")[1], re.S)]
    assert cells == [["shock", "-3.12%", "-2.50%", "4.00% (active)", "0.51%", "0.00012", "rates up"],
                     ["replay", "1.00%", "–", "–", "0.00%", "–", ""]]
    assert "rates &lt;up&gt;" in full
    brief = render("partials/stress.html.j2", **stress_table(frame, brief=True))
    assert "4.00%</td>" in brief and "(active)" not in brief


def test_the_page_relaxation_partial_prints_what_the_report_table_shows() -> None:
    table = pd.DataFrame({
        "option": [1, 1, 2], "constraint": ["constraints.turnover.max", "tracking_error.max", "constraints.names"],
        "side": ["upper", "upper", None], "limit": [0.02, 0.02, 40.0], "needed": [0.41252, 0.0251, 55.0],
        "relax_by": [0.39252, 0.0051, math.nan], "unit": ["weight", "annualised volatility", "names"],
    })
    columns, rows = relaxation_rows(table)
    html = render("partials/relaxation.html.j2", status="infeasible", message="", sentence="", conflict=[],
                  rows=rows, columns=columns, numbers=RELAXATION_NUMBERS)
    body = html.split("<tbody>")[1]
    cells = [re.findall(r"<td>(.*?)</td>", row) for row in re.findall(r"<tr>(.*?)</tr>", body, re.S)]
    assert cells == display_relaxation(table).astype(str).values.tolist()  # the report's own text of each cell
    assert cells[0] == ["1", "constraints.turnover.max", "upper", "2.000%", "41.252%", "39.252%", "% of NAV"]
    assert cells[2][2] == "" and cells[2][5] == "n/a"
