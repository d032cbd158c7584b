"""Sweeps: key paths, grids, build-once-then-re-solve, failed points kept, the table's figures."""

from __future__ import annotations

import pickle

import numpy as np
import pandas as pd
import pytest

from tests.conftest import random_model
from tests.runs import _tasks
from tests.runs._tasks import ClosedFormProblem
from trimtab.errors import InputError
from trimtab.runs._executors import InProcessExecutor
from trimtab.runs._sweep import apply_point, chunks, grid_points, key_path, point_label, sweep

UTILITY = {"objective": {"maximize": "utility", "risk_aversion": 10.0}, "constraints": {"fully_invested": True}}


@pytest.fixture(scope="module")
def book():
    model = random_model(n_assets=40, n_factors=4, seed=5)
    rng = np.random.default_rng(11)
    bench = pd.Series(rng.dirichlet(np.ones(40)), index=model.assets)
    alpha = pd.Series(rng.normal(scale=0.03, size=40), index=model.assets)
    return model, bench, alpha


def run(book, scenario, grid, **kwargs):
    model, bench, alpha = book
    return sweep(model, scenario, grid, holdings=bench, benchmark=bench, alpha=alpha, build=ClosedFormProblem, **kwargs)


def test_key_paths() -> None:
    assert key_path("risk_aversion") == ("objective", "risk_aversion")
    assert key_path("tracking_error.max") == ("constraints", "tracking_error", "max")
    assert key_path("constraints.turnover.max") == ("constraints", "turnover", "max")
    assert key_path("objective.cost_aversion") == ("objective", "cost_aversion")
    for bad, message in [("", "dotted key paths"), ("a..b", "dotted key paths"), ("objective", "names a whole section")]:
        with pytest.raises(InputError, match=message):
            key_path(bad)


def test_apply_point_sets_nested_values_and_list_positions() -> None:
    scenario = {"objective": {"risk_aversion": 1}, "constraints": {"factor_exposure": {"bounds": {"size": [-0.1, 0.1]}}}}
    out = apply_point(scenario, {"factor_exposure.bounds.size.1": 0.05, "turnover.max": 0.2, "risk_aversion": 4})
    assert out["constraints"]["factor_exposure"]["bounds"]["size"] == [-0.1, 0.05]
    assert out["constraints"]["turnover"] == {"max": 0.2}
    assert out["objective"]["risk_aversion"] == 4
    assert scenario["constraints"]["factor_exposure"]["bounds"]["size"] == [-0.1, 0.1]  # the input is untouched
    with pytest.raises(InputError, match=r"sweep: parameter factor_exposure.bounds.size.7: '7' is not a position in a list of 2"):
        apply_point(scenario, {"factor_exposure.bounds.size.7": 0.0})
    with pytest.raises(InputError, match=r"sweep: parameter risk_aversion.max: objective.risk_aversion is a value, not a section"):
        apply_point(scenario, {"risk_aversion.max": 0.0})


def test_grid_points() -> None:
    points = grid_points({"risk_aversion": [1, 2], "tracking_error.max": [0.01, 0.02, 0.03]})
    assert len(points) == 6 and points[0] == {"risk_aversion": 1, "tracking_error.max": 0.01}
    assert point_label(points[-1]) == "risk_aversion=2, tracking_error.max=0.03"
    assert grid_points([{"turnover.max": 0.1}]) == [{"turnover.max": 0.1}]
    for bad, message in [
        ({}, r"the grid is empty"),
        ({"risk_aversion": []}, r"grid\['risk_aversion'\] must be a non-empty list of values, got \[\]"),
        ({"risk_aversion": "5"}, r"must be a non-empty list of values, got '5'"),
        ([], r"a non-empty list of points"),
        ([{"risk_aversion": 1}, {"risk_aversion": 1}], r"the grid repeats points: risk_aversion=1"),
    ]:
        with pytest.raises(InputError, match=message):
            grid_points(bad)


def test_chunks_keep_neighbours_together() -> None:
    points = [{"x": i} for i in range(7)]
    parts = chunks(points, 3)
    assert [len(p) for p in parts] == [2, 3, 2]
    assert [p["x"] for part in parts for p in part] == list(range(7))
    assert chunks(points[:1], 4) == [tuple(points[:1])]


