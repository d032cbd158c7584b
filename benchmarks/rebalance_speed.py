"""Speed of one rebalance against the straightforward cvxpy build; prints figures, asserts nothing.

    python benchmarks/rebalance_speed.py [--quick] [--sizes 5000x50,20000x100] [--repeats 3]
                                         [--no-profile] [--no-prototype] [--no-settings] [--dpp] [--grid] [--timers] [--trimtab-only]

For each size N×K (default 5,000×50), on a seeded random instance (benchmarks/_instances.py:
fully invested, 0 ≤ w ≤ 5 %, |active exposure| ≤ 0.1 on every factor, one-way turnover cap,
linear costs, tracking-error cap, utility objective), medians of ``--repeats`` runs in one process:

1. the straightforward cvxpy build written here (factor form, but ``abs(Bᵀ(w − b)) ≤ 0.1``
   written directly, ``abs(w − w0)`` for turnover and costs, Clarabel with its default settings);
2. ``trimtab.construct.rebalance`` end to end (validation, build, solve, verification, result),
   with the stages split: cvxpy build, cvxpy compile, Clarabel, and everything else;
3. what-if re-solves through ``build_problem(...).solve(alpha=... | limits=... | holdings=...)``
   against a fresh ``rebalance`` of the same changed inputs;
4. a PROTOTYPE (not trimtab code): the same problem handed to Clarabel's own API with matrices built
   here by hand (y = Bᵀw as variables, w = w0 + buy − sell, TE as one cone over [Lᵀy; √d∘(w − b)]),
   with trimtab's Clarabel settings, plus a re-solve that only updates the vectors q and b;
5. trimtab's rebalance under variants of Clarabel's settings (SOLVER_SETTINGS changed in this
   process only), ``--dpp``: the lean build with cvxpy Parameters, and a cProfile breakdown;
   ``--timers``: only Clarabel's own timers for the prototype; ``--trimtab-only``: only trimtab's
   rebalance (FACTOR_IPM limits itself to SOLVER_SETTINGS['FACTOR_IPM']['blas_threads'], one by
   default; set that to None and run with and without OPENBLAS_NUM_THREADS=1 to see what BLAS threads cost).

Every objective is recomputed from the returned w with plain numpy and every limit is checked from
w (max breach printed). ``--grid`` prints the N ∈ {1k, 5k, 20k} × K ∈ {20, 50, 100} table of
trimtab's rebalance and the prototype (one run a cell). The machine's load average is printed
first: on shared cores, compare CPU seconds as well as wall time. Targets (from the optimizer's issue): N = 5,000 / K = 50 end
to end ≤ 0.6 s and ≥ 15× the straightforward build; a re-solve no slower than a fresh solve.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import statistics
import sys
import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any

import clarabel
import cvxpy as cp
import numpy as np
import pandas as pd
import scipy.sparse as sp

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _instances import PERIODS_PER_YEAR, SpeedInstance, speed_instance  # noqa: E402

from trimtab.construct import SOLVER_SETTINGS, build_problem, rebalance  # noqa: E402
from trimtab.construct import _solve  # noqa: E402  (instrumented below, read-only)

END_TO_END_TARGET = 0.6
RATIO_TARGET = 15.0


# ---------------------------------------------------------------------- numpy checks, from w only
def utility(inst: SpeedInstance, w: np.ndarray) -> float:
    """U = αᵀ(w − b) − λ·ppy·(‖Lᵀ Bᵀ(w − b)‖² + Σ dᵢ(wᵢ − bᵢ)²) − κ·Σ costᵢ·|wᵢ − w0ᵢ|."""
    x = inst.arrays()
    a = w - x["b"]
    f = x["L"].T @ (x["B"].T @ a)
    variance = f @ f + x["d"] @ (a * a)
    return float(x["alpha"] @ a - inst.risk_aversion * PERIODS_PER_YEAR * variance
                 - inst.cost_aversion * x["cost"] @ np.abs(w - x["w0"]))


def breaches(inst: SpeedInstance, w: np.ndarray, tracking_error_max: float | None = None) -> dict[str, float]:
    """How far w lies outside each limit (0 inside), in the limit's own unit."""
    x = inst.arrays()
    te_max = inst.tracking_error_max if tracking_error_max is None else tracking_error_max
    a = w - x["b"]
    f = x["L"].T @ (x["B"].T @ a)
    te = np.sqrt(PERIODS_PER_YEAR * (f @ f + x["d"] @ (a * a)))
    return {
        "budget": abs(w.sum() - 1.0),
        "w >= 0": max(0.0, float(-w.min())),
        "w <= max": max(0.0, float((w - inst.weight_max).max())),
        "exposure": max(0.0, float((np.abs(x["B"].T @ a) - inst.exposure_max).max())),
        "turnover": max(0.0, 0.5 * float(np.abs(w - x["w0"]).sum()) - inst.turnover_max),
        "tracking error": max(0.0, float(te) - te_max),
    }


