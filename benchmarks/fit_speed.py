"""Speed and memory of fit_time_series against a per-asset statsmodels OLS loop.

Run ``python benchmarks/fit_speed.py`` (N = 5,000 assets, T = 1,260 daily dates, K = 50 factors,
about 5% late listers) or ``python benchmarks/fit_speed.py --quick`` for a small run. Prints:

- wall time of one fit_time_series call;
- peak memory: tracemalloc's peak of Python-visible allocations during the fit (numpy buffers
  included) and the process's peak resident set size from resource.getrusage (ru_maxrss, the
  whole process: interpreter, libraries and the input data);
- the baseline: statsmodels OLS fitted asset by asset on a subset, timed and extrapolated to N,
  and the measured speed-up ratio.

Simulated data only (invented: Gaussian factors, Student-t specific returns).
"""

from __future__ import annotations

import argparse
import resource
import sys
import time
import tracemalloc
import warnings

import numpy as np
import pandas as pd
import statsmodels.api as sm

from trimtab import fit_time_series


def simulated_returns(n_assets: int, n_dates: int, n_factors: int, seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Asset and factor returns from a known linear model; ~5% of assets list late."""
    rng = np.random.default_rng(seed)
    dates = pd.bdate_range("2020-01-01", periods=n_dates)
    factors = pd.DataFrame(
        rng.normal(0.0, 0.01, size=(n_dates, n_factors)),
        index=dates,
        columns=[f"factor_{k:02d}" for k in range(n_factors)],
    )
    betas = rng.normal(0.0, 0.5, size=(n_factors, n_assets))
    betas[0] += 1.0
    noise = rng.standard_t(5, size=(n_dates, n_assets)) * (0.015 / np.sqrt(5.0 / 3.0))
    values = factors.to_numpy() @ betas + noise
    late = rng.choice(n_assets, size=max(1, n_assets // 20), replace=False)
    starts = rng.integers(n_dates // 10, n_dates // 2, size=len(late))
    for asset, start in zip(late, starts):
        values[:start, asset] = np.nan
    assets = pd.DataFrame(values, index=dates, columns=[f"S{i:05d}" for i in range(n_assets)])
    return assets, factors


def statsmodels_loop(assets: pd.DataFrame, factors: pd.DataFrame) -> float:
    """Seconds to fit statsmodels OLS with an intercept asset by asset, on each asset's own dates."""
    design = sm.add_constant(factors)
    start = time.perf_counter()
    for name in assets.columns:
        y = assets[name].dropna()
        result = sm.OLS(y, design.loc[y.index]).fit()
        _ = (result.params, result.tvalues, result.mse_resid, result.rsquared, result.resid)
    return time.perf_counter() - start


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="N=500, T=500, K=10, baseline on 50 assets")
    args = parser.parse_args(argv)
    n_assets, n_dates, n_factors, n_baseline = (500, 500, 10, 50) if args.quick else (5_000, 1_260, 50, 100)

    assets, factors = simulated_returns(n_assets, n_dates, n_factors)
    n_ragged = int(assets.isna().any().sum())
    print(f"data: N={n_assets} assets ({n_ragged} late listers), T={n_dates} dates, K={n_factors} factors")

    fit_time_series(assets.iloc[:, :50], factors)  # warm-up: imports and first-call costs
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        start = time.perf_counter()
        model = fit_time_series(assets, factors)
        elapsed = time.perf_counter() - start
        # memory in a second call: tracemalloc slows allocation, so it is off while timing
        tracemalloc.start()
        fit_time_series(assets, factors)
        _, traced_peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    rss_peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # KiB on Linux
    print(f"fit_time_series: {elapsed:.3f} s for {model.n_assets} assets")
    print(f"peak memory during the fit (tracemalloc, Python/numpy allocations): {traced_peak / 1e6:.0f} MB")
    print(f"peak resident set size of the whole process (getrusage ru_maxrss): {rss_peak_kib / 1e3:.0f} MB")

    subset = assets.iloc[:, :: max(1, n_assets // n_baseline)].iloc[:, :n_baseline]
    loop_seconds = statsmodels_loop(subset, factors)
    extrapolated = loop_seconds * n_assets / subset.shape[1]
    print(
        f"statsmodels OLS loop: {loop_seconds:.3f} s for {subset.shape[1]} assets "
        f"-> {extrapolated:.1f} s extrapolated to {n_assets}"
    )
    print(f"speed-up (extrapolated loop / fit_time_series): {extrapolated / elapsed:.0f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