def test_risk_aversion_sweep_builds_once_and_scales_as_one_over_lambda(book) -> None:
    _tasks.BUILDS.clear()
    lambdas = [2.0, 5.0, 10.0, 40.0]
    result = run(book, UTILITY, {"risk_aversion": lambdas})
    assert len(_tasks.BUILDS) == 1
    table = result.table
    assert table["built"].tolist() == [True, False, False, False]
    assert list(table.index) == [f"risk_aversion={x:g}" for x in lambdas]
    assert (table["status"] == "solved").all()
    # a = Σ⁻¹α̃/(2λP): TE and expected alpha are both ∝ 1/λ (closed form of mean-variance with a budget)
    np.testing.assert_allclose(table["tracking_error"] * table["risk_aversion"], table["tracking_error"].iloc[0] * 2.0, rtol=1e-12)
    np.testing.assert_allclose(table["expected_alpha"] * table["risk_aversion"], table["expected_alpha"].iloc[0] * 2.0, rtol=1e-12)
    # first-order condition: αᵀa = α̃ᵀa (1ᵀa = 0) = 2λP·aᵀΣa = 2λ·TE²
    np.testing.assert_allclose(table["expected_alpha"], 2.0 * table["risk_aversion"] * table["tracking_error"] ** 2, rtol=1e-10)
    assert result.parameters == ["risk_aversion"]
    assert "4 points; 4 solved" in result.summary()


def test_failed_points_are_kept_with_their_parameters(book) -> None:
    scenario = {"objective": {"maximize": "alpha"}, "constraints": {"tracking_error": {"max": 0.02}}}
    result = run(book, scenario, {"tracking_error.max": [0.0005, 0.01, 0.02]}, keep_results=True)
    table = result.table
    assert table["status"].tolist() == ["infeasible", "solved", "solved"]
    assert table.loc["tracking_error.max=0.0005", "error"] == "tracking_error.max 0.0005 is below the smallest reachable 0.001"
    # the TE cap binds: the forecast TE equals each cap (closed form a = σ̄Σ⁻¹α̃/√(Pα̃ᵀΣ⁻¹α̃))
    np.testing.assert_allclose(table["tracking_error"].iloc[1:], [0.01, 0.02], rtol=1e-12)
    assert set(result.results) == {"tracking_error.max=0.01", "tracking_error.max=0.02"}
    assert len(result.failed) == 1
    # a limit the built problem cannot re-solve is a failed row naming the error, not a crash
    bad = run(book, scenario, [{"tracking_error.max": 0.01}, {"turnover.max": 0.1}])
    assert bad.table["status"].tolist() == ["solved", "failed"]
    assert bad.table["error"].iloc[1] == "solve: limits not re-solvable: ['turnover.max']"


def test_a_grid_value_the_scenario_refuses_fails_the_sweep_before_solving(book) -> None:
    # issue #11: a 3 meant as 3% was a failed row with a class name; it is a bad grid, named
    scenario = {"objective": {"maximize": "alpha"}, "constraints": {"tracking_error": {"max": 0.02}}}
    with pytest.raises(InputError, match=r"^grid point tracking_error.max=3: constraints.tracking_error.max: 3 would mean 300%.*did you mean 0.03\?$"):
        model, bench, alpha = book  # trimtab's own builder: the scenario's checks apply
        sweep(model, scenario, {"tracking_error.max": [0.01, 3]}, holdings=bench, benchmark=bench, alpha=alpha)


def test_without_reuse_every_point_is_built(book) -> None:
    _tasks.BUILDS.clear()
    reused = run(book, UTILITY, {"risk_aversion": [3.0, 6.0, 9.0]})
    fresh = run(book, UTILITY, {"risk_aversion": [3.0, 6.0, 9.0]}, reuse=False)
    assert len(_tasks.BUILDS) == 4
    assert fresh.table["built"].all()
    columns = ["tracking_error", "turnover", "expected_alpha"]
    pd.testing.assert_frame_equal(reused.table[columns], fresh.table[columns], rtol=1e-12)