def worst(b: dict[str, float]) -> str:
    name = max(b, key=lambda k: b[k])
    return f"{b[name]:.1e} ({name})" if b[name] > 0 else "0"


# ---------------------------------------------------------------------- timing helpers
@dataclass
class Run:
    """One solve: stage seconds, iterations, weights and the numpy objective."""

    stages: dict[str, float]
    total: float
    iterations: int
    weights: np.ndarray
    status: str = "optimal"
    extra: dict[str, Any] = field(default_factory=dict)
    cpu: float = float("nan")


def timed_cpu(fn: Callable[[], Run]) -> Run:
    """fn() with this process's CPU seconds attached (steadier than wall time on a shared machine)."""
    start = time.process_time()
    run = fn()
    return replace(run, cpu=time.process_time() - start)


def median_run(fn: Callable[[], Run], repeats: int) -> Run:
    runs = [timed_cpu(fn) for _ in range(repeats)]
    mid = statistics.median(r.total for r in runs)
    chosen = min(runs, key=lambda r: abs(r.total - mid))
    stages = {k: statistics.median(r.stages[k] for r in runs) for k in chosen.stages}
    return replace(chosen, stages=stages, total=mid, cpu=statistics.median(r.cpu for r in runs))


class SolveProbe:
    """Wraps trimtab's solver call to read cvxpy's compile time and Clarabel's own time (measurement only)."""

    def __init__(self) -> None:
        self.original = _solve.run
        self.records: list[tuple[float, float]] = []

    def __enter__(self) -> SolveProbe:
        def run(problem: cp.Problem, solver: str, *args: Any, **kwargs: Any) -> Any:
            attempt = self.original(problem, solver, *args, **kwargs)
            stats = problem.solver_stats
            self.records.append((float(problem.compilation_time or 0.0),
                                 float(getattr(stats, "solve_time", 0.0) or 0.0)))
            return attempt

        _solve.run = run
        return self

    def __exit__(self, *exc: Any) -> None:
        _solve.run = self.original


# ---------------------------------------------------------------------- 1. the straightforward build
def straightforward_problem(inst: SpeedInstance) -> tuple[cp.Problem, cp.Variable]:
    """Factor form written the obvious way."""
    x = inst.arrays()
    B, L, d, b, w0 = x["B"], x["L"], x["d"], x["b"], x["w0"]
    w = cp.Variable(len(b))
    risk = cp.sum_squares(L.T @ (B.T @ (w - b))) + cp.sum_squares(cp.multiply(np.sqrt(d), w - b))
    goal = (x["alpha"] @ (w - b) - inst.risk_aversion * PERIODS_PER_YEAR * risk
            - inst.cost_aversion * x["cost"] @ cp.abs(w - w0))
    constraints = [
        cp.sum(w) == 1,
        w >= 0,
        w <= inst.weight_max,
        cp.abs(B.T @ (w - b)) <= inst.exposure_max,
        0.5 * cp.sum(cp.abs(w - w0)) <= inst.turnover_max,
        risk <= inst.tracking_error_max**2 / PERIODS_PER_YEAR,
    ]
    return cp.Problem(cp.Maximize(goal), constraints), w


def straightforward(inst: SpeedInstance, settings: dict[str, Any] | None = None) -> Run:
    """The straightforward build solved by Clarabel with its default settings (or ``settings``)."""
    start = time.perf_counter()
    problem, w = straightforward_problem(inst)
    built = time.perf_counter() - start
    start = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # the status is printed instead
        problem.solve(solver=cp.CLARABEL, **(settings or {}))
    solved = time.perf_counter() - start
    compile_time = float(problem.compilation_time or 0.0)
    clarabel_time = float(problem.solver_stats.solve_time or 0.0)
    stages = {"build": built, "compile": compile_time, "clarabel": clarabel_time,
              "other": solved - compile_time - clarabel_time}
    return Run(stages, built + solved, int(problem.solver_stats.num_iters or 0),
               np.asarray(w.value, dtype=np.float64), str(problem.status))


def problem_sizes(inst: SpeedInstance) -> dict[str, tuple[int, int, int]]:
    """(variables, constraint rows, nonzeros of A) after cvxpy's compile, and of the prototype."""
    out = {}
    trimtab_problem = build_problem(inst.model, inst.scenario(), **inst.book()).build()[0]
    for label, problem in (("straightforward", straightforward_problem(inst)[0]), ("trimtab", trimtab_problem)):
        data = problem.get_problem_data(cp.CLARABEL)[0]
        out[label] = (data["A"].shape[1], data["A"].shape[0], data["A"].nnz)
    direct = DirectPrototype(inst)
    out["prototype"] = (direct.A.shape[1], direct.A.shape[0], direct.A.nnz)
    return out


