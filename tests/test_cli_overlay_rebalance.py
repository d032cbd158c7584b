"""A scenario's ``overlay:`` section as a user runs it on the demo (issue #23): rebalance, compare,
sweep and explore carry the overlay; its files reconcile with the Python API; the section is read
strictly (unknown or repeated keys, bad values and return-series instruments are one line, exit 2)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tests.demo_helpers import make_demo_folder
from tests.test_cli_overlay import in_folder
from trimtab.cli import EXIT_BAD_INPUT, app
from trimtab.demo import DEMO_FILES

@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = make_demo_folder(tmp_path_factory.mktemp("overlay-rebalance"))
    assert (folder / "overlay.yaml").read_text(encoding="utf-8") == DEMO_FILES["overlay.yaml"]
    return folder


def _baskets(folder: Path) -> dict[str, pd.Series]:
    frame = pd.read_csv(folder / "data" / "instruments.csv")
    return {name: rows.set_index("asset")["weight"] for name, rows in frame.groupby("instrument")}


def test_rebalance_with_the_demo_overlay(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "overlay"
    result = in_folder(demo, "rebalance", "overlay.yaml", "--out", out)
    assert result.exit_code == 0, result.output
    assert "Hedge overlay" in result.stdout and "Cash book, overlay and together" in result.stdout
    assert "not for a hedge overlay" in result.output  # FACTOR_IPM hands the problem to Clarabel, and says so
    overlay = pd.read_csv(out / "overlay.csv", index_col="instrument")
    assert set(overlay.columns) == {"notional", "contracts", "notional_after_rounding"}
    # whole contracts; the rounded notional is contracts × price × multiplier / NAV
    terms = pd.read_csv(demo / "data" / "contracts.csv", index_col="instrument")
    document = json.loads((out / "result.json").read_text(encoding="utf-8"))
    nav = document["context"]["nav"]
    target = pd.read_csv(out / "target_book.csv", index_col="asset")
    weights = target["target_weight"]
    # the hedged book's active market and size exposures are zero (the scenario's bounds), read with
    # numpy from the files: w + Σ h·basket against the benchmark, on the saved model's exposures
    import trimtab

    model = trimtab.FactorModel.load(demo / "model")
    bench = pd.read_csv(demo / "data" / "benchmark.csv", index_col="asset")["weight"].reindex(model.assets, fill_value=0.0)
    w = weights.reindex(model.assets, fill_value=0.0)
    hedged = w.copy()
    for name, basket in _baskets(demo).items():
        hedged = hedged + overlay.loc[name, "notional"] * basket.reindex(model.assets, fill_value=0.0)
    active = model.exposures.T @ (hedged - bench)
    assert abs(active["market"]) < 1e-6 and abs(active["size"]) < 1e-6
    cash_size = float((model.exposures.T @ (w - bench))["size"])
    assert abs(cash_size) > 1e-3  # the overlay carries the size hedge, not the stock selection
    exposures = pd.read_csv(out / "overlay_exposures.csv", index_col="factor")
    assert exposures.loc["size", "hedged"] == pytest.approx(active["size"], abs=1e-6)
    for name in terms.index:
        unit = terms.loc[name, "price"] * terms.loc[name, "multiplier"]
        n = overlay.loc[name, "contracts"]
        assert float(n) == round(float(n))
        assert overlay.loc[name, "notional_after_rounding"] == pytest.approx(n * unit / nav, rel=1e-12)
    assert document["overlay"]["risk"]["hedged"]["tracking_error"] <= 0.03 * (1 + 1e-6)
    assert "Hedge overlay" in (out / "report.html").read_text(encoding="utf-8")


def test_compare_and_sweep_show_the_overlay(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "compare"
    result = in_folder(demo, "compare", "base.yaml", "overlay.yaml", "--out", out)
    assert result.exit_code == 0, result.output
    assert "Tracking error, hedged book" in result.stdout and "Overlay gross notional" in result.stdout
    table = pd.read_csv(out / "comparison.csv", index_col="figure")
    assert float(table.loc["overlay_gross", "base"]) == 0.0 and float(table.loc["overlay_gross", "overlay"]) > 0
    out = tmp_path / "sweep"
    result = in_folder(demo, "sweep", "overlay.yaml", "--grid", "tracking_error.max=0.015,0.03", "--out", out)
    assert result.exit_code == 0, result.output
    points = pd.read_csv(out / "sweep.csv")
    assert (points["hedged_tracking_error"] <= points["tracking_error.max"] * (1 + 1e-6)).all()
    assert {"overlay_gross", "overlay.index_future"} <= set(points.columns)


def test_explore_shows_the_overlay(demo: Path) -> None:
    from trimtab.app import Explorer
    from trimtab.app._view import page_view

    explorer = Explorer.open(demo / "overlay.yaml")
    view = page_view(explorer.solve(explorer.changes_of({"tracking_error.max": 0.02})))
    assert view["status"] == "solved"
    assert "index_future" in view["html"]["overlay"] and "Hedged book" in view["html"]["overlay"]
    base = page_view(Explorer.open(demo / "base.yaml").solve({}))
    assert base["html"]["overlay"] == ""


@pytest.mark.parametrize(("section", "message"), [
    ("overlay: {instruments: data/instruments.csv, gross: 1}", r"bad_\d+\.yaml: overlay\.gross: unknown key"),
    ("overlay: {instruments: data/instruments.csv, max_gross: -1}", r"overlay\.max_gross: must be > 0"),
    ("overlay: {instruments: data/instruments.csv, notional: {index_future: [1, 0]}}", r"overlay.*above upper"),
    ("overlay: {instruments: data/instruments.csv, notional: {nothing: [0, 1]}}", r"bad_\d+\.yaml: overlay\.notional\.nothing: not an instrument of .*instruments\.csv"),
    ("overlay: {contracts: data/contracts.csv}", r"overlay\.instruments: required key missing"),
    ("overlay:\n  instruments: data/instruments.csv\n  instruments: data/instruments.csv",
     r"overlay\.instruments: key written twice"),
], ids=["unknown-key", "negative-gross", "bounds-reversed", "unknown-instrument", "no-instruments", "repeated-key"])
def test_a_bad_overlay_section_is_one_line_and_exit_2(demo: Path, tmp_path: Path, section: str, message: str) -> None:
    path = demo / f"bad_{abs(hash(section))}.yaml"
    path.write_text(f"extends: base.yaml\n{section}\n", encoding="utf-8")
    try:
        result = in_folder(demo, "rebalance", path.name, "--out", tmp_path / "bad")
    finally:
        path.unlink()
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert "Traceback" not in result.output
    import re

    assert re.search(message, result.output), result.output
    assert not (tmp_path / "bad").exists()


def test_return_series_instruments_cannot_join_the_rebalance(demo: Path, tmp_path: Path) -> None:
    series = demo / "data" / "future_returns.csv"
    dates = pd.bdate_range("2024-01-01", periods=30)
    pd.DataFrame({"date": dates.strftime("%Y-%m-%d"), "future": np.linspace(-0.01, 0.01, 30)}).to_csv(series, index=False)
    path = demo / "series_overlay.yaml"
    path.write_text("extends: base.yaml\noverlay: {instruments: data/future_returns.csv}\n", encoding="utf-8")
    try:
        result = in_folder(demo, "rebalance", path.name, "--out", tmp_path / "bad")
    finally:
        path.unlink()
        series.unlink()
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert "future_returns.csv: overlay.instruments: return-series instruments cannot join the rebalance" in result.output


@pytest.mark.parametrize("command", [("frontier", "overlay.yaml"),
                                     ("backtest", "base.yaml", "overlay.yaml", "--fit", "fit_backtest.yaml")],
                         ids=["frontier", "backtest"])
def test_commands_without_overlay_support_refuse_it(demo: Path, tmp_path: Path, command: tuple[str, ...]) -> None:
    # never a silent choice: a command that cannot carry the overlay stops before it runs
    result = in_folder(demo, *command, "--out", tmp_path / "out")
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert f"overlay.yaml: overlay: trimtab {command[0]} does not take a hedge overlay yet" in result.output
    assert not (tmp_path / "out").exists()
