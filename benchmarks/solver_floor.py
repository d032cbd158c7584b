"""FACTOR_IPM against its floor: iterations × (the Schur product, two small Choleskys, six N×K products).

    python benchmarks/solver_floor.py [--sizes 5000x50,20000x100] [--repeat 3]

For each size (benchmarks/_instances.py's speed instance, invented and seeded), in one process with
one BLAS thread (the method's setting): the solve (median of ``--repeat`` runs; iterations), the time
per iteration, and the floor estimate of #21 built from the same process's timings of its parts:

- the Schur product (Bᵀ·diag(δ))·[B, G], a general N × (K + p) product (p = dense rows + caps),
  and the same as a symmetric rank-k update (BLAS dsyrk), which a symmetric product could use;
- a Cholesky factorisation of order K + p, twice;
- an N×K product with a vector, six times (the passes one iteration needs at the least).

"floor" = iterations × (general Schur product + 2 Choleskys + 6 products); "solve / floor" says how
far the method is from it; the rest is numpy call overhead on N-long vectors and the extra passes.
A second table splits one solve's time by phase, timed by wrapping the method's own steps in this
process: forming and factorising the Newton system (``_Run.newton``), the two Newton solves of each
iteration with their refinement (``_Run.direction``), evaluating rows, caps and residuals
(``_Run.evaluate``, ``_Run.residuals``), the Farkas test, and the rest of the loop. Asserts nothing.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

import numpy as np
import scipy.linalg as la

sys.path.insert(0, os.path.dirname(__file__))
from _instances import speed_instance  # noqa: E402

from trimtab.construct import _fast, _ipm, build_problem  # noqa: E402

PHASES = {"newton": "form and factorise", "direction": "Newton solves", "evaluate": "rows and caps",
          "residuals": "residuals", "farkas": "Farkas test"}


def phases(qp: _ipm.QP) -> dict[str, float]:
    """Seconds per phase of one solve (see the module notes), by wrapping _ipm._Run's methods."""
    spent = dict.fromkeys(PHASES, 0.0)
    originals = {name: getattr(_ipm._Run, name) for name in PHASES}

    def timed(name: str):
        def wrapper(self, *args, **kwargs):
            start = time.perf_counter()
            try:
                return originals[name](self, *args, **kwargs)
            finally:
                spent[name] += time.perf_counter() - start
        return wrapper

    for name in PHASES:
        setattr(_ipm._Run, name, timed(name))
    try:
        start = time.perf_counter()
        _ipm.solve(qp)
        total = time.perf_counter() - start
    finally:
        for name, method in originals.items():
            setattr(_ipm._Run, name, method)
    # none of the wrapped steps calls another, so the phases do not overlap
    return {**spent, "rest": total - sum(spent.values()), "total": total}


def best(func, repeat: int = 7) -> float:
    """The median of ``repeat`` timings of ``func()`` (after one untimed call)."""
    func()
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        func()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="5000x50,20000x100")
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    split: list[tuple[str, dict[str, float], int]] = []
    print("| N × K | solve (median) | iterations | per iteration | Schur: general / symmetric | Cholesky | N×K product "
          "| floor | solve / floor |")
    print("|---|---|---|---|---|---|---|---|---|")
    for size in args.sizes.split(","):
        n, k = (int(x) for x in size.split("x"))
        inst = speed_instance(n, k)
        problem = build_problem(inst.model, inst.scenario(), **inst.book())
        qp = _fast.translate(problem, problem.all_rows()).qp
        with _fast._blas_limit():
            solves = []
            for _ in range(args.repeat):
                start = time.perf_counter()
                sol = _ipm.solve(qp)
                solves.append(time.perf_counter() - start)
            p = len(qp.lo) + len(qp.caps)
            rng = np.random.default_rng(0)
            wide = np.hstack([qp.B, rng.standard_normal((n, p))])
            weights = rng.uniform(0.5, 2.0, n)
            general = best(lambda: (wide.T * weights) @ wide)
            scaled = wide * np.sqrt(weights)[:, None]
            symmetric = best(lambda: la.blas.dsyrk(1.0, scaled.T, trans=0, lower=0))
            m = k + p
            spd = wide[: 4 * m].T @ wide[: 4 * m] + np.eye(m)
            chol = best(lambda: la.cho_factor(spd, lower=True, check_finite=False))
            vector = rng.standard_normal(n)
            product = best(lambda: qp.B.T @ vector)
            split.append((f"{n:,} × {k}", phases(qp), sol.iterations))
        solve = statistics.median(solves)
        floor = sol.iterations * (general + 2 * chol + 6 * product)
        print(f"| {n:,} × {k} | {solve:.3f} s | {sol.iterations} | {1e3 * solve / sol.iterations:.1f} ms "
              f"| {1e3 * general:.2f} / {1e3 * symmetric:.2f} ms | {1e3 * chol:.3f} ms | {1e3 * product:.3f} ms "
              f"| {floor:.3f} s | {solve / floor:.1f}× |", flush=True)
    print("\nOne solve by phase (ms per iteration; share of the solve):\n")
    print("| N × K | " + " | ".join(PHASES.values()) + " | rest of the loop | total |")
    print("|---|" + "---|" * (len(PHASES) + 2))
    for label, spent, iterations in split:
        cells = [f"{1e3 * spent[name] / iterations:.2f} ({spent[name] / spent['total']:.0%})" for name in [*PHASES, "rest"]]
        print(f"| {label} | " + " | ".join(cells) + f" | {1e3 * spent['total'] / iterations:.2f} |")
    print(f"\nload average {', '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
