"""The Jinja2 partials and the rows they lay out (#15): escaping, formatting, empty tables.

Since #25 the rows hold numbers and the partials format them with the filters of
``report/_filters.py``; the printed cells are checked on the rendered HTML.
"""

from __future__ import annotations

import math
import re

import pandas as pd
import pytest

from trimtab.report._templates import (
    binding_rows, bp, exposure_rows, num, pct, render, render_trades, trade_rows, warning_rows,
)


def _cells(html: str) -> list[list[str]]:
    """The text of each body row's cells."""
    body = html.split("<tbody>", 1)[1]
    return [re.findall(r"<td[^>]*>(.*?)</td>", row) for row in re.findall(r"<tr[^>]*>(.*?)</tr>", body, flags=re.S)]


def test_every_value_is_escaped() -> None:
    trades = pd.DataFrame({"initial_weight": [0.0], "target_weight": [0.01], "trade": [0.01], "shares": [100.0]},
                          index=pd.Index(["<script>alert(1)</script>"], name="asset"))
    html = render_trades(trade_rows(trades), caption="<b>1 trade</b>")
    assert "&lt;b&gt;1 trade&lt;/b&gt;" in html
    assert "<script>" not in html and "&lt;script&gt;alert(1)&lt;/script&gt;" in html


def test_formatting_of_missing_and_finite_values() -> None:
    assert (pct(0.0312), pct(None), pct(math.nan), pct("x")) == ("3.12%", "–", "–", "–")
    assert (bp(0.000179), num(1234.5, 0), num(0.12345, 2), num(math.inf)) == ("1.79 bp", "1,234", "0.12", "–")


def test_trade_rows_give_the_side_and_the_shares() -> None:
    trades = pd.DataFrame({"initial_weight": [0.02, 0.0], "target_weight": [0.0, 0.015], "trade": [-0.02, 0.015]},
                          index=["A", "B"])
    assert [(r["asset"], r["side"], r["shares"]) for r in trade_rows(trades)] == [("A", "sell", None), ("B", "buy", None)]
    assert _cells(render_trades(trade_rows(trades), caption="")) == [
        ["A", "sell", "2.00%", "0.00%", "-2.00%", ""],
        ["B", "buy", "0.00%", "1.50%", "1.50%", ""],
    ]
    with_shares = trades.assign(shares=[-1234.0, 560.0])
    assert [row[-1] for row in _cells(render_trades(trade_rows(with_shares), caption=""))] == ["-1,234", "560"]
    assert trade_rows(None) == [] and "No trades" in render_trades([], caption="")


def test_exposure_rows_largest_after_first_with_signed_bars() -> None:
    table = pd.DataFrame({"group": ["style", "style"], "pre": [0.1, -0.4], "post": [0.2, -0.1], "change": [0.1, 0.3]},
                         index=["value", "size"])
    rows = exposure_rows(table)
    assert [r["factor"] for r in rows] == ["value", "size"]
    assert rows[1]["pre_bar"] == pytest.approx(-50.0) and rows[0]["post_bar"] == pytest.approx(25.0)


def test_binding_rows_read_weights_in_percent_and_count_the_rest() -> None:
    table = pd.DataFrame([{"name": "weight", "kind": "weight", "value": 0.03, "unit": "weight", "asset": "A",
                           "n_binding": 4, "shadow_price": 0.0123456},
                          {"name": "beta", "kind": "beta", "value": 1.0, "unit": "ratio", "asset": None,
                           "n_binding": 1, "shadow_price": 0.5}])
    assert [(r["name"], r["where"]) for r in binding_rows(table)] == [("weight", "A and 3 more"), ("beta", "")]
    assert _cells(render("partials/binding.html.j2", rows=binding_rows(table))) == [
        ["weight", "weight", "3.000%", "A and 3 more", "0.0123"],
        ["beta", "beta", "1.0000", "", "0.5000"],
    ]


def test_warning_rows_accept_records_and_objects() -> None:
    class Note:
        def as_dict(self) -> dict:
            return {"kind": "name_concentration", "message": "five names hold 40%"}

    result = type("R", (), {"warnings": [Note(), {"kind": "data", "message": "2 ids dropped"}]})()
    assert warning_rows(result) == [{"kind": "name concentration", "message": "five names hold 40%"},
                                    {"kind": "data", "message": "2 ids dropped"}]
    assert warning_rows(object()) == []
