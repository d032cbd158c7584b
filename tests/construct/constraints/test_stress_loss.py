"""The stress_loss limit: its row against a naive loss, a dense cvxpy formulation (tests/construct/_dense.py),
the returned weights, and FACTOR_IPM solving it with no fall-back."""

from __future__ import annotations

import numpy as np
import pytest

import trimtab
from trimtab.construct import rebalance, validate_scenario
from trimtab.errors import ScenarioError

from .._dense import dense_solve
from ..conftest import make_fund
from ._helpers import build, expression_values, random_weights

SHOCKS = {
    "selloff": {"factors": {"f0": -0.10}},
    "rotation": {"factors": {"f1": 0.02, "f2": -0.02}},
}


def naive_loss(model, shock, w, b, conditional=True):
    """−(B·m)ᵀ(w − b) with m from numpy's explicit-inverse Gaussian conditioning."""
    F = model.factor_covariance.to_numpy()
    names = list(model.factors)
    S = [names.index(k) for k in shock]
    U = [k for k in range(len(names)) if k not in S]
    m = np.zeros(len(names))
    m[S] = list(shock.values())
    if conditional:
        m[U] = F[np.ix_(U, S)] @ np.linalg.inv(F[np.ix_(S, S)]) @ m[S]
    return -(model.exposures.to_numpy() @ m) @ (w - b)


@pytest.mark.parametrize("conditional", [True, False], ids=["conditional", "named-only"])
def test_row_is_the_loss_under_each_shock(conditional):
    fund, problem, c = build("stress_loss", {"shocks": SHOCKS, "max": 0.01, "conditional": conditional})
    (rows,) = c.rows
    assert rows.labels == ["selloff", "rotation"]
    assert rows.linear is not None and rows.linear.w is None  # factor space only
    w = random_weights(fund.model.n_assets)
    expected = [naive_loss(fund.model, s["factors"], w, fund.benchmark.to_numpy(), conditional) for s in SHOCKS.values()]
    np.testing.assert_allclose(rows.evaluate(w), expected, rtol=1e-10)
    np.testing.assert_allclose(expression_values(problem, rows, w), expected, rtol=1e-10)


def test_absolute_loss_uses_w_alone():
    fund, problem, c = build("stress_loss", {"shocks": SHOCKS, "max": 0.01, "active": False})
    (rows,) = c.rows
    w = random_weights(fund.model.n_assets)
    expected = [naive_loss(fund.model, s["factors"], w, np.zeros_like(w)) for s in SHOCKS.values()]
    np.testing.assert_allclose(rows.evaluate(w), expected, rtol=1e-10)


