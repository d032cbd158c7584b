"""The conflict set against its definition (issue #12).

An irreducible infeasible subset (Chinneck & Dravnieks, ORSA J. Computing 3(2), 1991): the reported
limits cannot all hold, and dropping any one of them leaves limits that can. Feasibility is decided
here by an independent dense cvxpy formulation on Σ = BFBᵀ + diag(d) (tests/construct/_dense.py),
never by trimtab's own factor-form problem.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel
from trimtab.construct import rebalance
from trimtab.errors import InfeasibleError, InputError

from ._dense import dense_feasible
from .conftest import Fund, make_fund


def subset(constraints: dict, paths: list[str]) -> dict:
    """The scenario's constraints restricted to the limits named by key paths."""
    out: dict = {}
    for path in paths:
        parts = path.split(".")
        key = parts[1]
        if key in ("group", "factor_exposure"):
            label = path.split("(")[-1].rstrip(")") if "(" in path else parts[3]
            options = constraints[key]
            band = options["bounds"].get(label, options["bounds"].get("default"))
            entry = out.setdefault(key, {k: v for k, v in options.items() if k != "bounds"} | {"bounds": {}})
            entry["bounds"][label] = band
        else:
            out[key] = constraints[key]
    return out


def check_definition(fund: Fund, constraints: dict, paths: list[str]) -> None:
    """The set is infeasible and each proper subset (one limit dropped) is feasible, on the dense model."""
    def feasible(chosen: list[str]) -> bool:
        return dense_feasible(fund.model, {"constraints": subset(constraints, chosen)}, holdings=fund.holdings,
                              benchmark=fund.benchmark, attributes=fund.attributes, nav=fund.nav)

    assert not feasible(paths), paths
    for drop in paths:
        rest = [p for p in paths if p != drop]
        assert feasible(rest), f"without {drop} the rest is still infeasible: the set is not irreducible"


def conflict_of(fund: Fund, constraints: dict, **kwargs) -> InfeasibleError:
    scenario = {"objective": {"minimize": "active_risk"}, "constraints": constraints}
    with pytest.raises(InfeasibleError) as caught:
        rebalance(fund.model, scenario, **fund.kwargs(), **kwargs)
    err = caught.value
    assert err.conflict, str(err)
    assert str(err).startswith("scenario: infeasible: these limits cannot all hold: " + ", ".join(err.conflict))
    table = err.relaxation
    assert "scale" not in table.columns
    assert list(table.columns) == ["option", "constraint", "kind", "side", "limit", "needed", "relax_by", "unit"]
    assert (table["relax_by"] > 0).all()
    return err


def achievable_te(fund: Fund, constraints: dict) -> float:
    result = rebalance(fund.model, {"objective": {"minimize": "active_risk"}, "constraints": constraints}, **fund.kwargs())
    active = (result.weights - fund.benchmark).to_numpy()
    # σ = √(ppy·aᵀΣa) on the dense Σ (textbook definition of tracking error)
    return float(np.sqrt(fund.model.periods_per_year * active @ fund.model.covariance().to_numpy() @ active))


def test_te_cap_below_the_achievable_minimum() -> None:
    fund = make_fund(40, 4, seed=3, drift=0.6)
    others = {"fully_invested": True, "long_only": True, "weight": {"max": 0.08}, "turnover": {"max": 0.05}}
    floor = achievable_te(fund, others)
    constraints = {**others, "tracking_error": {"max": floor - 0.001}}
    err = conflict_of(fund, constraints)
    assert "constraints.tracking_error.max" in err.conflict
    check_definition(fund, constraints, err.conflict)
    # raising the TE cap alone is an option, to (about) the achievable minimum
    te = err.relaxation[err.relaxation["constraint"] == "constraints.tracking_error.max"]
    assert len(te) == 1 and te["needed"].iloc[0] == pytest.approx(floor, rel=1e-3)