# ---------------------------------------------------------------------- 2. trimtab end to end
def trimtab_rebalance(inst: SpeedInstance, scenario: dict[str, Any] | None = None,
                      solvers: list[str] | None = None, **book: Any) -> Run:
    """``rebalance`` end to end; stages: build (translation or cvxpy build), compile, solver, other."""
    kwargs = {**inst.book(), **book}
    with SolveProbe() as probe:
        start = time.perf_counter()
        result = rebalance(inst.model, scenario or inst.scenario(), solvers=solvers, **kwargs)
        total = time.perf_counter() - start
    compile_time, clarabel_time = (sum(r[i] for r in probe.records) for i in (0, 1))
    solver_time = clarabel_time if result.solver != "FACTOR_IPM" else result.solve_time
    stages = {
        "build": result.build_time,
        "compile": compile_time,
        "solver": solver_time,
        "clarabel": clarabel_time,
        "other": total - result.build_time - compile_time - solver_time,
    }
    attempts = result.provenance["attempts"]
    status = f"{result.status} ({result.solver}" + (f", {len(attempts)} attempts)" if len(attempts) > 1 else ")")
    return Run(stages, total, result.iterations, result.weights.to_numpy(), status, {"attempts": attempts})


def what_if(inst: SpeedInstance, repeats: int) -> list[tuple[str, float, float, float, str]]:
    """(change, re-solve s, fresh s, |ΔU| between them, worst breach of the re-solve)."""
    rng = np.random.default_rng(7)
    new_alpha = inst.alpha * 0.5 + pd.Series(rng.normal(0, 0.01, len(inst.alpha)), index=inst.alpha.index)
    shift = inst.holdings * rng.uniform(0.9, 1.1, len(inst.holdings))
    new_holdings = shift / shift.sum()
    te_new = 0.8 * inst.tracking_error_max
    cases: list[tuple[str, dict[str, Any], SpeedInstance]] = [
        ("new alpha", {"alpha": new_alpha}, replace(inst, alpha=new_alpha)),
        (f"TE cap {inst.tracking_error_max:.0%} → {te_new:.1%}", {"limits": {"tracking_error.max": te_new}},
         replace(inst, tracking_error_max=te_new)),
        ("new holdings", {"holdings": new_holdings}, replace(inst, holdings=new_holdings)),
    ]
    problem = build_problem(inst.model, inst.scenario(), **inst.book())
    problem.solve()  # the first solve of the built problem is not part of the what-if
    out = []
    for label, change, changed in cases:
        # re-solve and fresh solve interleaved, so that a slow spell of the shared cores hits both
        times, fresh_runs, result = [], [], None
        for _ in range(max(repeats, 5)):
            start = time.perf_counter()
            result = problem.solve(**change)
            times.append(time.perf_counter() - start)
            fresh_runs.append(timed_cpu(lambda c=changed: trimtab_rebalance(c, c.scenario(), **c.book())))
        fresh = min(fresh_runs, key=lambda r: abs(r.total - statistics.median(f.total for f in fresh_runs)))
        w = result.weights.to_numpy()
        gap = abs(utility(changed, w) - utility(changed, fresh.weights)) / max(1e-12, abs(utility(changed, fresh.weights)))
        out.append((label, statistics.median(times), statistics.median(f.total for f in fresh_runs), gap,
                    worst(breaches(changed, w, changed.tracking_error_max))))
    return out


