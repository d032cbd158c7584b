"""A plain dense-covariance cvxpy formulation of the rebalance problem, written independently of
trimtab.construct (every constraint from its textbook definition on the N×N matrix Σ)."""

from __future__ import annotations

import cvxpy as cp
import numpy as np
import pandas as pd


def dense_constraints(model, scenario, *, holdings, benchmark, attributes=None, nav=None):
    """The variable w and every limit of the scenario's ``constraints`` on the dense Σ."""
    sigma = model.covariance().to_numpy()
    # dense square root: Σ = RᵀR with R the (N×N) Cholesky factor
    R = np.linalg.cholesky(sigma).T
    ppy = model.periods_per_year
    n = model.n_assets
    assets = model.assets
    w0 = holdings.reindex(assets).fillna(0.0).to_numpy()
    b = benchmark.reindex(assets).fillna(0.0).to_numpy() if benchmark is not None else np.zeros(n)
    B = model.exposures.to_numpy()
    w = cp.Variable(n)
    t = w - w0
    act = w - b
    cons = []
    c = scenario.get("constraints", {})
    if c.get("fully_invested"):
        cons.append(cp.sum(w) == 1)
    if "cash" in c:
        cash = 1 - cp.sum(w)
        cons += [cash >= c["cash"]["min"], cash <= c["cash"]["max"]]
    if c.get("long_only"):
        cons.append(w >= 0)
    if "leverage" in c:
        lev = c["leverage"]
        cons.append(cp.norm1(w) <= lev["gross"])
        cons += [cp.sum(w) >= lev["net"][0], cp.sum(w) <= lev["net"][1]]
        cons.append(cp.sum(cp.neg(w)) <= lev["short"])
    for key, value in (("weight", w), ("active_weight", act), ("trade", t)):
        if key in c:
            if c[key].get("min") is not None:
                cons.append(value >= c[key]["min"])
            if c[key].get("max") is not None:
                cons.append(value <= c[key]["max"])
    if "group" in c:
        g = c["group"]
        labels = attributes[g["by"]].reindex(assets)
        for label in sorted(labels.unique()):
            band = g["bounds"].get(label, g["bounds"].get("default"))
            if band is None:
                continue
            lo, hi = band
            member = (labels == label).to_numpy().astype(float)
            value = member @ (act if g.get("active") else w)
            cons += [value >= lo, value <= hi]
    if "factor_exposure" in c:
        fe = c["factor_exposure"]
        x = B.T @ (act if fe.get("active") else w)
        for k, name in enumerate(model.factors):
            bounds = fe["bounds"].get(name, fe["bounds"].get("default"))
            if bounds is not None:
                cons += [x[k] >= bounds[0], x[k] <= bounds[1]]
    if "stress_loss" in c:
        # the full move by dense Gaussian conditioning, m_U = F_US·inv(F_SS)·s, written here with
        # an explicit inverse (not trimtab's Cholesky solve); loss −(B·m)ᵀ(w − b) or −(B·m)ᵀw
        sl = c["stress_loss"]
        Fm = model.factor_covariance.to_numpy()
        names = list(model.factors)
        for shock in sl["shocks"].values():
            S = [names.index(k) for k in shock["factors"]]
            U = [k for k in range(len(names)) if k not in S]
            m = np.zeros(len(names))
            m[S] = list(shock["factors"].values())
            if sl.get("conditional", True) and U:
                m[U] = Fm[np.ix_(U, S)] @ np.linalg.inv(Fm[np.ix_(S, S)]) @ m[S]
            cons.append(-(B @ m) @ (act if sl.get("active", True) else w) <= sl["max"])
    if "beta" in c:
        sb = sigma @ b
        beta = sb @ w / (b @ sb)
        cons += [beta >= c["beta"]["min"], beta <= c["beta"]["max"]]
    if "tracking_error" in c:
        cons.append(np.sqrt(ppy) * cp.norm(R @ act) <= c["tracking_error"]["max"])
    if "total_risk" in c:
        cons.append(np.sqrt(ppy) * cp.norm(R @ w) <= c["total_risk"]["max"])
    F = model.factor_covariance.to_numpy()
    d = model.specific_variance.to_numpy()
    if "factor_risk" in c:
        cons.append(np.sqrt(ppy) * cp.norm(np.linalg.cholesky(F).T @ (B.T @ act)) <= c["factor_risk"]["max"])
    if "specific_risk" in c:
        cons.append(np.sqrt(ppy) * cp.norm(cp.multiply(np.sqrt(d), act)) <= c["specific_risk"]["max"])
    if "turnover" in c:
        cons.append(0.5 * cp.norm1(t) <= c["turnover"]["max"])
    if "liquidity" in c:
        liq = c["liquidity"]
        cap = liq["max_adv_fraction"] * liq.get("days", 1) * attributes["adv"].to_numpy() * attributes["price"].to_numpy() / nav
        cons.append(cp.abs(t) <= cap)
    pos = {x: i for i, x in enumerate(assets)}
    for key in ("no_buy", "no_sell", "no_trade"):
        for asset in c.get(key, []):
            i = pos[asset]
            if key != "no_sell":
                cons.append(t[i] <= 0)
            if key != "no_buy":
                cons.append(t[i] >= 0)
    if "must_hold" in c:
        for asset in c["must_hold"]["assets"]:
            cons.append(w[pos[asset]] >= c["must_hold"]["min_weight"])
    return w, cons, (R, ppy, n, assets, t, act)


def dense_feasible(model, scenario, *, holdings, benchmark, attributes=None, nav=None):
    """Whether the scenario's limits can all hold (Clarabel on the dense formulation, no objective)."""
    _, cons, _ = dense_constraints(model, scenario, holdings=holdings, benchmark=benchmark, attributes=attributes, nav=nav)
    problem = cp.Problem(cp.Minimize(0), cons)
    problem.solve(solver="CLARABEL", tol_feas=1e-10, tol_gap_abs=1e-10, tol_gap_rel=1e-10)
    assert problem.status in ("optimal", "infeasible"), problem.status
    return problem.status == "optimal"


def dense_solve(model, scenario, *, holdings, benchmark, alpha, attributes=None, nav=None):
    """Maximise the same objective under the same limits, written on Σ = BFBᵀ + diag(d) directly."""
    w, cons, parts = dense_constraints(model, scenario, holdings=holdings, benchmark=benchmark,
                                       attributes=attributes, nav=nav)
    R, ppy, n, assets, t, act = parts
    a = alpha.reindex(assets).fillna(0.0).to_numpy() if alpha is not None else np.zeros(n)
    o = scenario["objective"]
    goal = a @ act - o.get("risk_aversion", 0.0) * ppy * cp.sum_squares(R @ act)
    if o.get("costs"):
        rate = attributes["spread"].to_numpy() / 2 + attributes["commission"].to_numpy()
        # |t|^{3/2} ≤ z as the power cone z^{2/3}·1^{1/3} ≥ |t| (cvxpy's power() atom ends inaccurate here)
        z = cp.Variable(n)
        cons.append(cp.PowCone3D(z, np.ones(n), t, 2.0 / 3.0))
        goal -= o.get("cost_aversion", 1.0) * (rate @ cp.abs(t) + attributes["impact"].to_numpy() @ z)
    problem = cp.Problem(cp.Maximize(goal), cons)
    problem.solve(solver="CLARABEL", tol_feas=1e-10, tol_gap_abs=1e-10, tol_gap_rel=1e-10)
    assert problem.status == "optimal", problem.status
    return pd.Series(w.value, index=assets), float(problem.value)
