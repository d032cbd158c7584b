"""fit_statistical against scikit-learn PCA, numpy eigh, the Bai–Ng criteria and the French portfolios."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from linearmodels.datasets import french
from sklearn.decomposition import PCA

import trimtab
from trimtab.errors import DataWarning, InputError
from trimtab.model import CovarianceSettings, fit_statistical
from trimtab.model._statistical import information_criteria, principal_components


def _factor_panel(n_dates: int = 500, n_assets: int = 200, n_factors: int = 3, seed: int = 0) -> pd.DataFrame:
    """Returns with ``n_factors`` strong factors: loadings N(0, 1), factors N(0, 1), noise N(0, 1), × 1%."""
    rng = np.random.default_rng(seed)
    factors = rng.normal(size=(n_dates, n_factors))
    loadings = rng.normal(size=(n_assets, n_factors))
    values = 0.01 * (factors @ loadings.T + rng.normal(size=(n_dates, n_assets)))
    return pd.DataFrame(
        values, index=pd.bdate_range("2020-01-01", periods=n_dates), columns=[f"A{i:03d}" for i in range(n_assets)]
    )


@pytest.fixture(scope="module")
def panel() -> pd.DataFrame:
    return _factor_panel()


@pytest.mark.parametrize("criterion", ["IC_p1", "IC_p2", "IC_p3"])
def test_bai_ng_criterion_picks_the_three_simulated_factors(panel, criterion):
    # Why it must pick 3 (N = 200, T = 500): each true factor removes about a quarter to a half of
    # the remaining mean square, ln V(k−1) − ln V(k) ≥ ln(4/3) ≈ 0.29 for k ≤ 3, far above the
    # per-factor penalty (IC_p2: (N+T)/(NT)·ln 200 ≈ 0.037; IC_p1 ≈ 0.034; IC_p3 ≈ 0.026). Past 3
    # a component only takes the largest noise eigenvalue, about (1 + √(N/T))² ≈ 2.7 (Marchenko–
    # Pastur edge) of the ≈ N = 200 left, ln-gain ≈ 0.014, below every penalty.
    model = fit_statistical(panel, criterion=criterion, max_factors=10)
    table = model.fit_report.extra["criterion"]
    assert model.n_factors == 3
    assert int(table[criterion].idxmin()) == 3
    assert model.fit_report.extra["selected_by"] == criterion
    assert list(table.index) == list(range(11))


def test_information_criteria_match_the_formulas_on_explicit_reconstructions(panel):
    # V(k) by forming the rank-k reconstruction explicitly, then Bai & Ng (2002) penalties typed
    # out from the paper: IC_p1, IC_p2, IC_p3 with C² = min(N, T).
    X = panel.to_numpy() - panel.to_numpy().mean(axis=0)
    T, N = X.shape
    U, s, Vt = np.linalg.svd(X, full_matrices=False)
    table = information_criteria(s[:6], float((X**2).sum()), T, N)
    for k in range(7):
        V = ((X - (U[:, :k] * s[:k]) @ Vt[:k]) ** 2).sum() / (N * T)
        assert table.loc[k, "V"] == pytest.approx(V, rel=1e-10)
        assert table.loc[k, "IC_p1"] == pytest.approx(np.log(V) + k * (N + T) / (N * T) * np.log(N * T / (N + T)), rel=1e-12)
        assert table.loc[k, "IC_p2"] == pytest.approx(np.log(V) + k * (N + T) / (N * T) * np.log(min(N, T)), rel=1e-12)
        assert table.loc[k, "IC_p3"] == pytest.approx(np.log(V) + k * np.log(min(N, T)) / min(N, T), rel=1e-12)


def test_matches_scikit_learn_pca(panel):
    # Reference: sklearn.decomposition.PCA — components_ (= loadings, up to sign) and
    # explained_variance_ (= s²/(T − 1) = the diagonal of F with default settings).
    model = fit_statistical(panel, n_factors=5)
    pca = PCA(n_components=5, svd_solver="full").fit(panel.to_numpy())
    B = model.exposures.to_numpy()
    signs = np.sign(np.sum(B * pca.components_.T, axis=0))
    np.testing.assert_allclose(B, pca.components_.T * signs, atol=1e-10)
    np.testing.assert_allclose(np.diag(model.factor_covariance.to_numpy()), pca.explained_variance_, rtol=1e-10)
    np.testing.assert_allclose(model.fit_report.extra["explained_variance"].to_numpy(), pca.explained_variance_, rtol=1e-10)
    np.testing.assert_allclose(model.fit_report.factor_returns.to_numpy(), pca.transform(panel.to_numpy()) * signs, atol=1e-12)
    off = model.factor_covariance.to_numpy() - np.diag(np.diag(model.factor_covariance.to_numpy()))
    assert np.abs(off).max() < 1e-12 * pca.explained_variance_[0]


def test_matches_numpy_eigh_of_the_sample_covariance(panel):
    model = fit_statistical(panel, n_factors=4)
    values, vectors = np.linalg.eigh(np.cov(panel.to_numpy(), rowvar=False))
    top = np.argsort(values)[::-1][:4]
    np.testing.assert_allclose(np.diag(model.factor_covariance.to_numpy()), values[top], rtol=1e-10)
    B = model.exposures.to_numpy()
    np.testing.assert_allclose(np.abs(np.sum(B * vectors[:, top], axis=0)), 1.0, atol=1e-10)


def test_svd_and_gram_routes_agree_up_to_sign():
    rng = np.random.default_rng(4)
    wide = rng.normal(size=(40, 300)) @ np.diag(rng.uniform(0.5, 2.0, 300))
    wide -= wide.mean(axis=0)
    a = principal_components(wide, 6, "svd")
    b = principal_components(wide, 6, "gram")
    assert principal_components(wide, 6)["route"] == "gram"
    assert principal_components(wide.T.copy(), 6)["route"] == "svd"
    np.testing.assert_allclose(a["singular_values"], b["singular_values"], rtol=1e-10)
    signs = np.sign(np.sum(a["loadings"] * b["loadings"], axis=0))
    np.testing.assert_allclose(a["loadings"], b["loadings"] * signs, atol=1e-9)
    np.testing.assert_allclose(a["scores"], b["scores"] * signs, atol=1e-9)
    assert a["total"] == pytest.approx(b["total"], rel=1e-14)


def test_wide_panel_uses_the_time_route_and_matches_pca():
    panel = _factor_panel(n_dates=60, n_assets=400, n_factors=2, seed=9)
    model = fit_statistical(panel, n_factors=2)
    assert model.fit_report.extra["route"] == "gram"
    pca = PCA(n_components=2, svd_solver="full").fit(panel.to_numpy())
    np.testing.assert_allclose(np.abs(np.sum(model.exposures.to_numpy() * pca.components_.T, axis=0)), 1.0, atol=1e-10)


def test_specific_variance_and_per_asset_report(panel):
    model = fit_statistical(panel, n_factors=3)
    E = model.fit_report.residuals.to_numpy()
    X = panel.to_numpy() - panel.to_numpy().mean(axis=0)
    B = model.exposures.to_numpy()
    np.testing.assert_allclose(E, X - X @ B @ B.T, atol=1e-14)
    # dof = k + 1 (loadings on 3 scores and the mean): Σe²/(T − 4).
    np.testing.assert_allclose(model.specific_variance.to_numpy(), (E**2).sum(axis=0) / (len(panel) - 4), rtol=1e-12)
    r2 = 1 - E.var(axis=0, ddof=1) / panel.to_numpy().var(axis=0, ddof=1)
    np.testing.assert_allclose(model.fit_report.assets["r_squared"].to_numpy(), r2, rtol=1e-10)
    assert model.fit_report.settings["specific_dof"] == 4
    assert model.provenance["estimator"] == "statistical"
    assert model.provenance["window"] == [str(panel.index[0].date()), str(panel.index[-1].date())]
    assert model.provenance["version"] == trimtab.__version__
    assert model.periods_per_year == 252.0
    assert set(model.factor_groups.values()) == {"statistical"}


def test_covariance_settings_are_applied_to_the_scores(panel):
    settings = CovarianceSettings(volatility_half_life=60.0)
    model = fit_statistical(panel, n_factors=2, covariance=settings)
    plain = fit_statistical(panel, n_factors=2)
    assert model.provenance["settings"]["covariance"]["volatility_half_life"] == 60.0
    assert not np.allclose(model.factor_covariance.to_numpy(), plain.factor_covariance.to_numpy())


def test_missing_data_policy_is_reported(panel):
    gappy = panel.iloc[:40, :30].copy()
    gappy.iloc[5, 2] = np.nan
    gappy.iloc[:30, 7] = np.nan  # 10 observations < min_periods = 20
    gappy.iloc[12, :] = np.nan  # a date with no return at all
    with pytest.warns(DataWarning) as record:
        model = fit_statistical(gappy, n_factors=2)
    messages = " | ".join(str(r.message) for r in record)
    assert "dropped 1 dates with no return at all" in messages
    assert "fewer than 20 observations: A007" in messages
    assert "filled 1 missing returns" in messages and "A002" in messages
    assert model.fit_report.dropped.to_dict() == {"A007": "fewer than 20 observations"}
    assert "A007" not in model.assets
    residuals = model.fit_report.residuals
    assert np.isnan(residuals.loc[gappy.index[5], "A002"])
    assert gappy.index[12] not in residuals.index
    assert model.fit_report.extra["filled_cells"] == 1
    assert model.fit_report.assets.loc["A002", "n_observations"] == 38


def test_first_principal_component_of_french_industries_tracks_the_market():
    # Open dataset shipped with linearmodels (Ken French's monthly industry portfolios, 1949–2016).
    # Fact of the trade (common practice, no source): the first principal component of industry
    # returns is the market; its scores correlate with MktRF above 0.95 (0.985 measured here).
    data = french.load()
    industries = ["NoDur", "Durbl", "Manuf", "Enrgy", "Chems", "BusEq", "Telcm", "Utils", "Shops", "Hlth", "Money", "Other"]
    returns = data.set_index(pd.to_datetime(data["dates"]))[industries]
    model = fit_statistical(returns, n_factors=3)
    assert model.periods_per_year == 12.0
    assert np.corrcoef(model.fit_report.factor_returns["pc1"], data["MktRF"])[0, 1] > 0.95
    assert (model.exposures["pc1"] > 0).all()  # every industry loads positively on the market
    pca = PCA(n_components=3, svd_solver="full").fit(returns.to_numpy())
    np.testing.assert_allclose(model.fit_report.extra["explained_variance"].to_numpy(), pca.explained_variance_, rtol=1e-10)


def test_pure_noise_prefers_no_factor_and_warns():
    rng = np.random.default_rng(8)
    noise = pd.DataFrame(0.01 * rng.normal(size=(300, 100)), index=pd.bdate_range("2021-01-01", periods=300))
    with pytest.warns(DataWarning, match="IC_p2 is lowest with no factor at all; using k = 1"):
        model = fit_statistical(noise, max_factors=5)
    assert model.n_factors == 1


def test_max_factors_is_capped_at_the_rank_limit():
    small = _factor_panel(n_dates=8, n_assets=6, n_factors=1, seed=2)
    model = fit_statistical(small, max_factors=20)
    assert model.fit_report.extra["max_factors_considered"] == 5


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"n_factors": 200}, r"n_factors must be at most min\(T, N\) - 1 = 199 \(T = 500 dates, N = 200 assets\), got 200"),
        ({"n_factors": 0}, r"n_factors must be a whole number >= 1 or None, got 0"),
        ({"n_factors": 2.0}, r"n_factors must be a whole number >= 1 or None, got 2.0"),
        ({"max_factors": 0}, r"max_factors must be a whole number >= 1, got 0"),
        ({"criterion": "AIC"}, r"criterion must be one of IC_p1, IC_p2, IC_p3, got 'AIC'"),
        ({"demean": "yes"}, r"demean must be True or False, got 'yes'"),
        ({"min_periods": 1}, r"min_periods must be a whole number >= 2 or None, got 1"),
        ({"periods_per_year": 0}, r"periods_per_year must be a positive number or None, got 0"),
        ({"covariance": "ledoit_wolf"}, r"covariance: expected CovarianceSettings or None, got str"),
    ],
)
def test_bad_arguments(panel, kwargs, message):
    with pytest.raises(InputError, match=message):
        fit_statistical(panel, **kwargs)


def test_bad_panels(panel):
    empty = panel.iloc[:, :5].copy()
    empty["A003"] = np.nan
    with pytest.raises(InputError, match=r"no observations \(all NaN\) for assets: A003"):
        fit_statistical(empty)
    with pytest.raises(InputError, match=r"too few dates with returns: 2; need at least 3"):
        fit_statistical(panel.iloc[:2])
    thin = panel.iloc[:10, :3].copy()
    thin.iloc[:6, 1:] = np.nan
    with pytest.raises(InputError, match=r"fewer than 2 assets with at least 5 observations"):
        fit_statistical(thin)
    with pytest.raises(InputError, match=r"asset_returns: duplicate dates"):
        fit_statistical(panel.set_axis([panel.index[0]] * 2 + list(panel.index[2:])))
    with pytest.raises(InputError, match=r"cannot infer periods_per_year from an index of type RangeIndex"):
        fit_statistical(panel.reset_index(drop=True))
    with pytest.raises(InputError, match=r"asset_returns: non-numeric columns: A000"):
        fit_statistical(panel.assign(A000="x"))


def test_assets_with_too_few_observations_for_the_degrees_of_freedom_are_left_out():
    panel = _factor_panel(n_dates=12, n_assets=20, n_factors=1, seed=6)
    panel.iloc[:8, 4] = np.nan  # 4 observations; with k = 3 and the mean, dof = 4
    with pytest.warns(DataWarning) as record:
        model = fit_statistical(panel, n_factors=3, min_periods=4)
    assert "no more than 4 observations (the degrees of freedom): A004" in " | ".join(str(r.message) for r in record)
    assert "A004" not in model.assets


def test_saved_model_round_trips_with_its_provenance(panel, tmp_path):
    model = fit_statistical(panel, max_factors=6)
    loaded = type(model).load(model.save(tmp_path / "statistical_model"))
    np.testing.assert_allclose(loaded.exposures.to_numpy(), model.exposures.to_numpy(), rtol=1e-15)
    assert loaded.provenance["settings"]["criterion"] == "IC_p2"
    assert loaded.provenance["window"] == model.provenance["window"]
    assert loaded.fit_report.method == "statistical"


def test_a_choice_at_the_top_of_the_search_range_warns() -> None:
    # issue #12: four strong factors searched up to 2 only: IC_p2 (Bai & Ng 2002) falls all the way to
    # k = 2, the edge of the range, so the choice says more about max_factors than about the data
    rng = np.random.default_rng(12)
    f = rng.normal(0, 0.02, (300, 4))
    panel = pd.DataFrame(f @ rng.normal(0, 1, (4, 60)) + rng.normal(0, 0.005, (300, 60)),
                         index=pd.bdate_range("2024-01-01", periods=300))
    with pytest.warns(DataWarning, match=r"IC_p2 picked k = 2, the top of its search range \(max_factors = 2\)"):
        model = fit_statistical(panel, max_factors=2)
    assert model.n_factors == 2
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert fit_statistical(panel, max_factors=8).n_factors == 4  # inside the range: no warning
