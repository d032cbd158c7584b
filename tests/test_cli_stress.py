"""trimtab stress, replay and attribute-returns as a user runs them on the demo: figures that reconcile
with the Python API, outputs written whole, one-line errors with exit code 2."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

import trimtab
from tests.demo_helpers import make_demo_folder
from trimtab.cli import EXIT_BAD_INPUT, app
from trimtab.scenario import MARKER

runner = CliRunner()


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("stress-demo"))


def invoke(*args: str | Path) -> object:
    return runner.invoke(app, [str(a) for a in args])


BOOK = ("--holdings", "data/holdings.csv", "--benchmark", "data/benchmark.csv", "--attributes", "data/attributes.csv")


def in_folder(folder: Path, *args: str | Path) -> object:
    import os

    here = os.getcwd()
    os.chdir(folder)
    try:
        return invoke(*args)
    finally:
        os.chdir(here)


def test_stress_writes_the_shock_table_and_matches_the_api(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "stress"
    result = in_folder(demo, "--json", "stress", "--model", "model", *BOOK, "--shocks", "shocks.yaml", "--out", out)
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    shocks = {r["shock"]: r for r in document["shocks"]}
    assert set(shocks) == {"equity_selloff", "momentum_reversal", "small_caps_hit", "value_rebound", "energy_spike"}
    for name in ("shocks.csv", "factor_moves.csv", "contributions.csv", "active_contributions.csv", "result.json", "report.html", MARKER):
        assert (out / name).exists(), name
    table = pd.read_csv(out / "shocks.csv", index_col="shock")
    assert table.loc["equity_selloff", "book"] == pytest.approx(shocks["equity_selloff"]["book"])
    assert (table["book"] - table["benchmark"] - table["active"]).abs().max() < 1e-12
    moves = pd.read_csv(out / "factor_moves.csv", index_col="shock")
    assert moves.loc["equity_selloff", "market"] == pytest.approx(-0.10)
    assert "Stress test" in (out / "report.html").read_text(encoding="utf-8")


def test_stress_text_and_unconditional(demo: Path) -> None:
    result = in_folder(demo, "stress", "--model", "model", *BOOK, "--shocks", "shocks.yaml", "--unconditional")
    assert result.exit_code == 0, result.output
    assert "named factors only" in result.stdout and "equity_selloff" in result.stdout


def test_replay_finds_worst_months(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "replay"
    result = in_folder(demo, "--json", "replay", "--model", "model", *BOOK, "--length", "21", "--worst", "2",
                       "--window", "spring=2023-03-01:2023-05-31", "--out", out)
    assert result.exit_code == 0, result.output
    rows = json.loads(result.stdout)["windows"]
    assert [r["found"] for r in rows] == ["chosen", "worst for book", "worst for book", "worst for active", "worst for active"]
    model = trimtab.FactorModel.load(demo / "model")
    assert model.factor_history is not None
    assert (out / "windows.csv").exists() and (out / "report.html").exists()


def test_attribute_returns_reconciles(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "attr"
    result = in_folder(demo, "--json", "attribute-returns", "--model", "model", "--returns", "data/returns.parquet", *BOOK,
                       "--start", "2023-06-01", "--group-by", "industry", "--out", out)
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    linked = pd.DataFrame(document["linked"]).set_index("component")["contribution"]
    assert linked.sum() == pytest.approx(document["total"], rel=1e-10)
    returns = pd.read_csv(out / "returns.csv", index_col=0)
    compounded = (1 + returns["book"]).prod() - (1 + returns["benchmark"]).prod()
    assert document["total"] == pytest.approx(compounded, rel=1e-10)
    by_period = pd.read_csv(out / "by_period.csv", index_col=0)
    assert (by_period.drop(columns="total").sum(axis=1) - by_period["total"]).abs().max() < 1e-12


def test_attribute_a_backtest_folder(demo: Path, tmp_path: Path) -> None:
    bt = tmp_path / "bt"
    done = in_folder(demo, "backtest", "base.yaml", "--fit", "fit.yaml", "--window", "250", "--every", "42",
                     "--max-dates", "4", "--out", bt)
    assert done.exit_code == 0, done.output
    result = in_folder(demo, "--json", "attribute-returns", "--backtest", bt, "--model", "model")
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    history = pd.read_csv(bt / "history.csv").dropna(subset=["realised_active"])
    compounded = (1 + history["book_return"]).prod() - (1 + history["benchmark_return"]).prod()
    assert document["total"] == pytest.approx(compounded, rel=1e-10)
    linked = pd.DataFrame(document["linked"]).set_index("component")["contribution"]
    assert linked.sum() == pytest.approx(compounded, rel=1e-10)
    # the backtest's own total, ∏(1 + Rₜ − Rbₜ) − 1, is given beside it
    totals = pd.read_csv(bt / "totals.csv", index_col=0)
    assert document["compounded_active_returns"] == pytest.approx(totals.loc["base", "active_return"], rel=1e-10)



def test_a_backtest_of_several_scenarios_asks_which(demo: Path, tmp_path: Path) -> None:
    bt = tmp_path / "bt2"
    done = in_folder(demo, "backtest", "base.yaml", "low_turnover.yaml", "--fit", "fit.yaml", "--window", "250",
                     "--every", "42", "--max-dates", "2", "--out", bt)
    assert done.exit_code == 0, done.output
    result = in_folder(demo, "attribute-returns", "--backtest", bt, "--model", "model")
    assert result.exit_code == EXIT_BAD_INPUT
    assert "add --scenario base or --scenario low_turnover" in result.output
    result = in_folder(demo, "attribute-returns", "--backtest", bt, "--model", "model", "--scenario", "nope")
    assert result.exit_code == EXIT_BAD_INPUT and "--scenario nope: not in" in result.output
    shown = in_folder(demo, "attribute-returns", "--backtest", bt, "--model", "model", "--scenario", "low_turnover", "--out", tmp_path / "ar")
    assert shown.exit_code == 0, shown.output
    # issue #20: realised returns carry a caution that fits them, not the forecasts' one
    assert "past returns split by a risk model, not a forecast" in " ".join(shown.stdout.split()) and "model forecasts" not in shown.stdout
    page = (tmp_path / "ar" / "report.html").read_text(encoding="utf-8")
    assert "past returns split by a risk model, not a forecast" in page and "model forecasts" not in page
    result = in_folder(demo, "--json", "attribute-returns", "--backtest", bt, "--model", "model", "--scenario", "low_turnover")
    assert result.exit_code == 0, result.output
    history = pd.read_csv(bt / "history.csv").query("scenario == 'low_turnover'").dropna(subset=["realised_active"])
    compounded = (1 + history["book_return"]).prod() - (1 + history["benchmark_return"]).prod()
    assert json.loads(result.stdout)["total"] == pytest.approx(compounded, rel=1e-10)

@pytest.mark.parametrize(
    ("args", "pattern"),
    [
        (("stress", "--model", "model", *BOOK, "--shocks", "missing.yaml"), r"missing\.yaml: no such shock file"),
        (("stress", "--model", "model", *BOOK, "--shocks", "bad_shocks.yaml"), r"bad_shocks\.yaml: shocks\.crash\.factors\.market: a move of -10 is -1000%"),
        (("stress", "--model", "model", *BOOK, "--shocks", "unknown_factor.yaml"), r"crash: unknown factor\(s\) marketplace"),
        (("replay", "--model", "model", *BOOK, "--window", "oops"), r"--window: expected NAME=START:END"),
        (("replay", "--model", "model", *BOOK, "--length", "99999"), r"length 99999 is longer than the history"),
        (("attribute-returns", "--model", "model", "--returns", "data/returns.parquet"), r"give exactly one of --weights"),
        (("attribute-returns", "--backtest", "data"), r"give --factor-returns"),
        (("attribute-returns", "--model", "model", "--returns", "data/returns.parquet", *BOOK, "--linking", "nope"), r"linking must be one of carino, sum"),
    ],
    ids=["no-file", "percent-typo", "unknown-factor", "bad-window", "too-long", "weights-or-holdings", "backtest-needs-factors", "linking"],
)
def test_bad_input_is_one_line_and_exit_2(demo: Path, tmp_path: Path, args: tuple[str, ...], pattern: str) -> None:
    work = tmp_path / "work"
    shutil.copytree(demo, work)
    (work / "bad_shocks.yaml").write_text("shocks:\n  crash:\n    factors: {market: -10}\n", encoding="utf-8")
    (work / "unknown_factor.yaml").write_text("shocks:\n  crash:\n    factors: {marketplace: -0.1}\n", encoding="utf-8")
    result = in_folder(work, *args)
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("trimtab: error: "), result.stderr
    import re

    assert re.search(pattern, lines[0]), lines[0]
    assert "Traceback" not in result.output


def test_a_failed_run_leaves_no_output(demo: Path, tmp_path: Path) -> None:
    out = tmp_path / "never"
    result = in_folder(demo, "stress", "--model", "model", *BOOK, "--shocks", "missing.yaml", "--out", out)
    assert result.exit_code == EXIT_BAD_INPUT
    assert not out.exists()


def test_attribute_returns_with_a_weights_history(demo: Path, tmp_path: Path) -> None:
    # a weights file with a row at each rebalance date; each row is held until the next one
    bench = pd.read_csv(demo / "data" / "benchmark.csv", index_col="asset")["weight"]
    tilted = bench.copy()
    tilted.iloc[:20] *= 1.5
    tilted /= tilted.sum()
    weights = pd.DataFrame([bench, tilted], index=pd.to_datetime(["2023-06-01", "2023-09-01"]))
    weights.index.name = "date"
    weights.to_csv(tmp_path / "weights.csv")
    result = in_folder(demo, "--json", "attribute-returns", "--model", "model", "--returns", "data/returns.parquet",
                       "--weights", tmp_path / "weights.csv", "--benchmark", "data/benchmark.csv", "--start", "2023-06-01")
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    linked = pd.DataFrame(document["linked"]).set_index("component")["contribution"]
    assert linked.sum() == pytest.approx(document["total"], rel=1e-10)
    # before the tilt the book is the benchmark: nothing to attribute in June
    model = trimtab.FactorModel.load(demo / "model")
    returns = pd.read_parquet(demo / "data" / "returns.parquet").set_index("date").loc["2023-06-01":]
    held = weights.reindex(returns.index, method="ffill").fillna(0.0)
    api = trimtab.attribute_returns(model, held.reindex(columns=model.assets, fill_value=0.0), returns,
                                    benchmark=bench.reindex(model.assets, fill_value=0.0))
    assert api.linked["total"] == pytest.approx(document["total"], rel=1e-12)
    assert api.by_period.loc[:"2023-08-31", "total"].abs().max() < 1e-15


def test_the_command_in_the_demo_shock_file_runs(demo: Path) -> None:
    # issue #20: the comment's command failed (share holdings need prices); it is run as written
    import re
    import shlex

    text = (demo / "shocks.yaml").read_text(encoding="utf-8")
    comment = " ".join(line.lstrip("# ").strip() for line in text.splitlines() if line.startswith("#"))
    command = re.search(r"`trimtab (stress [^`]+)`", comment)
    assert command is not None, comment
    result = in_folder(demo, *shlex.split(command.group(1)))
    assert result.exit_code == 0, result.output
    assert "equity_selloff" in result.stdout
