"""The rebalance with a hedge overlay (issue #23) against a dense cvxpy solve of the same problem, on
linearmodels' monthly French data (30 portfolios as assets, MktRF/SMB/HML/Mom as factors).

The reference builds Σ = B·F·Bᵀ + diag(d) densely (fine at N = 30) and writes the joint problem as
the docs state it: the risk rows and the objective read v = w + X·h, the cash rows read w."""

from __future__ import annotations

import cvxpy as cp
import numpy as np
import pandas as pd
import pytest

import trimtab
from trimtab import FactorModel, InputError

from ..hedge.test_overlay import baskets, book, french_data, model  # noqa: F401 (fixtures)


def _dense(model: FactorModel) -> np.ndarray:
    B, F, d = model._B, model._F, model._d
    return B @ F @ B.T + np.diag(d)


SCENARIO = {"objective": {"minimize": "active_risk"},
            "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.10}}}


def _reference(model, w0, b, X, *, turnover, te_max=None, max_gross=None, exposure=None):
    """min (v − b)ᵀΣ(v − b), v = w + Xh; Σw = 1, w ≥ 0, ½Σ|w − w0| ≤ turnover (dense Σ, cvxpy)."""
    S = _dense(model) * model.periods_per_year
    n, m = X.shape
    w, h = cp.Variable(n), cp.Variable(m)
    v = w + X @ h
    cons = [cp.sum(w) == 1, w >= 0, 0.5 * cp.norm1(w - w0) <= turnover]
    if te_max is not None:
        cons.append(cp.quad_form(v - b, cp.psd_wrap(S)) <= te_max**2)
    if max_gross is not None:
        cons.append(cp.norm1(h) <= max_gross)
    if exposure is not None:
        k, lo, hi = exposure
        e = model._B[:, k] @ (v - b)
        cons += [e >= lo, e <= hi]
    # the annualised variance is ~1e-4 here: scaled to ~1 and solved tightly, so the reference is
    # more exact than the tool's default tolerances and the comparison measures the tool
    prob = cp.Problem(cp.Minimize(1e4 * cp.quad_form(v - b, cp.psd_wrap(S))), cons)
    prob.solve(solver=cp.CLARABEL, tol_gap_abs=1e-12, tol_gap_rel=1e-12, tol_feas=1e-12)
    assert prob.status == cp.OPTIMAL
    return w.value, h.value


def test_joint_rebalance_matches_a_dense_cvxpy_solve(model, book):
    w0, b = book
    inst = baskets(model)
    overlay = {"instruments": inst, "max_gross": 0.5}
    result = trimtab.rebalance(model, SCENARIO, holdings=w0, benchmark=b, overlay=overlay)
    X = np.column_stack([inst[k].reindex(model.assets, fill_value=0.0).to_numpy() for k in inst])
    w_ref, h_ref = _reference(model, w0.to_numpy(), b.to_numpy(), X, turnover=0.10, max_gross=0.5)
    S = _dense(model) * model.periods_per_year
    f = lambda x: float((x - b.to_numpy()) @ S @ (x - b.to_numpy()))  # noqa: E731
    v, v_ref = result.weights.to_numpy() + X @ result.overlay.notional.to_numpy(), w_ref + X @ h_ref
    # the objective agrees to the solvers' gap tolerance (1e-10 absolute, docs/construction.md)
    assert f(v) == pytest.approx(f(v_ref), abs=2e-10)
    # f is strongly convex in v with modulus 2·λmin(S): at the constrained optimum v*,
    # f(v) − f(v*) ≥ λmin(S)·‖v − v*‖² (first-order optimality; Boyd & Vandenberghe 2004, §9.1.2),
    # so a gap of 2e-10 bounds ‖v − v*‖ by √(2e-10/λmin); here that is about 3.5e-4
    bound = np.sqrt(2e-10 / np.linalg.eigvalsh(S)[0])
    assert np.linalg.norm(v - v_ref) <= bound
    # w and h are pinned only through v and the cash rows: agreement at the same order
    np.testing.assert_allclose(result.weights.to_numpy(), w_ref, atol=bound)
    np.testing.assert_allclose(result.overlay.notional.to_numpy(), h_ref, atol=bound)
    assert result.solver != "FACTOR_IPM"
    assert result.verification["ok"].all()


def test_te_cap_that_binds_is_met_more_cheaply_with_the_overlay(model, book):
    # a book tilted to small caps (benchmark + 15% of the small-minus-big basket): its active risk is
    # mostly the size bet. Minimising spread costs under a 1% TE cap, the cash book alone must trade
    # stocks up to the cap; with the baskets the size bet is shorted instead (baskets trade at no
    # modelled cost here: the overlay's costs are charged, not optimised, docs/overlay.md)
    _, b = book
    inst = baskets(model)
    tilt = inst["size"].reindex(model.assets, fill_value=0.0)
    w0 = b + 0.15 * tilt
    assert (w0 >= 0).all() and w0.sum() == pytest.approx(1.0)
    attrs = pd.DataFrame({"spread": 0.002}, index=model.assets)
    scenario = {"objective": {"maximize": "alpha", "costs": {"spread": "spread"}},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.01}}}
    alpha = pd.Series(0.0, index=model.assets)
    plain = trimtab.rebalance(model, scenario, holdings=w0, benchmark=b, alpha=alpha, attributes=attrs)
    hedged = trimtab.rebalance(model, scenario, holdings=w0, benchmark=b, alpha=alpha, attributes=attrs,
                               overlay={"instruments": inst, "max_gross": 1.0})
    table = plain.constraints.set_index("name")
    assert table.loc["tracking_error", "binding"] and plain.turnover > 0.01
    assert -hedged.objective["costs"] < 0.1 * -plain.objective["costs"]
    assert hedged.turnover < 0.1 * plain.turnover
    te = hedged.overlay.figures
    assert te["hedged"]["tracking_error"] <= 0.01 * (1 + 1e-6)
    assert te["cash_book"]["tracking_error"] > 0.01  # the overlay carries the hedge
    # the hedged TE recomputed with a dense Σ (outside the factor form)
    S = _dense(model) * model.periods_per_year
    X = np.column_stack([inst[n].reindex(model.assets, fill_value=0.0).to_numpy() for n in inst])
    a = hedged.weights.to_numpy() + X @ hedged.overlay.notional.to_numpy() - b.to_numpy()
    assert np.sqrt(a @ S @ a) == pytest.approx(te["hedged"]["tracking_error"], rel=1e-10)


