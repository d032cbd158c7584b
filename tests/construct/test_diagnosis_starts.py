"""The shortcuts that keep an infeasible what-if near the time of a feasible one (#21), each checked
by switching it off: the diagnosis must then name the same conflict set and the same relaxations.

- the elastic problems start from FACTOR_IPM's certifying iterate with their slacks covering what it
  breaches (``_elastic_ipm._phase_one_start``), and price a cap's slack at that start;
- a cap's slack stops being re-priced once it alone moved (``_elastic_ipm._only_one_cap_moved``:
  the multipliers scale with its price, so the point is the majorise–minimise fixed point);
- a cap with a slack column has that column raised by the breach a step's curvature leaves
  (``_ipm._Run._cover_with_slack_columns``), so a tight cap's elastic problem converges in factor
  form instead of stalling and falling back to cvxpy.
"""

from __future__ import annotations

import pytest

from trimtab.construct import _elastic_ipm, _ipm, _solve

from .conftest import make_fund
from .test_conflict import achievable_te
from .test_diagnosis_ipm import CASES, _diagnosis, assert_same_diagnosis

OBJECTIVES = [{"minimize": "active_risk"},
              {"maximize": "utility", "risk_aversion": 2, "costs": {"spread": "spread"}}]


def _all_cases(objective: dict) -> list:
    runs = [(fund, {"objective": objective, "constraints": constraints})
            for fund, constraints in (make() for make in CASES.values())]
    return [_diagnosis(f.model, s, f.kwargs(), None) for f, s in runs]


@pytest.mark.parametrize("objective", OBJECTIVES, ids=["min-active-risk", "utility"])
def test_starting_from_the_certificate_changes_no_answer(monkeypatch, objective: dict) -> None:
    with_start = _all_cases(objective)
    monkeypatch.setattr(_elastic_ipm, "_phase_one_start", lambda *args: None)
    for new, old in zip(with_start, _all_cases(objective)):
        assert_same_diagnosis(new, old)


@pytest.mark.parametrize("objective", OBJECTIVES, ids=["min-active-risk", "utility"])
def test_stopping_the_repricing_early_changes_no_answer(monkeypatch, objective: dict) -> None:
    calls = []
    original = _elastic_ipm._only_one_cap_moved

    def spied(*args):
        answer = original(*args)
        calls.append(answer)
        return answer

    monkeypatch.setattr(_elastic_ipm, "_only_one_cap_moved", spied)
    early = _all_cases(objective)
    assert any(calls), "no case stopped early: the shortcut is not exercised"
    monkeypatch.setattr(_elastic_ipm, "_only_one_cap_moved", lambda *args: False)
    for new, old in zip(early, _all_cases(objective)):
        assert_same_diagnosis(new, old)


def test_only_one_cap_moved_reads_the_slack_columns() -> None:
    import numpy as np

    caps = [(5, 1.0, 0.01)]
    w = np.array([0.2, 0.3, 0.5, 0.0, 0.0, 0.4])  # 3 assets, linear slacks at 3 and 4, the cap's at 5
    alpha = np.zeros(6)
    alpha[5] = -0.005  # σ priced at the tangent at σ = 0: 1 × 0.01 / 2
    assert _elastic_ipm._only_one_cap_moved(w, caps, 3, alpha)
    w[3] = 1e-4  # a linear limit moved too: its price is then a multiplier, and σ's re-pricing matters
    assert not _elastic_ipm._only_one_cap_moved(w, caps, 3, alpha)
    w[3], w[5] = 0.0, 0.0  # nothing moved
    assert not _elastic_ipm._only_one_cap_moved(w, caps, 3, alpha)
    # σ = 0.4 is priced next at 1 × 0.01 / (2√1.4) = 0.004226: settled when the run priced it at
    # least that high (a tangent at a smaller σ), not when it priced it lower (a start beyond 0.4)
    w[5] = 0.4
    assert _elastic_ipm._only_one_cap_moved(w, caps, 3, alpha)
    alpha[5] = -0.004
    assert not _elastic_ipm._only_one_cap_moved(w, caps, 3, alpha)


def test_a_tight_cap_is_diagnosed_in_factor_form(monkeypatch) -> None:
    """A TE cap well below reach with a tight turnover cap: every elastic problem and feasibility test
    is answered by FACTOR_IPM, no cvxpy solve is made, and the answer is the cvxpy path's."""
    fund = make_fund(400, 8, seed=11, drift=0.6)
    others = {"fully_invested": True, "long_only": True, "weight": {"max": 0.05},
              "factor_exposure": {"active": True, "bounds": {"default": [-0.3, 0.3]}}, "turnover": {"max": 0.02}}
    scenario = {"objective": {"minimize": "active_risk"},
                "constraints": {**others, "tracking_error": {"max": 0.2 * achievable_te(fund, others)}}}
    cvxpy_calls = []
    original = _solve.run
    monkeypatch.setattr(_solve, "run", lambda *args, **kw: cvxpy_calls.append(args[1]) or original(*args, **kw))
    new = _diagnosis(fund.model, scenario, fund.kwargs(), None)
    assert cvxpy_calls == []  # before #21's last pass: one elastic problem stalled twice and went to Clarabel
    assert "constraints.tracking_error.max" in new.conflict
    monkeypatch.setattr(_solve, "run", original)
    assert_same_diagnosis(new, _diagnosis(fund.model, scenario, fund.kwargs(), ["CLARABEL"]))


def test_a_cap_s_slack_column_covers_what_a_step_leaves(monkeypatch) -> None:
    """In an elastic problem whose TE cap may move, every iterate after a step holds the cap to its
    slack exactly (the cover raises σ by the breach), and the run converges (without the cover this
    one stalls, and at 5,000 × 50 the run stalled at a cap residual of 7.8e-4)."""
    import numpy as np

    from trimtab.construct import _fast, build_problem

    fund = make_fund(400, 8, seed=11, drift=0.6)
    others = {"fully_invested": True, "long_only": True, "weight": {"max": 0.05}, "turnover": {"max": 0.02}}
    scenario = {"objective": {"minimize": "active_risk"},
                "constraints": {**others, "tracking_error": {"max": 0.2 * achievable_te(fund, others)}}}
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    rows = [r for r in problem.all_rows() if r.soft is None]
    tr = _fast.translate(problem, rows)
    cap_rows = [r for r, _ in tr.cap_rows]
    movable = {id(cap_rows[0]): (np.ones(1, dtype=bool), 1.0)}
    qp, _, caps = _elastic_ipm._with_slacks(tr, movable)
    assert caps, "the TE cap got no slack column"

    residuals = []
    original = _ipm._Run.iterate

    def watched(self):
        step = original(self)
        residuals.append(float(np.max(self.h[self.m_lin:] + self.s[self.m_lin:])))
        return step

    monkeypatch.setattr(_ipm._Run, "iterate", watched)
    covered = _ipm.solve(qp)
    assert covered.converged
    assert max(residuals) <= 1e-12 * max(1.0, max(abs(r) for r in residuals))
    residuals.clear()
    monkeypatch.setattr(_ipm._Run, "_cover_with_slack_columns", lambda self: None)
    bare = _ipm.solve(qp)
    assert max(residuals) > 1e-6  # without it a step leaves the cap breached beyond its slack
    # the optimum is the elastic problem's: no more than the run without the cover reached, which on
    # this case stops short of converging (measured: stalled)
    assert covered.objective <= bare.objective + 1e-9 * max(1.0, abs(bare.objective))
