"""Pre- and post-trade stress in the rebalance result, its table file, result.json (schema-valid) and report."""

from __future__ import annotations

import json

import jsonschema
import numpy as np
import pytest
from rich.console import Console

import trimtab
from trimtab.construct import rebalance
from trimtab.report import JSON_SCHEMA, print_rebalance, render_html, write_json, write_tables

from ..construct.conftest import make_fund

SCENARIO = {
    "objective": {"minimize": "active_risk"},
    "constraints": {"fully_invested": True, "long_only": True,
                    "stress_loss": {"shocks": {"selloff": {"factors": {"f0": -0.1}, "description": "down 10%"}}, "max": 0.05}},
    "stress": {"rotation": {"factors": {"f1": 0.02}, "specific": {"A0002": -0.2}}},
}


@pytest.fixture(scope="module")
def result():
    fund = make_fund(40, 4, seed=3)
    return fund, rebalance(fund.model, SCENARIO, **fund.kwargs())


def test_stress_table_is_trimtab_stress_before_and_after(result):
    fund, res = result
    table = res.stress
    assert list(table.index) == ["selloff", "rotation"]
    assert list(table["source"]) == ["stress_loss", "stress"]
    for shock, moves, specific in (("selloff", {"f0": -0.1}, None), ("rotation", {"f1": 0.02}, {"rotation": {"A0002": -0.2}})):
        pre = trimtab.stress(fund.model, fund.holdings, {shock: moves}, benchmark=fund.benchmark, specific=specific)
        post = trimtab.stress(fund.model, res.weights, {shock: moves}, benchmark=fund.benchmark, specific=specific)
        assert table.loc[shock, "pre_active"] == pytest.approx(pre.returns.loc[shock, "active"], rel=1e-12)
        assert table.loc[shock, "post_book"] == pytest.approx(post.returns.loc[shock, "book"], rel=1e-12)
    assert table.loc["selloff", "limit"] == 0.05 and table.loc["selloff", "limit_on"] == "active"
    assert np.isnan(table.loc["rotation", "limit"])
    # the limit row of the constraint table is the post-trade loss
    row = res.constraints.set_index("name").loc["stress_loss[selloff]"]
    assert row["value"] == pytest.approx(-table.loc["selloff", "post_active"], abs=1e-12)


def test_result_json_carries_the_stress_records_and_validates(result, tmp_path):
    _, res = result
    path = write_json(res, tmp_path / "result.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    jsonschema.validate(document, JSON_SCHEMA)
    assert [r["shock"] for r in document["stress"]] == ["selloff", "rotation"]
    assert document["stress"][1]["limit"] is None
    assert document["stress"][0]["description"] == "down 10%"


def test_tables_html_and_terminal_show_the_shocks(result, tmp_path):
    _, res = result
    written = write_tables(res, tmp_path, file_format="csv")
    assert tmp_path / "stress.csv" in written
    page = render_html(res)
    assert "Stress tests before and after the trade" in page and "rotation" in page
    console = Console(record=True, width=140)
    print_rebalance(res, console=console)
    assert "Stress tests" in console.export_text()


def test_no_shocks_no_section():
    fund = make_fund(30, 3, seed=1)
    res = rebalance(fund.model, {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True}}, **fund.kwargs())
    assert res.stress is None
    assert "Stress tests" not in render_html(res)