@pytest.mark.parametrize("solver", ["FACTOR_IPM", "CLARABEL"])
def test_binding_stress_limit_matches_dense_formulation(solver):
    # outside reference: the same problem on the dense N×N covariance with the loss rows written from
    # their definition (tests/construct/_dense.py); the limit is tight enough to bind
    fund = make_fund(120, 6, seed=5)
    free = {"objective": {"maximize": "utility", "risk_aversion": 2},
            "constraints": {"fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.05}}}
    unlimited = rebalance(fund.model, free, **fund.kwargs())
    loss_free = trimtab.stress(fund.model, unlimited.weights, {k: v["factors"] for k, v in SHOCKS.items()},
                               benchmark=fund.benchmark).returns["active"].min()
    cap = 0.5 * max(-loss_free, 1e-4)
    scenario = {"objective": free["objective"],
                "constraints": {**free["constraints"], "stress_loss": {"shocks": SHOCKS, "max": cap}}}
    result = rebalance(fund.model, scenario, solvers=(solver,), **fund.kwargs())
    assert result.solver == solver
    assert [a.split(":")[0] for a in result.provenance["attempts"]] == [solver]  # no fall-back
    expected, value = dense_solve(fund.model, scenario, **fund.kwargs())
    np.testing.assert_allclose(result.weights.to_numpy(), expected.to_numpy(), atol=1e-5)
    assert result.objective["total"] == pytest.approx(value, abs=1e-7)
    # the returned weights keep every loss within the cap, recomputed from the weights by trimtab.stress
    after = trimtab.stress(fund.model, result.weights, {k: v["factors"] for k, v in SHOCKS.items()}, benchmark=fund.benchmark)
    assert (-after.returns["active"] <= cap + 1e-8).all()
    table = result.constraints.set_index("name")
    rows = table.loc[[f"stress_loss[{k}]" for k in SHOCKS]]
    np.testing.assert_allclose(rows["value"].to_numpy(), -after.returns["active"].to_numpy(), atol=1e-10)
    assert rows["binding"].any()
    assert (rows.loc[rows["binding"], "shadow_price"] > 0).all()
    checks = result.verification[result.verification["kind"].str.endswith("stress_loss")]
    assert len(checks) == 1 and checks["ok"].all()  # the worst shock's row of the independent numpy check


def test_shadow_price_is_the_gain_per_unit_of_loosening():
    # finite difference: (U*(max + δ) − U*(max)) / δ ≈ the price of a binding limit
    fund = make_fund(80, 5, seed=9)
    objective = {"maximize": "utility", "risk_aversion": 2}
    limits = {"fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.06}}
    free = rebalance(fund.model, {"objective": objective, "constraints": limits}, **fund.kwargs())
    shock = {"selloff": {"f0": -0.1}}
    loss = -float(trimtab.stress(fund.model, free.weights, shock, benchmark=fund.benchmark).returns["active"].iloc[0])
    if loss < 0:  # the unconstrained book gains in a selloff: shock the other way
        shock, loss = {"selloff": {"f0": 0.1}}, -loss
    cap = 0.5 * loss

    def solve(limit):
        scenario = {"objective": objective, "constraints": {
            **limits, "stress_loss": {"shocks": {"selloff": {"factors": shock["selloff"]}}, "max": limit}}}
        return rebalance(fund.model, scenario, **fund.kwargs())

    result = solve(cap)
    row = result.constraints.set_index("name").loc["stress_loss[selloff]"]
    assert row["binding"]
    delta = 1e-6
    gain = (solve(cap + delta).objective["total"] - result.objective["total"]) / delta
    assert row["shadow_price"] == pytest.approx(gain, rel=0.02)


@pytest.mark.parametrize(
    ("options", "match"),
    [
        ({"shocks": SHOCKS}, r"missing required key\(s\) max"),
        ({"shocks": SHOCKS, "max": -0.01}, r"stress_loss\.max: must be ≥ 0"),
        ({"shocks": {"x": {"factors": {"f0": -0.1}, "f0": -0.1}}, "max": 0.01}, r"stress_loss\.shocks\.x\.f0: unknown key; allowed here: factors"),
        ({"shocks": {"x": {"factors": {"f0": -10}}}, "max": 0.01}, r"shocks\.x\.factors\.f0: a move of -10 is -1000%"),
        ({"shocks": {"x": {"factors": {"f0": "big"}}}, "max": 0.01}, r"shocks\.x\.factors\.f0: expected a finite number"),
        ({"shocks": "shocks.yaml", "max": 0.01}, r"a shock file \(shocks\.yaml\) is read when a scenario file is loaded"),
        ({"shocks": {"x": {"factors": {"f0": -0.1}, "specific": {"A0001": -0.2}}}, "max": 0.01},
         r"shocks\.x\.specific: a stress limit moves factors only"),
        ({"shocks": SHOCKS, "max": 0.01, "active": "yes"}, r"stress_loss\.active: expected true or false"),
    ],
    ids=["no-max", "negative-max", "mixed-forms", "percent-typo", "text-move", "file-in-python", "specific", "active-text"],
)
def test_bad_options_name_the_key(options, match):
    with pytest.raises(ScenarioError, match=match):
        validate_scenario({"objective": {"minimize": "active_risk"}, "constraints": {"stress_loss": options}})


def test_unknown_factor_is_named_at_build_time():
    with pytest.raises(ScenarioError, match=r"stress_loss\.shocks: x: unknown factor\(s\) nope"):
        build("stress_loss", {"shocks": {"x": {"factors": {"nope": -0.1}}}, "max": 0.01})


def test_active_limit_without_benchmark_is_an_error():
    fund = make_fund(30, 4)
    kwargs = {**fund.kwargs(), "benchmark": None}
    with pytest.raises(ScenarioError, match=r"stress_loss\.active: active stress limits need a benchmark"):
        rebalance(fund.model, {"objective": {"minimize": "total_risk"},
                               "constraints": {"stress_loss": {"shocks": SHOCKS, "max": 0.01}}}, **kwargs)


def test_limit_can_be_swept_like_any_other():
    spec = validate_scenario({"objective": {"minimize": "active_risk"},
                              "constraints": {"stress_loss": {"shocks": SHOCKS, "max": 0.01}}})
    assert spec.with_limits({"stress_loss.max": 0.02}).constraints["stress_loss"]["max"] == 0.02
