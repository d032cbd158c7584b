"""Speed of many accounts rebalanced together; prints figures side by side, asserts nothing.

    python benchmarks/accounts_speed.py [--accounts 1000] [--names 100] [--universe 1500] [--dask]

Accounts of about ``--names`` names each drawn from the invented demo universe (``--universe``
stocks; the demo fund's model fitted exactly from its simulated truth, its alpha, benchmark and
attributes), each held near the benchmark's weights in its names; the scenario: maximise alpha net
of half-spread costs, fully invested, long only, weight ≤ 5%, tracking error ≤ 6%, one-way turnover
≤ 30%; an aggregate cap of 5% of ADV. Printed:

1. in process: total seconds, rounds, seconds per account per round;
2. ``--dask``: the same on a 2-worker LocalCluster, its start-up timed apart;
3. per account: one plain ``trimtab.rebalance`` of the first 20 accounts each (build + solve +
   full result), against the per-account time inside the run (shared build, warm start, weights only).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd

import trimtab
from trimtab.demo import make_demo_fund

SCENARIO = {
    "objective": {"maximize": "alpha", "costs": {"spread": "spread"}},
    "constraints": {"fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.05},
                    "tracking_error": {"max": 0.06}, "turnover": {"max": 0.3}},
}


def inputs(n_universe: int, n_accounts: int, n_names: int, seed: int = 5):
    fund = make_demo_fund(n_assets=n_universe, n_days=300, n_holdings=10, seed=7)
    model = trimtab.FactorModel(fund.exposures, fund.factor_covariance, fund.specific_variance)
    rng = np.random.default_rng(seed)
    bench = fund.benchmark
    accounts = {}
    for k in range(n_accounts):
        held = rng.choice(n_universe, size=n_names, replace=False, p=bench.to_numpy())
        w = bench.iloc[held].to_numpy() * np.exp(0.3 * rng.normal(size=n_names))
        for _ in range(20):
            w = np.minimum(w / w.sum(), 0.045)
        accounts[f"A{k:05d}"] = {"holdings": pd.Series(w / w.sum(), index=bench.index[held]),
                                 "nav": float(np.exp(rng.uniform(np.log(1e6), np.log(2e7))))}
    return model, fund, accounts


def run(model, fund, accounts, executor=None):
    start = time.perf_counter()
    result = trimtab.rebalance_accounts(model, SCENARIO, accounts, alpha=fund.alpha, benchmark=fund.benchmark,
                                        attributes=fund.attributes, aggregate={"max_adv_fraction": 0.05},
                                        executor=executor)
    return result, time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--accounts", type=int, default=1000)
    parser.add_argument("--names", type=int, default=100)
    parser.add_argument("--universe", type=int, default=1500)
    parser.add_argument("--dask", action="store_true")
    args = parser.parse_args()
    model, fund, accounts = inputs(args.universe, args.accounts, args.names)
    result, seconds = run(model, fund, accounts)
    per = seconds / (len(accounts) * result.rounds)
    print(f"{len(accounts)} accounts × ~{args.names} names, universe {args.universe}: in process {seconds:.1f} s, "
          f"{result.rounds} rounds, {result.n_solved} solved, {1e3 * per:.1f} ms per account per round")
    if args.dask:
        start = time.perf_counter()
        with trimtab.get_executor("dask", workers=2) as ex:
            startup = time.perf_counter() - start
            remote, remote_seconds = run(model, fund, accounts, ex)
        same = np.abs(remote.weights - result.weights).to_numpy().max()
        print(f"2-worker LocalCluster: start-up {startup:.1f} s, run {remote_seconds:.1f} s "
              f"({seconds / remote_seconds:.2f}× in process), largest weight difference {same:.1e}")
    single = []
    for name in list(accounts)[:20]:
        body = accounts[name]
        start = time.perf_counter()
        trimtab.rebalance(model, SCENARIO, holdings=body["holdings"], benchmark=fund.benchmark, alpha=fund.alpha,
                          attributes=fund.attributes, nav=body["nav"])
        single.append(time.perf_counter() - start)
    inside = result.summary["seconds"].median()
    print(f"per account: plain rebalance {1e3 * np.median(single):.0f} ms (median of 20), inside the run "
          f"{1e3 * inside:.0f} ms (median, last round) → {np.median(single) / inside:.1f}× from the shared build, "
          "warm start and weights-only rounds")


if __name__ == "__main__":
    main()