# ---------------------------------------------------------------------- 4. PROTOTYPE: Clarabel direct
class DirectPrototype:
    """PROTOTYPE measurement, not trimtab code: this problem family in Clarabel's own form.

    x = [w (N), buy (N), sell (N), y (K)]; minimise ½xᵀPx + qᵀx with
    P = 2λ·ppy·blockdiag(diag(d), 0, 0, F), q = [−α − 2λ·ppy·d∘b, κ·c, κ·c, −2λ·ppy·F·Bᵀb];
    zero cone: 1ᵀw = 1, w − buy + sell = w0, y − Bᵀw = 0; nonnegative cone: w ≤ w_max, w ≥ 0,
    buy, sell ≥ 0, |y − Bᵀb| ≤ e, ½1ᵀ(buy + sell) ≤ T; second-order cone:
    ‖[Lᵀ(y − Bᵀb); √d∘(w − b)]‖ ≤ TE/√ppy.
    """

    def __init__(self, inst: SpeedInstance) -> None:
        start = time.perf_counter()
        x = inst.arrays()
        B, L, d, b, w0 = x["B"], x["L"], x["d"], x["b"], x["w0"]
        n, k = B.shape
        self.n, self.k, self.inst = n, k, inst
        c = inst.risk_aversion * PERIODS_PER_YEAR
        F = L @ L.T
        yb = B.T @ b
        eye, zero_nn = sp.identity(n, format="csc"), sp.csc_matrix((n, n))
        P = sp.block_diag([sp.diags(2 * c * d), zero_nn, zero_nn, sp.triu(sp.csc_matrix(2 * c * F))], format="csc")
        self.q = np.concatenate([-x["alpha"] - 2 * c * d * b, inst.cost_aversion * x["cost"],
                                 inst.cost_aversion * x["cost"], -2 * c * F @ yb])
        ones = np.ones((1, n))
        rows = [
            # zero cone: budget, trade split, exposure definition
            [sp.csc_matrix(ones), None, None, sp.csc_matrix((1, k))],
            [eye, -eye, eye, None],
            [sp.csc_matrix(-B.T), None, None, sp.identity(k)],
            # nonnegative cone
            [eye, None, None, None],
            [-eye, None, None, None],
            [None, -eye, None, None],
            [None, None, -eye, None],
            [None, None, None, sp.identity(k)],
            [None, None, None, -sp.identity(k)],
            [sp.csc_matrix((1, n)), sp.csc_matrix(0.5 * ones), sp.csc_matrix(0.5 * ones), None],
            # second-order cone
            [sp.csc_matrix((1, n)), None, None, sp.csc_matrix((1, k))],
            [None, None, None, sp.csc_matrix(-L.T)],
            [sp.diags(-np.sqrt(d)), None, None, None],
        ]
        self.A = sp.bmat(rows, format="csc")
        e = inst.exposure_max
        self.parts = dict(w0=w0, yb=yb, e=e)
        self.b_vec = self._b(inst.tracking_error_max, w0)
        self.cones = [clarabel.ZeroConeT(1 + n + k), clarabel.NonnegativeConeT(4 * n + 2 * k + 1),
                      clarabel.SecondOrderConeT(1 + k + n)]
        self.P = P
        self.settings = clarabel.DefaultSettings()
        self.settings.verbose = False
        self.settings.presolve_enable = False  # keeps the data update allowed for the re-solve
        for key, value in SOLVER_SETTINGS["CLARABEL"].items():
            setattr(self.settings, key, value)
        self.build_time = time.perf_counter() - start

    def _b(self, te_max: float, w0: np.ndarray) -> np.ndarray:
        n, k = self.n, self.k
        x = self.inst.arrays()
        yb, e = self.parts["yb"], self.parts["e"]
        sq = np.sqrt(x["d"])
        return np.concatenate([
            [1.0], w0, np.zeros(k),
            np.full(n, self.inst.weight_max), np.zeros(3 * n), yb + e, e - yb, [self.inst.turnover_max],
            [te_max / np.sqrt(PERIODS_PER_YEAR)], -x["L"].T @ yb, -sq * x["b"],
        ])

    def solve(self) -> Run:
        start = time.perf_counter()
        self.solver = clarabel.DefaultSolver(self.P, self.q, self.A, self.b_vec, self.cones, self.settings)
        setup = time.perf_counter() - start
        sol = self.solver.solve()
        total = time.perf_counter() - start
        w = np.asarray(sol.x[: self.n], dtype=np.float64)
        return Run({"build": self.build_time, "setup": setup, "clarabel": total - setup}, self.build_time + total,
                   int(sol.iterations), w, str(sol.status))

    def resolve(self, alpha: np.ndarray | None = None, te_max: float | None = None) -> Run:
        """Update q (alpha) or b (a limit) in place and solve again: no new matrices, no new setup."""
        start = time.perf_counter()
        c = self.inst.risk_aversion * PERIODS_PER_YEAR
        x = self.inst.arrays()
        if alpha is not None:
            self.q[: self.n] = -alpha - 2 * c * x["d"] * x["b"]
        if te_max is not None:
            self.b_vec = self._b(te_max, x["w0"])
        self.solver.update(q=self.q, b=self.b_vec)
        sol = self.solver.solve()
        total = time.perf_counter() - start
        return Run({"update+solve": total}, total, int(sol.iterations), np.asarray(sol.x[: self.n]), str(sol.status))


# ---------------------------------------------------------------------- settings experiments
SETTINGS_VARIANTS: list[tuple[str, dict[str, Any]]] = [
    ("trimtab's SOLVER_SETTINGS", {}),
    ("gap tolerances 1e-8 (Clarabel default)", {"tol_gap_abs": 1e-8, "tol_gap_rel": 1e-8}),
    ("refinement tolerances 1e-10", {"iterative_refinement_reltol": 1e-10, "iterative_refinement_abstol": 1e-10}),
    ("refinement 1e-10 and gap 1e-8", {"iterative_refinement_reltol": 1e-10, "iterative_refinement_abstol": 1e-10,
                                       "tol_gap_abs": 1e-8, "tol_gap_rel": 1e-8}),
    ("direct_solve_method auto (default)", {"direct_solve_method": "auto"}),
    ("equilibration on (default)", {"equilibrate_enable": True}),
]


