"""The infeasibility diagnosis in factor form (FACTOR_IPM) against the cvxpy/Clarabel path (#21).

The cvxpy path stays callable: a problem whose solver order has no FACTOR_IPM (``solvers=["CLARABEL"]``)
is diagnosed as before #21, by feasibility tests and elastic problems through cvxpy and Clarabel.
Both paths must name the same conflict set and the same relaxation options, of the same sizes, on
every infeasible case of the test suite and on the demo's infeasible scenario. The conflict sets
themselves are checked against their definition on a dense N×N formulation in test_conflict.py.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.construct import _diagnosis_ipm, build_problem, rebalance
from trimtab.errors import InfeasibleError

from .conftest import Fund, make_fund
from .test_conflict import achievable_te, edge_case, industry_model


def _holdings_over_the_cap() -> tuple[Fund, dict]:
    fund = make_fund(30, 3, seed=5)
    holdings = fund.holdings.copy()
    holdings.iloc[0] += 0.10
    holdings.iloc[1:] *= (1.0 - holdings.iloc[0]) / holdings.iloc[1:].sum()
    fund = Fund(fund.model, fund.benchmark, holdings, fund.alpha, fund.attributes)
    return fund, {"weight": {"max": holdings.iloc[0] - 0.08}, "turnover": {"max": 0.02}}


def _neutral_against_band() -> tuple[Fund, dict]:
    model, attributes = industry_model()
    bench = pd.Series(0.25, index=model.assets)
    fund = Fund(model, bench, bench.copy(), pd.Series(0.0, index=model.assets), attributes)
    return fund, {"fully_invested": True, "long_only": True, "factor_exposure": {"bounds": {"ind_a": [0.0, 0.0]}},
                  "group": {"by": "industry", "bounds": {"a": [0.1, 0.6], "b": [0.0, 1.0]}}}


def _te_below_reach() -> tuple[Fund, dict]:
    fund = make_fund(40, 4, seed=3, drift=0.6)
    others = {"fully_invested": True, "long_only": True, "weight": {"max": 0.08}, "turnover": {"max": 0.05}}
    return fund, {**others, "tracking_error": {"max": achievable_te(fund, others) - 0.001}}


CASES = {
    "te-cap-below-reach": _te_below_reach,
    "te-cap-of-zero": lambda: (make_fund(40, 4, seed=3, drift=0.6),
                               {"fully_invested": True, "long_only": True, "turnover": {"max": 0.05},
                                "tracking_error": {"max": 0.0}}),
    "caps-below-the-budget": lambda: (make_fund(40, 4, seed=4), {"fully_invested": True, "weight": {"max": 0.01}}),
    "neutral-factor-against-band": _neutral_against_band,
    "turnover-against-position-caps": _holdings_over_the_cap,
    "ipm-budget-against-caps": lambda: (make_fund(40, 4, seed=69),
                                        {"fully_invested": True, "long_only": True, "weight": {"max": 0.02}}),
    "te-and-turnover-with-every-limit": lambda: (make_fund(200, 6, seed=8, drift=0.6),
                                                 {"fully_invested": True, "long_only": True, "weight": {"max": 0.03},
                                                  "factor_exposure": {"active": True,
                                                                      "bounds": {"default": [-0.3, 0.3]}},
                                                  "group": {"by": "industry", "active": True,
                                                            "bounds": {"default": [-0.1, 0.1]}},
                                                  "turnover": {"max": 0.02}, "tracking_error": {"max": 0.004}}),
}


def _diagnosis(model, scenario: dict, kwargs: dict, solvers) -> InfeasibleError:
    with pytest.raises(InfeasibleError) as caught:
        rebalance(model, scenario, solvers=solvers, **kwargs)
    return caught.value


def assert_same_diagnosis(new: InfeasibleError, old: InfeasibleError) -> None:
    assert new.conflict == old.conflict
    assert str(new) == str(old)
    exact = ["option", "constraint", "kind", "side", "limit", "unit"]
    pd.testing.assert_frame_equal(new.relaxation[exact], old.relaxation[exact])
    # sizes from two solvers' optima: equal to their tolerances (Clarabel's 1e-8, FACTOR_IPM's 1e-9)
    np.testing.assert_allclose(new.relaxation["needed"], old.relaxation["needed"], rtol=1e-5, atol=1e-7)
    np.testing.assert_allclose(new.relaxation["relax_by"], old.relaxation["relax_by"], rtol=1e-4, atol=1e-7)


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
@pytest.mark.parametrize("objective", [{"minimize": "active_risk"},
                                       {"maximize": "utility", "risk_aversion": 2, "costs": {"spread": "spread"}}],
                         ids=["min-active-risk", "utility"])
def test_factor_form_and_cvxpy_give_the_same_diagnosis(case: str, objective: dict) -> None:
    fund, constraints = CASES[case]()
    scenario = {"objective": objective, "constraints": constraints}
    new = _diagnosis(fund.model, scenario, fund.kwargs(), None)
    old = _diagnosis(fund.model, scenario, fund.kwargs(), ["CLARABEL"])
    assert_same_diagnosis(new, old)


def test_the_edge_case_gets_the_same_diagnosis_both_ways() -> None:
    fund, constraints, objective = edge_case()
    scenario = {"objective": objective, "constraints": constraints}
    new = _diagnosis(fund.model, scenario, fund.kwargs(), None)
    old = _diagnosis(fund.model, scenario, fund.kwargs(), ["CLARABEL"])
    assert new.conflict == old.conflict
    exact = ["option", "constraint", "kind", "side", "limit", "unit"]
    pd.testing.assert_frame_equal(new.relaxation[exact], old.relaxation[exact])
    # 0.1% from the edge the sizes are small (a TE move of 6e-6): equal to the solvers' accuracy
    np.testing.assert_allclose(new.relaxation["relax_by"], old.relaxation["relax_by"], rtol=2e-3, atol=1e-8)


def test_the_demo_s_infeasible_scenario_gets_the_same_diagnosis_both_ways(tmp_path) -> None:
    from tests.demo_helpers import make_demo_folder
    from trimtab.scenario import load_inputs, load_scenario

    folder = make_demo_folder(tmp_path)
    scenario = load_scenario(folder / "infeasible.yaml")
    inputs = load_inputs(scenario)
    mapping = scenario.rebalance_mapping()
    new = _diagnosis(inputs.model, mapping, inputs.rebalance_kwargs(), None)
    old = _diagnosis(inputs.model, mapping, inputs.rebalance_kwargs(), ["CLARABEL"])
    assert "constraints.tracking_error.max" in new.conflict
    assert_same_diagnosis(new, old)


def test_feasibility_tests_in_factor_form_answer_both_ways() -> None:
    fund = make_fund(40, 4, seed=4)
    problem = build_problem(fund.model, {"objective": {"minimize": "active_risk"},
                                         "constraints": {"fully_invested": True, "weight": {"max": 0.01}}},
                            **fund.kwargs())
    rows = problem.all_rows()
    # 40 caps of 1% cannot hold a 100% budget (closed form: Σ caps = 40%); each limit alone can
    assert _diagnosis_ipm.feasible(problem, rows) is False
    for r in rows:
        assert _diagnosis_ipm.feasible(problem, [r]) is True
    # a scenario without FACTOR_IPM in its order is left to the cvxpy path
    clarabel = build_problem(fund.model, problem.spec, solvers=["CLARABEL"], **fund.kwargs())
    assert _diagnosis_ipm.feasible(clarabel, rows) is None


@pytest.mark.parametrize("objective", [{"minimize": "active_risk"},
                                       {"maximize": "utility", "risk_aversion": 2, "costs": {"spread": "spread"}}],
                         ids=["min-active-risk", "utility"])
def test_what_the_diagnosis_remembers_changes_no_answer(monkeypatch, objective: dict) -> None:
    """The diagnosis' memory (_diagnosis_memo: remembered points, infeasible row sets, one-limit
    elastic optima, nearest-point starts) only saves solves: with it switched off (each question
    solved afresh, as before it existed) every case names the same conflict set and relaxations,
    and over all cases the diagnosis takes fewer FACTOR_IPM iterations with it."""
    import contextlib

    from trimtab.construct import _diagnosis_memo, _ipm

    original = _ipm.solve
    iterations = [0]

    def counted(qp, **kwargs):
        solution = original(qp, **kwargs)
        iterations[0] += solution.iterations
        return solution

    monkeypatch.setattr(_ipm, "solve", counted)
    runs = [(fund, {"objective": objective, "constraints": constraints})
            for fund, constraints in (make() for make in CASES.values())]
    remembered = [_diagnosis(f.model, s, f.kwargs(), None) for f, s in runs]
    with_memory, iterations[0] = iterations[0], 0
    with monkeypatch.context() as m:
        m.setattr(_diagnosis_memo, "remembering", contextlib.nullcontext)
        afresh = [_diagnosis(f.model, s, f.kwargs(), None) for f, s in runs]
    assert _diagnosis_memo.current() is None
    for new, old in zip(remembered, afresh):
        assert_same_diagnosis(new, old)
    assert with_memory < iterations[0]
