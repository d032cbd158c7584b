"""Every writer on a real (tiny) rebalance from trimtab.construct, not the stand-in."""

from __future__ import annotations

import json
from pathlib import Path

import html5lib
import numpy as np
import pandas as pd
import pytest
from rich.console import Console

from trimtab import FactorModel, rebalance
from trimtab.report import CAUTION, JSON_SCHEMA, print_comparison, print_rebalance, write_html, write_json, write_tables

SVG = "{http://www.w3.org/2000/svg}svg"


@pytest.fixture(scope="module")
def solved() -> tuple:
    from ..conftest import random_model

    base = random_model(n_assets=40, n_factors=5, seed=0)
    model = FactorModel(base.exposures, base.factor_covariance, base.specific_variance,
                        factor_groups={"f0": "market", "f1": "style", "f2": "style"})
    rng = np.random.default_rng(1)
    benchmark = pd.Series(rng.dirichlet(np.full(40, 5.0)), index=model.assets)
    holdings = pd.Series(rng.dirichlet(np.ones(40)), index=model.assets)
    alpha = pd.Series(rng.normal(scale=0.02, size=40), index=model.assets)
    attributes = pd.DataFrame(
        {"price": rng.uniform(10, 100, 40), "adv": rng.uniform(1e5, 1e6, 40), "spread": 0.001, "commission": 0.0002},
        index=model.assets,
    )
    scenario = {
        "objective": {"maximize": "utility", "risk_aversion": 10, "cost_aversion": 1,
                      "costs": {"spread": "spread", "commission": "commission"}},
        "constraints": {"fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.1},
                        "tracking_error": {"max": 0.03}, "turnover": {"max": 0.3}},
    }
    kwargs = dict(holdings=holdings, benchmark=benchmark, alpha=alpha, attributes=attributes, nav=1e8)
    tight = rebalance(model, scenario, **kwargs)
    loose = rebalance(model, {**scenario, "constraints": {**scenario["constraints"], "turnover": {"max": 0.6}}}, **kwargs)
    return tight, loose


def test_real_result_through_every_writer(solved: tuple, tmp_path: Path) -> None:
    tight, loose = solved
    assert tight.post_trade is not None and tight.pre_trade is not None

    console = Console(record=True, width=200, color_system=None)
    print_rebalance(tight, console=console)
    print_comparison({"tight": tight, "loose": loose}, console=console)
    text = console.export_text()
    assert "Risk budget (tracking error)" in text and CAUTION in text
    for name in tight.constraints.loc[tight.constraints["binding"].astype(bool), "name"]:
        assert name in text

    page = write_html({"tight": tight, "loose": loose}, tmp_path / "report.html").read_text(encoding="utf-8")
    tree = html5lib.HTMLParser(strict=True, namespaceHTMLElements=False).parse(page)
    assert len(tree.findall(f".//{SVG}")) == 10  # no text attributes here: no attribute sections
    one = write_html(tight, tmp_path / "one.html").read_text(encoding="utf-8")
    assert "Constraints" in one and "Of daily volume" in one

    import jsonschema  # reference validator for JSON Schema draft 2020-12

    document = json.loads(write_json(tight, tmp_path / "result.json").read_text(encoding="utf-8"))
    jsonschema.validate(document, JSON_SCHEMA)
    # The writer reports the optimizer's own figures: its one-way turnover and its ex-ante tracking error.
    summary = {row["label"]: row["value"] for row in document["trade_summary"]}
    assert summary["Turnover, one-way (½·Σ|trade|)"] == pytest.approx(tight.turnover, abs=1e-8)
    # the report's post-trade figures are those of the book as traded (rounded to whole shares, issue #13)
    assert document["risk_budget"]["post"] == pytest.approx(tight.figures["tracking_error"], rel=1e-9)
    assert document["risk_budget"]["post"] == pytest.approx(tight.ex_ante["tracking_error"], rel=1e-4)
    assert document["risk_budget"]["cap"] == 0.03

    written = write_tables(tight, tmp_path / "tables", file_format="csv")
    constraints = pd.read_csv(tmp_path / "tables" / "constraints.csv")
    assert set(constraints["name"]) == set(tight.constraints["name"])
    assert {p.name for p in written} >= {"trades.csv", "verification.csv", "post_trade_by_asset.csv"}