def test_te_cap_of_zero() -> None:
    fund = make_fund(40, 4, seed=3, drift=0.6)
    constraints = {"fully_invested": True, "long_only": True, "turnover": {"max": 0.05}, "tracking_error": {"max": 0.0}}
    err = conflict_of(fund, constraints)
    assert "constraints.tracking_error.max" in err.conflict
    check_definition(fund, constraints, err.conflict)
    # a cap of 0 forces w = b: raising it alone is an option, and the table never proposes a cap below 0
    assert (err.relaxation.loc[err.relaxation["kind"] == "tracking_error", "needed"] > 0).all()


def test_caps_that_cannot_sum_to_the_budget() -> None:
    # 40 assets at most 1% each cannot hold 100% (closed form: Σ caps = 40%)
    fund = make_fund(40, 4, seed=4)
    constraints = {"fully_invested": True, "weight": {"max": 0.01}}
    err = conflict_of(fund, constraints)
    assert sorted(err.conflict) == ["constraints.fully_invested", "constraints.weight.max"]
    check_definition(fund, constraints, err.conflict)
    table = err.relaxation
    # two options, each alone: the budget to 40% (one limit) or every cap to 2.5% (closed form 1/40)
    assert set(table["option"]) == {"1", "2"}
    budget = table[table["kind"] == "budget"]
    assert len(budget) == 1 and budget["needed"].iloc[0] == pytest.approx(0.40, abs=1e-6)
    caps = table[table["kind"] == "weight"]
    assert len(caps) == 40 and np.allclose(caps["needed"], 0.025, atol=1e-6)


def industry_model() -> tuple[FactorModel, pd.DataFrame]:
    """Four assets, two industries; factor ``ind_a`` is the industry-a indicator (invented)."""
    assets = ["A1", "A2", "B1", "B2"]
    exposures = pd.DataFrame({"market": [1.0, 1.1, 0.9, 1.0], "ind_a": [1.0, 1.0, 0.0, 0.0]}, index=assets)
    factor_cov = pd.DataFrame([[0.0001, 0.0], [0.0, 0.00005]], index=exposures.columns, columns=exposures.columns)
    model = FactorModel(exposures, factor_cov, pd.Series(0.0002, index=assets))
    attributes = pd.DataFrame({"industry": ["a", "a", "b", "b"], "price": 10.0, "adv": 1e6, "lot": 1.0,
                               "spread": 1e-3, "commission": 0.0, "impact": 0.0}, index=assets)
    return model, attributes


def test_factor_neutrality_against_a_group_band() -> None:
    model, attributes = industry_model()
    bench = pd.Series(0.25, index=model.assets)
    fund = Fund(model, bench, bench.copy(), pd.Series(0.0, index=model.assets), attributes)
    constraints = {"fully_invested": True, "long_only": True,
                   "factor_exposure": {"bounds": {"ind_a": [0.0, 0.0]}},
                   "group": {"by": "industry", "bounds": {"a": [0.1, 0.6], "b": [0.0, 1.0]}}}
    err = conflict_of(fund, constraints)
    assert sorted(err.conflict) == ["constraints.factor_exposure.bounds.ind_a", "constraints.group.bounds.a"]
    check_definition(fund, constraints, err.conflict)


def test_turnover_cap_against_position_caps() -> None:
    fund = make_fund(30, 3, seed=5)
    holdings = fund.holdings.copy()
    holdings.iloc[0] += 0.10
    holdings.iloc[1:] *= (1.0 - holdings.iloc[0]) / holdings.iloc[1:].sum()
    fund = Fund(fund.model, fund.benchmark, holdings, fund.alpha, fund.attributes)
    constraints = {"weight": {"max": holdings.iloc[0] - 0.08}, "turnover": {"max": 0.02}}
    err = conflict_of(fund, constraints)
    assert sorted(err.conflict) == ["constraints.turnover.max", "constraints.weight.max"]
    check_definition(fund, constraints, err.conflict)
    # the least turnover sells every excess over the cap and buys nothing: ½·Σ max(w0 − cap, 0) (closed form)
    excess = (holdings - constraints["weight"]["max"]).clip(lower=0.0).sum()
    turnover = err.relaxation[err.relaxation["kind"] == "turnover"]
    assert turnover["needed"].iloc[0] == pytest.approx(0.5 * excess, abs=1e-6)


