"""Speed of sweeps and of one rebalance; prints figures, asserts nothing.

    python benchmarks/sweep_speed.py [--quick] [--points 50] [--scaling]

1. A sweep of ``--points`` tracking-error caps at N = 2,000, K = 30 (budget, 0 ≤ w ≤ 5 %, |active
   exposure| ≤ 0.1 on every factor, one-way turnover cap, TE cap), with the problem built once and
   re-solved per point (FACTOR_IPM, each point starting from the previous one), against (a) the
   same points each solved by a fresh cvxpy build, compiled each time and solved by Clarabel
   (``solvers=["CLARABEL"]``: the issue's baseline, "50 independent fresh solves (compile each
   time)"), and (b) the same points each a fresh trimtab rebalance (FACTOR_IPM from its cold
   start), all in one process. The target is ≥ 5× against (a). Figures are checked equal between
   the runs. A few points are also solved the straightforward way (cvxpy, exposure bounds on
   Bᵀ(w − b), |trade| epigraph, Clarabel defaults, compiled each time), and its time per point printed.
2. ``--scaling``: one rebalance (build, first solve, a what-if re-solve with new alpha) for
   N ∈ {1k, 5k, 20k} × K ∈ {20, 50, 100}, as a Markdown table (``--quick``: N ≤ 5k, K ≤ 50).

The instances are random and invented (seeded).
"""

from __future__ import annotations

import argparse
import functools
import os
import time
import warnings
from typing import Any

import numpy as np
import pandas as pd

from trimtab import FactorModel
from trimtab.construct import SOLVER_SETTINGS, build_problem


def random_model(n_assets: int, n_factors: int, seed: int = 0) -> FactorModel:
    """Market betas near 1 and standardised style exposures; factor vols 16 % (market) and 3–8 %
    (styles) a year with correlations from a random Cholesky factor; specific vols 20–45 % a year."""
    rng = np.random.default_rng(seed)
    names = pd.Index([f"S{i:06d}" for i in range(n_assets)])
    styles = [f"style_{k:03d}" for k in range(1, n_factors)]
    exposures = np.column_stack([rng.normal(1.0, 0.25, n_assets), rng.standard_normal((n_assets, n_factors - 1))])
    vols = np.r_[0.16, rng.uniform(0.03, 0.08, n_factors - 1)] / np.sqrt(252)
    root = np.tril(rng.normal(scale=0.15, size=(n_factors, n_factors)), -1) + np.eye(n_factors)
    corr = root @ root.T
    scale = 1.0 / np.sqrt(np.diag(corr))
    cov = (corr * np.outer(scale, scale)) * np.outer(vols, vols)
    specific = (rng.uniform(0.20, 0.45, n_assets) / np.sqrt(252)) ** 2
    factors = ["market", *styles]
    return FactorModel(
        pd.DataFrame(exposures, index=names, columns=factors),
        pd.DataFrame(cov, index=factors, columns=factors),
        pd.Series(specific, index=names),
    )


def instance(n_assets: int, n_factors: int, seed: int = 0) -> tuple[FactorModel, dict[str, Any], dict[str, pd.Series]]:
    """A model, the benchmark scenario of the optimizer's speed brief, and a book."""
    model = random_model(n_assets, n_factors, seed)
    rng = np.random.default_rng(seed + 1)
    bench = pd.Series(rng.dirichlet(np.ones(n_assets)), index=model.assets)
    holdings = pd.Series(rng.dirichlet(np.ones(n_assets)), index=model.assets)
    alpha = pd.Series(rng.normal(scale=0.02, size=n_assets), index=model.assets)
    scenario = {
        "objective": {"maximize": "alpha"},
        "constraints": {
            "fully_invested": True,
            "long_only": True,
            "weight": {"min": 0.0, "max": 0.05},
            "factor_exposure": {"active": True, "bounds": {f: [-0.1, 0.1] for f in model.factors}},
            "turnover": {"max": 0.3},
            "tracking_error": {"max": 0.03},
        },
    }
    return model, scenario, {"holdings": holdings, "benchmark": bench, "alpha": alpha}


def straightforward_solve(model: FactorModel, scenario: dict[str, Any], book: dict[str, pd.Series], cap: float) -> tuple[float, str]:
    """One point the straightforward way (compile everything each time): cvxpy in factor form with
    the exposure bounds written on Bᵀ(w − b) and the turnover on |w − w₀|, Clarabel defaults.
    Returns the expected active alpha αᵀ(w − b) and the solver status."""
    import cvxpy as cp

    B, d = model.exposures.to_numpy(), model.specific_variance.to_numpy()
    L = np.linalg.cholesky(model.factor_covariance.to_numpy())
    b, w0, alpha = (book[k].to_numpy() for k in ("benchmark", "holdings", "alpha"))
    limits = scenario["constraints"]
    w = cp.Variable(model.n_assets)
    active = w - b
    periods = model.periods_per_year
    constraints = [
        cp.sum(w) == 1,
        w >= 0,
        w <= limits["weight"]["max"],
        cp.abs(B.T @ active) <= 0.1,
        0.5 * cp.norm1(w - w0) <= limits["turnover"]["max"],
        periods * (cp.sum_squares(L.T @ (B.T @ active)) + cp.sum_squares(cp.multiply(np.sqrt(d), active))) <= cap**2,
    ]
    problem = cp.Problem(cp.Maximize(alpha @ w), constraints)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # "solution may be inaccurate": reported via the status
        problem.solve(solver=cp.CLARABEL)
    return float(alpha @ (w.value - b)), str(problem.status)


