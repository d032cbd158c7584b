"""Ex-post return attribution against Carino's published linking formula, the exact reconciliation
identities, statsmodels OLS exposures on linearmodels' French data, and a backtest's own record."""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from linearmodels.datasets import french

import trimtab
from trimtab import fit_time_series
from trimtab.attribution import link
from trimtab.errors import DataWarning, InputError

from ..conftest import random_model


def carino_factors(book: list[float], bench: list[float]) -> tuple[list[float], float]:
    """Carino (1999), written from memory of the paper: k_t = [ln(1+R_t) − ln(1+B_t)]/(R_t − B_t),
    k = [ln(1+R) − ln(1+B)]/(R − B) over the compounded returns; for a single portfolio (B = 0)
    these are k_t = ln(1+r_t)/r_t and k = ln(1+R)/R."""
    R = math.prod(1 + r for r in book) - 1
    Bc = math.prod(1 + b for b in bench) - 1
    k_t = [(math.log(1 + r) - math.log(1 + b)) / (r - b) for r, b in zip(book, bench)]
    k = (math.log(1 + R) - math.log(1 + Bc)) / (R - Bc)
    return k_t, k


@pytest.fixture
def setting():
    rng = np.random.default_rng(7)
    model = random_model(30, 4, seed=7, periods_per_year=12)
    dates = pd.date_range("2020-01-31", periods=24, freq="ME")
    f = pd.DataFrame(rng.normal(0.004, 0.03, (24, 4)), index=dates, columns=model.factors)
    eps = rng.normal(0, 0.02, (24, 30))
    r = pd.DataFrame(f.to_numpy() @ model.exposures.to_numpy().T + eps, index=dates, columns=model.assets)
    w = pd.DataFrame(rng.dirichlet(np.ones(30), 24), index=dates, columns=model.assets)
    b = pd.Series(1.0 / 30, index=model.assets)
    return model, w, r, f, b


def test_components_sum_to_the_active_return_each_period(setting):
    model, w, r, f, b = setting
    result = trimtab.attribute_returns(model, w, r, f, benchmark=b)
    active = ((w - b) * r).sum(axis=1)
    np.testing.assert_allclose(result.by_period["total"], active, rtol=1e-13)
    parts = result.by_period.drop(columns="total").sum(axis=1)
    np.testing.assert_allclose(parts, active, rtol=0, atol=1e-16)
    # each factor's part is its active exposure times its return
    X = (w - b).to_numpy() @ model.exposures.to_numpy()
    np.testing.assert_allclose(result.by_period[list(model.factors)].to_numpy(), X * f.to_numpy(), rtol=1e-12)
    np.testing.assert_allclose(result.exposures.to_numpy(), X, rtol=1e-12)


def test_carino_linking_matches_the_published_formula_and_reconciles(setting):
    model, w, r, f, b = setting
    result = trimtab.attribute_returns(model, w, r, f, benchmark=b)
    book, bench = result.returns["book"].tolist(), result.returns["benchmark"].tolist()
    k_t, k = carino_factors(book, bench)
    expected = result.by_period.drop(columns="total").mul(np.array(k_t) / k, axis=0).sum()
    pd.testing.assert_series_equal(result.linked.drop("total"), expected, check_names=False, rtol=1e-12)
    compounded = math.prod(1 + x for x in book) - math.prod(1 + x for x in bench)
    assert result.linked["total"] == pytest.approx(compounded, rel=1e-13)
    assert result.linked.drop("total").sum() == pytest.approx(compounded, rel=1e-12, abs=1e-15)
    # the asset table links the same way and adds up to the same total
    assert result.asset_contributions["total"].sum() == pytest.approx(compounded, rel=1e-11)
    factor_total = result.linked[list(model.factors)].sum()
    assert result.asset_contributions["factor"].sum() == pytest.approx(factor_total, rel=1e-10)


def test_single_portfolio_linking_reduces_to_log_ratios():
    # with a zero benchmark, Carino's factors are ln(1 + r)/r per period and ln(1 + R)/R overall
    book = pd.Series([0.02, -0.01, 0.03, 0.0])
    components = pd.DataFrame({"a": [0.01, -0.02, 0.01, 0.0], "b": [0.01, 0.01, 0.02, 0.0]})
    linked, scale = link(components, book, book * 0.0, "carino")
    R = float(np.prod(1 + book) - 1)
    k = math.log(1 + R) / R
    k_t = [math.log(1 + x) / x if x else 1.0 for x in book]
    np.testing.assert_allclose(scale.to_numpy(), np.array(k_t) / k, rtol=1e-12)
    assert linked["a"] + linked["b"] == pytest.approx(R, rel=1e-13)