def settings_experiments(inst: SpeedInstance, repeats: int) -> None:
    """trimtab's rebalance with SOLVER_SETTINGS changed in this process only (restored after each).

    The variants are interleaved round by round, so a change in the machine's load hits them alike.
    """
    print("\n  Clarabel settings through trimtab's rebalance (SOLVER_SETTINGS changed in this process only, "
          f"variants interleaved, medians of {repeats})")
    print(f"  {'variant':40s} {'total':>7s} {'cpu':>6s} {'Clarabel':>8s} {'iters':>5s} {'U rel. diff':>11s}  max breach")
    settings = SOLVER_SETTINGS["CLARABEL"]
    saved = dict(settings)
    runs: dict[str, list[Run]] = {label: [] for label, _ in SETTINGS_VARIANTS}
    failed: dict[str, str] = {}
    try:
        for _ in range(repeats):
            for label, change in SETTINGS_VARIANTS:
                if label in failed:
                    continue
                settings.update(change)
                try:
                    # solvers=["CLARABEL"]: by default FACTOR_IPM takes this problem, and the Clarabel
                    # column read 0.000 (#21)
                    runs[label].append(timed_cpu(lambda: trimtab_rebalance(inst, solvers=["CLARABEL"])))
                except Exception as err:  # a variant that fails verification is a finding, not a crash
                    failed[label] = str(err)[:160]
                finally:
                    settings.clear()
                    settings.update(saved)
    finally:
        settings.clear()
        settings.update(saved)
    reference = None
    for label, _ in SETTINGS_VARIANTS:
        if label in failed:
            print(f"  {label:40s} failed: {failed[label]}")
            continue
        group = runs[label]
        total = statistics.median(r.total for r in group)
        cpu = statistics.median(r.cpu for r in group)
        clarabel_time = statistics.median(r.stages["clarabel"] for r in group)
        last = group[-1]
        u = utility(inst, last.weights)
        reference = u if reference is None else reference
        print(f"  {label:40s} {total:7.3f} {cpu:6.2f} {clarabel_time:8.3f} {last.iterations:5d} "
              f"{abs(u - reference) / abs(reference):11.1e}  {worst(breaches(inst, last.weights))}")


# ---------------------------------------------------------------------- cvxpy Parameters (DPP), on request
def dpp_experiment(inst: SpeedInstance) -> None:
    """The lean factor-form build in cvxpy with alpha, holdings and the TE cap as Parameters.

    Only q and b depend on them, yet the parametrised compile is measured here against the plain one,
    followed by a re-solve with new alpha (compile skipped, Clarabel re-run).
    """
    x = inst.arrays()
    B, L, d, b, w0 = x["B"], x["L"], x["d"], x["b"], x["w0"]
    n, k = B.shape
    c, yb = inst.risk_aversion * PERIODS_PER_YEAR, B.T @ b
    print(f"\n  cvxpy Parameters (DPP) for alpha, holdings and the TE cap, lean build, N = {n:,}, K = {k}")

    def build(params: bool) -> tuple[cp.Problem, cp.Variable, cp.Parameter | None]:
        w, y = cp.Variable(n), cp.Variable(k)
        buy, sell = cp.Variable(n, nonneg=True), cp.Variable(n, nonneg=True)
        alpha = cp.Parameter(n, value=x["alpha"]) if params else x["alpha"]
        held = cp.Parameter(n, value=w0) if params else w0
        te = cp.Parameter(nonneg=True, value=inst.tracking_error_max) if params else inst.tracking_error_max
        factor, specific = L.T @ (y - yb), cp.multiply(np.sqrt(d), w - b)
        goal = (alpha @ w - c * (cp.sum_squares(factor) + cp.sum_squares(specific))
                - inst.cost_aversion * x["cost"] @ (buy + sell))
        constraints = [y == B.T @ w, w == held + buy - sell, cp.sum(w) == 1, w >= 0, w <= inst.weight_max,
                       y - yb <= inst.exposure_max, y - yb >= -inst.exposure_max,
                       0.5 * cp.sum(buy + sell) <= inst.turnover_max,
                       cp.norm(cp.hstack([factor, specific]), 2) <= te / np.sqrt(PERIODS_PER_YEAR)]
        return cp.Problem(cp.Maximize(goal), constraints), w, alpha if params else None

    for params in (False, True):
        start = time.perf_counter()
        problem, w, alpha = build(params)
        problem.solve(solver=cp.CLARABEL, **SOLVER_SETTINGS["CLARABEL"])
        total = time.perf_counter() - start
        print(f"  {'with Parameters' if params else 'plain constants':16s} first solve {total:7.2f} s "
              f"(compile {problem.compilation_time:.2f} s, Clarabel {problem.solver_stats.solve_time:.2f} s, "
              f"U {utility(inst, np.asarray(w.value)):.8e})")
        if alpha is not None:
            alpha.value = x["alpha"] * 0.5 + np.random.default_rng(7).normal(0, 0.01, n)
            start = time.perf_counter()
            problem.solve(solver=cp.CLARABEL, **SOLVER_SETTINGS["CLARABEL"])
            print(f"  {'':16s} re-solve, new alpha {time.perf_counter() - start:.2f} s "
                  f"(compile {problem.compilation_time:.2f} s, Clarabel {problem.solver_stats.solve_time:.2f} s)")