def test_exposure_bounds_read_the_hedged_book(model, book):
    w0, b = book
    k = list(model.factors).index("SMB")
    scenario = {"objective": {"minimize": "active_risk"},
                "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.02},
                                "factor_exposure": {"active": True, "bounds": {"SMB": [0.1, 0.1]}}}}
    inst = baskets(model)
    result = trimtab.rebalance(model, scenario, holdings=w0, benchmark=b, overlay={"instruments": inst})
    X = np.column_stack([inst[n].reindex(model.assets, fill_value=0.0).to_numpy() for n in inst])
    v = result.weights.to_numpy() + X @ result.overlay.notional.to_numpy()
    hedged_smb = float(model._B[:, k] @ (v - b.to_numpy()))
    assert hedged_smb == pytest.approx(0.1, abs=1e-7)
    assert result.overlay.exposures.loc["SMB", "hedged"] == pytest.approx(hedged_smb, abs=1e-12)
    cash_smb = float(model._B[:, k] @ (result.weights.to_numpy() - b.to_numpy()))
    assert abs(cash_smb - 0.1) > 1e-3  # the cash book alone does not meet the bound
    w_ref, h_ref = _reference(model, w0.to_numpy(), b.to_numpy(), X, turnover=0.02, exposure=(k, 0.1, 0.1))
    S = _dense(model) * model.periods_per_year
    np.testing.assert_allclose(v, w_ref + X @ h_ref, atol=np.sqrt(2e-10 / np.linalg.eigvalsh(S)[0]))


