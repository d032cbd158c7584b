"""The explorer's engine: variants re-solved on the built problem, saved as scenario files (#15)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import yaml

from trimtab.app import Explorer
from trimtab.app._limits import apply
from trimtab.construct import rebalance
from trimtab.errors import InputError, ScenarioError
from trimtab.scenario import load_inputs, load_scenario
from trimtab.scenario._run import solve


def _weights(result) -> np.ndarray:  # type: ignore[no-untyped-def]
    return result.weights.to_numpy(dtype=float)


def _reference(explorer: Explorer, changes: dict) -> np.ndarray:
    """The same scenario solved cold by Clarabel through cvxpy (an outside solver), for comparison."""
    result = rebalance(explorer.inputs.model, apply(explorer.mapping, changes), solvers=["CLARABEL"],
                       **explorer.inputs.rebalance_kwargs())
    return _weights(result)


@pytest.mark.parametrize(
    "changes",
    [{}, {"tracking_error.max": 0.02}, {"group.bounds.default.1": 0.02}, {"factor_exposure.bounds.momentum.1": 0.05}],
    ids=["as-written", "te-cap", "group-band", "new-momentum-bound"],
)
def test_a_variant_matches_a_cold_solve_by_an_outside_solver(explorer: Explorer, changes: dict) -> None:
    variant = explorer.solve(explorer.changes_of(changes))
    assert variant.status == "solved"
    # Clarabel (interior point, cvxpy) on the same limits: same optimum to solver tolerance
    np.testing.assert_allclose(_weights(variant.result), _reference(explorer, changes), atol=2e-4)


def test_the_te_cap_moves_the_tracking_error(explorer: Explorer) -> None:
    tight = explorer.solve(explorer.changes_of({"tracking_error.max": 0.015})).result
    loose = explorer.solve(explorer.changes_of({"tracking_error.max": 0.025})).result
    te = [r.post_trade.headline()["risk"] for r in (tight, loose)]
    assert te[0] <= 0.015 + 1e-6 and te[0] < te[1] <= 0.025 + 1e-6


def test_an_infeasible_setting_is_a_variant_with_its_relaxation(explorer: Explorer) -> None:
    variant = explorer.solve(explorer.changes_of({"tracking_error.max": 0.002, "turnover.max": 0.01}))
    assert variant.status == "infeasible"
    assert any("turnover" in str(name) or "tracking_error" in str(name) for name in variant.error.relaxation["constraint"])


def test_a_value_the_scenario_rules_reject_names_the_key(explorer: Explorer) -> None:
    with pytest.raises(ScenarioError, match=r"constraints\.tracking_error\.max: must be ≥ 0"):
        explorer.solve(explorer.changes_of({"tracking_error.max": -0.01}))


def test_save_extends_the_scenario_and_reruns_to_the_same_weights(explorer: Explorer, demo_folder: Path, tmp_path: Path) -> None:
    changes = explorer.changes_of({"tracking_error.max": 0.022, "factor_exposure.bounds.momentum.1": 0.05})
    variant = explorer.solve(changes)
    before = sorted(p.name for p in demo_folder.iterdir())
    path = explorer.save("explored_te22", changes)
    assert path == demo_folder / "explored_te22.yaml"
    assert sorted(p.name for p in demo_folder.iterdir()) == sorted([*before, path.name])
    body = yaml.safe_load(path.read_text(encoding="utf-8"))
    assert body["extends"] == "base.yaml" and body["name"] == "explored_te22"
    assert body["constraints"] == {"tracking_error": {"max": 0.022},
                                   "factor_exposure": {"active": True, "bounds": {"momentum": [None, 0.05]}}}
    run = solve(load_inputs(load_scenario(path)))
    np.testing.assert_allclose(_weights(run.result), _weights(variant.result), atol=1e-6)
    with pytest.raises(InputError, match="explored_te22.yaml already exists"):
        explorer.save("explored_te22", {})
    assert path.read_text(encoding="utf-8").startswith("# Saved by trimtab explore")
    path.unlink()


@pytest.mark.parametrize("name", ["", "../up", "a/b", "-dash", "x" * 65, "sp ace"], ids=["empty", "dots", "slash", "dash", "long", "space"])
def test_save_refuses_a_name_that_is_not_a_plain_file_name(explorer: Explorer, name: str) -> None:
    with pytest.raises(InputError, match="name: use letters, digits"):
        explorer.save(name, {})


def test_opening_both_sides_of_a_new_bound_is_the_scenario_as_written(explorer: Explorer) -> None:
    base = explorer.solve({}).result
    opened = explorer.solve(explorer.changes_of({"factor_exposure.bounds.momentum.0": None,
                                                  "factor_exposure.bounds.momentum.1": None}))
    np.testing.assert_allclose(_weights(opened.result), _weights(base), atol=1e-6)


def test_the_trail_key_changes_with_the_scenario_file_and_its_text(explorer: Explorer, demo_folder: Path) -> None:
    # the page keeps its trail in sessionStorage under this key: another file, or this one edited,
    # must give another key (a fresh trail); the same file unchanged gives the same key
    copy = demo_folder / "trail_key_copy.yaml"
    copy.write_bytes((demo_folder / "base.yaml").read_bytes())
    try:
        other = Explorer.open(copy)
        assert explorer.trail_key() == explorer.trail_key() == explorer.settings()["trail_key"]
        assert other.trail_key() != explorer.trail_key()
        before = other.trail_key()
        copy.write_text(copy.read_text() + "\n# edited\n")
        assert other.trail_key() != before
        # the same file over other data (a refitted model, a new book) is another trail too
        import dataclasses

        refit = other.inputs.model.specific_variance * 1.01
        moved = Explorer(dataclasses.replace(other.inputs, model=dataclasses.replace(other.inputs.model, specific_variance=refit)))
        assert moved.trail_key() != other.trail_key()
    finally:
        copy.unlink()
