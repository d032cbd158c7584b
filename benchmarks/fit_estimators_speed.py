"""Speed of fit_cross_section and fit_statistical against general-purpose baselines run in the same process.

Run ``python benchmarks/fit_estimators_speed.py`` or ``python benchmarks/fit_estimators_speed.py --quick``
(a small run). Prints figures only:

- fit_cross_section (N = 5,000 assets, 10 industries, 5 styles, market, T = 500 dates, square-root
  weights): wall time, against a statsmodels WLS fitted date by date on a subset of the dates (the
  design [1, industry dummies with one dropped, styles], the same column space and so the same
  residuals), timed and extrapolated to all T dates; the ratio, and the largest residual
  difference on the subset as a check that both solved the same problem.
- fit_statistical (N = 5,000, T = 500 and N = 20,000, T = 250, k chosen by IC_p2 among up to 20):
  wall time, against scikit-learn PCA on the same demeaned matrix with the same number of
  components considered (``svd_solver="full"``, exact like ours, and scikit-learn's own
  ``"auto"`` choice); the ratios, and the time of trimtab's decomposition alone (the rest of the
  fit is the criteria, the residuals, the specific variances and the per-asset statistics).

Simulated data only (invented: Gaussian factor returns and exposures, Student-t specific returns).
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd
import statsmodels.api as sm
from sklearn.decomposition import PCA

from trimtab import fit_cross_section, fit_statistical
from trimtab.model._statistical import principal_components


def cross_section_data(
    n_assets: int, n_dates: int, n_industries: int, n_styles: int, seed: int = 0
) -> tuple[pd.DataFrame, pd.DataFrame, pd.Series, pd.Series]:
    """Returns, static style exposures, industry labels and regression weights from a known model."""
    rng = np.random.default_rng(seed)
    assets = [f"S{i:05d}" for i in range(n_assets)]
    dates = pd.bdate_range("2022-01-03", periods=n_dates)
    industry = pd.Series([f"industry_{j:02d}" for j in rng.integers(0, n_industries, n_assets)], index=assets)
    style_names = ["size", "value", "momentum", "profitability", "investment", "low_risk"][:n_styles]
    styles = pd.DataFrame(rng.normal(size=(n_assets, n_styles)), index=assets, columns=style_names)
    weights = pd.Series(np.sqrt(rng.lognormal(mean=8.0, sigma=1.5, size=n_assets)), index=assets)
    codes = pd.Index(sorted(industry.unique())).get_indexer(industry)
    market = rng.normal(0.0003, 0.01, n_dates)
    industry_returns = rng.normal(0.0, 0.005, (n_dates, n_industries))
    style_returns = rng.normal(0.0, 0.003, (n_dates, n_styles))
    noise = rng.standard_t(5, size=(n_dates, n_assets)) * 0.015
    values = market[:, None] + industry_returns[:, codes] + style_returns @ styles.to_numpy().T + noise
    returns = pd.DataFrame(values, index=dates, columns=assets)
    return returns, styles, industry, weights


def statsmodels_cross_section(
    returns: pd.DataFrame, styles: pd.DataFrame, industry: pd.Series, weights: pd.Series, n_sample: int
) -> tuple[float, np.ndarray, list[int]]:
    """Seconds for WLS on ``n_sample`` evenly spaced dates, their residuals and the row positions used."""
    dummies = pd.get_dummies(industry, dtype=np.float64).iloc[:, 1:]  # one dropped: same column space
    design = sm.add_constant(pd.concat([dummies, styles], axis=1))
    rows = np.linspace(0, len(returns.index) - 1, n_sample).round().astype(int).tolist()
    residuals = np.empty((n_sample, returns.shape[1]))
    start = time.perf_counter()
    for j, t in enumerate(rows):
        fit = sm.WLS(returns.iloc[t].to_numpy(), design.to_numpy(), weights=weights.to_numpy()).fit()
        _ = (fit.params, fit.tvalues, fit.rsquared)
        residuals[j] = fit.resid
    return time.perf_counter() - start, residuals, rows


def bench_cross_section(n_assets: int, n_dates: int, n_sample: int) -> None:
    returns, styles, industry, weights = cross_section_data(n_assets, n_dates, 10, 5)
    start = time.perf_counter()
    model = fit_cross_section(returns, styles, industry=industry, weights=weights)
    ours = time.perf_counter() - start
    baseline, residuals, rows = statsmodels_cross_section(returns, styles, industry, weights, n_sample)
    extrapolated = baseline / n_sample * n_dates
    ours_residuals = model.fit_report.residuals.iloc[rows][returns.columns].to_numpy()
    gap = float(np.abs(ours_residuals - residuals).max())
    print(f"fit_cross_section  N={n_assets:,} T={n_dates} K={model.n_factors} (market, 10 industries, 5 styles)")
    print(f"  trimtab                                    {ours:8.3f} s")
    print(
        f"  statsmodels WLS per date ({n_sample} dates, x{n_dates / n_sample:g}) {extrapolated:8.3f} s"
        f"  ({baseline:.3f} s measured)"
    )
    print(f"  ratio baseline / trimtab                   {extrapolated / ours:8.1f}x")
    print(f"  largest residual difference on those dates {gap:8.1e}")


def bench_statistical(n_assets: int, n_dates: int, max_factors: int, seed: int = 1) -> None:
    rng = np.random.default_rng(seed)
    n_true = 5
    scores = rng.normal(0.0, 0.01, (n_dates, n_true))
    loadings = rng.normal(1.0, 0.5, (n_true, n_assets))
    values = scores @ loadings + rng.standard_t(5, size=(n_dates, n_assets)) * 0.015
    returns = pd.DataFrame(values, index=pd.bdate_range("2022-01-03", periods=n_dates),
                           columns=[f"S{i:05d}" for i in range(n_assets)])
    start = time.perf_counter()
    model = fit_statistical(returns, max_factors=max_factors)
    ours = time.perf_counter() - start
    considered = model.fit_report.extra["max_factors_considered"]
    centred = values - values.mean(axis=0)
    start = time.perf_counter()
    principal_components(centred, considered)
    decomposition = time.perf_counter() - start
    timings = {}
    for solver in ("full", "auto"):
        start = time.perf_counter()
        PCA(n_components=considered, svd_solver=solver, random_state=0).fit(values)
        timings[solver] = time.perf_counter() - start
    print(f"fit_statistical    N={n_assets:,} T={n_dates} ({considered} components considered, k={model.n_factors} chosen)")
    print(f"  trimtab (route {model.fit_report.extra['route']})                       {ours:8.3f} s")
    print(f"    of which the decomposition alone          {decomposition:8.3f} s")
    for solver, seconds in timings.items():
        print(f"  scikit-learn PCA svd_solver={solver!r:7}        {seconds:8.3f} s   ratio baseline / trimtab {seconds / ours:6.2f}x")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a small run (seconds)")
    args = parser.parse_args()
    if args.quick:
        bench_cross_section(n_assets=1_000, n_dates=100, n_sample=10)
        bench_statistical(n_assets=1_000, n_dates=100, max_factors=10)
        bench_statistical(n_assets=2_000, n_dates=60, max_factors=10)
    else:
        bench_cross_section(n_assets=5_000, n_dates=500, n_sample=25)
        bench_statistical(n_assets=5_000, n_dates=500, max_factors=20)
        bench_statistical(n_assets=20_000, n_dates=250, max_factors=20)


if __name__ == "__main__":
    main()