def test_relaxed_limits_solve() -> None:
    fund = make_fund(40, 4, seed=4)
    err = conflict_of(fund, {"fully_invested": True, "weight": {"max": 0.01}})
    # option 1 (scenario order) moves the budget alone: Σw may fall to 40%, each cap still 1%
    assert err.relaxation.loc[err.relaxation["option"] == "1", "kind"].tolist() == ["budget"]
    result = err.relaxed()
    assert 0.4 - 1e-5 <= float(result.weights.sum()) <= 1.0
    assert float(result.weights.max()) <= 0.01 + 1e-7


def test_a_variant_s_own_limits_come_first() -> None:
    fund = make_fund(40, 4, seed=4)
    scenario = {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True, "weight": {"max": 0.01}}}
    from trimtab.construct import build_problem

    problem = build_problem(fund.model, scenario, **fund.kwargs())
    problem.changed = ("weight",)
    with pytest.raises(InfeasibleError) as caught:
        problem.solve()
    assert caught.value.conflict == ["constraints.weight.max", "constraints.fully_invested"]
    # the same from the Python API's keyword, with a key path or a bare key
    for changed in (["constraints.weight.max"], ["weight"]):
        with pytest.raises(InfeasibleError) as caught:
            rebalance(fund.model, scenario, changed_limits=changed, **fund.kwargs())
        assert caught.value.conflict == ["constraints.weight.max", "constraints.fully_invested"]
    with pytest.raises(InfeasibleError) as caught:
        rebalance(fund.model, scenario, **fund.kwargs())
    assert caught.value.conflict == ["constraints.fully_invested", "constraints.weight.max"]
    for bad in ("weight", 5, [1]):
        with pytest.raises(InputError, match="changed_limits must be a list of constraint keys"):
            rebalance(fund.model, scenario, changed_limits=bad, **fund.kwargs())


def test_a_clarabel_only_run_gets_the_same_diagnosis() -> None:
    fund = make_fund(40, 4, seed=3, drift=0.6)
    constraints = {"fully_invested": True, "long_only": True, "turnover": {"max": 0.05}, "tracking_error": {"max": 0.0}}
    for solvers in (["CLARABEL"], ["SCS"]):
        err = conflict_of(fund, constraints, solvers=solvers)
        assert "constraints.tracking_error.max" in err.conflict


def test_the_error_travels_between_processes_without_its_problem() -> None:
    import pickle

    fund = make_fund(40, 4, seed=4)
    err = conflict_of(fund, {"fully_invested": True, "weight": {"max": 0.01}})
    back = pickle.loads(pickle.dumps(err))  # executors send errors back from worker processes
    assert back.conflict == err.conflict and str(back) == str(err) and back.relaxed is None
    pd.testing.assert_frame_equal(back.relaxation, err.relaxation)


def edge_case() -> tuple[Fund, dict, dict]:
    """#21: 300 names with rich limits and a TE cap 0.1% (relative) below the smallest reachable TE.

    Before the fix FACTOR_IPM stalled, Clarabel failed with a numerical error on every rung, the
    feasibility tests of the diagnosis could not tell (SCS called a point beyond the cap optimal) and
    the run ended as a solver failure (exit 3) with no conflict set.
    """
    fund = make_fund(300, 8, seed=1, drift=0.5)
    others = {"fully_invested": True, "long_only": True, "weight": {"max": 0.006}, "turnover": {"max": 0.08},
              "factor_exposure": {"active": True, "bounds": {"default": [-0.2, 0.2]}},
              "group": {"by": "industry", "active": True, "bounds": {"default": [-0.05, 0.05]}},
              "liquidity": {"max_adv_fraction": 0.2}}
    floor = achievable_te(fund, others)
    objective = {"maximize": "utility", "risk_aversion": 1.0, "cost_aversion": 1.0,
                 "costs": {"spread": "spread", "commission": "commission"}}
    return fund, {**others, "tracking_error": {"max": floor * (1 - 1e-3)}}, objective