# ---------------------------------------------------------------------- profiling
PROFILE_PARTS = [
    ("validate + align inputs + rows", "construct/_problem.py", "build_problem"),
    ("cvxpy expression build", "construct/_problem.py", "build"),
    ("cvxpy compile (get_problem_data)", "cvxpy/problems/problem.py", "get_problem_data"),
    ("Clarabel solve (incl. setup)", "reductions/solvers/conic_solvers/clarabel_conif.py", "solve_via_data"),
    ("cvxpy unpack results", "cvxpy/problems/problem.py", "unpack_results"),
    ("numpy verification (verify)", "construct/_verify.py", "verify"),
    ("result: make_result total", "construct/_result.py", "make_result"),
    ("  of which pre/post attribution", "construct/_result.py", "_attribute"),
    ("  of which constraint table", "construct/_result.py", "_constraint_table"),
    ("  of which trade list", "construct/_result.py", "_trades"),
]


def profile(inst: SpeedInstance) -> None:
    print(f"\n== Where the time goes in trimtab's rebalance on the Clarabel path at N = {inst.model.n_assets:,}, "
          f"K = {inst.model.n_factors} (cProfile, one run; the profiler inflates Python-heavy parts)")
    profiler = cProfile.Profile()
    start = time.perf_counter()
    profiler.enable()
    # the parts below are cvxpy's and Clarabel's: with FACTOR_IPM (the default) every one read 0.000 (#21)
    rebalance(inst.model, inst.scenario(), solvers=["CLARABEL"], **inst.book())
    profiler.disable()
    wall = time.perf_counter() - start
    stats = pstats.Stats(profiler).stats  # type: ignore[attr-defined]
    print(f"  {'part':40s} {'seconds':>8s} {'share':>7s}")
    for label, file_end, name in PROFILE_PARTS:
        seconds = sum(v[3] for (path, _, fn), v in stats.items()
                      if fn == name and path.replace("\\", "/").endswith(file_end))
        print(f"  {label:40s} {seconds:8.3f} {seconds / wall:7.1%}")
    print(f"  {'total under the profiler':40s} {wall:8.3f}")
    # the floor a structure-aware factorisation would face: one Schur complement on the K dense rows
    B = inst.model.exposures.to_numpy()
    weights = np.random.default_rng(3).uniform(0.5, 2.0, len(B))
    start = time.perf_counter()
    for _ in range(20):
        np.linalg.cholesky(B.T @ (weights[:, None] * B) + np.eye(B.shape[1]))
    print(f"  for comparison, Bᵀ·D·B and a K × K Cholesky with dense BLAS: {(time.perf_counter() - start) / 20 * 1e3:.2f} ms")


