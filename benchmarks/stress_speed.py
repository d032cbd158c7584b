"""Speed of stress tests, replays and ex-post return attribution; prints figures and ratios, asserts nothing.

    python benchmarks/stress_speed.py [--quick]

1. stress() of N = 100,000 assets, K = 100 factors through 50 shocks (each naming 3 factors, the other
   97 conditioned), against a baseline measured in the same run: the same returns computed shock by
   shock from the N-vector of asset moves B·m (what a first implementation does), at the same size.
2. replay() of the worst 21-period windows over 2,520 periods of history, same model.
3. attribute_returns() of 252 periods × 5,000 assets, K = 50, against a baseline in the same run: a
   plain per-period loop (pandas rows, then the linking written out), at the same size.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd

import trimtab
from trimtab import FactorModel

sys.path.insert(0, str(Path(__file__).resolve().parent))
from _instances import random_model  # noqa: E402


def with_history(model: FactorModel, periods: int, seed: int = 0) -> FactorModel:
    """``model`` carrying a simulated factor-return history f ~ N(0, F) of ``periods`` business days."""
    from trimtab.model import FitReport

    rng = np.random.default_rng(seed)
    F = model.factor_covariance.to_numpy()
    dates = pd.bdate_range("2015-01-01", periods=periods)
    history = pd.DataFrame(rng.multivariate_normal(np.zeros(model.n_factors), F, periods), index=dates, columns=model.factors)
    report = FitReport("time_series", pd.DataFrame(index=model.assets), pd.DataFrame(), factor_returns=history)
    object.__setattr__(model, "fit_report", report)
    return model


def timed(fn: Callable[[], object], repeat: int) -> float:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def naive_stress(model: FactorModel, w: np.ndarray, shocks: dict[str, dict[str, float]]) -> list[float]:
    F = model.factor_covariance.to_numpy()
    B = model.exposures.to_numpy()
    names = list(model.factors)
    out = []
    for moves in shocks.values():
        S = [names.index(k) for k in moves]
        U = [k for k in range(len(names)) if k not in S]
        m = np.zeros(len(names))
        m[S] = list(moves.values())
        m[U] = F[np.ix_(U, S)] @ np.linalg.solve(F[np.ix_(S, S)], m[S])
        out.append(float(w @ (B @ m)))  # an N-vector of asset moves per shock
    return out


def naive_attribution(model: FactorModel, w: pd.Series, b: pd.Series, returns: pd.DataFrame, factors: pd.DataFrame) -> float:
    B = model.exposures
    rows, book, bench = [], [], []
    for date in returns.index:
        r = returns.loc[date]
        a = w - b
        x = B.T @ a
        rows.append(x * factors.loc[date])
        book.append(float(w @ r))
        bench.append(float(b @ r))
    R, Rb = np.array(book), np.array(bench)
    k_t = (np.log1p(R) - np.log1p(Rb)) / (R - Rb)
    total, total_b = np.prod(1 + R) - 1, np.prod(1 + Rb) - 1
    k = (np.log1p(total) - np.log1p(total_b)) / (total - total_b)
    linked = sum(kt / k * row for kt, row in zip(k_t, rows))
    return float(linked.sum())


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, one repeat")
    args = parser.parse_args()
    n, k, repeat = (20_000, 50, 1) if args.quick else (100_000, 100, 5)
    rng = np.random.default_rng(1)

    model = with_history(random_model(n, k), 2520)
    w = pd.Series(rng.dirichlet(np.ones(n)), index=model.assets)
    b = pd.Series(1.0 / n, index=model.assets)
    shocks = {f"shock_{j}": {str(f): float(rng.normal(0, 0.03)) for f in rng.choice(model.factors, 3, replace=False)}
              for j in range(50)}
    fast = timed(lambda: trimtab.stress(model, w, shocks, benchmark=b), repeat)
    slow = timed(lambda: naive_stress(model, w.to_numpy(), shocks), repeat)
    print(f"stress, N = {n:,}, K = {k}, 50 shocks: {fast:.3f} s; shock-by-shock N-vector baseline {slow:.3f} s "
          f"(ratio {slow / fast:.1f}x)")
    replay = timed(lambda: trimtab.replay(model, w, benchmark=b, length=21, k=5), repeat)
    print(f"replay, N = {n:,}, K = {k}, 2,520 periods, worst 5 windows of 21 for book and active: {replay:.3f} s")

    n2, k2, t2 = (2_000, 30, 60) if args.quick else (5_000, 50, 252)
    small = random_model(n2, k2, seed=2)
    dates = pd.bdate_range("2024-01-01", periods=t2)
    factors = pd.DataFrame(rng.normal(0, 0.01, (t2, k2)), index=dates, columns=small.factors)
    returns = pd.DataFrame(factors.to_numpy() @ small.exposures.to_numpy().T + rng.normal(0, 0.01, (t2, n2)),
                           index=dates, columns=small.assets)
    w2 = pd.Series(rng.dirichlet(np.ones(n2)), index=small.assets)
    b2 = pd.Series(1.0 / n2, index=small.assets)
    fast = timed(lambda: trimtab.attribute_returns(small, w2, returns, factors, benchmark=b2), repeat)
    slow = timed(lambda: naive_attribution(small, w2, b2, returns, factors), repeat)
    print(f"attribute_returns, {t2} periods × {n2:,} assets, K = {k2}: {fast:.3f} s (with the asset table); "
          f"per-period pandas loop baseline (factor part only) {slow:.3f} s (ratio {slow / fast:.1f}x)")


if __name__ == "__main__":
    main()