def test_the_edge_of_feasibility_is_diagnosed_on_the_default_path() -> None:
    fund, constraints, objective = edge_case()
    scenario = {"objective": objective, "constraints": constraints}
    errors = {}
    for name, solvers in (("default", None), ("clarabel", ["CLARABEL"])):
        with pytest.raises(InfeasibleError) as caught:
            rebalance(fund.model, scenario, solvers=solvers, **fund.kwargs())
        errors[name] = caught.value
    new, old = errors["default"], errors["clarabel"]
    assert new.conflict == ["constraints.fully_invested", "constraints.weight.max", "constraints.turnover.max",
                            "constraints.tracking_error.max"]
    # the same diagnosis as the Clarabel-only path (the path that diagnosed it before the regression)
    assert new.conflict == old.conflict
    pd.testing.assert_frame_equal(new.relaxation.drop(columns=["needed", "relax_by"]),
                                  old.relaxation.drop(columns=["needed", "relax_by"]))
    np.testing.assert_allclose(new.relaxation["relax_by"], old.relaxation["relax_by"], rtol=1e-3, atol=1e-8)
    te = new.relaxation[new.relaxation["constraint"] == "constraints.tracking_error.max"]
    assert te["needed"].iloc[0] == pytest.approx(constraints["tracking_error"]["max"] / (1 - 1e-3), rel=2e-4)
    # the first option applied solves, and its weights hold the loosened limits (verified from w)
    result = new.relaxed()
    assert float(result.weights.sum()) <= 1.0 + 1e-7


# issue #19: one plain sentence per limit of the conflict set
def _infeasible_with(constraints):
    from trimtab.construct import rebalance
    from trimtab.errors import InfeasibleError

    from .conftest import make_fund

    fund = make_fund(60, 4, seed=91)
    base = {"fully_invested": True, "long_only": True, "weight": {"max": 0.1}}
    with pytest.raises(InfeasibleError) as caught:
        rebalance(fund.model, {"objective": {"maximize": "alpha"}, "constraints": {**base, **constraints}}, **fund.kwargs())
    return fund, caught.value


def test_each_conflicting_limit_has_a_sentence_with_its_own_way_out() -> None:
    # the demo's infeasible scenario in small: a tracking-error cap and a turnover cap that cannot both hold
    _, err = _infeasible_with({"liquidity": {"max_adv_fraction": 0.1}, "tracking_error": {"max": 0.005}, "turnover": {"max": 0.01}})
    assert err.conflict == ["constraints.tracking_error.max", "constraints.turnover.max"]
    te, turnover = err.reasons
    table = err.relaxation.set_index("constraint")
    needed_te = table.loc["constraints.tracking_error.max", "needed"]
    assert te.startswith("constraints.tracking_error.max: enough on its own: from 0.5% to ")
    assert f"{100 * needed_te:.3g}%" in te and "(option 1)" in te
    assert turnover.startswith("constraints.turnover.max: enough on its own: from 1% to ") and "(option 2)" in turnover


def test_a_te_cap_below_reach_says_why_turnover_alone_cannot_help() -> None:
    fund, err = _infeasible_with({"liquidity": {"max_adv_fraction": 0.002}, "tracking_error": {"max": 0.0005}, "turnover": {"max": 0.05}})
    assert set(err.conflict) == {"constraints.tracking_error.max", "constraints.turnover.max"}
    reasons = dict(r.split(": ", 1) for r in err.reasons)
    assert reasons["constraints.tracking_error.max"].startswith("enough on its own")
    # the most one-way turnover the liquidity limit allows: what can be sold against what can be bought,
    # each asset at most 0.2% of its ADV (a closed form checked here by hand)
    cap = 0.002 * fund.attributes["adv"] * fund.attributes["price"] / fund.nav
    w0 = fund.holdings
    sell = np.minimum(w0, cap).sum()
    buy = np.minimum(np.minimum(0.1, w0 + cap) - w0, cap).clip(lower=0).sum()
    reach = min(sell, buy)
    text = reasons["constraints.turnover.max"]
    assert text.startswith("raising it from 5% alone is not enough: the liquidity limit (0.2% of ADV a day) allows at most ")
    assert f"at most {100 * reach:.3g}% one-way today" in text
    # the relaxation table offers the single-limit way out that exists (the cap), not turnover
    assert list(err.relaxation["constraint"]) == ["constraints.tracking_error.max"]