def test_overlay_is_exempt_from_budget_and_long_only(model, book):
    w0, b = book
    result = trimtab.rebalance(model, SCENARIO, holdings=w0, benchmark=b, overlay={"instruments": baskets(model)})
    # the cash rows read w alone, within the verification's tolerance (ABS_TOL = 1e-7, docs/construction.md)
    assert result.weights.sum() == pytest.approx(1.0, abs=1e-7)
    assert (result.weights >= -1e-7).all()
    assert abs(result.overlay.notional.sum()) > 1e-3  # while the overlay is outside the budget
    assert (result.overlay.notional < 0).any()  # a short hedge


@pytest.mark.parametrize(("overlay", "match"), [
    ({"instruments": {}}, "overlay.instruments"),
    ({"instruments": {"x": pd.Series({"nope": 1.0})}}, r"overlay.instruments.x: assets not in the risk model"),
    ({"instruments": {"x": pd.Series({"NoDur": 1.0})}, "max_gross": -1}, "overlay.max_gross"),
    ({"instruments": {"x": pd.Series({"NoDur": 1.0})}, "gross": 1}, r"unknown key\(s\) gross"),
    ({"instruments": {"x": pd.Series({"NoDur": 1.0})}, "notional": {"y": [0, 1]}}, "overlay.notional.y: unknown instrument"),
], ids=["empty", "unknown-asset", "negative-gross", "unknown-key", "unknown-notional"])
def test_bad_overlay_is_one_clear_error(model, book, overlay, match):
    w0, b = book
    with pytest.raises(InputError, match=match):
        trimtab.rebalance(model, SCENARIO, holdings=w0, benchmark=b, overlay=overlay)


def test_relaxation_measures_the_hedged_book(model, book):
    # an infeasible TE cap with an overlay: the relaxation's "needed" cap is measured on w + X·h of
    # the diagnosis's own solve, so the cap it names holds (and one just below it does not)
    _, b = book
    index = baskets(model)["index"]
    w0 = b + 0.15 * baskets(model)["size"].reindex(model.assets, fill_value=0.0)
    overlay = {"instruments": {"index": index}, "max_gross": 0.1}

    def scenario(te: float) -> dict:
        return {"objective": {"minimize": "active_risk"},
                "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.005},
                                "tracking_error": {"max": te}}}

    with pytest.raises(trimtab.InfeasibleError) as caught:
        trimtab.rebalance(model, scenario(0.001), holdings=w0, benchmark=b, overlay=overlay)
    table = caught.value.relaxation.set_index("constraint")
    needed = float(table.loc["constraints.tracking_error.max", "needed"])
    cash_only = trimtab.rebalance(model, scenario(1.0), holdings=w0, benchmark=b).ex_ante["tracking_error"]
    assert needed < cash_only - 1e-4  # the overlay lowers the reachable tracking error
    solved = trimtab.rebalance(model, scenario(needed * (1 + 1e-4)), holdings=w0, benchmark=b, overlay=overlay)
    assert solved.overlay.figures["hedged"]["tracking_error"] <= needed * (1 + 1e-4) * (1 + 1e-6)
    with pytest.raises(trimtab.InfeasibleError):
        trimtab.rebalance(model, scenario(needed * (1 - 1e-3)), holdings=w0, benchmark=b, overlay=overlay)


def test_notional_bounds_and_gross_cap_hold_and_are_rows_of_the_table(model, book):
    w0, b = book
    overlay = {"instruments": baskets(model), "max_gross": 0.04, "notional": {"index": [-0.01, 0.0]}}
    result = trimtab.rebalance(model, SCENARIO, holdings=w0, benchmark=b, overlay=overlay)
    h = result.overlay.notional
    assert -0.01 - 1e-7 <= h["index"] <= 1e-7
    assert h.abs().sum() <= 0.04 + 1e-7
    names = set(result.constraints["name"])
    assert {"overlay.max_gross", "overlay.notional[index]"} <= names
    checked = result.verification.set_index("name")
    assert checked.loc["overlay.max_gross", "ok"] and checked.loc["overlay.max_gross", "value"] == pytest.approx(h.abs().sum())
