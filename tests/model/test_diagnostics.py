"""Residual cross-correlation check and bias statistic against brute force, open data and closed forms."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import french
from scipy import stats

from trimtab.errors import InputError
from trimtab.model._diagnostics import BiasResult, ResidualCheck, bias_statistic, check_residuals

FACTORS = ["MktRF", "SMB", "HML", "Mom"]


def ols_residuals(returns: pd.DataFrame, factors: pd.DataFrame) -> pd.DataFrame:
    """Time-series OLS residuals with an intercept, one statsmodels fit per column."""
    X = sm.add_constant(factors)
    return pd.DataFrame({name: sm.OLS(returns[name], X).fit().resid for name in returns})


def brute_force(residuals: pd.DataFrame, alpha: float, n_worst: int = 10) -> tuple[int, int, pd.DataFrame]:
    """Every pair with np.corrcoef on its common dates: (tested, significant, worst pairs)."""
    critical = stats.norm.isf(alpha / 2)  # two-sided normal critical value
    rows = []
    values = residuals.to_numpy()
    names = residuals.columns
    for a in range(values.shape[1]):
        for b in range(a + 1, values.shape[1]):
            common = ~np.isnan(values[:, a]) & ~np.isnan(values[:, b])
            n = int(common.sum())
            x, y = values[common, a], values[common, b]
            if n < 4 or np.ptp(x) == 0 or np.ptp(y) == 0:
                continue
            r = np.corrcoef(x, y)[0, 1]
            rows.append((names[a], names[b], r, n, np.arctanh(r) * np.sqrt(n - 3)))
    table = pd.DataFrame(rows, columns=["asset_a", "asset_b", "correlation", "n_obs", "z"])
    significant = int((table["z"].abs() > critical).sum())
    worst = table.reindex(table["z"].abs().sort_values(ascending=False, kind="stable").index).head(n_worst)
    return len(table), significant, worst.reset_index(drop=True)


def assert_same_as_brute_force(result: ResidualCheck, residuals: pd.DataFrame, alpha: float) -> None:
    tested, significant, worst = brute_force(residuals, alpha)
    assert result.pairs_tested == tested
    assert result.pairs_significant == significant
    got = result.worst_pairs
    assert list(got.columns) == ["asset_a", "asset_b", "correlation", "n_obs", "z"]
    assert got["asset_a"].tolist() == worst["asset_a"].tolist()
    assert got["asset_b"].tolist() == worst["asset_b"].tolist()
    assert got["n_obs"].tolist() == worst["n_obs"].tolist()
    np.testing.assert_allclose(got["correlation"], worst["correlation"], rtol=1e-10)
    np.testing.assert_allclose(got["z"], worst["z"], rtol=1e-9)


@pytest.fixture(scope="module")
def french_data() -> pd.DataFrame:
    return french.load().set_index("dates")


def simulated_panel(n_assets: int, n_periods: int, seed: int, missing: float = 0.0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    common = rng.normal(size=(n_periods, 1))
    values = rng.normal(size=(n_periods, n_assets)) + 0.35 * common * rng.normal(size=n_assets)
    values[rng.random(values.shape) < missing] = np.nan
    return pd.DataFrame(values, columns=[f"A{i:03d}" for i in range(n_assets)])


# --- check_residuals: equality with brute force -------------------------------------------------


@pytest.mark.parametrize("block_size", [1, 4, 7, 512])
def test_blockwise_equals_brute_force_with_nans(block_size: int) -> None:
    panel = simulated_panel(23, 60, seed=1, missing=0.15)
    panel.iloc[:, 5] = np.nan  # an asset never observed
    panel.iloc[:54, 9] = np.nan  # an asset with 6 dates: some pairs have under 4 common dates
    panel.iloc[54:, 9] = [0.3, -1.2, 0.8, 2.0, -0.1, 0.5]
    result = check_residuals(panel, alpha=0.05, block_size=block_size)
    assert result.method == "all pairs, blockwise"
    assert_same_as_brute_force(result, panel, 0.05)
    assert list(result.excluded_assets) == ["A005"]


def test_blockwise_equals_dense_corrcoef_without_nans() -> None:
    panel = simulated_panel(30, 80, seed=2)
    result = check_residuals(panel, alpha=0.01, block_size=8)
    assert_same_as_brute_force(result, panel, 0.01)
    # Dense cross-check with one np.corrcoef call: same significant count.
    corr = np.corrcoef(panel.to_numpy(), rowvar=False)[np.triu_indices(30, 1)]
    z = np.arctanh(corr) * np.sqrt(80 - 3)
    assert result.pairs_significant == int((np.abs(z) > stats.norm.isf(0.005)).sum())


def test_mixed_dense_and_ragged_tiles_equal_brute_force() -> None:
    panel = simulated_panel(20, 50, seed=3)
    panel.iloc[[1, 7, 30], 12:] = np.nan  # first 12 columns complete, the rest ragged
    panel.iloc[:, 3] = 1.5  # constant: never testable
    result = check_residuals(panel, alpha=0.1, block_size=6)
    assert_same_as_brute_force(result, panel, 0.1)
    assert "A003" in list(result.excluded_assets)


def test_counts_and_p_value_follow_their_definitions() -> None:
    panel = simulated_panel(25, 40, seed=4, missing=0.1)
    result = check_residuals(panel, alpha=0.05)
    assert result.expected_significant == pytest.approx(0.05 * result.pairs_tested)
    # Binomial upper tail P(X >= k), scipy.stats.binom.
    expected_p = 1.0 - stats.binom.cdf(result.pairs_significant - 1, result.pairs_tested, 0.05)
    assert result.p_value == pytest.approx(expected_p, rel=1e-9)
    assert result.critical_z == pytest.approx(1.959963984540054, rel=1e-12)  # closed form Φ⁻¹(0.975)
    assert result.pairs_total == 25 * 24 // 2
    assert result.n_assets == result.n_assets_used == 25 and result.n_periods == 40


# --- check_residuals: verdicts on real and simulated data ---------------------------------------


def test_flags_french_industry_residuals_on_four_factors(french_data: pd.DataFrame) -> None:
    # The industry portfolios NoDur…Other (Ken French data via linearmodels), excess returns on MktRF,
    # SMB, HML, Mom: industry effects are not in the four factors, so their residuals are correlated.
    industries = list(french_data.loc[:, "NoDur":"Other"].columns)
    assert len(industries) == 12
    excess = french_data[industries].sub(french_data["RF"], axis=0)
    residuals = ols_residuals(excess, french_data[FACTORS])
    result = check_residuals(residuals)
    assert result.flagged
    assert result.pairs_tested == len(industries) * (len(industries) - 1) // 2
    assert result.pairs_significant > 2 * result.expected_significant
    assert result.p_value < 1e-6
    assert "FLAGGED" in result.summary()


def test_does_not_flag_exact_factor_model_residuals() -> None:
    # Returns simulated from an exact factor model with independent specific returns, then fitted by
    # statsmodels OLS on the true factors: residuals are independent across assets.
    rng = np.random.default_rng(11)
    n_periods, n_assets = 240, 80
    factors = pd.DataFrame(rng.normal(scale=0.04, size=(n_periods, 4)), columns=FACTORS)
    betas = rng.normal(size=(4, n_assets))
    specific = rng.normal(scale=0.05, size=(n_periods, n_assets))
    returns = pd.DataFrame(factors.to_numpy() @ betas + specific, columns=[f"S{i:02d}" for i in range(n_assets)])
    result = check_residuals(ols_residuals(returns, factors))
    assert not result.flagged
    assert result.pairs_tested == n_assets * (n_assets - 1) // 2
    # Under independence the count is about alpha × pairs = 31.6 with binomial s.d. ≈ 5.6.
    assert abs(result.pairs_significant - result.expected_significant) < 4 * np.sqrt(result.expected_significant)
    assert "not flagged" in result.summary()
    # issue #20: the verdict leads with the rule it applies and the excess ratio
    ratio = result.pairs_significant / result.expected_significant
    assert (f"rule: flagged when the significant pairs exceed 2× the expected count and the binomial tail p < {result.alpha:g}; "
            f"here {ratio:.2f}× expected, p = {result.p_value:.3g}: not flagged") in result.summary()


def test_flag_rule_needs_both_excess_count_and_small_p_value() -> None:
    # 10 assets, 45 pairs, alpha 0.01: expected 0.45. Two planted pairs exceed twice that, but the
    # binomial tail P(X >= 2) ≈ 0.074 is above alpha, so not flagged; five planted pairs are.
    rng = np.random.default_rng(14)
    base = rng.normal(size=(300, 10))
    two = base.copy()
    two[:, 1] += 2 * two[:, 0]
    two[:, 3] += 2 * two[:, 2]
    few = check_residuals(pd.DataFrame(two))
    assert few.pairs_significant == 2 and few.pairs_significant > 2 * few.expected_significant
    assert few.p_value == pytest.approx(stats.binom.sf(1, 45, 0.01), rel=1e-12) and few.p_value > 0.01
    assert not few.flagged
    five = base.copy()
    for k in range(5):
        five[:, 2 * k + 1] += 2 * five[:, 2 * k]
    many = check_residuals(pd.DataFrame(five))
    assert many.pairs_significant == 5 and many.p_value < 0.01 and many.flagged


# --- check_residuals: sampled path --------------------------------------------------------------


def test_sampled_pairs_are_reproducible_and_correct() -> None:
    panel = simulated_panel(40, 70, seed=5, missing=0.1)
    first = check_residuals(panel, max_pairs=200, seed=7)
    again = check_residuals(panel, max_pairs=200, seed=7)
    other = check_residuals(panel, max_pairs=200, seed=8)
    assert first.method == "sampled pairs" and first.seed == 7
    assert first.pairs_total == 780 and first.pairs_tested == 200
    pd.testing.assert_frame_equal(first.worst_pairs, again.worst_pairs)
    assert first.pairs_significant == again.pairs_significant
    assert not first.worst_pairs.equals(other.worst_pairs)
    # Every reported pair carries its brute-force correlation and common count.
    _, _, everything = brute_force(panel, 0.01, n_worst=780)
    lookup = everything.set_index(["asset_a", "asset_b"])
    for row in first.worst_pairs.itertuples(index=False):
        assert row.asset_a < row.asset_b
        ref = lookup.loc[(row.asset_a, row.asset_b)]
        assert row.n_obs == ref["n_obs"]
        assert row.correlation == pytest.approx(ref["correlation"], rel=1e-10)
    # The sampled significant count cannot exceed the significant count over all pairs.
    assert first.pairs_significant <= check_residuals(panel).pairs_significant
    assert "sampled, seed 7" in first.summary()


def test_sampling_all_pairs_gives_the_blockwise_counts() -> None:
    panel = simulated_panel(15, 30, seed=6, missing=0.2)
    full = check_residuals(panel, alpha=0.1)
    # max_pairs equal to the total: not sampled; one fewer: sampled, and with the same worst pairs
    # unless the dropped pair was among them.
    assert check_residuals(panel, alpha=0.1, max_pairs=105).method == "all pairs, blockwise"
    nearly = check_residuals(panel, alpha=0.1, max_pairs=104, block_size=3)
    assert nearly.method == "sampled pairs"
    assert full.pairs_tested - nearly.pairs_tested == 1
    assert full.pairs_significant - nearly.pairs_significant in (0, 1)


def test_worst_pairs_length_and_empty_case() -> None:
    panel = simulated_panel(6, 20, seed=7)
    assert len(check_residuals(panel, n_worst=3).worst_pairs) == 3
    assert len(check_residuals(panel, n_worst=0).worst_pairs) == 0
    sparse = pd.DataFrame({"a": [1.0, 2.0, np.nan, np.nan, 5.0], "b": [np.nan, np.nan, 1.0, 2.0, 3.0]})
    empty = check_residuals(sparse)
    assert empty.pairs_tested == 0 and empty.p_value == 1.0 and not empty.flagged
    assert np.isnan(empty.share_significant)
    assert list(empty.excluded_assets) == ["a", "b"]
    assert "not tested" in empty.summary()


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"alpha": 0.0}, "alpha must be a probability strictly between 0 and 1, got 0.0"),
        ({"alpha": 1.5}, "alpha must be a probability strictly between 0 and 1, got 1.5"),
        ({"max_pairs": 0}, "max_pairs must be a whole number >= 1 or None, got 0"),
        ({"block_size": 2.5}, "block_size must be a whole number >= 1, got 2.5"),
        ({"seed": -1}, "seed must be a whole number >= 0, got -1"),
        ({"n_worst": -2}, "n_worst must be a whole number >= 0, got -2"),
    ],
)
def test_check_residuals_option_errors(kwargs: dict, match: str) -> None:
    with pytest.raises(InputError, match="check_residuals: " + match):
        check_residuals(simulated_panel(3, 10, seed=0), **kwargs)


def test_check_residuals_input_errors() -> None:
    panel = simulated_panel(3, 10, seed=0)
    with pytest.raises(InputError, match="check_residuals: expected a DataFrame of dates × assets, got ndarray"):
        check_residuals(panel.to_numpy())  # type: ignore[arg-type]
    with pytest.raises(InputError, match="check_residuals: need at least 2 asset columns, got 1"):
        check_residuals(panel.iloc[:, :1])
    with pytest.raises(InputError, match="check_residuals: duplicate assets: A000"):
        check_residuals(panel.set_axis(["A000", "A000", "A002"], axis=1))
    bad = panel.copy()
    bad.iloc[2, 2] = -np.inf
    with pytest.raises(InputError, match="check_residuals: infinite values in columns: A002"):
        check_residuals(bad)
    with pytest.raises(InputError, match="check_residuals: non-numeric columns: A001"):
        check_residuals(panel.assign(A001=["x"] * 10))


# --- bias_statistic -----------------------------------------------------------------------------


def test_bias_statistic_by_hand() -> None:
    dates = pd.date_range("2020-01-31", periods=5, freq="ME")
    r = pd.Series([0.01, -0.02, 0.03, 0.0, -0.01], index=dates)
    sigma = pd.Series([0.02, 0.02, 0.01, 0.04, 0.02], index=dates[::-1]).sort_index()
    z = np.array([0.01 / sigma.iloc[0], -0.02 / sigma.iloc[1], 0.03 / sigma.iloc[2], 0.0, -0.01 / sigma.iloc[4]])
    mean = z.sum() / 5
    expected = np.sqrt(((z - mean) ** 2).sum() / 4)
    result = bias_statistic(r, sigma.sample(frac=1.0, random_state=0))  # labels matched, not positions
    assert isinstance(result, BiasResult)
    assert result.statistic == pytest.approx(expected, rel=1e-13)
    assert result.n_periods == 5
    assert result.lower == pytest.approx(1 - np.sqrt(0.4)) and result.upper == pytest.approx(1 + np.sqrt(0.4))
    assert result.inside == (result.lower <= expected <= result.upper)
    np.testing.assert_allclose(result.standardised.to_numpy(), z, rtol=1e-13)
    assert "Bias statistic" in result.summary()


def test_bias_statistic_inside_band_when_forecast_is_right() -> None:
    # With correct forecasts zₜ ~ N(0, 1), so (T − 1) b² ~ χ²(T − 1) (closed form, normal sampling theory).
    T = 1000
    half = np.sqrt(2 / T)
    coverage = stats.chi2.cdf((T - 1) * (1 + half) ** 2, T - 1) - stats.chi2.cdf((T - 1) * (1 - half) ** 2, T - 1)
    assert coverage > 0.95
    rng = np.random.default_rng(12)
    sigma = rng.uniform(0.01, 0.05, size=T)
    result = bias_statistic(rng.normal(size=T) * sigma, sigma)
    assert result.inside and "consistent" in result.summary()
    # Across 300 seeds the share inside is the coverage within 4 binomial standard deviations.
    inside = []
    for seed in range(300):
        g = np.random.default_rng(1000 + seed)
        inside.append(bias_statistic(g.normal(size=T) * sigma, sigma).inside)
    assert abs(np.mean(inside) - coverage) < 4 * np.sqrt(coverage * (1 - coverage) / 300)


def test_bias_statistic_detects_a_forecast_twice_too_high_or_low() -> None:
    rng = np.random.default_rng(13)
    T = 500
    sigma = rng.uniform(0.01, 0.03, size=T)
    returns = rng.normal(size=T) * sigma
    high = bias_statistic(returns, 2 * sigma)
    assert high.statistic == pytest.approx(0.5, abs=4 * 0.5 / np.sqrt(2 * T))  # s.e. of b ≈ b/√(2T)
    assert not high.inside and "over-forecast" in high.summary()
    low = bias_statistic(returns, sigma / 2)
    assert low.statistic == pytest.approx(4 * high.statistic, rel=1e-12)  # b scales with 1/σ exactly
    assert not low.inside and "under-forecast" in low.summary()


def test_bias_statistic_errors() -> None:
    dates = pd.date_range("2021-01-01", periods=4, freq="D")
    r = pd.Series([0.01, 0.02, -0.01, 0.0], index=dates)
    s = pd.Series(0.02, index=dates)
    with pytest.raises(InputError, match=r"periods missing from forecast_volatility: .*2021-01-04"):
        bias_statistic(r, s.iloc[:3])
    with pytest.raises(InputError, match=r"periods missing from realised_returns: .*2021-01-04"):
        bias_statistic(r.iloc[:3], s)
    with pytest.raises(InputError, match="realised_returns has 4 periods but forecast_volatility has 3"):
        bias_statistic(r, np.full(3, 0.02))
    with pytest.raises(InputError, match=r"forecast_volatility must be > 0; not for periods: .*2021-01-02"):
        bias_statistic(r, s.where(s.index != dates[1], 0.0))
    with pytest.raises(InputError, match=r"bias_statistic \(realised_returns\): missing or infinite values for: "):
        bias_statistic(r.where(r.index != dates[2]), s)
    with pytest.raises(InputError, match="need at least 2 periods, got 1"):
        bias_statistic([0.01], [0.02])
    with pytest.raises(InputError, match="realised_returns must be a Series or 1-D array, got a DataFrame"):
        bias_statistic(r.to_frame(), s)
    with pytest.raises(InputError, match="forecast_volatility must be 1-D, got 2 dimensions"):
        bias_statistic(np.ones(4), np.ones((2, 2)))
    with pytest.raises(InputError, match="realised_returns must be numbers, could not convert"):
        bias_statistic(["a", "b"], [0.1, 0.1])
    with pytest.raises(InputError, match=r"bias_statistic \(realised_returns\): duplicate periods"):
        bias_statistic(pd.Series([0.1, 0.2], index=["x", "x"]), pd.Series([0.1, 0.2], index=["x", "y"]))
