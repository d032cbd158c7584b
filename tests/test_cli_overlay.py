"""trimtab overlay as a user runs it on the demo: the demo's index future and style baskets neutralise
the book's active market and size exposures; files reconcile with the Python API; bad input is one
line and exit code 2."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

import trimtab
from tests.demo_helpers import make_demo_folder
from trimtab.cli import EXIT_BAD_INPUT, app
from trimtab.scenario import MARKER

runner = CliRunner()
BOOK = ("--holdings", "data/holdings.csv", "--benchmark", "data/benchmark.csv", "--attributes", "data/attributes.csv")
OVERLAY = ("overlay", "--model", "model", *BOOK, "--instruments", "data/instruments.csv")


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("overlay-demo"))


def in_folder(folder: Path, *args: str | Path) -> object:
    here = os.getcwd()
    os.chdir(folder)
    try:
        return runner.invoke(app, [str(a) for a in args])
    finally:
        os.chdir(here)


def test_demo_overlay_neutralises_market_and_size(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "overlay"
    result = in_folder(demo, "--json", *OVERLAY, "--target", "market=0", "--target", "size=0",
                       "--contracts", "data/contracts.csv", "--out", out)
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    exposures = {r["factor"]: r for r in document["exposures"]}
    assert abs(exposures["market"]["after"]) < 1e-8 and abs(exposures["size"]["after"]) < 1e-8
    for name in ("trades.csv", "exposures.csv", "risk.csv", "instruments.csv", "result.json", "report.html", MARKER):
        assert (out / name).exists(), name
    trades = pd.read_csv(out / "trades.csv", index_col="instrument")
    terms = pd.read_csv(demo / "data" / "contracts.csv", index_col="instrument")
    nav = trades["amount"] / trades["notional_after_rounding"]
    # notional after rounding = contracts × price × multiplier / NAV (the definition of a contract's notional)
    np.testing.assert_allclose(trades["notional_after_rounding"] * nav,
                               trades["contracts"] * terms.loc[trades.index, "price"] * terms.loc[trades.index, "multiplier"], rtol=1e-12)
    assert (trades["contracts"] == trades["contracts"].round()).all()
    risk = pd.read_csv(out / "risk.csv", index_col="book")
    assert risk.loc["after", "active"] < risk.loc["before", "active"]
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "Hedge overlay" in page and "not investment advice" in page and "<svg" in page


def test_cli_matches_the_python_api(demo: Path) -> None:
    result = in_folder(demo, "--json", *OVERLAY, "--target", "market=0")
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    model = trimtab.FactorModel.load(demo / "model")
    from trimtab.scenario._instruments import read_instruments

    shares = pd.read_csv(demo / "data" / "holdings.csv", index_col="asset")["shares"]
    prices = pd.read_csv(demo / "data" / "attributes.csv", index_col="asset")["price"]
    value = shares * prices.loc[shares.index]
    w = value / value.sum()
    b = pd.read_csv(demo / "data" / "benchmark.csv", index_col="asset")["weight"]
    api = trimtab.overlay(model, w, read_instruments([demo / "data" / "instruments.csv"], model.assets), benchmark=b,
                          targets={"market": 0.0})
    notional = {r["instrument"]: r["notional"] for r in document["trades"]}
    for name, value in api.notional.items():
        assert notional[name] == pytest.approx(value, rel=1e-9, abs=1e-12)


def test_return_series_instrument_from_a_file(demo: Path, tmp_path: Path) -> None:
    factors = pd.read_csv(demo / "data" / "factor_returns.csv", index_col="date")
    rng = np.random.default_rng(1)
    series = 0.9 * factors["market"] + rng.normal(0.0, 0.002, len(factors))
    path = tmp_path / "future.csv"
    series.rename("future").to_frame().to_csv(path, index_label="date")
    result = in_folder(demo, *OVERLAY[:-2], "--instruments", path, "--target", "market=0")
    assert result.exit_code == 0, result.output
    assert "time-series regression" in result.output


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--target", "beta=0"), "--target beta=0: unknown factor 'beta'"),
        (("--target", "market"), "--target: expected FACTOR=NUMBER"),
        (("--target", "market=0", "--target", "market=0.1"), "given twice"),
        (("--minimize", "risk"), "--minimize: expected active_risk or total_risk"),
    ],
    ids=["unknown-factor", "no-value", "twice", "bad-minimize"],
)
def test_bad_options_are_one_line(demo: Path, args: tuple[str, ...], message: str) -> None:
    result = in_folder(demo, *OVERLAY, *args)
    assert result.exit_code == EXIT_BAD_INPUT
    assert message in result.output and "Traceback" not in result.output


@pytest.mark.parametrize(
    ("file", "text", "message"),
    [
        ("instruments", "instrument,asset,weight\nhedge,NOPE,1.0\n", "instrument hedge: assets not in the risk model: NOPE"),
        ("instruments", "instrument,asset,weight\nhedge,{a},x\n", "column weight: not a finite number in row 2"),
        ("instruments", "instrument,asset\nhedge,{a}\n", "columns instrument, asset, weight; missing weight"),
        ("contracts", "instrument,price,multiplier\nindex_future,0,50\n", "column price must be > 0; not for index_future"),
        ("contracts", "instrument,price,multiplier\nother,10,50\n", "instruments not in --instruments: other"),
    ],
    ids=["unknown-asset", "bad-weight", "missing-column", "price-zero", "unknown-instrument"],
)
def test_bad_files_are_one_line(demo: Path, tmp_path: Path, file: str, text: str, message: str) -> None:
    asset = pd.read_csv(demo / "data" / "benchmark.csv")["asset"].iloc[0]
    path = tmp_path / f"{file}.csv"
    path.write_text(text.format(a=asset), encoding="utf-8")
    if file == "instruments":
        args = (*OVERLAY[:-2], "--instruments", path)
    else:
        args = (*OVERLAY, "--contracts", path)
    result = in_folder(demo, *args)
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert message in result.output and "Traceback" not in result.output
    assert len(result.output.strip().splitlines()) == 1


def test_unreachable_targets_exit_1(demo: Path) -> None:
    result = in_folder(demo, *OVERLAY, "--target", "market=0", "--target", "size=0", "--target", "value=0", "--target", "momentum=0")
    assert result.exit_code == 1
    assert "the 3 instruments cannot reach all 4 target exposures" in result.output
    assert len(result.output.strip().splitlines()) == 1


def test_holdings_column_reads_a_rebalanced_book(demo: Path, tmp_path: Path) -> None:
    # a rebalance's target_book.csv has target_weight and weight_after_orders columns besides shares
    bench = pd.read_csv(demo / "data" / "benchmark.csv")
    book = pd.DataFrame({"asset": bench["asset"], "shares": 1.0, "target_weight": bench["weight"], "weight_after_orders": bench["weight"]})
    path = tmp_path / "target_book.csv"
    book.to_csv(path, index=False)
    result = in_folder(demo, "--json", "overlay", "--model", "model", "--holdings", path, "--holdings-column", "target_weight",
                       "--benchmark", "data/benchmark.csv", "--instruments", "data/instruments.csv")
    assert result.exit_code == 0, result.output
    # the book is the benchmark: nothing to hedge against it
    trades = json.loads(result.stdout)["trades"]
    assert max(abs(t["notional"]) for t in trades) < 1e-9


def test_contracts_held_give_the_trade(demo: Path, tmp_path: Path) -> None:
    path = tmp_path / "contracts.csv"
    path.write_text("instrument,price,multiplier,cost,held\nindex_future,4210,50,2.5,10\nsmall_cap_basket,100,1000,30,-5\n", encoding="utf-8")
    out = tmp_path / "held"
    result = in_folder(demo, *OVERLAY, "--target", "market=0", "--contracts", path, "--out", out)
    assert result.exit_code == 0, result.output
    trades = pd.read_csv(out / "trades.csv", index_col="instrument")
    assert trades.loc["index_future", "trade"] == trades.loc["index_future", "contracts"] - 10
    assert trades.loc["small_cap_basket", "trade"] == trades.loc["small_cap_basket", "contracts"] + 5
    assert "to trade" in result.output
    bad = tmp_path / "bad.csv"
    bad.write_text("instrument,price,multiplier,held\nindex_future,4210,50,1.5\n", encoding="utf-8")
    result = in_folder(demo, *OVERLAY, "--contracts", bad)
    assert result.exit_code == EXIT_BAD_INPUT and "column held must be a whole number of contracts" in result.output
