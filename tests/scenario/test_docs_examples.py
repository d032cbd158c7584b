"""Every objective and constraint example in docs/scenarios.md validates with the optimizer's validator."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
import yaml

from trimtab.construct import validate_scenario

DOC = (Path(__file__).resolve().parents[2] / "docs" / "scenarios.md").read_text(encoding="utf-8")
BLOCKS = [yaml.safe_load(b) for b in re.findall(r"```yaml\n(.*?)```", DOC, flags=re.S)]
CONSTRAINTS = {k: v for b in BLOCKS if isinstance(b, dict) and isinstance(b.get("constraints"), dict) for k, v in b["constraints"].items()}


def test_every_constraint_kind_has_an_example() -> None:
    from trimtab.construct._spec import VALIDATORS

    assert set(CONSTRAINTS) == set(VALIDATORS)


@pytest.mark.parametrize("key", sorted(CONSTRAINTS))
def test_constraint_example_validates(key: str) -> None:
    spec = validate_scenario({"objective": {"maximize": "alpha"}, "constraints": {key: CONSTRAINTS[key]}}, source="docs")
    assert key in spec.constraints


def test_objective_examples_validate() -> None:
    objectives = [yaml.safe_load(line.split("#")[0])["objective"] for line in DOC.splitlines() if line.startswith("objective: {")]
    objectives += [b["objective"] for b in BLOCKS if isinstance(b, dict) and isinstance(b.get("objective"), dict)]
    assert len(objectives) >= 6
    for objective in objectives:
        assert validate_scenario({"objective": objective}, source="docs").objective["kind"]