# ---------------------------------------------------------------------- the report
def compare(inst: SpeedInstance, repeats: int, prototype: bool, do_profile: bool, dpp: bool, settings: bool) -> None:
    n, k = inst.model.n_assets, inst.model.n_factors
    print(f"\n== N = {n:,}, K = {k}: medians of {repeats} in one process")
    naive = median_run(lambda: straightforward(inst), repeats)
    ours = median_run(lambda: trimtab_rebalance(inst), repeats)
    clarabel_path = median_run(lambda: trimtab_rebalance(inst, solvers=["CLARABEL"]), repeats)
    u_ref = utility(inst, naive.weights)
    naive_tuned = median_run(lambda: straightforward(inst, SOLVER_SETTINGS["CLARABEL"]), repeats)
    rows = [("straightforward cvxpy", naive), ("  same, trimtab's settings", naive_tuned), ("trimtab rebalance", ours),
            ("trimtab, Clarabel path", clarabel_path)]
    proto = None
    if prototype:
        proto = median_run(lambda: DirectPrototype(inst).solve(), repeats)
        rows.append(("PROTOTYPE Clarabel direct", proto))
    print(f"  {'path':26s} {'build':>7s} {'compile':>8s} {'solver':>7s} {'other':>7s} {'total':>7s} {'cpu':>6s} "
          f"{'speed-up':>8s} {'iters':>5s} {'U from w':>14s} {'rel. diff':>9s}  {'max breach from w':22s} status")
    for label, run in rows:
        s = run.stages
        compile_time = s.get("compile", s.get("setup", 0.0))
        other = s.get("other", 0.0)
        solver_time = s.get("solver", s.get("clarabel", 0.0))
        u = utility(inst, run.weights)
        print(f"  {label:26s} {s['build']:7.3f} {compile_time:8.3f} {solver_time:7.3f} {other:7.3f} "
              f"{run.total:7.3f} {run.cpu:6.2f} {naive.total / run.total:7.1f}× {run.iterations:5d} {u:14.8e} "
              f"{abs(u - u_ref) / abs(u_ref):9.1e}  {worst(breaches(inst, run.weights)):22s} {run.status}")
    print("  (trimtab rebalance = FACTOR_IPM, trimtab's factor-form interior-point method: 'build' = the translation"
          " of the rows, no compile; the Clarabel path is trimtab with solvers=['CLARABEL']; trimtab 'other' ="
          " validation, verification, result assembly and cvxpy's work around the solver call;"
          " PROTOTYPE 'compile' = Clarabel setup; cpu = this process's CPU seconds, all threads)")
    sizes = problem_sizes(inst)
    print("  problem handed to Clarabel: " + "; ".join(
        f"{label} {v:,} variables, {r:,} rows, nnz(A) {a:,}" for label, (v, r, a) in sizes.items()))
    if n == 5_000 and k == 50:
        ratio = naive.total / ours.total
        print(f"  target: end to end ≤ {END_TO_END_TARGET} s → {ours.total:.3f} s "
              f"({'met' if ours.total <= END_TO_END_TARGET else 'NOT met'}); ≥ {RATIO_TARGET:.0f}× → {ratio:.1f}× "
              f"({'met' if ratio >= RATIO_TARGET else 'NOT met'})")
    print("\n  What-if re-solves (build_problem once, then .solve(change)) against a fresh rebalance of the same inputs\n"
          f"  (medians of {max(repeats, 5)}, the two interleaved)")
    print(f"  {'change':22s} {'re-solve':>9s} {'fresh':>7s} {'fresh/re':>8s} {'U rel. diff':>11s}  max breach")
    for label, again, fresh, gap, breach in what_if(inst, repeats):
        print(f"  {label:22s} {again:9.3f} {fresh:7.3f} {fresh / again:7.2f}× {gap:11.1e}  {breach}")
    print("  target: a re-solve no slower than a fresh solve (ratio ≥ 1)")
    if prototype:
        rng = np.random.default_rng(7)
        new_alpha = inst.alpha.to_numpy() * 0.5 + rng.normal(0, 0.01, n)
        changed = replace(inst, alpha=pd.Series(new_alpha, index=inst.alpha.index))
        direct = DirectPrototype(inst)
        direct.solve()
        again = median_run(lambda: direct.resolve(alpha=new_alpha), repeats)
        fresh = median_run(lambda: DirectPrototype(changed).solve(), repeats)
        check = trimtab_rebalance(changed, changed.scenario(), **changed.book())
        gap = abs(utility(changed, again.weights) - utility(changed, check.weights)) / abs(utility(changed, check.weights))
        print(f"  PROTOTYPE Clarabel direct, new alpha: q updated in place and re-solved {again.total:.3f} s "
              f"(cpu {again.cpu:.2f}) against new matrices and setup {fresh.total:.3f} s (cpu {fresh.cpu:.2f}) → "
              f"{fresh.total / again.total:.2f}×; {again.iterations} it; U rel. diff to trimtab {gap:.1e}; "
              f"max breach {worst(breaches(changed, again.weights))}")
    if settings:
        settings_experiments(inst, repeats)
    if dpp:
        dpp_experiment(inst)
    if do_profile:
        profile(inst)


def grid(repeats: int, prototype: bool) -> None:
    print("\n== trimtab rebalance, N × K grid (seconds; one run a cell unless --repeats > 1)")
    print("| N | K | build | solver | other | total | cpu | iterations | Clarabel path (total, iterations) | ratio | U rel. diff |"
          + (" hand-built Clarabel prototype (total, iterations) |" if prototype else ""))
    print("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|" + ("---:|" if prototype else ""))
    for n in (1_000, 5_000, 20_000):
        for k in (20, 50, 100):
            inst = speed_instance(n, k, seed=n + k)
            run = median_run(lambda i=inst: trimtab_rebalance(i), repeats)
            ref = median_run(lambda i=inst: trimtab_rebalance(i, solvers=["CLARABEL"]), repeats)
            s = run.stages
            u, v = utility(inst, run.weights), utility(inst, ref.weights)
            line = (f"| {n:,} | {k} | {s['build']:.3f} | {s['solver']:.3f} | {s['other']:.3f} | {run.total:.3f} | "
                    f"{run.cpu:.2f} | {run.iterations} | {ref.total:.2f} ({ref.iterations}) | "
                    f"{ref.total / run.total:.1f}× | {abs(u - v) / abs(v):.0e} |")
            if prototype:
                proto = median_run(lambda i=inst: DirectPrototype(i).solve(), repeats)
                line += f" {proto.total:.2f} ({proto.iterations}) |"
            print(line, flush=True)
    print("solver = FACTOR_IPM's iterations; build = translating the rows; other = validation and alignment, numpy "
          "verification and the result (tables); cpu = CPU seconds of this process; Clarabel path = the same "
          "rebalance with solvers=['CLARABEL'] (cvxpy compile + Clarabel)")


