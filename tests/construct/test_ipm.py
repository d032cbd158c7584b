"""trimtab's factor-form interior-point method (FACTOR_IPM) against Clarabel and dense references,
and the hand-over to the cvxpy ladder for what it does not take or cannot solve."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.construct import _fast, _ipm, _ipm_newton, build_problem, rebalance
from trimtab.errors import InfeasibleError, SolverError

from ._dense import dense_feasible, dense_solve
from .conftest import make_fund
from .test_problem import every_constraint


def both(fund, scenario, **extra):
    kwargs = fund.kwargs() | extra
    ours = rebalance(fund.model, scenario, solvers=["FACTOR_IPM"], **kwargs)
    ref = rebalance(fund.model, scenario, solvers=["CLARABEL"], **kwargs)
    assert ours.solver == "FACTOR_IPM" and ref.solver == "CLARABEL"
    return ours, ref


@pytest.mark.parametrize("seed", [61, 62, 63])
def test_every_kind_with_impact_costs_matches_clarabel_and_dense(seed):
    # outside references: Clarabel through cvxpy (power cone for the impact term) and the dense
    # N×N formulation of tests/construct/_dense.py
    fund = make_fund(150, 8, seed=seed)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5, "cost_aversion": 1.5, "costs": True},
                "constraints": every_constraint(fund.model.assets)}
    ours, ref = both(fund, scenario)
    np.testing.assert_allclose(ours.weights.to_numpy(), ref.weights.to_numpy(), atol=1e-6)
    assert ours.objective["total"] == pytest.approx(ref.objective["total"], rel=1e-7, abs=1e-10)
    expected, value = dense_solve(fund.model, scenario, **fund.kwargs())
    np.testing.assert_allclose(ours.weights.to_numpy(), expected.to_numpy(), atol=1e-5)
    assert ours.verification["ok"].all()


def test_shadow_prices_agree_with_clarabel_on_binding_limits():
    fund = make_fund(200, 10, seed=64)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5, "costs": {"spread": "spread"}},
                "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.02},
                                "factor_exposure": {"active": True, "bounds": {"default": [-0.03, 0.03], "f1": [0, 0]}},
                                "group": {"by": "industry", "active": True, "bounds": {"default": [-0.01, 0.01]}},
                                "tracking_error": {"max": 0.015}, "turnover": {"max": 0.15}, "no_trade": ["A0007"]}}
    ours, ref = both(fund, scenario)
    a = ours.constraints.set_index("name")
    b = ref.constraints.set_index("name")
    # a frozen name sits at the kink of its trading cost: any dual in the subdifferential is valid for
    # Clarabel, while FACTOR_IPM reports the one-sided gain of loosening (here 0: the cost exceeds it)
    assert a.loc["no_trade", "shadow_price"] == 0.0
    binding = b.index[b["binding"] & (b["shadow_price"].abs() > 1e-6) & (b.index != "no_trade")]
    assert len(binding) >= 4, b
    for name in binding:
        assert a.loc[name, "shadow_price"] == pytest.approx(b.loc[name, "shadow_price"], rel=2e-4, abs=1e-7), name


@pytest.mark.parametrize("objective", [{"maximize": "alpha"}, {"minimize": "active_risk"}, {"minimize": "total_risk"}])
def test_other_objectives_match_clarabel(objective):
    fund = make_fund(120, 6, seed=65)
    constraints = {"fully_invested": True, "long_only": True, "weight": {"max": 0.04}, "tracking_error": {"max": 0.03},
                   "factor_risk": {"max": 0.025}, "specific_risk": {"max": 0.02}, "turnover": {"max": 0.3}}
    ours, ref = both(fund, {"objective": objective, "constraints": constraints})
    np.testing.assert_allclose(ours.weights.to_numpy(), ref.weights.to_numpy(), atol=2e-6)
    assert ours.objective["total"] == pytest.approx(ref.objective["total"], rel=1e-7, abs=1e-10)


def test_holdings_outside_their_bounds_are_traded_back_in():
    # w0 above the weight cap (a forced sale), below a must-hold floor, and frozen no-trade names:
    # the boxes on buys and sells then have positive lower bounds or zero width
    fund = make_fund(60, 4, seed=66)
    holdings = fund.holdings.copy()
    holdings.iloc[:3] = 0.08
    holdings.iloc[3] = 0.0
    holdings /= holdings.sum()
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.05},
                                "must_hold": {"assets": [fund.model.assets[3]], "min_weight": 0.01},
                                "no_trade": list(fund.model.assets[10:12]), "turnover": {"max": 0.4}}}
    ours, ref = both(fund, scenario, holdings=holdings)
    w = ours.weights.reindex(fund.model.assets).fillna(0.0)
    assert (w.iloc[:3] <= 0.05 + 1e-9).all() and w.iloc[3] >= 0.01 - 1e-9
    np.testing.assert_allclose(w.iloc[10:12].to_numpy(), holdings.iloc[10:12].to_numpy(), atol=1e-12)
    np.testing.assert_allclose(ours.weights.to_numpy(), ref.weights.to_numpy(), atol=1e-6)


def test_problems_outside_its_class_go_to_clarabel():
    fund = make_fund(60, 4, seed=67)
    soft = {"objective": {"maximize": "utility", "risk_aversion": 5},
            "constraints": {"fully_invested": True, "long_only": True,
                            "tracking_error": {"max": 0.01, "soft": {"penalty": 5.0}}}}
    gross = {"objective": {"maximize": "utility", "risk_aversion": 5},
             "constraints": {"fully_invested": True, "leverage": {"gross": 1.3}, "weight": {"min": -0.05, "max": 0.05}}}
    for scenario in (soft, gross):
        result = rebalance(fund.model, scenario, **fund.kwargs())
        assert result.solver == "CLARABEL"
        assert result.provenance["notes"] == []  # not an attempt: no "accepted after" note
    with pytest.raises(SolverError, match=r"FACTOR_IPM: not for soft constraint tracking_error"):
        rebalance(fund.model, soft, solvers=["FACTOR_IPM"], **fund.kwargs())


def test_a_run_that_does_not_converge_falls_back_with_a_note(monkeypatch):
    fund = make_fund(80, 4, seed=68)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.02}}}
    original = _ipm.solve

    def capped(qp, *, max_iter=3, verbose=False):
        return original(qp, max_iter=3, verbose=verbose)

    monkeypatch.setattr(_ipm, "solve", capped)
    result = rebalance(fund.model, scenario, **fund.kwargs())
    assert result.solver == "CLARABEL"
    assert result.provenance["attempts"][0].startswith("FACTOR_IPM: max_iter")
    assert result.provenance["notes"] == ["solver: accepted CLARABEL after FACTOR_IPM: max_iter"]


def test_infeasible_and_unbounded_problems_are_still_diagnosed():
    fund = make_fund(40, 4, seed=69)
    infeasible = {"objective": {"maximize": "utility", "risk_aversion": 5},
                  "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.02}}}
    with pytest.raises(InfeasibleError, match="fully_invested"):
        rebalance(fund.model, infeasible, **fund.kwargs())
    with pytest.raises(SolverError, match="unbounded"):
        rebalance(fund.model, {"objective": {"maximize": "alpha"}, "constraints": {"fully_invested": True}},
                  **fund.kwargs())


def _qp(fund, scenario):
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    return _fast.translate(problem, problem.all_rows()).qp


def _linear_farkas_bound(qp, sol):
    """min over the boxes of Σ y·g(x) for the linear rows, y the solution's row multipliers, written
    from the QP's data alone (Farkas' lemma over a box: a positive minimum proves no x holds every row)."""
    n = qp.n
    up, lo = sol.row_upper, sol.row_lower
    y = up - lo  # coefficient of each row's value
    a = qp.Aw + qp.Ay @ qp.B.T  # rows × N, the value's w-gradient
    coef_w = y @ a
    coef_t = float(y @ qp.at)
    cu, cv = coef_w + coef_t, -coef_w + coef_t  # on u and v, with w = w0 + u − v
    coef = np.concatenate([cu, cv])
    with np.errstate(invalid="ignore"):
        box = np.where(coef > 0, coef * qp.lb, np.where(coef < 0, coef * qp.ub, 0.0))
    limits = -np.where(up > 0, up * qp.hi, 0.0) + np.where(lo > 0, lo * qp.lo, 0.0)
    return float(y @ (qp.Aw @ qp.w0 + qp.Ay @ (qp.B.T @ qp.w0) + qp.const) + box.sum() + limits.sum())


def test_a_primal_infeasible_problem_stops_with_a_farkas_certificate():
    # #21: 40 names at most 2% each cannot hold 100% (closed form: Σ caps = 80%)
    fund = make_fund(40, 4, seed=69)
    qp = _qp(fund, {"objective": {"maximize": "utility", "risk_aversion": 5},
                    "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.02}}})
    sol = _ipm.solve(qp)
    assert sol.status == "infeasible" and not sol.converged
    assert sol.iterations < 30  # detected, not waited out to MAX_ITER
    # the multipliers it stopped with certify it, checked from the problem's data (outside the method)
    y_size = max(np.abs(sol.row_upper).max(), np.abs(sol.row_lower).max())
    assert _linear_farkas_bound(qp, sol) / y_size > 0.1  # the 20% shortfall, times the budget's multiplier


def test_a_te_cap_below_its_reach_is_certified_infeasible_early():
    fund = make_fund(60, 4, seed=3, drift=0.6)
    constraints = {"fully_invested": True, "long_only": True, "turnover": {"max": 0.05}, "tracking_error": {"max": 0.001}}
    # the outside reference: a dense N×N cvxpy formulation finds these limits infeasible
    assert not dense_feasible(fund.model, {"constraints": constraints}, holdings=fund.holdings,
                              benchmark=fund.benchmark, attributes=fund.attributes, nav=fund.nav)
    sol = _ipm.solve(_qp(fund, {"objective": {"minimize": "active_risk"}, "constraints": constraints}))
    assert sol.status == "infeasible" and sol.iterations < 40
    assert sol.cap_duals[0] > 0  # the cap takes part in the certificate


def test_the_same_limits_within_reach_are_never_called_infeasible():
    # on a feasible problem the Farkas bound cannot be positive (weak duality), at any iterate
    fund = make_fund(60, 4, seed=3, drift=0.6)
    constraints = {"fully_invested": True, "long_only": True, "turnover": {"max": 0.05}, "tracking_error": {"max": 0.2}}
    sol = _ipm.solve(_qp(fund, {"objective": {"minimize": "active_risk"}, "constraints": constraints}))
    assert sol.converged


def test_an_unbounded_objective_stops_with_a_ray():
    # maximise alpha with only the budget: w = w0 + t·d with Σd = 0 and αᵀd > 0 gains without bound
    fund = make_fund(40, 4, seed=69)
    qp = _qp(fund, {"objective": {"maximize": "alpha"}, "constraints": {"fully_invested": True}})
    sol = _ipm.solve(qp)
    assert sol.status == "unbounded" and not sol.converged and sol.iterations < _ipm.MAX_ITER
    d = qp.weights(sol.x) - qp.w0
    d /= np.abs(d).max()
    assert abs(d.sum()) < 1e-6  # keeps the budget
    assert qp.alpha @ d > 1e-3  # and raises expected alpha


@pytest.mark.parametrize("inside", [0, 3])
def test_the_newton_solve_matches_a_dense_solve(inside):
    # the Woodbury solve of [H Aᵀ; A 0] against numpy.linalg.solve on the same matrix formed densely;
    # with ``inside`` assets of tiny barrier terms, the solve that takes them out of Woodbury
    rng = np.random.default_rng(70)
    n, k = 30, 4
    B = rng.normal(size=(n, k))
    S = (lambda m: m @ m.T)(rng.normal(size=(k, k)))
    dW = rng.uniform(0.1, 1.0, n)
    barrier = rng.uniform(0.01, 10.0, 2 * n)
    dW[5:5 + inside] = 0.0
    barrier[5:5 + inside] = 1e-7
    fixed = np.zeros(2 * n, dtype=bool)
    fixed[[3, n + 7]] = True
    curvature = rng.uniform(0.0, 2.0, n)
    curvature[5:5 + inside] = 0.0
    newton = _ipm._Newton(B, dW, S, barrier, fixed, n, curvature)
    W, T = rng.normal(size=(n, 2)), rng.uniform(0.0, 1.0, 2)
    W_eq, T_eq = rng.normal(size=(n, 2)), np.array([0.0, 0.5])
    newton.factor(W, T, W_eq, T_eq)
    assert len(newton.split) == inside
    E = np.hstack([np.eye(n), -np.eye(n)])  # w = w0 + E·x
    H = E.T @ (np.diag(dW) + B @ S @ B.T) @ E + np.diag(barrier)
    one = np.ones(2 * n)
    H += np.kron(np.ones((2, 2)), np.diag(curvature))
    U = E.T @ W + np.outer(one, T)
    H += U @ U.T
    A = (E.T @ W_eq + np.outer(one, T_eq)).T
    free = ~fixed
    r1, r2 = rng.normal(size=2 * n), rng.normal(size=2)
    r1[fixed] = 0.0
    Hf = H[np.ix_(free, free)]
    Af = A[:, free]
    kkt = np.block([[Hf, Af.T], [Af, np.zeros((2, 2))]])
    expected = np.linalg.solve(kkt, np.concatenate([r1[free], r2]))
    dx, dnu = newton.solve(r1, r2)
    np.testing.assert_allclose(dx[free], expected[:-2], rtol=1e-9, atol=1e-11)
    np.testing.assert_allclose(dnu, expected[-2:], rtol=1e-9, atol=1e-11)
    assert (dx[fixed] == 0).all()


def _linear_end_game(seed, n=300, k=5, inside=8):
    """The Newton matrix of a linear-like problem near its end: no curvature, every coordinate at a
    bound (barrier ~1e8) but a few strictly inside their boxes (barrier 1e-8), heavy binding rows."""
    rng = np.random.default_rng(seed)
    B = rng.normal(size=(n, k))
    S = (lambda m: m @ m.T)(rng.normal(size=(k, k))) * 1e6
    barrier = 1e8 * rng.uniform(0.5, 2.0, 2 * n)
    interior = rng.choice(n, inside, replace=False)
    barrier[interior] = 1e-8
    fixed = np.zeros(2 * n, dtype=bool)
    fixed[n + interior[0]] = True
    W, T = rng.normal(size=(n, 2)) * 1e3, np.array([0.0, 1e4])
    W_eq, T_eq = np.ones((n, 1)), np.array([0.0])
    E = np.hstack([np.eye(n), -np.eye(n)])
    U = E.T @ W + np.outer(np.ones(2 * n), T)
    H = E.T @ (B @ S @ B.T) @ E + np.diag(barrier) + U @ U.T
    A = (E.T @ W_eq + np.outer(np.ones(2 * n), T_eq)).T
    free = ~fixed
    kkt = np.block([[H[np.ix_(free, free)], A[:, free].T], [A[:, free], np.zeros((1, 1))]])
    r1, r2 = rng.normal(size=2 * n), rng.normal(size=1)
    r1[fixed] = 0.0
    return (B, np.zeros(n), S, barrier, fixed, n, np.zeros(n)), (W, T, W_eq, T_eq), (r1, r2), kkt, free


@pytest.mark.parametrize("seed", [70, 73, 79])
def test_the_newton_solve_is_backward_stable_when_a_few_assets_sit_inside_their_boxes(seed, monkeypatch):
    # normwise backward error η = ‖K·x − b‖ / (‖K‖₂·‖x‖ + ‖b‖) (the Rigal–Gaches formula, as in
    # Higham's "Accuracy and Stability of Numerical Algorithms", ch. 7; cited from memory): a
    # backward-stable solve gives η near machine epsilon, as numpy.linalg.solve (LAPACK) does on the
    # same dense matrix
    args, columns, (r1, r2), kkt, free = _linear_end_game(seed)
    rhs = np.concatenate([r1[free], r2])

    def eta(solution):
        return np.linalg.norm(kkt @ solution - rhs) / (np.linalg.norm(kkt, 2) * np.linalg.norm(solution) + np.linalg.norm(rhs))

    def ours():
        newton = _ipm._Newton(*args)
        newton.factor(*columns)
        dx, dnu = newton.solve(r1, r2)
        return newton, np.concatenate([dx[free], dnu])

    reference = np.linalg.solve(kkt, rhs)
    newton, split = ours()
    assert len(newton.split) == 8  # the assets inside their boxes are solved densely
    assert eta(split) <= 1e-14 and eta(reference) <= 1e-14
    # Woodbury alone on the same matrix loses the solution to cancellation
    monkeypatch.setattr(_ipm_newton, "SPLIT_WEIGHT", np.inf)
    newton, woodbury = ours()
    assert len(newton.split) == 0
    assert eta(woodbury) > 1e-10


def test_solver_name_in_the_result_and_its_settings():
    fund = make_fund(40, 4, seed=71)
    result = rebalance(fund.model, {"objective": {"minimize": "active_risk"},
                                    "constraints": {"fully_invested": True, "long_only": True}}, **fund.kwargs())
    assert result.solver == "FACTOR_IPM"
    assert result.provenance["solver_settings"]["tol_gap"] == _ipm.TOL_GAP
    assert result.provenance["solver_settings"]["blas_threads"] == 1


def test_the_method_runs_with_the_blas_threads_of_its_settings(monkeypatch):
    from threadpoolctl import threadpool_info

    from trimtab.construct import SOLVER_SETTINGS

    fund = make_fund(40, 4, seed=71)
    scenario = {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True, "long_only": True}}
    seen = []
    original = _ipm.solve

    def recording(qp, **kwargs):
        seen.append({lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"})
        return original(qp, **kwargs)

    monkeypatch.setattr(_ipm, "solve", recording)
    rebalance(fund.model, scenario, **fund.kwargs())
    assert seen[-1] == {1}  # numpy's own BLAS is always there to limit
    before = {lib["num_threads"] for lib in threadpool_info() if lib["user_api"] == "blas"}
    monkeypatch.setitem(SOLVER_SETTINGS, "FACTOR_IPM", {"blas_threads": None})
    result = rebalance(fund.model, scenario, **fund.kwargs())
    assert seen[-1] == before  # None leaves the process's setting alone
    assert result.provenance["solver_settings"]["blas_threads"] is None
    assert str(result).startswith("Rebalance: optimal (FACTOR_IPM")
    assert isinstance(result.weights, pd.Series)


def test_re_solves_of_a_built_problem_use_it_too():
    fund = make_fund(60, 4, seed=72)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.02}}}
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    again = problem.solve(limits={"tracking_error.max": 0.01})
    assert again.solver == "FACTOR_IPM"
    te = again.constraints.set_index("name").loc["tracking_error"]
    assert te["value"] <= 0.01 * (1 + 1e-6) and te["binding"]


def test_warm_starts_follow_every_change_but_a_new_alpha(monkeypatch):
    fund = make_fund(60, 4, seed=73)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.02}}}
    problem = build_problem(fund.model, scenario, **fund.kwargs())
    problem.solve()
    assert problem.warm.state is not None
    assert problem.update(limits={"tracking_error.max": 0.015}).warm is problem.warm
    assert problem.update(risk_aversion=8.0).warm is problem.warm
    assert problem.update(holdings=fund.benchmark).warm is problem.warm
    assert problem.update(alpha=fund.alpha * 0.5).warm is not problem.warm
    # new holdings: the previous weights are re-expressed as trades from them, and the warm run
    # reaches the cold solve's answer
    runs = []
    original = _ipm.solve

    def recording(qp, **kwargs):
        solution = original(qp, **kwargs)
        runs.append((kwargs.get("warm") is not None, solution.converged))
        return solution

    monkeypatch.setattr(_ipm, "solve", recording)
    moved = problem.solve(holdings=fund.benchmark)
    assert runs == [(True, True)]
    fresh = rebalance(fund.model, scenario, **(fund.kwargs() | {"holdings": fund.benchmark}))
    # this warm run ends optimal_stalled (a zero step at μ ≈ 6e-12, the cap residual 5e-8 under
    # ACCEPT_PRIMAL 1e-7): the objective is the cold solve's to 1.6e-8, and a weight near its bound
    # 0, where the objective is flattest, is 5.8e-6 from Clarabel's at 1e-10 (the cold solve: 3.4e-7).
    # The acceptance rule promises the objective, so the weights are held to 1e-5 here; the run
    # reached 1e-6 until the Schur blocks were computed apart (#21), a change of rounding only
    # (half of the warm re-solves of a 30-point TE sweep end optimal_stalled, before and after it)
    reference = rebalance(fund.model, scenario, solvers=["CLARABEL"], **(fund.kwargs() | {"holdings": fund.benchmark}))
    np.testing.assert_allclose(fresh.weights.to_numpy(), reference.weights.to_numpy(), atol=1e-6)
    np.testing.assert_allclose(moved.weights.to_numpy(), reference.weights.to_numpy(), atol=1e-5)
    # the rule's promise is ~1e-6 of the objective; measured 1.6e-8 here (it was under 1e-8 before)
    assert moved.objective["total"] == pytest.approx(reference.objective["total"], rel=1e-7)
    assert fresh.objective["total"] == pytest.approx(reference.objective["total"], rel=1e-8)
    # a warm-started re-solve reaches the cold solve's answer
    warm = problem.solve(limits={"tracking_error.max": 0.015})
    cold = rebalance(fund.model, {**scenario, "constraints": {**scenario["constraints"], "tracking_error": {"max": 0.015}}},
                     **fund.kwargs())
    np.testing.assert_allclose(warm.weights.to_numpy(), cold.weights.to_numpy(), atol=1e-6)
    assert warm.objective["total"] == pytest.approx(cold.objective["total"], rel=1e-8)
