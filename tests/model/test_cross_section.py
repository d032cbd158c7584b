"""fit_cross_section against statsmodels WLS / GLM.fit_constrained, restricted least squares and simulation."""

from __future__ import annotations

import re
import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import trimtab
from trimtab.errors import DataWarning, InputError
from trimtab.model import CovarianceSettings, fit_cross_section
from trimtab.model._cross_section import infer_periods_per_year, restricted_wls

INDUSTRIES = ["banks", "energy", "retail", "tech"]


def _panel(n_assets: int = 60, n_dates: int = 8, seed: int = 0, gaps: bool = True):
    """Random returns, two style columns, industry labels and √cap-like weights."""
    rng = np.random.default_rng(seed)
    assets = [f"A{i:03d}" for i in range(n_assets)]
    styles = pd.DataFrame({"size": rng.normal(size=n_assets), "value": rng.normal(size=n_assets)}, index=assets)
    industry = pd.Series([INDUSTRIES[i % 4] for i in range(n_assets)], index=assets)
    weights = pd.Series(rng.uniform(1.0, 3.0, n_assets), index=assets)
    returns = pd.DataFrame(
        rng.normal(0.0, 0.01, (n_dates, n_assets)), index=pd.bdate_range("2024-01-02", periods=n_dates), columns=assets
    )
    if gaps:
        returns.iloc[1, [3, 10, 17]] = np.nan
        returns.iloc[4, 20:25] = np.nan
    return returns, styles, industry, weights


def _dense_design(styles: pd.DataFrame, industry: pd.Series, assets: pd.Index) -> np.ndarray:
    dummies = (industry.loc[assets].to_numpy()[:, None] == np.array(INDUSTRIES)[None, :]).astype(float)
    return np.column_stack([np.ones(len(assets)), dummies, styles.loc[assets].to_numpy()])


def _fit(*args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)
        return fit_cross_section(*args, **kwargs)


@pytest.fixture(scope="module")
def fitted():
    returns, styles, industry, weights = _panel()
    model = fit_cross_section(returns, styles, industry=industry, weights=weights)
    return returns, styles, industry, weights, model


def _date_sample(returns, styles, industry, weights, t):
    row = returns.iloc[t]
    assets = row.index[row.notna().to_numpy()]
    X = _dense_design(styles, industry, assets)
    return assets, X, row.loc[assets].to_numpy(), weights.loc[assets].to_numpy()


def _reparameterisation(c: np.ndarray) -> np.ndarray:
    """f = R g with the LAST industry expressed through the others (a different pivot from the code's)."""
    p = 1 + len(c) + 2
    keep = [i for i in range(p) if i != len(c)]
    R = np.eye(p)[:, keep]
    R[len(c), 1:len(c)] = -c[:-1] / c[-1]
    return R


def test_factor_returns_match_statsmodels_wls_on_reparameterised_design(fitted):
    # Reference: statsmodels WLS on X R (restricted least squares by substitution, Greene 2012 §5.3).
    returns, styles, industry, weights, model = fitted
    report = model.fit_report
    for t in range(len(returns.index)):
        assets, X, y, w = _date_sample(returns, styles, industry, weights, t)
        c = np.array([w[industry.loc[assets].to_numpy() == j].sum() for j in INDUSTRIES])
        R = _reparameterisation(c)
        res = sm.WLS(y, X @ R, weights=w).fit()
        f = R @ res.params
        np.testing.assert_allclose(report.factor_returns.iloc[t].to_numpy(), f, rtol=1e-9, atol=1e-13)
        se = np.sqrt(np.diag(R @ res.cov_params() @ R.T))
        np.testing.assert_allclose(report.extra["t_stats_by_date"].iloc[t].to_numpy(), f / se, rtol=1e-8)
        assert report.extra["r_squared_by_date"].iloc[t] == pytest.approx(res.rsquared, rel=1e-9)
        np.testing.assert_allclose(report.residuals.iloc[t].loc[assets].to_numpy(), res.resid, atol=1e-13)


