"""Scenario YAML: extends chains, deep merge, path anchoring and the one-line errors."""

from __future__ import annotations

from pathlib import Path

import pytest

from trimtab.errors import ScenarioError
from trimtab.scenario import deep_merge, load_scenario
from trimtab.scenario._yaml import read_yaml_mapping

BASE = """\
description: the base
model: ../models/main
data:
  holdings: data/holdings.csv
  benchmark: {path: data/benchmark.csv}
  alpha: data/alpha.csv
objective: {maximize: utility, risk_aversion: 10}
constraints:
  long_only: true
  weight: {min: 0.0, max: 0.05}
  group: {by: industry, bounds: {default: [-0.05, 0.05], Orchard Foods: [-0.01, 0.01]}}
  turnover: {max: 0.25}
output: {dir: out/base, tables: parquet}
"""


def write(path: Path, text: str) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def test_extends_merges_mappings_replaces_lists_and_null_removes(tmp_path: Path) -> None:
    write(tmp_path / "base" / "base.yaml", BASE)
    child = write(
        tmp_path / "child.yaml",
        """\
extends: base/base.yaml
objective: {risk_aversion: 25}
constraints:
  weight: {max: 0.02}
  group: {bounds: {default: [-0.02, 0.02]}}
  turnover: null
  factor_exposure: {active: true, bounds: {size: [0, 0]}}
""",
    )
    scenario = load_scenario(child, deep=False)
    merged = scenario.mapping
    # mappings merge key by key
    assert merged["objective"] == {"maximize": "utility", "risk_aversion": 25}
    assert merged["constraints"]["weight"] == {"min": 0.0, "max": 0.02}
    # a list value replaces the base's list; sibling keys of the same mapping survive
    assert merged["constraints"]["group"]["bounds"] == {"default": [-0.02, 0.02], "Orchard Foods": [-0.01, 0.01]}
    # null removes the key, new keys are added
    assert "turnover" not in merged["constraints"]
    assert merged["constraints"]["factor_exposure"]["bounds"] == {"size": [0, 0]}
    assert merged["constraints"]["long_only"] is True
    # the base's relative paths stay relative to the base's folder
    assert Path(scenario.spec.data.holdings.path) == (tmp_path / "base" / "data" / "holdings.csv")
    assert Path(scenario.spec.model.path or "") == (tmp_path / "models" / "main")
    # name and output.dir belong to one file: the child gets its own
    assert scenario.name == "child"
    assert scenario.spec.output.dir is None
    assert scenario.output_dir == tmp_path / "results" / "child"
    assert scenario.spec.output.tables == "parquet"
    assert [p.name for p in scenario.chain] == ["child.yaml", "base.yaml"]


def test_deep_merge_does_not_modify_its_inputs() -> None:
    base = {"a": {"b": [1, 2], "c": 1}}
    child = {"a": {"b": [3]}}
    merged = deep_merge(base, child)
    assert merged == {"a": {"b": [3], "c": 1}}
    assert base == {"a": {"b": [1, 2], "c": 1}}
    merged["a"]["c"] = 5
    assert base["a"]["c"] == 1


def test_scenario_that_extends_itself(tmp_path: Path) -> None:
    write(tmp_path / "a.yaml", "extends: b.yaml\n")
    write(tmp_path / "b.yaml", "extends: a.yaml\n")
    with pytest.raises(ScenarioError, match=r"a\.yaml: scenario a\.yaml extends itself \(via a\.yaml → b\.yaml → a\.yaml\)"):
        load_scenario(tmp_path / "a.yaml")
    write(tmp_path / "c.yaml", "extends: c.yaml\n")
    with pytest.raises(ScenarioError, match=r"scenario c\.yaml extends itself \(via c\.yaml → c\.yaml\)"):
        load_scenario(tmp_path / "c.yaml")


def test_missing_base_and_bad_extends(tmp_path: Path) -> None:
    write(tmp_path / "a.yaml", "extends: nowhere.yaml\n")
    with pytest.raises(ScenarioError, match=r"a\.yaml: extends: base scenario 'nowhere\.yaml' not found"):
        load_scenario(tmp_path / "a.yaml")
    write(tmp_path / "b.yaml", "extends: [x.yaml]\n")
    with pytest.raises(ScenarioError, match=r"b\.yaml: extends: expected the path of a base scenario file, got \['x\.yaml'\]"):
        load_scenario(tmp_path / "b.yaml")


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("model: [unclosed\n", r"bad\.yaml: line 2, column 1: not valid YAML"),
        ("", r"bad\.yaml: the scenario file is empty; expected a mapping of keys"),
        ("- a\n- b\n", r"bad\.yaml: expected a mapping of keys at the top level, got a list"),
        ("1: a\n", r"bad\.yaml: keys must be text, got 1"),
    ],
)
def test_malformed_files(tmp_path: Path, text: str, message: str) -> None:
    path = write(tmp_path / "bad.yaml", text)
    with pytest.raises(ScenarioError, match=message):
        read_yaml_mapping(path)


def test_missing_file_and_folder(tmp_path: Path) -> None:
    with pytest.raises(ScenarioError, match=r"nope\.yaml: no such scenario file"):
        load_scenario(tmp_path / "nope.yaml")
    with pytest.raises(ScenarioError, match=r"is a folder; expected a scenario file"):
        load_scenario(tmp_path)


def test_error_names_the_file_that_set_the_key(tmp_path: Path) -> None:
    write(tmp_path / "base.yaml", BASE.replace("tables: parquet", "tables: xlsx"))
    child = write(tmp_path / "child.yaml", "extends: base.yaml\n")
    with pytest.raises(ScenarioError, match=r"base\.yaml: output\.tables: expected 'csv', 'parquet' or 'none', got 'xlsx'"):
        load_scenario(child, deep=False)


def test_unreadable_file(tmp_path: Path) -> None:
    path = tmp_path / "latin.yaml"
    path.write_bytes("description: caf\xe9\n".encode("latin-1"))
    with pytest.raises(ScenarioError, match=r"latin\.yaml: the scenario file is not UTF-8 text"):
        read_yaml_mapping(path)