class TwoWorkers(InProcessExecutor):
    """In process, but reporting two workers and sending each task through pickle, as a pool would."""

    @property
    def n_workers(self) -> int:
        return 2

    def map(self, func, items, **kwargs):
        if "shared" in kwargs:
            kwargs["shared"] = pickle.loads(pickle.dumps(kwargs["shared"]))
        return super().map(func, [pickle.loads(pickle.dumps(item)) for item in items], **kwargs)


def test_chunks_for_two_workers_match_one_chunk(book) -> None:
    grid = {"risk_aversion": [1.0, 2.0, 4.0, 8.0]}
    local = run(book, UTILITY, grid)
    remote = run(book, UTILITY, grid, executor=TwoWorkers())
    assert remote.table["built"].tolist() == [True, False, True, False]  # two chunks, one build each
    columns = ["tracking_error", "total_risk", "turnover", "expected_alpha", "status"]
    pd.testing.assert_frame_equal(local.table[columns], remote.table[columns])


def test_bad_scenario(book) -> None:
    with pytest.raises(InputError, match=r"sweep: scenario must be a mapping with an objective section"):
        run(book, {"constraints": {}}, {"risk_aversion": [1.0]})


def test_real_optimizer_points_equal_direct_rebalances(book) -> None:
    """Each sweep point is the scenario with that value: the same weights as trimtab.rebalance on it."""
    from trimtab.construct import rebalance

    model, bench, alpha = book
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 10.0},
                "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.3}}}
    result = sweep(model, scenario, {"risk_aversion": [5.0, 20.0], "turnover.max": [0.1, 0.3]},
                   holdings=bench, benchmark=bench, alpha=alpha, keep_results=True)
    assert (result.table["status"] == "solved").all(), result.table
    assert result.table["built"].tolist() == [True, False, False, False]  # built once, then RebalanceProblem.solve(**changes)
    for label, row in result.table.iterrows():
        direct = rebalance(model, apply_point(scenario, {"risk_aversion": row["risk_aversion"], "turnover.max": row["turnover.max"]}),
                           holdings=bench, benchmark=bench, alpha=alpha)
        # the sweep's re-solves start from the previous point (a warm start), the direct rebalance from
        # the cold start; both stop at FACTOR_IPM's tolerances (duality gap 1e-9), which place the
        # weights within a few 1e-7 of each other
        np.testing.assert_allclose(result.results[label].weights.to_numpy(), direct.weights.to_numpy(), atol=1e-6)
        # figures recomputed from the weights: one-way turnover within its cap
        assert row["turnover"] <= row["turnover.max"] + 1e-7
    # the tighter the turnover cap and the larger λ, the lower the tracking error
    te = result.table.set_index(["risk_aversion", "turnover.max"])["tracking_error"]
    assert te[(20.0, 0.3)] < te[(5.0, 0.3)] and te[(5.0, 0.1)] <= te[(5.0, 0.3)] + 1e-9


class RefusesChanges(ClosedFormProblem):
    """A built problem whose re-solve refuses every change, as a problem whose limits a key path does not reach."""

    attempts = 0

    def solve(self, **changes):
        from trimtab.errors import ScenarioError

        if changes:
            RefusesChanges.attempts += 1
            raise ScenarioError("scenario: constraints: tracking_error: max: no such limit in this scenario")
        return super().solve()


def test_a_refused_re_solve_builds_afresh_and_is_not_retried(book) -> None:
    model, bench, alpha = book
    _tasks.BUILDS.clear()
    RefusesChanges.attempts = 0
    result = sweep(model, UTILITY, {"risk_aversion": [2.0, 4.0, 8.0]}, holdings=bench, benchmark=bench, alpha=alpha, build=RefusesChanges)
    assert result.table["built"].tolist() == [True, True, True]
    assert len(_tasks.BUILDS) == 3 and RefusesChanges.attempts == 1
    reference = run(book, UTILITY, {"risk_aversion": [2.0, 4.0, 8.0]})
    np.testing.assert_allclose(result.table["tracking_error"], reference.table["tracking_error"], rtol=1e-12)


def test_labels_show_floats_plainly() -> None:
    assert point_label({"tracking_error.max": 0.045000000000000005, "risk_aversion": 3}) == "tracking_error.max=0.045, risk_aversion=3"
