"""Solver order, fallback and the failure that names the breached constraint."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import _problem, _solve, rebalance
from trimtab.construct._solve import SOLVER_ORDER, solver_order
from trimtab.errors import InputError, SolverError

from .conftest import make_fund

SCENARIO = {"objective": {"minimize": "active_risk"},
            "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.06}}}


def test_default_order_is_clarabel_then_scs():
    assert SOLVER_ORDER == ("CLARABEL", "SCS")
    assert solver_order(None) == ("CLARABEL", "SCS")
    with pytest.raises(InputError, match=r"rebalance: solvers must name at least one solver"):
        solver_order([])


def test_clarabel_settings_exist_in_the_installed_clarabel():
    import clarabel

    settings = clarabel.DefaultSettings()
    for key in _solve.SOLVER_SETTINGS["CLARABEL"]:
        assert hasattr(settings, key), key


def test_clarabel_is_retried_with_equilibration(monkeypatch):
    fund = make_fund(30, 3, seed=91)
    monkeypatch.setitem(_solve.SOLVER_SETTINGS, "CLARABEL", {"max_iter": 2})
    result = rebalance(fund.model, SCENARIO, benchmark=fund.benchmark)
    assert result.solver == "CLARABEL"
    assert len(result.provenance["attempts"]) == 2
    assert result.provenance["solver_settings"]["equilibrate_enable"] is True


def test_falls_back_to_scs_when_clarabel_stops_early(monkeypatch):
    fund = make_fund(30, 3, seed=91)
    monkeypatch.setitem(_solve.SOLVER_SETTINGS, "CLARABEL", {"max_iter": 2})
    monkeypatch.setitem(_solve.RETRY_SETTINGS, "CLARABEL", {"max_iter": 2})
    result = rebalance(fund.model, SCENARIO, benchmark=fund.benchmark)
    assert result.solver == "SCS"
    assert [a.split(":")[0] for a in result.provenance["attempts"]] == ["CLARABEL", "CLARABEL", "SCS"]
    assert result.verification["ok"].all()


def test_breach_after_every_solver_names_the_constraint(monkeypatch):
    fund = make_fund(30, 3, seed=92)
    real = _solve.run

    def corrupt(problem, solver, settings=None):
        attempt = real(problem, solver, settings)
        w = next(v for v in problem.variables() if v.name() == "w")
        value = np.array(w.value)
        value[4] += 0.05  # push one asset over its 6% cap
        w.value = value
        return attempt

    monkeypatch.setattr(_problem._solve, "run", corrupt)
    with pytest.raises(SolverError, match=r"no solver returned verified weights: CLARABEL: .*weight\[A0004\] breached by 0\.0"):
        rebalance(fund.model, SCENARIO, benchmark=fund.benchmark)


def test_unbounded_objective_is_reported():
    fund = make_fund(20, 3, seed=93)
    with pytest.raises(SolverError, match=r"the objective alpha is unbounded under these constraints"):
        rebalance(fund.model, {"objective": {"maximize": "alpha"}, "constraints": {"fully_invested": True}},
                  alpha=fund.alpha)
