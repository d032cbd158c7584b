"""Walk-forward backtest timing: a two-worker Dask LocalCluster against in-process; prints figures.

    python benchmarks/backtest_executors.py [--quick] [--dates 60] [--assets 1000]

A backtest of 3 scenarios (TE budget 3 %, TE budget 1.5 %, turnover cap 5 %) over ``--dates``
rebalance dates on invented returns simulated from a known 10-factor model, re-fitting a
time-series model on a 250-day window at each date. The same backtest runs in this process and on
a LocalCluster of two single-threaded worker processes on loopback (cluster start-up timed
separately), and the two histories are checked equal. ``--quick``: 12 dates, N = 300.
"""

from __future__ import annotations

import argparse
import os
import time

import numpy as np
import pandas as pd

from trimtab.runs import backtest, get_executor


def simulate(n_assets: int, n_dates: int, n_factors: int = 10, seed: int = 0) -> dict[str, pd.DataFrame | pd.Series]:
    """Daily returns rₜ = B·fₜ + εₜ, an alpha view per date, an equal-weight benchmark (all invented)."""
    rng = np.random.default_rng(seed)
    assets = [f"S{i:05d}" for i in range(n_assets)]
    factors = ["market"] + [f"factor_{k:02d}" for k in range(1, n_factors)]
    dates = pd.bdate_range("2018-01-01", periods=n_dates)
    B = rng.normal(scale=0.5, size=(n_assets, n_factors))
    B[:, 0] = 1.0 + 0.2 * rng.normal(size=n_assets)
    f = rng.normal(size=(n_dates, n_factors)) * np.r_[0.01, np.full(n_factors - 1, 0.004)]
    r = f @ B.T + rng.normal(size=(n_dates, n_assets)) * rng.uniform(0.01, 0.02, size=n_assets)
    score = rng.normal(size=n_assets)
    alpha = 0.02 * (0.7 * score + 0.3 * rng.normal(size=(n_dates, n_assets)))
    return {
        "returns": pd.DataFrame(r, index=dates, columns=assets),
        "factors": pd.DataFrame(f, index=dates, columns=factors),
        "alpha": pd.DataFrame(alpha, index=dates, columns=assets),
        "benchmark": pd.Series(1.0 / n_assets, index=assets),
    }


def scenarios(n_assets: int) -> dict[str, dict]:
    cap = max(0.05, 5.0 / n_assets)
    base = {
        "objective": {"maximize": "alpha"},
        "constraints": {
            "fully_invested": True,
            "long_only": True,
            "weight": {"min": 0.0, "max": cap},
            "turnover": {"max": 0.25},
            "tracking_error": {"max": 0.03},
        },
    }
    tight = {**base, "constraints": {**base["constraints"], "tracking_error": {"max": 0.015}}}
    light = {**base, "constraints": {**base["constraints"], "turnover": {"max": 0.05}}}
    return {"te_3pct": base, "te_1.5pct": tight, "turnover_5pct": light}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--quick", action="store_true", help="12 dates at N = 300")
    parser.add_argument("--dates", type=int, default=60)
    parser.add_argument("--assets", type=int, default=1000)
    parser.add_argument("--every", type=int, default=5, help="rows between rebalances")
    args = parser.parse_args()
    n_dates, n_assets = (12, 300) if args.quick else (args.dates, args.assets)
    window = 250
    data = simulate(n_assets, window + n_dates * args.every)
    dates = list(data["returns"].index[window - 1 :: args.every][:n_dates])
    settings = dict(window=window, rebalance_dates=dates, factor_returns=data["factors"], benchmark=data["benchmark"], costs=0.001)
    runs = scenarios(n_assets)
    print(f"Load average before the run: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores (other work slows both runs)")
    print(f"Backtest of {len(runs)} scenarios × {n_dates} dates at N = {n_assets:,}, K = {data['factors'].shape[1]}, window {window}")
    start = time.perf_counter()
    local = backtest(data["returns"], data["alpha"], runs, **settings)
    t_local = time.perf_counter() - start
    print(f"  in-process                     : {t_local:8.1f} s")
    start = time.perf_counter()
    with get_executor("dask", workers=2) as cluster:
        t_start = time.perf_counter() - start
        start = time.perf_counter()
        remote = backtest(data["returns"], data["alpha"], runs, executor=cluster, **settings)
        t_remote = time.perf_counter() - start
    print(f"  2-worker LocalCluster, start-up: {t_start:8.1f} s")
    print(f"  2-worker LocalCluster, run     : {t_remote:8.1f} s   (with start-up {t_start + t_remote:.1f} s)")
    print(f"  speed-up in-process / cluster  : {t_local / t_remote:8.2f}×   (with start-up {t_local / (t_start + t_remote):.2f}×)")
    both = (local.history["status"] == "solved") & (remote.history["status"] == "solved")
    columns = ["forecast_te", "realised_active", "turnover", "cost"]
    same = (local.history.loc[both, columns] - remote.history.loc[both, columns]).abs().max().max()
    print(f"  dates solved in both runs: {int(both.sum())}/{len(both)}; largest difference in {', '.join(columns)}: {same:.1e}")
    counts = local.history["status"].value_counts().to_dict()
    print(f"  dates by status: {counts}")
    print(local.summary())


if __name__ == "__main__":
    main()