def test_factor_returns_match_glm_fit_constrained_and_bordered_system(fitted):
    # References: statsmodels GLM(Gaussian, var_weights).fit_constrained (WLS with a linear
    # restriction), and the textbook KKT system of restricted least squares (Greene 2012 §5.3):
    # [XᵀWX Cᵀ; C 0] [β; λ] = [XᵀWy; 0], solvable although XᵀWX itself is singular here.
    returns, styles, industry, weights, model = fitted
    for t in (0, 1, 4):
        assets, X, y, w = _date_sample(returns, styles, industry, weights, t)
        c = np.array([w[industry.loc[assets].to_numpy() == j].sum() for j in INDUSTRIES])
        C = np.concatenate([[0.0], c, [0.0, 0.0]])[None, :]
        glm = sm.GLM(y, X, family=sm.families.Gaussian(), var_weights=w).fit_constrained((C, np.zeros(1)))
        got = model.fit_report.factor_returns.iloc[t].to_numpy()
        np.testing.assert_allclose(got, glm.params, rtol=1e-8, atol=1e-13)
        G = X.T @ (w[:, None] * X)
        kkt = np.block([[G, C.T], [C, np.zeros((1, 1))]])
        beta = np.linalg.solve(kkt, np.concatenate([X.T @ (w * y), [0.0]]))[:-1]
        np.testing.assert_allclose(got, beta, rtol=1e-8, atol=1e-13)


def test_greene_restricted_least_squares_formula():
    # Greene (2012) eq. 5-14: b* = b − M⁻¹Cᵀ[C M⁻¹Cᵀ]⁻¹(Cb − 0), b = M⁻¹XᵀWy. XᵀWX is singular
    # here (market = sum of dummies), so M = XᵀWX + CᵀC: on the feasible set Cβ = 0 the added term
    # βᵀCᵀCβ vanishes, the restricted problem is unchanged and M is invertible because [X; C] has
    # full column rank.
    returns, styles, industry, weights = _panel(gaps=False)
    tied = _fit(returns, styles, industry=industry, weights=weights)
    X = _dense_design(styles, industry, returns.columns)
    w = weights.to_numpy()
    c = np.array([w[industry.to_numpy() == j].sum() for j in INDUSTRIES])
    C = np.concatenate([[0.0], c, [0.0, 0.0]])[None, :]
    Minv = np.linalg.inv(X.T @ (w[:, None] * X) + C.T @ C)
    for t in range(len(returns.index)):
        b = Minv @ X.T @ (w * returns.iloc[t].to_numpy())
        b_star = b - Minv @ C.T @ np.linalg.solve(C @ Minv @ C.T, C @ b)
        np.testing.assert_allclose(tied.fit_report.factor_returns.iloc[t].to_numpy(), b_star, rtol=1e-8, atol=1e-14)


def test_market_is_the_weighted_mean_of_unconstrained_industry_intercepts():
    # Same column space identity: without the market the dummies carry the intercept, b_j; with it,
    # f_market + f_j = b_j and Σ c_j f_j = 0 give f_market = Σ c_j b_j / Σ c_j; styles unchanged.
    returns, styles, industry, weights = _panel(gaps=False)
    free = _fit(returns, styles, industry=industry, weights=weights, market=False)
    tied = _fit(returns, styles, industry=industry, weights=weights)
    w = weights.to_numpy()
    c = np.array([w[industry.to_numpy() == j].sum() for j in INDUSTRIES])
    b = free.fit_report.factor_returns
    res = sm.WLS(returns.iloc[0].to_numpy(), _dense_design(styles, industry, returns.columns)[:, 1:], weights=w).fit()
    np.testing.assert_allclose(b.iloc[0].to_numpy(), res.params, rtol=1e-9)
    f = tied.fit_report.factor_returns
    np.testing.assert_allclose(f["market"].to_numpy(), b[INDUSTRIES].to_numpy() @ c / c.sum(), rtol=1e-9)
    np.testing.assert_allclose(f[INDUSTRIES].to_numpy(), b[INDUSTRIES].to_numpy() - f[["market"]].to_numpy(), atol=1e-14)
    np.testing.assert_allclose(f[["size", "value"]].to_numpy(), b[["size", "value"]].to_numpy(), rtol=1e-9)


