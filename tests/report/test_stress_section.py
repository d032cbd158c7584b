"""Pre- and post-trade stress in the rebalance result, its table file, result.json (schema-valid) and report."""

from __future__ import annotations

import json

import jsonschema
import numpy as np
import pandas as pd
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


def test_replay_rows_are_the_worst_windows_before_and_after():
    # the worst windows for the active book before the trade, found by trimtab.replay, replayed on both books
    rng = np.random.default_rng(8)
    dates = pd.date_range("2014-01-31", periods=120, freq="ME")
    f = pd.DataFrame(rng.normal(0.005, [0.045, 0.02], (120, 2)), index=dates, columns=["mkt", "smb"])
    B = rng.normal([1.0, 0.0], 0.4, (30, 2))
    r = pd.DataFrame(f.to_numpy() @ B.T + rng.normal(0, 0.03, (120, 30)), index=dates, columns=[f"S{i:02d}" for i in range(30)])
    model = trimtab.fit_time_series(r, f)
    bench = pd.Series(1.0 / 30, index=model.assets)
    holdings = pd.Series(rng.dirichlet(np.ones(30)), index=model.assets)
    res = rebalance(model, {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True},
                            "replay": {"length": 3, "count": 2}}, holdings=holdings, benchmark=bench)
    table = res.stress
    assert list(table["source"]) == ["replay", "replay"]
    worst = trimtab.replay(model, holdings, benchmark=bench, length=3, k=2).windows
    worst = worst[worst["found"] == "worst for active"]
    np.testing.assert_allclose(table["pre_active"].to_numpy(), worst["active"].to_numpy(), rtol=1e-12)
    after = trimtab.replay(model, res.weights, benchmark=bench,
                           windows={n: (s, e) for n, s, e in zip(table.index, worst["start"], worst["end"])}).windows
    np.testing.assert_allclose(table["post_active"].to_numpy(), after["active"].to_numpy(), rtol=1e-12)
    assert table.index[0].startswith("history ")


def test_replay_settings_are_checked():
    from trimtab.construct import validate_scenario
    from trimtab.errors import ScenarioError

    with pytest.raises(ScenarioError, match=r"replay\.length: must be ≥ 1"):
        validate_scenario({"objective": {"minimize": "active_risk"}, "replay": {"length": 0}})
    with pytest.raises(ScenarioError, match=r"replay\.months: unknown key; allowed here: length, count"):
        validate_scenario({"objective": {"minimize": "active_risk"}, "replay": {"length": 21, "months": 3}})
