"""The invented demo fund: deterministic, invented, and its fitted model recovers the simulated truth."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from trimtab.demo import (
    _BLOCKED,
    DEMO_FILES,
    DEMO_SCENARIOS,
    INDUSTRIES,
    INFORMATION_COEFFICIENT,
    SPECIFIC_DOF,
    alpha_scores,
    make_demo_fund,
    stock_codes,
)
from trimtab.errors import InputError
from trimtab.model import fit_time_series

REPO = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def fund():  # type: ignore[no-untyped-def]
    return make_demo_fund(n_assets=600, n_holdings=120, seed=5)


def test_same_seed_same_fund_other_seed_other_fund() -> None:
    a = make_demo_fund(n_assets=100, n_holdings=20, n_days=300, seed=1)
    b = make_demo_fund(n_assets=100, n_holdings=20, n_days=300, seed=1)
    c = make_demo_fund(n_assets=100, n_holdings=20, n_days=300, seed=2)
    pd.testing.assert_frame_equal(a.returns, b.returns)
    pd.testing.assert_series_equal(a.shares, b.shares)
    pd.testing.assert_series_equal(a.alpha, b.alpha)
    assert not a.returns.columns.equals(c.returns.columns)


def test_shape_of_the_default_fund() -> None:
    full = make_demo_fund()
    assert full.returns.shape == (1008, 1500)
    assert len(full.shares) == 300
    assert full.attributes["industry"].nunique() == 10
    assert set(full.attributes["industry"]) == set(INDUSTRIES)
    late = full.returns.isna().any()
    assert 10 <= late.sum() <= 60  # "a few assets with short histories": 2% of 1,500
    assert full.returns.notna().sum().min() >= 260
    assert full.benchmark.sum() == pytest.approx(1.0, abs=1e-12)
    # the benchmark is cap-weighted
    np.testing.assert_allclose(full.benchmark, full.attributes["market_cap"] / full.attributes["market_cap"].sum(), rtol=1e-12)
    # the fund holds 300 names and its cash: weights plus cash share sum to one
    assert full.holdings_weights.sum() + full.cash / full.nav == pytest.approx(1.0, abs=1e-12)
    # the drifted book is away from its targets (a rebalance has something to do)
    assert (full.holdings_weights / full.holdings_weights.sum() - full.targets).abs().sum() > 0.05


def test_codes_are_invented_four_letter_codes() -> None:
    rng = np.random.default_rng(0)
    codes = stock_codes(1500, rng)
    assert len(set(codes)) == 1500
    assert all(len(c) == 4 and c.isalpha() and c.isupper() for c in codes)
    assert all(c[2] in "JQXZ" for c in codes)  # the scheme: consonant, vowel, J/Q/X/Z, vowel
    assert not set(codes) & _BLOCKED
    with pytest.raises(InputError, match=r"demo: n_assets must be at most \d+ \(the invented codes run out\), got 5000"):
        stock_codes(5000, rng)


def test_bad_sizes() -> None:
    with pytest.raises(InputError, match=r"demo: n_holdings must be between 10 and n_assets \(100\), got 200"):
        make_demo_fund(n_assets=100, n_holdings=200)
    with pytest.raises(InputError, match=r"demo: n_days must be at least 300, got 20"):
        make_demo_fund(n_assets=100, n_holdings=20, n_days=20)


def test_alpha_has_the_stated_information_coefficient(fund) -> None:  # type: ignore[no-untyped-def]
    # alpha = IC·σᵢ·zᵢ: alpha/σᵢ is IC times the score, exactly
    sigma = np.sqrt(fund.specific_variance.loc[fund.alpha.index] * 252)
    z = fund.alpha / sigma / INFORMATION_COEFFICIENT
    # the scores correlate with next year's specific returns; a sample correlation has standard
    # error (1 − ρ²)/√n (Fisher), ≈ 0.04 here, so this only bounds it loosely ...
    realised = fund.next_year_specific.loc[z.index] / sigma
    assert abs(np.corrcoef(z, realised)[0, 1] - INFORMATION_COEFFICIENT) < 5 * (1 - INFORMATION_COEFFICIENT**2) / np.sqrt(len(z))
    assert len(fund.alpha) == 600 - 600 // 20
    # ... and the construction itself is checked on 400,000 draws: corr = IC to 5·(1 − IC²)/√n ≈ 0.008,
    # and Var(z) = IC² + (1 − IC²) = 1 to 5·√(2/n) (normal theory for a sample variance).
    rng = np.random.default_rng(17)
    target = rng.normal(size=400_000)
    scores = alpha_scores(target, INFORMATION_COEFFICIENT, rng)
    n = len(target)
    assert abs(np.corrcoef(scores, target)[0, 1] - INFORMATION_COEFFICIENT) < 5 * (1 - INFORMATION_COEFFICIENT**2) / np.sqrt(n)
    assert abs(scores.var() - 1.0) < 5 * np.sqrt(2 / n)


def test_fitted_model_recovers_the_simulated_truth(fund) -> None:  # type: ignore[no-untyped-def]
    model = fit_time_series(fund.returns, fund.factor_returns, min_periods=126)
    assert model.n_assets == 600 and list(model.factors) == list(fund.exposures.columns)
    full = fund.returns.columns[fund.returns.notna().all()]
    X = fund.factor_returns.to_numpy()
    T, K = X.shape
    N = len(full)

    # Exposures. OLS with an intercept on regressors X: conditional on X, Var(β̂ᵢ) = σᵢ²·(X̃ᵀX̃)⁻¹ with X̃
    # the demeaned regressors (Gauss–Markov; holds for any error law with finite variance, so for
    # Student-t with ν = 5). For one factor this is the textbook SE σₑ/(σ_f·√T). So zᵢₖ = (β̂ᵢₖ − βᵢₖ)/SEᵢₖ
    # is close to N(0, 1) for T = 1,008 (central limit theorem over dates).
    Xc = X - X.mean(axis=0)
    G = np.linalg.inv(Xc.T @ Xc)
    se = np.sqrt(np.outer(fund.specific_variance.loc[full], np.diag(G)))
    z = (model.exposures.loc[full, fund.exposures.columns] - fund.exposures.loc[full]).to_numpy() / se
    # E[z²] = 1. Within an asset the K estimates are correlated with correlation matrix C = G scaled to
    # unit diagonal, so for Gaussian z, Var(Σₖ zₖ²) = 2·tr(C²); assets are independent, hence
    # sd(mean z²) = √(2·tr(C²)/(N·K²)). Five standard deviations:
    C = G / np.sqrt(np.outer(np.diag(G), np.diag(G)))
    sd_mean = np.sqrt(2 * np.trace(C @ C) / (N * K**2))
    assert abs((z**2).mean() - 1.0) < 5 * sd_mean
    # No single estimate is far out: Bonferroni bound at 0.1% over N·K normal deviates.
    assert np.abs(z).max() < stats.norm.ppf(1 - 0.0005 / (N * K))

    # Specific variance. σ̂ᵢ² = RSS/(n − p) is unbiased; Var(σ̂ᵢ²)/σᵢ⁴ ≈ (κ − 1)/(n − p) with κ the
    # kurtosis of the errors, 3 + 6/(ν − 4) = 9 for Student-t ν = 5 (moments of the t distribution).
    # The mean over N independent assets of σ̂²/σ² therefore has sd √((κ − 1)/((n − p)·N)).
    kappa = 3 + 6 / (SPECIFIC_DOF - 4)
    ratio = model.specific_variance.loc[full] / fund.specific_variance.loc[full]
    assert abs(ratio.mean() - 1.0) < 5 * np.sqrt((kappa - 1) / ((T - K - 1) * N))

    # Factor covariance. The model's F is the sample covariance of the observed factor returns
    # (numpy reference; ddof does not matter at this tolerance), and that estimates the true F with
    # relative sd √(2/T) on the diagonal (normal factor returns: Var(s²) = 2σ⁴/(T − 1)).
    Fhat = model.factor_covariance.loc[fund.factor_covariance.index, fund.factor_covariance.columns].to_numpy()
    np.testing.assert_allclose(Fhat, np.cov(X, rowvar=False), rtol=2e-3)
    truth = fund.factor_covariance.to_numpy()
    assert np.all(np.abs(np.diag(Fhat) / np.diag(truth) - 1) < 5 * np.sqrt(2 / (T - 1)))
    # correlations: sd(ρ̂) ≈ (1 − ρ²)/√T (Fisher)
    sd = np.sqrt(np.diag(truth))
    rho, rho_hat = truth / np.outer(sd, sd), Fhat / np.outer(np.sqrt(np.diag(Fhat)), np.sqrt(np.diag(Fhat)))
    off = ~np.eye(K, dtype=bool)
    assert np.all(np.abs(rho_hat - rho)[off] < 5 * (1 - rho[off] ** 2) / np.sqrt(T) + 1e-12)


def test_repository_scenarios_are_the_demo_files() -> None:
    # scenarios/ in the repository holds exactly the files `trimtab demo` writes.
    for name, text in DEMO_FILES.items():
        assert (REPO / "scenarios" / name).read_text(encoding="utf-8") == text, name
    assert {p.name for p in (REPO / "scenarios").glob("*.yaml")} == set(DEMO_FILES)
    assert set(DEMO_SCENARIOS) <= {Path(n).stem for n in DEMO_FILES}
