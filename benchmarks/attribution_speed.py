"""Speed of the risk attribution and of the HTML report; prints figures, asserts nothing.

    python benchmarks/attribution_speed.py [--quick]

1. attribute() on N = 100,000 assets, K = 100 factors (target < 0.5 s, peak extra memory < 1 GB), with the
   memory a dense Σ would need printed beside it; and, as a baseline measured in the same run, the same
   attribution from a dense Σ at N = 4,000 against the factored form at that size.
2. write_html() for a 2,000-asset rebalance (target < 3 s). When trimtab.construct.rebalance is
   importable, a real rebalance is solved first (not timed); otherwise an attribution-only pre/post
   report is timed and the output says so.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import tempfile
import time
import tracemalloc
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab import FactorModel
from trimtab.attribution import attribute
from trimtab.report import write_html


def random_model(n_assets: int, n_factors: int, seed: int = 0) -> FactorModel:
    rng = np.random.default_rng(seed)
    assets = [f"S{i:06d}" for i in range(n_assets)]
    factors = ["market"] + [f"factor_{k:03d}" for k in range(1, n_factors)]
    B = rng.normal(scale=0.5, size=(n_assets, n_factors))
    B[:, 0] = 1.0 + 0.2 * rng.normal(size=n_assets)
    A = rng.normal(size=(n_factors, n_factors)) / np.sqrt(n_factors)
    F = (A @ A.T + np.eye(n_factors)) * 2e-5
    d = rng.uniform(1e-4, 9e-4, size=n_assets)
    return FactorModel(
        pd.DataFrame(B, index=assets, columns=factors),
        pd.DataFrame(F, index=factors, columns=factors),
        pd.Series(d, index=assets),
    )


def timed(fn: Any, repeats: int = 5) -> tuple[float, Any]:
    """Median wall time of ``repeats`` calls (the 2 cores are shared, so single calls are noisy)."""
    times, out = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times), out


def peak_memory(fn: Any) -> float:
    """Peak bytes allocated (tracemalloc, which numpy reports to) while ``fn`` runs, in MB."""
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak / 1e6


def attribution_benchmark(n_assets: int, n_factors: int) -> None:
    print(f"== attribution: N = {n_assets:,}, K = {n_factors}")
    model = random_model(n_assets, n_factors)
    rng = np.random.default_rng(1)
    w = pd.Series(rng.dirichlet(np.ones(n_assets)), index=model.assets)
    b = pd.Series(rng.dirichlet(np.ones(n_assets)), index=model.assets)
    model.attribute(w, b)  # warm the model's cached arrays
    seconds, attr = timed(lambda: attribute(model, w, b))
    start = time.perf_counter()
    attribute(model, w, b).headline()
    first_lazy = time.perf_counter() - start
    lazy_seconds, _ = timed(lambda: attribute(model, w, b).headline())
    mb = peak_memory(lambda: attribute(model, w, b))
    mb_all = peak_memory(lambda: attribute(model, w, b).headline())
    dense_gb = n_assets * n_assets * 8 / 1e9
    print(f"attribute(w, b):                     {seconds:8.3f} s   (target < 0.5 s)")
    print(f"  with every headline figure, first: {first_lazy:8.3f} s   (the model caches U = B·L for the asset variances)")
    print(f"  with every headline figure, later: {lazy_seconds:8.3f} s")
    print(f"peak extra memory, attribute:        {mb:8.1f} MB  (target < 1,000 MB)")
    print(f"peak extra memory, with headline:    {mb_all:8.1f} MB")
    print(f"model arrays B, F, d:                {model._B.nbytes / 1e6 + model._F.nbytes / 1e6 + model._d.nbytes / 1e6:8.1f} MB")
    print(f"a dense Σ would need:                {dense_gb:8.1f} GB  ({n_assets:,}² × 8 bytes)")
    print(f"Euler check |Σ contributions − σ|:   {abs(attr.by_asset['contribution'].sum() - attr.risk):.2e}")


def dense_baseline(n_assets: int, n_factors: int) -> None:
    print(f"== baseline in the same run: dense Σ against the factored form, N = {n_assets:,}, K = {n_factors}")
    model = random_model(n_assets, n_factors, seed=2)
    rng = np.random.default_rng(3)
    w = rng.dirichlet(np.ones(n_assets))
    b = rng.dirichlet(np.ones(n_assets))
    ppy = model.periods_per_year

    def dense() -> np.ndarray:
        S = model.covariance().to_numpy()
        a = w - b
        Sa = S @ a
        sigma = np.sqrt(ppy * a @ Sa)
        return a * ppy * Sa / sigma

    model.attribute(w, b)
    dense_seconds, contrib = timed(dense)
    factored_seconds, attr = timed(lambda: attribute(model, w, b))
    dense_mb = peak_memory(dense)
    factored_mb = peak_memory(lambda: attribute(model, w, b))
    print(f"dense Σ (build + Σa):   {dense_seconds:8.3f} s  {dense_mb:8.1f} MB")
    print(f"factored:               {factored_seconds:8.3f} s  {factored_mb:8.1f} MB")
    print(f"ratio dense/factored:   {dense_seconds / factored_seconds:8.1f}× time, {dense_mb / factored_mb:8.1f}× memory")
    print(f"max |difference| of contributions: {np.max(np.abs(contrib - attr.by_asset['contribution'].to_numpy())):.2e}")


@dataclass(frozen=True, eq=False)
class _PrePost:
    """Attribution-only report input: the fields the writers read, without an optimizer."""

    pre_trade: Any
    post_trade: Any
    trades: pd.DataFrame
    scenario: dict[str, Any] = field(default_factory=dict)
    status: str = "attribution only (no optimizer)"


def html_benchmark(n_assets: int, n_factors: int) -> None:
    print(f"== HTML report: N = {n_assets:,}, K = {n_factors}")
    model = random_model(n_assets, n_factors, seed=4)
    rng = np.random.default_rng(5)
    benchmark = pd.Series(rng.dirichlet(np.full(n_assets, 5.0)), index=model.assets)
    holdings = pd.Series(rng.dirichlet(np.ones(n_assets)), index=model.assets)
    subject: Any = None
    try:
        from trimtab.construct import rebalance  # noqa: PLC0415

        scenario = {
            "objective": {"minimize": "active_risk"},
            "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.25},
                            "tracking_error": {"max": 0.05}},
        }
        start = time.perf_counter()
        subject = rebalance(model, scenario, holdings=holdings, benchmark=benchmark)
        print(f"real rebalance solved in {time.perf_counter() - start:.2f} s (not part of the report time)")
    except Exception as err:  # the optimizer may be absent or still changing: report and fall back
        print(f"NOTE: no real rebalance ({type(err).__name__}: {err}); timing an attribution-only pre/post report")
        target = benchmark + 0.5 * (holdings - benchmark)
        trades = pd.DataFrame({"initial_weight": holdings, "target_weight": target, "trade": target - holdings})
        subject = _PrePost(
            pre_trade=attribute(model, holdings, benchmark),
            post_trade=attribute(model, target, benchmark),
            trades=trades,
            scenario={"constraints": {"tracking_error": {"max": 0.05}}},
        )
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "report.html"
        seconds, _ = timed(lambda: write_html(subject, path), repeats=3)
        size = path.stat().st_size / 1e3
    print(f"write_html:              {seconds:8.3f} s   (target < 3 s), {size:,.0f} kB")


def main() -> int:
    print(f"load average at start: {', '.join(f'{v:.2f}' for v in os.getloadavg())} (2 cores, shared)")
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, for a smoke run")
    args = parser.parse_args()
    if args.quick:
        attribution_benchmark(10_000, 20)
        dense_baseline(1_000, 20)
        html_benchmark(500, 10)
    else:
        attribution_benchmark(100_000, 100)
        dense_baseline(4_000, 100)
        html_benchmark(2_000, 20)
    return 0


if __name__ == "__main__":
    sys.exit(main())