def test_constraint_holds_on_every_date(fitted):
    returns, styles, industry, weights, model = fitted
    report = model.fit_report
    c = report.extra["industry_weights"]
    for t in range(len(returns.index)):
        row = returns.iloc[t]
        present = row.index[row.notna().to_numpy()]
        expected = [weights.loc[present][industry.loc[present] == j].sum() for j in INDUSTRIES]
        np.testing.assert_allclose(c.iloc[t].to_numpy(), expected, rtol=1e-14)
    total = (c.to_numpy() * report.factor_returns[INDUSTRIES].to_numpy()).sum(axis=1)
    assert np.abs(total).max() < 1e-12
    assert "c_j" in report.extra["constraint"]


def test_fitted_values_equal_regression_with_one_dummy_dropped(fitted):
    # Textbook identity: same column space ⇒ same fitted values and residuals.
    returns, styles, industry, weights, model = fitted
    for t in range(len(returns.index)):
        assets, X, y, w = _date_sample(returns, styles, industry, weights, t)
        res = sm.WLS(y, np.delete(X, 2, axis=1), weights=w).fit()
        np.testing.assert_allclose(model.fit_report.residuals.iloc[t].loc[assets].to_numpy(), res.resid, atol=1e-13)


def test_blockwise_core_matches_a_naive_dense_solve():
    # Naive version written here: dense X R, numpy lstsq on √w-scaled rows.
    rng = np.random.default_rng(5)
    n, J = 200, 6
    codes = np.concatenate([np.arange(J), rng.integers(0, J, n - J)])
    styles = rng.normal(size=(n, 3))
    w = rng.uniform(0.5, 2.0, n)
    Y = rng.normal(size=(n, 4))
    fit = restricted_wls(styles, codes, J, w, Y, True)
    c = np.bincount(codes, weights=w)
    X = np.column_stack([np.ones(n), np.eye(J)[codes], styles])
    p = X.shape[1]
    R = np.zeros((p, p - 1))  # express industry 0 through the others
    R[0, 0] = 1.0
    for j in range(1, J):
        R[1 + j, j] = 1.0
        R[1, j] = -c[j] / c[0]
    R[1 + J:, J:] = np.eye(3)
    g, *_ = np.linalg.lstsq(np.sqrt(w)[:, None] * (X @ R), np.sqrt(w)[:, None] * Y, rcond=None)
    np.testing.assert_allclose(fit.factor_returns, R @ g, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(fit.residuals, Y - X @ R @ g, atol=1e-12)


def test_recovers_simulated_fundamental_model():
    # Known exposures and factor returns, t(5) specific returns with variance ∝ 1/w, so WLS is GLS
    # and its standard errors are right: each estimate is within 5 standard errors of the truth,
    # and the squared z-scores average about 1 (χ²₁ mean).
    rng = np.random.default_rng(11)
    n, T = 1500, 60
    assets = [f"S{i:04d}" for i in range(n)]
    labels = np.array(INDUSTRIES + ["utilities"])[rng.integers(0, 5, n)]
    industry = pd.Series(labels, index=assets)
    names = ["banks", "energy", "retail", "tech", "utilities"]
    styles = pd.DataFrame(rng.normal(size=(n, 3)), index=assets, columns=["size", "value", "momentum"])
    w = rng.uniform(1.0, 10.0, n)
    c = np.array([w[labels == j].sum() for j in names])
    f_ind = rng.normal(0.0, 0.01, (T, 5))
    f_ind -= (f_ind @ c / c.sum())[:, None]  # the true returns satisfy Σ c_j f_j = 0
    truth = np.column_stack([rng.normal(0.0004, 0.01, T), f_ind, rng.normal(0.0, 0.005, (T, 3))])
    X = np.column_stack([np.ones(n), (labels[:, None] == np.array(names)).astype(float), styles.to_numpy()])
    shocks = rng.standard_t(5, size=(T, n)) / np.sqrt(5 / 3) * 0.02 / np.sqrt(w)
    returns = pd.DataFrame(truth @ X.T + shocks, index=pd.bdate_range("2023-01-02", periods=T), columns=assets)
    model = fit_cross_section(returns, styles, industry=industry, weights=pd.Series(w, index=assets))
    report = model.fit_report
    estimate = report.factor_returns[["market", *names, "size", "value", "momentum"]].to_numpy()
    t_stats = report.extra["t_stats_by_date"][["market", *names, "size", "value", "momentum"]].to_numpy()
    se = estimate / t_stats
    z = (estimate - truth) / se
    assert np.abs(z).max() < 5.0
    assert 0.75 < np.mean(z**2) < 1.3
    assert list(model.factors) == ["market", *names, "size", "value", "momentum"]


def test_long_exposures_use_the_previous_date_and_latest_snapshot():
    # Returns built without noise from the exposures of the PREVIOUS date: the fit must be exact,
    # which it is only under the start-of-period lag convention.
    rng = np.random.default_rng(3)
    n, T = 40, 6
    assets = [f"B{i:02d}" for i in range(n)]
    dates = pd.bdate_range("2024-03-01", periods=T)
    rows = []
    for d in dates:
        for i, a in enumerate(assets):
            rows.append({"date": d, "asset": a, "sector": INDUSTRIES[(i + d.day) % 4], "size": rng.normal()})
    long = pd.DataFrame(rows)
    truth = rng.normal(0, 0.01, (T, 6))
    values = np.full((T, n), np.nan)
    for t in range(1, T):
        prev = long[long["date"] == dates[t - 1]].set_index("asset").loc[assets]
        X = np.column_stack([np.ones(n), (prev["sector"].to_numpy()[:, None] == np.array(INDUSTRIES)).astype(float), prev["size"]])
        cw = np.array([(prev["sector"] == j).sum() for j in INDUSTRIES], dtype=float)
        f = truth[t].copy()
        f[1:5] -= f[1:5] @ cw / cw.sum()
        truth[t] = f
        values[t] = X @ f
    returns = pd.DataFrame(values, index=dates, columns=assets)
    with pytest.warns(DataWarning, match="skipped 1 dates"):
        model = fit_cross_section(returns, long, industry="sector")
    np.testing.assert_allclose(model.fit_report.factor_returns.to_numpy(), truth[1:], atol=1e-12)
    last = long[long["date"] == dates[-1]].set_index("asset").loc[assets]
    np.testing.assert_array_equal(model.exposures["size"].to_numpy(), last["size"].to_numpy())
    dummies = (last["sector"].to_numpy()[:, None] == np.array(INDUSTRIES)).astype(float)
    np.testing.assert_array_equal(model.exposures[INDUSTRIES].to_numpy(), dummies)
    assert (model.exposures["market"] == 1.0).all()
    assert model.provenance["settings"]["exposure_date"] == str(dates[-1].date())


def test_covariance_and_specific_variance_come_from_the_fitted_series(fitted):
    returns, styles, industry, weights, model = fitted
    report = model.fit_report
    # Sample covariance with divisor T − 1 (numpy.cov) and Σu²/T_i (dof 0).
    np.testing.assert_allclose(model.factor_covariance.to_numpy(), np.cov(report.factor_returns.to_numpy(), rowvar=False), rtol=1e-12)
    u = report.residuals.to_numpy()
    expected = np.nansum(u * u, axis=0) / np.isfinite(u).sum(axis=0)
    np.testing.assert_allclose(model.specific_variance.to_numpy(), expected, rtol=1e-12)
    r = returns.to_numpy()
    mask = np.isfinite(u)
    r2 = [1 - np.var(u[mask[:, i], i], ddof=1) / np.var(r[mask[:, i], i], ddof=1) for i in range(u.shape[1])]
    np.testing.assert_allclose(report.assets["r_squared"].to_numpy(), r2, rtol=1e-10)
    assert report.assets["n_observations"].tolist() == mask.sum(axis=0).tolist()
    assert model.factor_groups["market"] == "market" and model.factor_groups["tech"] == "industry"
    assert model.factor_groups["size"] == "style"
    assert model.provenance["estimator"] == "cross_section"
    assert model.provenance["window"] == ["2024-01-02", "2024-01-11"]
    assert model.provenance["version"] == trimtab.__version__
    assert model.periods_per_year == 252.0


def test_covariance_settings_are_passed_on():
    returns, styles, industry, weights = _panel(n_dates=30, gaps=False)
    settings = CovarianceSettings(shrinkage="ledoit_wolf", specific_shrinkage=0.5)
    plain = fit_cross_section(returns, styles, industry=industry)
    shrunk = fit_cross_section(returns, styles, industry=industry, covariance=settings)
    assert shrunk.provenance["settings"]["covariance"]["shrinkage"] == "ledoit_wolf"
    # Specific shrinkage pulls each d toward its industry mean (groups = industry labels).
    d = plain.specific_variance
    target = d.groupby(industry.loc[d.index]).transform("mean")
    np.testing.assert_allclose(shrunk.specific_variance.to_numpy(), (0.5 * d + 0.5 * target).to_numpy(), rtol=1e-12)


def test_assets_without_exposures_or_returns_are_dropped_with_a_warning():
    returns, styles, industry, weights = _panel(gaps=False)
    returns = returns.assign(ZZZ=0.01)
    extra = pd.DataFrame({"size": [0.5], "value": [0.1]}, index=["YYY"])
    with pytest.warns(DataWarning, match=r"2 assets left out.*no exposures: ZZZ.*no returns: YYY"):
        model = fit_cross_section(
            returns, pd.concat([styles, extra]), industry=pd.concat([industry, pd.Series({"YYY": "tech"})]),
        )
    assert model.fit_report.dropped.to_dict() == {"ZZZ": "no exposures", "YYY": "no returns"}
    assert "ZZZ" not in model.assets and "YYY" not in model.assets


def test_style_only_model_without_market_or_industries_uses_uncentred_r_squared():
    returns, styles, industry, weights = _panel(gaps=False)
    model = fit_cross_section(returns, styles, market=False)
    y = returns.iloc[0].to_numpy()
    res = sm.OLS(y, styles.to_numpy()).fit()  # no constant: statsmodels reports the uncentred R²
    np.testing.assert_allclose(model.fit_report.factor_returns.iloc[0].to_numpy(), res.params, rtol=1e-9)
    assert model.fit_report.extra["r_squared_by_date"].iloc[0] == pytest.approx(res.rsquared, rel=1e-9)
    assert model.fit_report.extra["constraint"] == "none"


def test_periods_per_year_inference():
    monthly = pd.date_range("2000-01-31", periods=24, freq="ME")
    assert infer_periods_per_year(monthly, None, "x") == 12.0
    assert infer_periods_per_year(pd.date_range("2000-01-07", periods=10, freq="W-FRI"), None, "x") == 52.0
    assert infer_periods_per_year(pd.period_range("2000Q1", periods=8, freq="Q"), None, "x") == 4.0
    assert infer_periods_per_year(pd.RangeIndex(5), 12, "x") == 12.0


# ---------------------------------------------------------------------------------------------
# Bad input: one clear line each
# ---------------------------------------------------------------------------------------------


def _bad_cases():
    returns, styles, industry, weights = _panel(gaps=False)
    dup_dates = returns.copy()
    dup_dates.index = [returns.index[0]] * 2 + list(returns.index[2:])
    dup_assets = returns.copy()
    dup_assets.columns = ["A000", *returns.columns[:-1]]
    nan_styles = styles.copy()
    nan_styles.loc["A007", "value"] = np.nan
    text_styles = styles.assign(value=["x"] * len(styles))
    constant = styles.assign(size=1.0)
    collinear = styles.assign(combo=styles["size"] + 2 * styles["value"])
    long = pd.DataFrame({"date": [returns.index[0]] * 2, "asset": ["A000", "A000"], "size": [1.0, 2.0]})
    few = returns.copy()
    few.iloc[3, 4:] = np.nan
    other_ids = styles.set_axis([f"X{i}" for i in range(len(styles))])
    dup_exposure = pd.concat([styles, styles.iloc[:1]])
    return [
        ((returns, styles), {"industry": industry.iloc[:-3]}, r"industry: exposures missing for assets: A057, A058, A059"),
        ((returns, styles), {"weights": weights.iloc[6:]}, r"weights: exposures missing for assets: A000, A001, A002, A003, A004 \(and 1 more\)"),
        ((returns, other_ids), {}, r"asset ids do not match between exposures \(X0, X1, .*\) and asset_returns \(A000"),
        ((returns, nan_styles), {}, r"1 NaN or infinite values, at A007/value"),
        ((returns, text_styles), {}, r"exposures: non-numeric columns: value"),
        ((returns, constant), {"industry": industry}, r"style column 'size' is constant across assets"),
        ((returns, collinear), {}, r"exposures are collinear on date 2024-01-02"),
        ((few, styles), {"industry": industry}, r"fewer assets with a return and exposures than min_assets=7 .* on dates: 2024-01-05"),
        ((dup_dates, styles), {}, r"asset_returns: duplicate dates"),
        ((dup_assets, styles), {}, r"asset_returns: duplicate assets: A000"),
        ((returns, dup_exposure), {}, r"exposures: duplicate asset ids: A000"),
        ((returns, long), {}, r"duplicate \(date, asset\) rows: 2024-01-02/A000"),
        ((returns, styles), {"weights": -weights}, r"regression weights must be positive and finite; bad for assets: A000"),
        ((returns, styles), {"weights": weights.astype(str)}, r"weights: expected positive numbers, got dtype"),
        ((returns, styles), {"weights": [1.0] * 60}, r"weights must be a Series by asset, a column name or None, got list"),
        ((returns, styles), {"industry": "sector"}, r"industry='sector' is not a column of exposures"),
        ((returns, styles), {"industry": industry.where(industry != "tech")}, r"industry: missing values for assets: A003"),
        ((returns, styles.rename(columns={"size": "tech"})), {"industry": industry}, r"factor names used twice .*: tech"),
        ((returns, styles[[]]), {"market": False}, r"no factors: give style columns"),
        ((returns, styles), {"market": 1}, r"market must be True or False, got 1"),
        ((returns, styles), {"min_assets": 2}, r"min_assets must be a whole number >= 4"),
        ((returns, styles.to_numpy()), {}, r"exposures must be a DataFrame .* got ndarray"),
        ((returns, styles), {"covariance": {"shrinkage": "ledoit_wolf"}}, r"covariance: expected CovarianceSettings or None, got dict"),
        ((returns.reset_index(drop=True), styles), {}, r"cannot infer periods_per_year from an index of type RangeIndex"),
        ((returns, styles), {"periods_per_year": -1}, r"periods_per_year must be a positive number or None, got -1"),
        ((returns.set_axis(pd.date_range("2000", periods=8, freq="20D")), styles), {}, r"median date spacing of 20 days"),
        ((returns.iloc[:, :0], styles), {}, r"asset_returns has no asset columns"),
    ]


def test_an_industry_without_members_on_a_date_is_left_out_of_that_date():
    # issue #12: the fit goes on without that industry's factor on that date, with a warning
    returns, styles, industry, weights = _panel(gaps=False)
    day = returns.index[2]
    no_members = returns.copy()
    no_members.loc[day, industry.index[industry == "retail"]] = np.nan
    with pytest.warns(DataWarning, match=r"industry 'retail' has no member with a return on 1 dates; .*: 2024-01-04"):
        model = fit_cross_section(no_members, styles, industry=industry, weights=weights)
    assert model.fit_report.factor_returns.loc[day, "retail"] == 0.0
    # Reference: statsmodels WLS on that date with the market, the dummies of the industries present but
    # one, and the styles: the same column space as the restricted design, so the same residuals
    y = no_members.loc[day].dropna()
    labels = industry[y.index]
    present = sorted(labels.unique())
    X = np.column_stack([np.ones(len(y))] + [(labels == j).to_numpy(float) for j in present[1:]] + [styles.loc[y.index].to_numpy()])
    reference = sm.WLS(y.to_numpy(), X, weights=weights[y.index].to_numpy()).fit()
    np.testing.assert_allclose(model.fit_report.residuals.loc[day, y.index].to_numpy(), reference.resid, atol=1e-12)


@pytest.mark.parametrize("args, kwargs, message", _bad_cases())
def test_bad_input_raises_one_clear_line(args, kwargs, message):
    with pytest.raises(InputError, match=message) as info:
        _fit(*args, **kwargs)
    assert "\n" not in str(info.value)


def test_dates_without_any_prior_exposures_or_regressions():
    returns, styles, industry, weights = _panel(gaps=False)
    late = pd.DataFrame({"date": returns.index[-1], "asset": styles.index, "size": styles["size"].to_numpy()})
    with pytest.raises(InputError, match="no date has both returns and exposures known before it"):
        _fit(returns, late)
    one = pd.DataFrame({"date": returns.index[-2], "asset": styles.index, "size": styles["size"].to_numpy()})
    with pytest.raises(InputError, match=re.escape("need at least 2 dates with a regression, got 1")):
        _fit(returns, one)
    bad_dates = pd.DataFrame({"date": "not a date", "asset": styles.index, "size": 1.0})
    with pytest.raises(InputError, match="the date column cannot be read as dates"):
        _fit(returns, bad_dates)


def test_no_asset_left_for_the_model():
    returns, styles, industry, weights = _panel(gaps=False)
    dates = returns.index
    early = pd.DataFrame({"date": dates[0], "asset": styles.index[:30], "size": styles["size"].to_numpy()[:30]})
    late = pd.DataFrame({"date": dates[-2], "asset": styles.index[30:], "size": styles["size"].to_numpy()[30:]})
    with pytest.warns(DataWarning) as record:
        with pytest.raises(InputError, match="no asset has both exposures on the latest date and at least 2 specific returns"):
            fit_cross_section(returns, pd.concat([early, late]))
    messages = " | ".join(str(r.message) for r in record)
    assert "skipped 1 dates" in messages and "fewer than 2 specific returns: A030" in messages
    assert "no exposures on the latest exposure date: A000" in messages


@pytest.mark.parametrize(
    "dates, message",
    [([1, "x"] * 10, "exposures: dates cannot be ordered"), (["a"] * 10 + ["b"] * 10, "dates cannot be compared with the return dates")],
)
def test_exposure_dates_that_do_not_order(dates, message):
    rng = np.random.default_rng(2)
    assets = [f"A{i}" for i in range(20)]
    returns = pd.DataFrame(0.01 * rng.normal(size=(5, 20)), columns=assets)
    long = pd.DataFrame({"date": dates, "asset": assets, "size": rng.normal(size=20)})
    with pytest.raises(InputError, match=message):
        fit_cross_section(returns, long, periods_per_year=12)


def test_industry_and_weights_as_columns_match_the_series_form():
    returns, styles, industry, weights = _panel()
    by_series = _fit(returns, styles, industry=industry, weights=weights)
    static = styles.assign(sector=industry, cap_weight=weights)
    by_column = _fit(returns, static, industry="sector", weights="cap_weight")
    long = pd.concat([static.assign(date=returns.index[0] - pd.Timedelta(days=1)).rename_axis("asset").reset_index()])
    by_long = _fit(returns, long, industry="sector", weights="cap_weight")
    for other in (by_column, by_long):
        pd.testing.assert_frame_equal(other.fit_report.factor_returns, by_series.fit_report.factor_returns, rtol=1e-12)
        pd.testing.assert_frame_equal(other.exposures, by_series.exposures)
    assert by_long.provenance["settings"]["exposure_format"] == "long"
    assert by_column.provenance["settings"]["weights"] == "column cap_weight"


def test_saved_model_round_trips_with_its_provenance(fitted, tmp_path):
    model = fitted[-1]
    loaded = type(model).load(model.save(tmp_path / "cross_section_model"))
    pd.testing.assert_frame_equal(loaded.exposures, model.exposures, check_names=False)
    np.testing.assert_allclose(loaded.factor_covariance.to_numpy(), model.factor_covariance.to_numpy(), rtol=1e-15)
    assert loaded.provenance["estimator"] == "cross_section"
    assert loaded.provenance["settings"]["lag"] == "exposures known at the start of each period"
    assert loaded.fit_report.method == "cross_section"