def trimtab_only(sizes: list[tuple[int, int]], repeats: int) -> None:
    """trimtab's rebalance alone, a fresh model each run (its cached arrays recomputed, as in a new session)."""
    threads = os.environ.get("OPENBLAS_NUM_THREADS", "unset")
    ipm = SOLVER_SETTINGS.get("FACTOR_IPM", {}).get("blas_threads")
    print(f"\n== trimtab rebalance only (OPENBLAS_NUM_THREADS={threads}; FACTOR_IPM blas_threads={ipm}), "
          f"medians of {repeats}")
    for n, k in sizes:
        runs = [timed_cpu(lambda: trimtab_rebalance(speed_instance(n, k, seed=n + k))) for _ in range(repeats)]
        med = {key: statistics.median(r.stages[key] for r in runs) for key in ("build", "compile", "solver", "other")}
        print(f"  N = {n:,}, K = {k}: total {statistics.median(r.total for r in runs):.3f} s, "
              f"cpu {statistics.median(r.cpu for r in runs):.3f} s; build {med['build']:.3f}, compile {med['compile']:.3f}, "
              f"solver {med['solver']:.3f}, other {med['other']:.3f}; {runs[-1].status}", flush=True)


def clarabel_timers(inst: SpeedInstance) -> None:
    """Clarabel's own timers (setup, factorisation, solves) for the PROTOTYPE at this size."""
    direct = DirectPrototype(inst)
    run = direct.solve()
    info = direct.solver.get_info()
    print(f"\n== Clarabel's timers, PROTOTYPE at N = {inst.model.n_assets:,}, K = {inst.model.n_factors}: "
          f"{run.iterations} iterations, {run.total:.3f} s; LDLᵀ factor nnz {info.linsolver.nnzL:,} "
          f"({info.linsolver.name}, {info.linsolver.threads} thread)", flush=True)
    direct.solver.print_timers()


def parse_sizes(text: str) -> list[tuple[int, int]]:
    out = []
    for part in text.split(","):
        n, _, k = part.strip().lower().partition("x")
        out.append((int(n), int(k)))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="N = 1,000, K = 20 only")
    parser.add_argument("--sizes", default="5000x50", help="comma-separated NxK, e.g. 5000x50,20000x100")
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--no-profile", action="store_true")
    parser.add_argument("--no-prototype", action="store_true")
    parser.add_argument("--no-settings", action="store_true", help="skip the Clarabel settings variants")
    parser.add_argument("--dpp", action="store_true", help="also time cvxpy Parameters (slow: tens of seconds)")
    parser.add_argument("--trimtab-only", action="store_true", help="only trimtab's rebalance at --sizes")
    parser.add_argument("--timers", action="store_true", help="only Clarabel's timers for the prototype")
    parser.add_argument("--grid", action="store_true", help="only the N × K table for docs/performance.md")
    args = parser.parse_args()
    print(f"load average at start: {', '.join(f'{x:.2f}' for x in os.getloadavg())} ({os.cpu_count()} cores)")
    print(f"cvxpy {cp.__version__}, Clarabel {clarabel.__version__}, numpy {np.__version__}; "
          f"trimtab Clarabel settings {SOLVER_SETTINGS['CLARABEL']}")
    warm = speed_instance(200, 5, seed=99)
    trimtab_rebalance(warm)  # imports and first-call costs outside the timings
    straightforward(warm)
    if args.grid:
        grid(args.repeats, not args.no_prototype)
        return
    if args.trimtab_only:
        trimtab_only([(1_000, 20)] if args.quick else parse_sizes(args.sizes), args.repeats)
        return
    if args.timers:
        for n, k in [(1_000, 20)] if args.quick else parse_sizes(args.sizes):
            clarabel_timers(speed_instance(n, k, seed=n + k))
        return
    for n, k in [(1_000, 20)] if args.quick else parse_sizes(args.sizes):
        compare(speed_instance(n, k, seed=n + k), args.repeats, not args.no_prototype, not args.no_profile, args.dpp,
                not args.no_settings)


if __name__ == "__main__":
    main()