def sweep_benchmark(n_points: int, n_assets: int, n_factors: int, baseline_points: int) -> None:
    from trimtab.runs import sweep

    model, scenario, book = instance(n_assets, n_factors)
    caps = [float(x) for x in np.linspace(0.01, 0.05, n_points)]
    grid = {"tracking_error.max": caps}
    print(f"Load average before the run: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores; "
          f"OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS', 'unset')}; FACTOR_IPM blas_threads="
          f"{SOLVER_SETTINGS.get('FACTOR_IPM', {}).get('blas_threads')}")
    print(f"Sweep of {n_points} TE caps at N = {n_assets:,}, K = {n_factors} (one process)")
    sweep(model, scenario, {"tracking_error.max": caps[:1]}, **book)  # warm-up (imports, first compile), not timed
    start = time.perf_counter()
    reused = sweep(model, scenario, grid, **book)
    t_reuse = time.perf_counter() - start
    start = time.perf_counter()
    compiled = sweep(model, scenario, grid, reuse=False, build=functools.partial(build_problem, solvers=["CLARABEL"]),
                     **book)
    t_compiled = time.perf_counter() - start
    start = time.perf_counter()
    fresh = sweep(model, scenario, grid, reuse=False, **book)
    t_fresh = time.perf_counter() - start
    solved = ((reused.table["status"] == "solved") & (fresh.table["status"] == "solved")
              & (compiled.table["status"] == "solved"))

    def largest_gap(other: Any) -> float:
        diff = (reused.table.loc[solved, "expected_alpha"] - other.table.loc[solved, "expected_alpha"]).abs()
        return float(diff.max()) if solved.any() else float("nan")

    print(f"  built once, re-solved per point (FACTOR_IPM, warm) : {t_reuse:8.2f} s  ({t_reuse / n_points * 1e3:.0f} ms a point)")
    print(f"  (a) {n_points} fresh cvxpy builds, compiled, Clarabel : {t_compiled:8.2f} s  "
          f"({t_compiled / n_points * 1e3:.0f} ms a point)")
    print(f"  (b) {n_points} fresh trimtab rebalances (FACTOR_IPM)  : {t_fresh:8.2f} s  ({t_fresh / n_points * 1e3:.0f} ms a point)")
    print(f"  ratio (a) / re-solved : {t_compiled / t_reuse:8.2f}×   (target ≥ 5×: "
          f"{'met' if t_compiled / t_reuse >= 5 else 'NOT met'})")
    print(f"  ratio (b) / re-solved : {t_fresh / t_reuse:8.2f}×   (what the reuse and warm starts themselves save)")
    print(f"  points solved: {int(solved.sum())}/{n_points}; largest expected-alpha difference to (a) "
          f"{largest_gap(compiled):.2e}, to (b) {largest_gap(fresh):.2e}")
    if baseline_points:
        picked = caps[:: max(1, len(caps) // baseline_points)][:baseline_points]
        start = time.perf_counter()
        solved_points = [straightforward_solve(model, scenario, book, cap) for cap in picked]
        per_point = (time.perf_counter() - start) / len(picked)
        values = [v for v, _ in solved_points]
        statuses = sorted({status for _, status in solved_points})
        ours = reused.table["expected_alpha"].to_numpy()[[caps.index(c) for c in picked]]
        rel = float(np.max(np.abs(np.array(values) - ours) / np.abs(ours)))
        print(f"  straightforward cvxpy build, compiled each time: {per_point * 1e3:.0f} ms a point "
              f"(measured on {len(picked)} points, status {', '.join(statuses)}; objectives agree to {rel:.1e} relative)")
        print(f"  ratio straightforward / re-solved: {per_point * n_points / t_reuse:8.2f}×")


def one_rebalance(n_assets: int, n_factors: int) -> dict[str, float]:
    from trimtab.construct import build_problem

    model, scenario, book = instance(n_assets, n_factors, seed=n_assets + n_factors)
    start = time.perf_counter()
    problem = build_problem(model, scenario, **book)
    built = time.perf_counter() - start
    start = time.perf_counter()
    result = problem.solve()
    solved = time.perf_counter() - start
    new_alpha = book["alpha"] * 0.5 + 0.01 * np.random.default_rng(1).normal(size=n_assets)
    start = time.perf_counter()
    problem.solve(alpha=new_alpha)
    again = time.perf_counter() - start
    return {"build": built, "solve": solved, "re-solve": again, "status": str(getattr(result, "status", "?"))}


def scaling_table(quick: bool) -> None:
    sizes = [1_000, 5_000] if quick else [1_000, 5_000, 20_000]
    factors = [20, 50] if quick else [20, 50, 100]
    print("\nOne rebalance (budget, long-only, 0 ≤ w ≤ 5 %, |active exposure| ≤ 0.1, turnover, TE cap), seconds")
    print("| N | K | validate and build | first solve (incl. verification) | re-solve, new alpha | status |")
    print("|---:|---:|---:|---:|---:|---|")
    for n in sizes:
        for k in factors:
            row = one_rebalance(n, k)
            print(f"| {n:,} | {k} | {row['build']:.2f} | {row['solve']:.2f} | {row['re-solve']:.2f} | {row['status']} |", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="10 points; the scaling table up to N = 5k, K = 50")
    parser.add_argument("--points", type=int, default=50)
    parser.add_argument("--scaling", action="store_true", help="also print the one-rebalance table")
    parser.add_argument("--no-sweep", action="store_true", help="only the scaling table")
    parser.add_argument("--baseline-points", type=int, default=5,
                        help="points solved the straightforward way (0: skip); its time is per point")
    args = parser.parse_args()
    if not args.no_sweep:
        sweep_benchmark(10 if args.quick else args.points, 2_000, 30, min(args.baseline_points, 2) if args.quick else args.baseline_points)
    if args.scaling or args.no_sweep:
        scaling_table(args.quick)


if __name__ == "__main__":
    main()
