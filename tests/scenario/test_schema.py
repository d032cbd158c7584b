"""The scenario schema: unknown keys, missing keys and bad values give one line with the key path."""

from __future__ import annotations

from pathlib import Path

import pytest

from trimtab.errors import ScenarioError
from trimtab.scenario import load_scenario
from trimtab.scenario._schema import FitSettings, HoldingsFile, ScenarioSpec

GOOD = """\
model: model
data:
  holdings: {path: holdings.csv, kind: shares, cash: 100}
objective: {minimize: active_risk}
"""


def scenario_file(tmp_path: Path, text: str) -> Path:
    path = tmp_path / "s.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def test_good_file_and_defaults(tmp_path: Path) -> None:
    scenario = load_scenario(scenario_file(tmp_path, GOOD), deep=False)
    spec = scenario.spec
    assert isinstance(spec, ScenarioSpec)
    assert spec.name == "s"
    assert spec.data.holdings.kind == "shares" and spec.data.holdings.cash == 100
    assert spec.data.unknown_assets == "error"
    assert spec.output.tables == "csv" and spec.output.write_json and spec.output.html
    assert spec.constraints == {}
    assert scenario.rebalance_mapping() == {"objective": {"minimize": "active_risk"}, "constraints": {}}
    # the digest depends on the settings only
    again = load_scenario(scenario_file(tmp_path, GOOD), deep=False)
    assert again.digest == scenario.digest


@pytest.mark.parametrize(
    ("text", "message"),
    [
        (GOOD + "colour: red\n", r"s\.yaml: colour: unknown key; allowed here: alerts, alpha_factor, backtest, constraints, data, description, model, name, objective, orders, output"),
        (GOOD.replace("kind: shares", "kind: shares, prise_column: p"), r"data\.holdings\.prise_column: unknown key; did you mean price_column\?"),
        (GOOD + "output: {jsn: true}\n", r"output\.jsn: unknown key; did you mean json\?"),
        (GOOD.replace("kind: shares", "kind: lots"), r"data\.holdings\.kind: expected 'weights' or 'shares', got 'lots'"),
        (GOOD.replace("cash: 100", "cash: -1"), r"data\.holdings\.cash: must be ≥ 0 \(got -1\)"),
        (GOOD.replace("objective: {minimize: active_risk}\n", ""), r"s\.yaml: objective: required key missing"),
        (GOOD.replace("objective: {minimize: active_risk}", "objective: maximize"), r"objective: expected a mapping, got 'maximize'"),
        (GOOD.replace("model: model", "model: {path: m, fit: {method: statistical, returns: r.csv}}"), r"model: give exactly one of path \(a saved model folder\) or fit \(fit settings\)"),
        (GOOD.replace("model: model", "model: {fit: {method: time_series, returns: r.csv}}"), r"model\.fit: method time_series needs factor_returns"),
        (GOOD.replace("model: model", "model: {fit: {method: guess, returns: r.csv}}"), r"model\.fit\.method: expected 'time_series', 'cross_section' or 'statistical', got 'guess'"),
        (GOOD + "name: ../elsewhere\n", r"s\.yaml: name: expected a name usable as a folder name \(no / or \\, not \. or \.\.\), got '\.\./elsewhere'"),
        (GOOD.replace("  holdings: {path: holdings.csv, kind: shares, cash: 100}", "  holdings: 5"), r"data\.holdings: expected a mapping, got 5"),
    ],
)
def test_errors_name_file_key_path_and_expectation(tmp_path: Path, text: str, message: str) -> None:
    with pytest.raises(ScenarioError, match=message):
        load_scenario(scenario_file(tmp_path, text), deep=False)


def test_more_problems_are_counted(tmp_path: Path) -> None:
    text = GOOD + "colour: red\nshape: round\n"
    with pytest.raises(ScenarioError, match=r"s\.yaml: 2 problems: \(1\) colour: unknown key; allowed here: .* \(2\) shape: unknown key"):
        load_scenario(scenario_file(tmp_path, text), deep=False)


def test_string_shorthand_equals_the_mapping() -> None:
    assert HoldingsFile.model_validate("h.csv") == HoldingsFile.model_validate({"path": "h.csv"})
    settings = FitSettings.model_validate({"method": "statistical", "returns": "r.parquet", "n_factors": 3})
    assert settings.returns.path == "r.parquet" and settings.returns.layout == "auto"
