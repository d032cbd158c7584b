"""Output folders and the HTML page of sweeps, frontiers and backtests: files, strict HTML, caution text."""

from __future__ import annotations

import json

import html5lib
import numpy as np
import pandas as pd
import pytest

from tests.conftest import random_model
from tests.runs._tasks import ClosedFormProblem, closed_form_rebalance
from tests.runs.test_backtest import SCENARIO, simulate
from trimtab.errors import InputError
from trimtab.report import CAUTION
from trimtab.runs import backtest, frontier, sweep
from trimtab.report._pages import html_table, render_page, write_backtest, write_frontier, write_sweep


def _strict(path) -> str:
    text = path.read_text(encoding="utf-8")
    html5lib.HTMLParser(strict=True).parse(text)  # raises on any parse error (html5lib, WHATWG parsing)
    assert CAUTION in text
    # self-contained: no scripts, no linked stylesheets, nothing fetched (namespace URIs are names, not fetches)
    assert "<script" not in text and "<link" not in text and 'src="http' not in text and 'href="http' not in text
    return text


@pytest.fixture(scope="module")
def book():
    model = random_model(n_assets=30, n_factors=3, seed=2)
    bench = pd.Series(1 / 30, index=model.assets)
    alpha = pd.Series(np.random.default_rng(9).normal(scale=0.02, size=30), index=model.assets)
    return model, bench, alpha


def test_sweep_folder(tmp_path, book) -> None:
    model, bench, alpha = book
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5.0}}
    result = sweep(model, scenario, {"risk_aversion": [2.0, 4.0, 8.0]}, holdings=bench, benchmark=bench, alpha=alpha, build=ClosedFormProblem)
    target = write_sweep(result, tmp_path / "out", title="Sweep: demo")
    assert sorted(p.name for p in target.iterdir()) == [".trimtab-output", "report.html", "result.json", "sweep.csv"]
    text = _strict(target / "report.html")
    assert text.count("<svg") == 2 and "Tracking error, turnover and expected alpha against risk_aversion" in text
    table = pd.read_csv(target / "sweep.csv", index_col=0)
    np.testing.assert_allclose(table["tracking_error"], result.table["tracking_error"], rtol=1e-12)
    assert len(json.loads((target / "result.json").read_text())["sweep"]) == 3


def test_frontier_folder(tmp_path, book) -> None:
    model, bench, alpha = book
    result = frontier(model, {"objective": {"maximize": "alpha"}}, holdings=bench, benchmark=bench, alpha=alpha,
                      tracking_errors=[0.01, 0.02], build=ClosedFormProblem)
    target = write_frontier(result, tmp_path / "f")
    assert (target / "frontier_te.csv").exists() and not (target / "frontier_turnover.csv").exists()
    assert _strict(target / "report.html").count("<svg") == 1


def test_backtest_folder(tmp_path) -> None:
    market = simulate(n_assets=30, n_dates=420)
    scenarios = {"bold": {"objective": {"risk_aversion": 10.0}}, "calm": SCENARIO}
    result = backtest(market.returns, market.alpha, scenarios, window=250, frequency=10, factor_returns=market.factors,
                      benchmark=market.benchmark, rebalance=closed_form_rebalance, costs=0.001)
    target = write_backtest(result, tmp_path / "bt")
    names = sorted(p.name for p in target.iterdir())
    assert names == [".trimtab-output", "bias.csv", "exposures.csv", "history.csv", "report.html", "result.json",
                     "risk_contributions.csv", "totals.csv"]
    text = _strict(target / "report.html")
    assert text.count("<svg") == 4 and "Cumulative active return after costs" in text
    history = pd.read_csv(target / "history.csv", index_col=[0, 1])
    assert len(history) == 2 * len(result.settings["rebalance_dates"])
    # ids are prefixed per chart, so four charts on one page do not clash
    ids = [part.split('"')[0] for part in text.split(' id="')[1:]]
    assert len(ids) == len(set(ids))


def test_refuses_to_replace_a_folder_it_did_not_write(tmp_path, book) -> None:
    model, bench, alpha = book
    result = sweep(model, {"objective": {"risk_aversion": 5.0}}, {"risk_aversion": [2.0]}, holdings=bench,
                   benchmark=bench, alpha=alpha, build=ClosedFormProblem)
    (tmp_path / "mine").mkdir()
    (tmp_path / "mine" / "notes.txt").write_text("keep", encoding="utf-8")
    with pytest.raises(InputError, match=r"folder exists and was not written by trimtab"):
        write_sweep(result, tmp_path / "mine")
    assert (tmp_path / "mine" / "notes.txt").read_text(encoding="utf-8") == "keep"


def test_page_and_table_escape_text() -> None:
    frame = pd.DataFrame({"x": [0.5, np.nan], "ok": [True, False], "n": [3, 4]}, index=["<a>", "b"])
    table = html_table(frame, percent_columns=["x"])
    assert "&lt;a&gt;" in table and "50.00%" in table and "–" in table and "yes" in table
    page = render_page("T & U", [("S", table)])
    html5lib.HTMLParser(strict=True).parse(page)
    assert "<title>T &amp; U</title>" in page


def test_page_tables_print_large_amounts_whole_not_in_e_notation() -> None:
    # an ADV of 21,035 shares read "2.1e+04" in the accounts overview's blocks table
    from trimtab.report._pages import html_table

    frame = pd.DataFrame({"adv": [21034.6], "gross": [1050.0], "impact": [0.012345]}, index=pd.Index(["HUJY"], name="asset"))
    text = html_table(frame)
    assert "21,035" in text and "1050" in text and "0.01235" in text
    assert "e+0" not in text
