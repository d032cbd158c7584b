"""Shock files: read through the scenario YAML reader, one-line errors naming the file and key path,
and paths in scenarios anchored to the file that names them."""

from __future__ import annotations

from pathlib import Path

import pytest

from trimtab.errors import ScenarioError
from trimtab.scenario._shocks import load_shocks, resolve_shock_files

REPO = Path(__file__).resolve().parents[2]


def test_the_demo_shock_file_loads():
    shocks = load_shocks(REPO / "scenarios" / "shocks.yaml")
    assert shocks["equity_selloff"]["factors"] == {"market": -0.10}
    assert shocks["equity_selloff"]["description"] == "The market falls 10%"
    assert all(entry["factors"] for entry in shocks.values())


@pytest.mark.parametrize(
    ("text", "match"),
    [
        ("", "the shock file is empty"),
        ("shock: {}\n", r"shock: unknown key; did you mean shocks\?"),  # issue #11: the closest key suggested
        ("description: x\n", "shocks: required key missing"),
        ("shocks:\n  a: {factors: {market: -0.1}, market: -0.1}\n", r"shocks\.a\.market: unknown key; allowed here: factors, description, specific"),
        ("shocks:\n  a: {factors: {market: -5}}\n", r"shocks\.a\.factors\.market: a move of -5 is -500%"),
        ("shocks:\n  a: {factors: {market: '-10%'}}\n", r"shocks\.a\.factors\.market: expected a finite number"),
        ("shocks:\n  a: {factors: {}}\n", r"shocks\.a\.factors: expected a mapping factor → move"),
        ("shocks: [1, 2]\n", "shocks: expected a mapping of shock name"),
    ],
    ids=["empty", "unknown-top", "no-shocks", "mixed-forms", "percent", "text", "no-factors", "list"],
)
def test_bad_shock_files_fail_in_one_line(tmp_path, text, match):
    path = tmp_path / "shocks.yaml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ScenarioError, match=match) as caught:
        load_shocks(path)
    message = str(caught.value)
    assert "\n" not in message and message.startswith(str(path))


def test_short_form_is_the_same_shock(tmp_path):
    # issue #20: one shock vocabulary; {crash: {market: -0.1}} as trimtab.stress() takes it
    short, full = tmp_path / "short.yaml", tmp_path / "full.yaml"
    short.write_text("shocks:\n  crash: {market: -0.1}\n", encoding="utf-8")
    full.write_text("shocks:\n  crash: {factors: {market: -0.1}}\n", encoding="utf-8")
    assert load_shocks(short) == load_shocks(full)


def test_paths_are_replaced_by_their_shocks(tmp_path):
    shocks = tmp_path / "house.yaml"
    shocks.write_text("shocks:\n  s: {factors: {market: -0.1}}\n", encoding="utf-8")
    mapping = {"objective": {}, "constraints": {"stress_loss": {"shocks": str(shocks), "max": 0.01}}, "stress": str(shocks)}
    out = resolve_shock_files(mapping)
    assert out["stress"]["s"]["factors"] == {"market": -0.1}
    assert out["constraints"]["stress_loss"]["shocks"]["s"]["factors"] == {"market": -0.1}
    assert mapping["stress"] == str(shocks)  # the input is not changed