def test_sum_linking_shows_the_compounding_difference(setting):
    model, w, r, f, b = setting
    result = trimtab.attribute_returns(model, w, r, f, benchmark=b, linking="sum")
    np.testing.assert_allclose(result.linked[list(model.factors)], result.by_period[list(model.factors)].sum(), rtol=1e-13)
    assert result.linked.drop("total").sum() == pytest.approx(result.linked["total"], rel=1e-12)
    assert result.linked["compounding"] != 0.0


def test_risk_share_is_the_span_share_of_ex_ante_active_variance(setting):
    model, w, r, f, b = setting
    result = trimtab.attribute_returns(model, w, r, f, benchmark=b)
    F, d = model.factor_covariance.to_numpy(), model.specific_variance.to_numpy()
    A = (w - b).to_numpy()
    X = A @ model.exposures.to_numpy()
    factor_part = (X * (X @ F)).sum(axis=0)
    specific_part = ((A * A) @ d).sum()
    total = factor_part.sum() + specific_part
    np.testing.assert_allclose(result.risk_share[list(model.factors)], factor_part / total, rtol=1e-12)
    assert result.risk_share["specific"] == pytest.approx(specific_part / total, rel=1e-12)
    assert result.risk_share.sum() == pytest.approx(1.0)
    table = result.factor_table()
    assert {"contribution", "share_of_return", "share_of_risk"} <= set(table.columns)


def test_groups_and_top_assets_add_up(setting):
    model, w, r, f, b = setting
    result = trimtab.attribute_returns(model, w, r, f, benchmark=b)
    groups = pd.Series(["x", "y", "z"] * 10, index=model.assets)
    by_group = result.by_group(groups)
    assert by_group["total"].sum() == pytest.approx(result.linked["total"], rel=1e-11)
    top = result.top_assets(3)
    assert len(top) == 3 and top["specific"].abs().is_monotonic_decreasing
    assert "Largest stock-picking" in str(result)


def test_a_fixed_series_is_held_every_period(setting):
    model, w, r, f, b = setting
    fixed = w.iloc[0]
    a = trimtab.attribute_returns(model, fixed, r, f, benchmark=b)
    c = trimtab.attribute_returns(model, pd.DataFrame([fixed] * len(r), index=r.index), r, f, benchmark=b)
    pd.testing.assert_frame_equal(a.by_period, c.by_period)


def test_french_portfolios_with_statsmodels_exposures():
    # real data: linearmodels' monthly French factors and 30 industry portfolios. The factor part of the
    # attribution uses exposures that statsmodels OLS (with a constant) gives for each portfolio, and the
    # intercept part its fitted constants; the three parts reconcile to (w − b)ᵀr each month
    data = french.load().set_index("dates")
    names = ["MktRF", "SMB", "HML", "Mom"]
    factors = data[names]
    excess = data[data.columns[5:]].sub(data["RF"], axis=0)
    model = fit_time_series(excess, factors)
    bench = pd.Series(1.0 / model.n_assets, index=model.assets)
    book = bench.copy()
    book.iloc[:10] += 0.02
    book.iloc[10:20] -= 0.02
    span = excess.index[-36:]
    result = trimtab.attribute_returns(model, book, excess.loc[span], benchmark=bench)
    X = sm.add_constant(factors)
    fits = {a: sm.OLS(excess[a], X).fit().params for a in model.assets}
    betas = pd.DataFrame({a: p[names] for a, p in fits.items()}).T
    consts = pd.Series({a: p["const"] for a, p in fits.items()})
    active = (book - bench).to_numpy()
    exposure = active @ betas.loc[model.assets].to_numpy()
    np.testing.assert_allclose(result.by_period[names].to_numpy(), exposure * factors.loc[span].to_numpy(), rtol=1e-6, atol=1e-12)
    assert result.by_period["intercept"].iloc[0] == pytest.approx(active @ consts.loc[model.assets].to_numpy(), rel=1e-6)
    realised = (excess.loc[span] * (book - bench)).sum(axis=1)
    np.testing.assert_allclose(result.by_period.drop(columns="total").sum(axis=1), realised, atol=1e-15)
    compounded = (1 + (excess.loc[span] * book).sum(axis=1)).prod() - (1 + (excess.loc[span] * bench).sum(axis=1)).prod()
    assert result.linked.drop("total").sum() == pytest.approx(compounded, rel=1e-11)


