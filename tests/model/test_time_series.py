"""fit_time_series against statsmodels OLS/WLS, linearmodels' TradedFactorModel and simulated models.

Data: ``linearmodels.datasets.french.load()`` (monthly MktRF, SMB, HML, Mom, RF and 30 portfolios:
12 industries and 18 size/value and size/momentum sorts, 1949–2017) and simulations seeded below.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.asset_pricing import TradedFactorModel

from trimtab import DataWarning, FactorModel, InputError, fit_time_series
from trimtab.model import CovarianceSettings

from ..conftest import french_monthly

FACTORS = ["MktRF", "SMB", "HML", "Mom"]
REL = 1e-8


@pytest.fixture(scope="module")
def french_data() -> tuple[pd.DataFrame, pd.DataFrame]:
    return french_monthly()


def ew_weights(n: int, half_life: float) -> np.ndarray:
    return 0.5 ** ((n - 1 - np.arange(n)) / half_life)


def assert_matches_statsmodels(model: FactorModel, asset: str, result: object, *, variance: float) -> None:
    """Our betas, t-statistics, R² and residual variance for one asset against a statsmodels fit."""
    table = model.fit_report.assets
    params = result.params.to_numpy()  # type: ignore[attr-defined]
    tvalues = result.tvalues.to_numpy()  # type: ignore[attr-defined]
    np.testing.assert_allclose(model.exposures.loc[asset].to_numpy(), params[1:], rtol=REL)
    np.testing.assert_allclose(table.loc[asset, "intercept"], params[0], rtol=REL)
    ours_t = table.loc[asset, ["t_intercept", *[f"t_{f}" for f in model.factors]]].to_numpy(dtype=float)
    np.testing.assert_allclose(ours_t, tvalues, rtol=REL)
    np.testing.assert_allclose(table.loc[asset, "r_squared"], result.rsquared, rtol=REL)  # type: ignore[attr-defined]
    np.testing.assert_allclose(model.specific_variance[asset], variance, rtol=REL)
    np.testing.assert_allclose(table.loc[asset, "residual_volatility"] ** 2, variance, rtol=REL)
    assert table.loc[asset, "n_observations"] == result.nobs  # type: ignore[attr-defined]


# ---------------------------------------------------------------------------------- references


def test_ols_matches_statsmodels_for_every_french_portfolio(french_data) -> None:
    excess, factors = french_data
    model = fit_time_series(excess, factors)
    assert model.n_assets == excess.shape[1] == 30 and model.periods_per_year == 12
    design = sm.add_constant(factors)
    for asset in excess.columns:
        result = sm.OLS(excess[asset], design).fit()
        # statsmodels OLS: params, tvalues, rsquared, mse_resid = ssr/df_resid
        assert_matches_statsmodels(model, asset, result, variance=result.mse_resid)
        np.testing.assert_allclose(model.fit_report.residuals[asset], result.resid, rtol=1e-7, atol=1e-13)
    # numpy.cov: the default factor covariance is the sample covariance with divisor T − 1
    np.testing.assert_allclose(model.factor_covariance, np.cov(factors.to_numpy(), rowvar=False), rtol=1e-12)
    report = model.fit_report
    assert report.method == "time_series" and len(report.dropped) == 0
    assert report.factor_returns.equals(factors)
    assert model.provenance["window"] == ["1949-01-01", str(factors.index[-1].date())]
    assert model.provenance["estimator"] == "fit_time_series" and model.provenance["n_dropped"] == 0


def test_half_life_matches_statsmodels_wls(french_data) -> None:
    excess, factors = french_data
    h = 60.0
    model = fit_time_series(excess, factors, half_life=h)
    w = ew_weights(len(factors), h)
    design = sm.add_constant(factors)
    for asset in excess.columns:
        result = sm.WLS(excess[asset], design, weights=w).fit()
        # statsmodels WLS with weights normalised to mean 1: its mse_resid is our
        # [Σ w e² / Σ w] · T/(T − K − 1); params, tvalues, rsquared do not depend on the scale
        normalised = sm.WLS(excess[asset], design, weights=w / w.mean()).fit()
        assert_matches_statsmodels(model, asset, result, variance=normalised.mse_resid)
    # numpy.cov with aweights = the EWMA weights: the factor covariance with the same half-life
    np.testing.assert_allclose(model.factor_covariance, np.cov(factors.to_numpy(), rowvar=False, aweights=w), rtol=1e-10)
    means = model.fit_report.extra["factor_means"]
    np.testing.assert_allclose(means, np.average(factors.to_numpy(), axis=0, weights=w), rtol=1e-12)


def test_traded_factor_model_risk_premia_and_betas(french_data) -> None:
    excess, factors = french_data
    model = fit_time_series(excess, factors)
    reference = TradedFactorModel(excess, factors).fit()
    # linearmodels TradedFactorModel: risk premia of traded factors are their sample means
    np.testing.assert_allclose(model.fit_report.extra["factor_means"][FACTORS], reference.risk_premia[FACTORS], rtol=1e-12)
    np.testing.assert_allclose(model.exposures.loc[excess.columns, FACTORS], reference.betas.loc[excess.columns, FACTORS], rtol=REL)
    np.testing.assert_allclose(model.fit_report.assets.loc[excess.columns, "intercept"], reference.alphas[excess.columns], rtol=1e-7)


def ragged(excess: pd.DataFrame) -> pd.DataFrame:
    out = excess.copy()
    out.iloc[:200, 0:4] = np.nan  # four late listers sharing a start date
    out.iloc[:300, 4] = np.nan  # a late lister of its own
    out.iloc[-150:, 5:7] = np.nan  # delisted
    out.iloc[100:130, 7] = np.nan  # a gap
    rng = np.random.default_rng(11)
    out.iloc[rng.random(len(out)) < 0.2, 8] = np.nan  # scattered missing months
    return out


@pytest.mark.parametrize("half_life", [None, 48.0], ids=["ols", "half_life"])
def test_ragged_histories_match_statsmodels_on_own_dates(french_data, half_life: float | None) -> None:
    excess, factors = french_data
    data = ragged(excess)
    model = fit_time_series(data, factors, half_life=half_life)
    w = np.ones(len(factors)) if half_life is None else ew_weights(len(factors), half_life)
    weights = pd.Series(w, index=factors.index)
    for asset in data.columns[:10]:
        y = data[asset].dropna()
        X = sm.add_constant(factors.loc[y.index])
        wi = weights.loc[y.index].to_numpy()  # calendar weights, on the asset's own dates
        result = sm.WLS(y, X, weights=wi).fit()
        normalised = sm.WLS(y, X, weights=wi / wi.mean()).fit()
        # statsmodels WLS (OLS when the weights are equal) on that asset's dates only
        assert_matches_statsmodels(model, asset, result, variance=normalised.mse_resid)
        assert model.fit_report.residuals[asset].isna().sum() == len(data) - len(y)


def first_pass_date_variance(data: pd.DataFrame, factors: pd.DataFrame) -> pd.Series:
    """v̂ₜ = mean over assets observed on t of eᵢₜ²/σ̂ᵢ², from per-asset statsmodels OLS."""
    standardised = pd.DataFrame(index=data.index, columns=data.columns, dtype=float)
    for asset in data.columns:
        y = data[asset].dropna()
        result = sm.OLS(y, sm.add_constant(factors.loc[y.index])).fit()
        standardised.loc[y.index, asset] = result.resid**2 / result.mse_resid
    return standardised.mean(axis=1)


def test_gls_second_pass_matches_statsmodels_wls(french_data) -> None:
    excess, factors = french_data
    data = ragged(excess)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model = fit_time_series(data, factors, gls=True)
    v = first_pass_date_variance(data, factors)
    np.testing.assert_allclose(model.fit_report.extra["date_variance"], v, rtol=1e-8)
    for asset in data.columns:
        y = data[asset].dropna()
        X = sm.add_constant(factors.loc[y.index])
        result = sm.WLS(y, X, weights=1.0 / v.loc[y.index]).fit()
        # statsmodels WLS with weights 1/v̂ₜ: params, tvalues, rsquared; d from its plain residuals
        resid = result.resid.to_numpy()
        variance = np.sum(resid**2) / (len(y) - len(FACTORS) - 1)
        assert_matches_statsmodels(model, asset, result, variance=variance)
    # the date weights are the equal first-pass weights 1/T divided by v̂ₜ: turbulent dates count less
    weights = model.fit_report.extra["date_weights"]
    np.testing.assert_allclose(weights * v, 1.0 / len(v), rtol=1e-12)


def test_gls_date_without_kept_assets(french_data) -> None:
    excess, factors = french_data
    data = excess.iloc[:, :6].copy()
    data.iloc[:5, 1:] = np.nan  # on the first five months only the short asset NoDur... has returns
    data.iloc[5:, 0] = np.nan  # ...and it is dropped (5 returns)
    with pytest.warns(DataWarning, match="dropped 1 of 6"):
        model = fit_time_series(data, factors, gls=True)
    v = model.fit_report.extra["date_variance"]
    # no kept asset on those dates: v̂ₜ = 1 there (documented), the rest from the kept assets
    assert (v.iloc[:5] == 1.0).all()
    np.testing.assert_allclose(v.iloc[5:], first_pass_date_variance(data.iloc[:, 1:], factors).iloc[5:], rtol=1e-8)


# ---------------------------------------------------------------------------------- simulation


def simulate(n_assets: int, n_dates: int, seed: int) -> tuple[pd.DataFrame, pd.DataFrame, pd.DataFrame, pd.Series]:
    """Known model r = α + Bf + e, Gaussian factors, Student-t(5) specific returns scaled to σᵢ."""
    rng = np.random.default_rng(seed)
    dates = pd.bdate_range("2015-01-01", periods=n_dates)
    names = ["market", "size", "value"]
    factors = pd.DataFrame(rng.normal(0.0003, 0.01, size=(n_dates, 3)), index=dates, columns=names)
    assets = [f"S{i:03d}" for i in range(n_assets)]
    betas = pd.DataFrame(rng.normal([1.0, 0.0, 0.0], 0.5, size=(n_assets, 3)), index=assets, columns=names)
    sigma = pd.Series(rng.uniform(0.01, 0.03, n_assets), index=assets)
    # Student-t with ν = 5 has variance ν/(ν − 2) = 5/3: divide by √(5/3) for unit variance
    shocks = rng.standard_t(5, size=(n_dates, n_assets)) / np.sqrt(5.0 / 3.0)
    returns = factors.to_numpy() @ betas.to_numpy().T + shocks * sigma.to_numpy()
    return pd.DataFrame(returns, index=dates, columns=assets), factors, betas, sigma


def test_recovers_a_known_model_with_fat_tailed_specific_returns() -> None:
    n_assets, n_dates = 400, 750
    returns, factors, betas, sigma = simulate(n_assets, n_dates, seed=7)
    model = fit_time_series(returns, factors)
    assert model.periods_per_year == 252
    table = model.fit_report.assets
    # Exposures. OLS is unbiased and, with i.i.d. errors of finite variance, (β̂ − β)/se is
    # asymptotically N(0, 1) whatever their distribution (central limit theorem; T = 750).
    # se = |β̂ / t|. P(|Z| > 5) ≈ 5.7e-7, so none of the 1,200 exceeds 5 se (expected 7e-4).
    # The count beyond 2 se is Binomial(1200, 0.0455): mean 54.6, sd 7.2; allow ±4 sd.
    error = model.exposures - betas
    se = (model.exposures / table[[f"t_{f}" for f in factors.columns]].to_numpy()).abs()
    z = (error / se).to_numpy()
    assert np.abs(z).max() < 5
    outside = int((np.abs(z) > 2).sum())
    assert abs(outside - 54.6) < 4 * 7.2, outside
    # Specific variances. s² = SSR/(T − K − 1) is unbiased; for i.i.d. errors with kurtosis κ,
    # Var(s²) ≈ σ⁴ (κ − 1)/T (the variance of a sample variance, e.g. Cramér 1946, §27.4, from
    # memory). Student-t(ν) has κ = 3 + 6/(ν − 4) = 9 for ν = 5, so sd(s²/σ² − 1) ≈ √(8/T) = 0.103.
    # Chebyshev (any distribution): at most 1/16 of assets beyond 4 sd on average; the mean of the
    # 400 ratios has sd 0.103/√400 = 0.0052 (independent assets): allow 4 of those.
    ratio = (model.specific_variance / sigma**2).to_numpy()
    sd = np.sqrt(8.0 / (n_dates - 4))
    assert np.mean(np.abs(ratio - 1) > 4 * sd) < 1 / 16
    assert abs(ratio.mean() - 1) < 4 * sd / np.sqrt(n_assets)
    # sd of the ratio across assets is close to √(8/T): its own sampling error is large with
    # these tails, so only a factor-of-two band is asserted; κ = 3 would give √(2/T) = 0.052.
    assert 0.5 * sd < ratio.std() < 2 * sd
    assert ratio.std() > 1.3 * np.sqrt(2.0 / n_dates)


def test_rolling_betas_show_a_jump_in_the_exposure_history() -> None:
    rng = np.random.default_rng(21)
    n_dates = 240
    dates = pd.date_range("2000-01-31", periods=n_dates, freq="ME")
    market = rng.normal(0.005, 0.045, n_dates)
    beta = np.where(np.arange(n_dates) < 120, 0.5, 1.5)  # jumps after 10 years
    returns = pd.DataFrame({"JUMP": beta * market + rng.normal(0, 0.01, n_dates),
                            "FLAT": 1.0 * market + rng.normal(0, 0.01, n_dates)}, index=dates)
    factors = pd.DataFrame({"market": market}, index=dates)
    model = fit_time_series(returns, factors, rolling_window=36, exposure_step=6)
    history = model.fit_report.exposure_history
    assert list(history.columns) == ["date", "asset", "factor", "exposure"]
    jump = history[history.asset == "JUMP"].set_index("date")["exposure"]
    assert jump.index[-1] == dates[-1] and (jump.index[1:] - jump.index[:-1]).max() <= pd.Timedelta(days=6 * 31)
    before, after = jump[jump.index <= dates[119]], jump[jump.index >= dates[119 + 36]]
    assert np.all(np.abs(before - 0.5) < 0.1) and np.all(np.abs(after - 1.5) < 0.1)
    straddling = jump[(jump.index > dates[125]) & (jump.index < dates[149])]
    assert np.all((straddling > 0.6) & (straddling < 1.4))
    # the model is the last window's fit: statsmodels OLS on the last 36 months
    last = sm.OLS(returns["JUMP"].iloc[-36:], sm.add_constant(factors.iloc[-36:])).fit()
    np.testing.assert_allclose(model.exposures.loc["JUMP", "market"], last.params["market"], rtol=REL)
    np.testing.assert_allclose(model.specific_variance["JUMP"], last.mse_resid, rtol=REL)
    np.testing.assert_allclose(jump.iloc[-1], model.exposures.loc["JUMP", "market"], rtol=1e-12)
    assert model.provenance["window"] == [str(dates[-36].date()), str(dates[-1].date())]

    ew = fit_time_series(returns, factors, exposure_half_life=12)
    ew_jump = ew.fit_report.exposure_history.query("asset == 'JUMP'").set_index("date")["exposure"]
    assert abs(ew_jump.loc[dates[119]] - 0.5) < 0.15 and abs(ew_jump.iloc[-1] - 1.5) < 0.1
    # exposure_half_life=h gives the same model as half_life=h (plus the history)
    same = fit_time_series(returns, factors, half_life=12)
    np.testing.assert_allclose(ew.exposures, same.exposures, rtol=1e-12)
    np.testing.assert_allclose(ew_jump.iloc[-1], ew.exposures.loc["JUMP", "market"], rtol=1e-12)


# ---------------------------------------------------------------------------------- dropping


def test_short_and_constant_histories_are_dropped_with_a_warning(french_data) -> None:
    excess, factors = french_data
    data = excess.iloc[:, :5].copy()
    data.iloc[:-10, 0] = np.nan  # 10 returns only
    data["FLAT"] = 0.001  # constant returns: zero variance
    with pytest.warns(DataWarning, match=r"dropped 2 of 6 assets .*NoDur, FLAT"):
        model = fit_time_series(data, factors)
    dropped = model.fit_report.dropped
    assert dropped["NoDur"] == "10 returns in the window, fewer than min_periods=24"
    assert dropped["FLAT"] == "constant returns (zero variance) on its dates"
    assert list(model.assets) == list(data.columns[1:5])
    assert model.provenance["n_dropped"] == 2


def test_collinear_on_own_dates_is_dropped(french_data) -> None:
    excess, factors = french_data
    f = factors.copy()
    f.iloc[:100, 1] = 0.0  # SMB constant over the first 100 months
    data = excess.iloc[:, :3].copy()
    data.iloc[100:, 0] = np.nan
    with pytest.warns(DataWarning, match="dropped 1 of 3"):
        model = fit_time_series(data, f)
    assert model.fit_report.dropped[data.columns[0]] == "factors collinear on its 100 dates"


def test_every_asset_dropped_is_an_error(french_data) -> None:
    excess, factors = french_data
    with pytest.raises(InputError, match=r"every one of the 30 assets was dropped: NoDur \(819 returns"):
        fit_time_series(excess, factors, min_periods=1000)


# ---------------------------------------------------------------------------------- bad input


def small_inputs() -> tuple[pd.DataFrame, pd.DataFrame]:
    rng = np.random.default_rng(5)
    dates = pd.date_range("2010-01-31", periods=40, freq="ME")
    factors = pd.DataFrame(rng.normal(0, 0.04, (40, 2)), index=dates, columns=["market", "size"])
    returns = pd.DataFrame(rng.normal(0, 0.05, (40, 3)), index=dates, columns=["A", "B", "C"])
    return returns, factors


def test_bad_factor_values_name_column_and_date() -> None:
    returns, factors = small_inputs()
    factors.iloc[3, 1] = np.nan
    with pytest.raises(InputError, match=r"factor_returns has NaN or infinite values .*: size on 2010-04-30"):
        fit_time_series(returns, factors)
    factors.iloc[3, 1] = np.inf
    with pytest.raises(InputError, match=r"size on 2010-04-30"):
        fit_time_series(returns, factors)
    # a gap in the factors on a date without asset returns is ignored
    returns.iloc[3] = np.nan
    factors.iloc[3, 1] = np.nan
    assert fit_time_series(returns, factors, min_periods=24).n_assets == 3


def test_bad_asset_values() -> None:
    returns, factors = small_inputs()
    returns.iloc[5, 2] = -np.inf
    with pytest.raises(InputError, match=r"asset_returns has infinite values: C on 2010-06-30"):
        fit_time_series(returns, factors)
    returns, factors = small_inputs()
    returns["D"] = "x"
    with pytest.raises(InputError, match=r"asset_returns: non-numeric columns: D"):
        fit_time_series(returns, factors)
    factors["label"] = "x"
    with pytest.raises(InputError, match=r"factor_returns: non-numeric columns: label"):
        fit_time_series(returns.drop(columns="D"), factors)
    with pytest.raises(InputError, match=r"asset_returns has no returns at all"):
        fit_time_series(returns.drop(columns="D") * np.nan, factors.drop(columns="label"))


def test_bad_labels_and_dates() -> None:
    returns, factors = small_inputs()
    with pytest.raises(InputError, match=r"asset_returns: duplicate assets: A"):
        fit_time_series(returns.rename(columns={"B": "A"}), factors)
    with pytest.raises(InputError, match=r"factor_returns: duplicate factors: market"):
        fit_time_series(returns, factors.rename(columns={"size": "market"}))
    with pytest.raises(InputError, match=r"asset_returns: duplicate dates"):
        fit_time_series(pd.concat([returns, returns.iloc[[0]]]).sort_index(), factors)
    shuffled = returns.iloc[[0, 1, 3, 2, *range(4, 40)]]
    with pytest.raises(InputError, match=r"dates must be increasing; 2010-03-31 comes after 2010-04-30"):
        fit_time_series(shuffled, factors)
    with pytest.raises(InputError, match=r"factor_returns: dates must be increasing"):
        fit_time_series(returns, factors.iloc[::-1])
    mixed = returns.set_axis(pd.Index([pd.Timestamp("2009-12-31"), "2010", *returns.index[2:]], dtype=object))
    with pytest.raises(InputError, match=r"asset_returns: dates of mixed types cannot be ordered"):
        fit_time_series(mixed, factors)
    with pytest.raises(InputError, match=r"no dates in common"):
        fit_time_series(returns, factors.set_index(factors.index + pd.Timedelta(days=1)))
    with pytest.raises(InputError, match=r"factor_returns has no row for 6 date\(s\) with asset returns: 2010-01-31, .* \(and 1 more\)"):
        fit_time_series(returns, factors.iloc[6:])


def test_empty_and_wrong_types() -> None:
    returns, factors = small_inputs()
    with pytest.raises(InputError, match=r"asset_returns is empty \(shape \(0, 3\)\)"):
        fit_time_series(returns.iloc[:0], factors)
    with pytest.raises(InputError, match=r"factor_returns is empty \(shape \(40, 0\)\)"):
        fit_time_series(returns, factors.iloc[:, :0])
    with pytest.raises(InputError, match=r"asset_returns: expected a DataFrame of dates × assets, got Series"):
        fit_time_series(returns["A"], factors)


def test_degenerate_factors() -> None:
    returns, factors = small_inputs()
    with pytest.raises(InputError, match=r"3 dates with returns, fewer than the 4 needed for 2 factors"):
        fit_time_series(returns.iloc[:3], factors)
    flat = factors.assign(size=0.01)
    with pytest.raises(InputError, match=r"constant over the 40 dates used .*: size"):
        fit_time_series(returns, flat)
    combo = factors.assign(value=factors["market"] - 2 * factors["size"] + 0.001, other=np.arange(40.0))
    with pytest.raises(InputError, match=r"perfectly collinear over the 40 dates used .*: market, size, value$"):
        fit_time_series(returns, combo, min_periods=24)


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"half_life": 0}, r"half_life must be a positive number of periods or None, got 0"),
        ({"half_life": "x"}, r"half_life must be a positive number"),
        ({"periods_per_year": -1}, r"periods_per_year must be a positive number"),
        ({"min_periods": 3}, r"min_periods must be a whole number >= 4 \(K \+ 2 for 2 factors\), got 3"),
        ({"min_periods": 30.5}, r"min_periods must be a whole number"),
        ({"gls": "yes"}, r"gls must be True or False"),
        ({"covariance": "ledoit_wolf"}, r"covariance must be a CovarianceSettings, a mapping of its fields or None, got str"),
        ({"covariance": {"shrink": "ledoit_wolf"}}, r"fit_time_series: covariance: unknown keys shrink"),
        ({"rolling_window": 10}, r"rolling_window must be a whole number of dates >= min_periods=24, got 10"),
        ({"rolling_window": 50}, r"rolling_window=50 exceeds the 40 dates with returns"),
        ({"exposure_half_life": 6, "half_life": 6}, r"exposure_half_life cannot be combined"),
        ({"exposure_half_life": 6, "rolling_window": 30}, r"exposure_half_life cannot be combined"),
        ({"rolling_window": 30, "exposure_step": 0}, r"exposure_step must be a whole number >= 1, got 0"),
    ],
)
def test_bad_parameters(kwargs: dict, message: str) -> None:
    returns, factors = small_inputs()
    with pytest.raises(InputError, match=message):
        fit_time_series(returns, factors, **kwargs)


def test_periods_per_year_inferred_or_refused() -> None:
    returns, factors = small_inputs()
    for freq, expected in (("B", 252), ("W-FRI", 52), ("ME", 12), ("QE", 4), ("YE", 1)):
        dates = pd.date_range("2001-01-01", periods=40, freq=freq)
        model = fit_time_series(returns.set_axis(dates), factors.set_axis(dates), min_periods=24)
        assert model.periods_per_year == expected, freq
    odd = pd.date_range("2001-01-01", periods=40, freq="15D")
    with pytest.raises(InputError, match=r"cannot infer periods_per_year from a median date spacing of 15 days"):
        fit_time_series(returns.set_axis(odd), factors.set_axis(odd))
    positions = pd.RangeIndex(40)
    with pytest.raises(InputError, match=r"cannot infer periods_per_year from an index of type RangeIndex \(dtype int64\)"):
        fit_time_series(returns.set_axis(positions), factors.set_axis(positions))
    model = fit_time_series(returns.set_axis(positions), factors.set_axis(positions), periods_per_year=12)
    assert model.provenance["window"] == ["0", "39"]


def test_covariance_settings_are_passed_through(french_data, tmp_path) -> None:
    excess, factors = french_data
    settings = CovarianceSettings(shrinkage="ledoit_wolf", specific_floor=0.002)
    model = fit_time_series(excess, factors, covariance=settings, factor_groups={"MktRF": "market"})
    plain = fit_time_series(excess, factors)
    # Ledoit–Wolf shrinks toward a scaled identity: trace kept, off-diagonals pulled in
    assert np.trace(model.factor_covariance) == pytest.approx(np.trace(plain.factor_covariance), rel=1e-12)
    assert (model.specific_variance >= 0.002).all()
    np.testing.assert_allclose(model.exposures, plain.exposures, rtol=1e-14)
    from_mapping = fit_time_series(excess, factors, covariance={"shrinkage": "ledoit_wolf", "specific_floor": 0.002})
    np.testing.assert_allclose(from_mapping.factor_covariance, model.factor_covariance, rtol=1e-15)
    assert model.provenance["settings"]["covariance"]["shrinkage"] == "ledoit_wolf"
    # the provenance survives a save/load round trip (JSON manifest)
    loaded = FactorModel.load(model.save(tmp_path / "model", file_format="csv"))
    assert loaded.provenance["estimator"] == "fit_time_series"
    np.testing.assert_allclose(loaded.exposures, model.exposures, rtol=1e-15)
