"""The small value checkers behind the scenario validator."""

from __future__ import annotations

import pytest

from trimtab.construct import _spec_fields as f
from trimtab.errors import ScenarioError

ROOT = f.Path("file.yaml", ("constraints", "x"))


def test_interval_forms():
    assert f.interval(ROOT, [None, 0.1]) == [None, 0.1]
    assert f.interval(ROOT, 0.0) == [0.0, 0.0]
    with pytest.raises(ScenarioError, match=r"^file\.yaml: constraints\.x: expected \[lower, upper\] \(null for unbounded\), got 'a'$"):
        f.interval(ROOT, "a")
    with pytest.raises(ScenarioError, match=r"constraints\.x\.1: expected a number, got 'b'"):
        f.interval(ROOT, [0, "b"])


def test_number_bounds_and_text_choices():
    assert f.number(ROOT, 3, minimum=0) == 3.0
    with pytest.raises(ScenarioError, match=r"constraints\.x: expected a number, got True"):
        f.number(ROOT, True)
    with pytest.raises(ScenarioError, match=r"constraints\.x: must be ≤ 1 \(got 2\)"):
        f.number(ROOT, 2, maximum=1)
    with pytest.raises(ScenarioError, match=r"constraints\.x: expected one of a, b, got 'c'"):
        f.text(ROOT, "c", ["a", "b"])
    assert f.describe("x" * 100).endswith("...")