def test_backtest_history_is_attributed_directly():
    # a small walk-forward backtest; its stored record (active exposures of each date's model, realised
    # book and benchmark returns) is attributed, and every figure reconciles with that record
    rng = np.random.default_rng(3)
    truth = random_model(25, 3, seed=3)
    dates = pd.bdate_range("2023-01-02", periods=160)
    f = pd.DataFrame(rng.normal(0.0, 0.01, (160, 3)), index=dates, columns=truth.factors)
    r = pd.DataFrame(f.to_numpy() @ truth.exposures.to_numpy().T + rng.normal(0, 0.01, (160, 25)), index=dates, columns=truth.assets)
    alpha = pd.DataFrame([rng.normal(0, 0.02, 25)], index=dates[:1], columns=truth.assets)
    bench = pd.Series(1.0 / 25, index=truth.assets)
    scenario = {"objective": {"maximize": "alpha"},
                "constraints": {"fully_invested": True, "long_only": True, "tracking_error": {"max": 0.05}}}
    bt = trimtab.backtest(r, alpha, {"base": scenario}, window=80, frequency=20, factor_returns=f, benchmark=bench)
    result = trimtab.attribute_backtest_returns(bt, f)
    hist = bt.history.loc["base"].dropna(subset=["realised_active"])
    np.testing.assert_allclose(result.by_period["total"], hist["realised_active"], rtol=1e-13)
    np.testing.assert_allclose(result.by_period.drop(columns="total").sum(axis=1), hist["realised_active"], atol=1e-16)
    first = hist.index[0]
    rows = f.loc[f.index > first].iloc[: int(hist.loc[first, "n_periods"])]
    x = bt.exposures.loc[("base", first)]
    np.testing.assert_allclose(result.by_period.loc[first, list(truth.factors)], x * rows.sum(), rtol=1e-12)
    compounded = (1 + hist["book_return"]).prod() - (1 + hist["benchmark_return"]).prod()
    assert result.linked["total"] == pytest.approx(compounded, rel=1e-12)
    assert result.linked.drop("total").sum() == pytest.approx(compounded, rel=1e-11)
    assert result.risk_share.sum() == pytest.approx(1.0, rel=1e-9)
    with pytest.raises(InputError, match="not kept for a backtest"):
        result.top_assets()


@pytest.mark.parametrize(
    ("change", "match"),
    [
        ({"linking": "geometric"}, "linking must be one of carino, sum"),
        ({"weights": "drop-date"}, r"weights has no row for 1 date\(s\) of asset_returns: 2020-01-31"),
        ({"weights": "unknown-asset"}, "weights: assets not in the risk model: ZZZ"),
        ({"factor_returns": "drop-factor"}, r"factor_returns has no column for factor\(s\) f3"),
        ({"factor_returns": "drop-date"}, r"factor_returns has no row for 1 date\(s\): 2020-01-31"),
        ({"factor_returns": None}, "the model carries no factor-return history"),
        ({"asset_returns": "crash"}, "a period return of -100% or worse"),
    ],
    ids=["linking", "weights-date", "weights-asset", "factor-missing", "factor-date", "no-history", "total-loss"],
)
def test_bad_input(setting, change, match):
    model, w, r, f, b = setting
    kwargs = {"linking": "carino"}
    weights, returns, factors = w, r, f
    if change.get("weights") == "drop-date":
        weights = w.iloc[1:]
    if change.get("weights") == "unknown-asset":
        weights = w.assign(ZZZ=0.0)
    if change.get("factor_returns") == "drop-factor":
        factors = f.drop(columns="f3")
    if change.get("factor_returns") == "drop-date":
        factors = f.iloc[1:]
    if "factor_returns" in change and change["factor_returns"] is None:
        factors = None
    if change.get("asset_returns") == "crash":
        returns = r.copy()
        returns.iloc[3] = -1.5
    if "linking" in change:
        kwargs["linking"] = change["linking"]
    with pytest.raises(InputError, match=match):
        trimtab.attribute_returns(model, weights, returns, factors, benchmark=b, **kwargs)


def test_missing_return_of_a_held_asset_counts_as_zero_with_a_warning(setting):
    model, w, r, f, b = setting
    gappy = r.copy()
    gappy.iloc[2, 4] = np.nan
    with pytest.warns(DataWarning, match=r"no return for held assets on 1 asset-periods \(counted as 0\): A0004"):
        result = trimtab.attribute_returns(model, w, gappy, f, benchmark=b)
    assert result.linked.drop("total").sum() == pytest.approx(result.linked["total"], rel=1e-12)
