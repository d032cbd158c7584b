"""The command line of issue #24: `trimtab risk --alpha`, the alpha_factor key in a scenario file and
the demo backtest (`trimtab backtest base.yaml alpha_factor.yaml --fit fit_backtest.yaml
--alpha-history data/alpha_history.csv`), run on a small demo folder as a user would."""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from tests.demo_helpers import make_demo_folder
from trimtab import FactorModel, alpha_alignment
from trimtab.cli import EXIT_BAD_INPUT, app

runner = CliRunner()


@pytest.fixture(scope="module")
def demo_folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("demo_alpha"))


def invoke(*args: str | Path) -> object:
    return runner.invoke(app, [str(a) for a in args])


def test_risk_with_alpha_shows_the_spanned_share(demo_folder: Path) -> None:
    common = ["risk", "--model", demo_folder / "model", "--holdings", demo_folder / "data" / "holdings.csv",
              "--cash", "6000000", "--attributes", demo_folder / "data" / "attributes.csv",
              "--benchmark", demo_folder / "data" / "benchmark.csv", "--alpha", demo_folder / "data" / "alpha.csv"]
    shown = invoke(*common)
    assert shown.exit_code == 0, shown.output
    assert "spanned by the factors (uncentred R²)" in shown.stdout
    assert "outside the factor span" in shown.stdout
    document = json.loads(invoke("--json", *common).stdout)
    model = FactorModel.load(demo_folder / "model")
    alpha = pd.read_csv(demo_folder / "data" / "alpha.csv", index_col="asset")["alpha"]
    expected = alpha_alignment(model, alpha.reindex(model.assets).dropna())
    assert document["alpha_alignment"]["spanned_share"] == pytest.approx(expected.spanned_share, rel=1e-9)
    # the demo's alpha forecasts specific returns: nearly all of it is outside the span, and it says so
    assert document["alpha_alignment"]["spanned_share"] < 0.1
    assert document["alpha_alignment"]["warnings"]


def test_a_percent_alpha_factor_volatility_is_one_error_line(demo_folder: Path, tmp_path: Path) -> None:
    work = tmp_path / "demo"
    shutil.copytree(demo_folder, work)
    text = (work / "alpha_factor.yaml").read_text(encoding="utf-8").replace("volatility: 0.03", "volatility: 3")
    (work / "alpha_factor.yaml").write_text(text, encoding="utf-8")
    result = invoke("check", work / "alpha_factor.yaml")
    assert result.exit_code == EXIT_BAD_INPUT
    lines = [line for line in result.stderr.strip().splitlines() if not line.startswith("trimtab: warning")]
    assert len(lines) == 1 and lines[0].startswith("trimtab: error: ")
    assert "alpha_factor.volatility: 3 would mean 300%" in lines[0] and "did you mean 0.03?" in lines[0]


def test_the_demo_backtest_prints_both_bias_statistics(demo_folder: Path, tmp_path: Path) -> None:
    result = invoke("backtest", demo_folder / "base.yaml", demo_folder / "alpha_factor.yaml",
                    "--fit", demo_folder / "fit_backtest.yaml", "--alpha-history", demo_folder / "data" / "alpha_history.csv",
                    "--max-dates", "4", "--out", tmp_path / "bt")
    assert result.exit_code == 0, result.output
    text = result.stdout
    assert text.count("    bias ") == 2
    assert "  base: " in text and "  alpha_factor: " in text
    assert "risk forecast on the model with the alpha factor (volatility 3.00% a year)" in text
    assert "reused at every date" not in text
    bias = pd.read_csv(tmp_path / "bt" / "bias.csv", index_col=0)
    assert list(bias.index) == ["base", "alpha_factor"]
    assert "alpha_factor" in pd.read_csv(tmp_path / "bt" / "exposures.csv").columns
    # without an alpha history the scenario's one alpha is reused, and the summary says so
    reused = invoke("backtest", demo_folder / "base.yaml", "--fit", demo_folder / "fit_backtest.yaml",
                    "--max-dates", "2", "--out", tmp_path / "bt2")
    assert reused.exit_code == 0, reused.output
    assert "one alpha vector is reused at every date" in reused.stdout
