"""The Jinja2 partials and the rows they lay out (#15): escaping, formatting, empty tables."""

from __future__ import annotations

import math

import pandas as pd
import pytest

from trimtab.report._templates import binding_rows, bp, exposure_rows, num, pct, render_trades, trade_rows, warning_rows


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
    assert trade_rows(trades) == [
        {"asset": "A", "side": "sell", "before": "2.00%", "after": "0.00%", "trade": "-2.00%", "shares": ""},
        {"asset": "B", "side": "buy", "before": "0.00%", "after": "1.50%", "trade": "1.50%", "shares": ""},
    ]
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
    assert binding_rows(table) == [
        {"name": "weight", "kind": "weight", "value": "3.000%", "where": "A and 3 more", "shadow_price": "0.0123"},
        {"name": "beta", "kind": "beta", "value": "1.0000", "where": "", "shadow_price": "0.5000"},
    ]


def test_warning_rows_accept_records_and_objects() -> None:
    class Note:
        def as_dict(self) -> dict:
            return {"kind": "name_concentration", "message": "five names hold 40%"}

    result = type("R", (), {"warnings": [Note(), {"kind": "data", "message": "2 ids dropped"}]})()
    assert warning_rows(result) == [{"kind": "name concentration", "message": "five names hold 40%"},
                                    {"kind": "data", "message": "2 ids dropped"}]
    assert warning_rows(object()) == []
