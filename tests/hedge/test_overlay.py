"""trimtab.overlay against outside references, on linearmodels' monthly French data (30 portfolios as
assets, MktRF/SMB/HML/Mom as factors): the minimum-variance hedge ratio (Johnson 1960; Ederington
1979) in closed form with a dense Σ, statsmodels OLS of simulated book returns on instrument returns,
a dense cvxpy solve of the same problem, and statsmodels OLS for instruments given as returns."""

from __future__ import annotations

import cvxpy as cp
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

import trimtab
from trimtab import FactorModel, InfeasibleError, InputError, fit_time_series

from ..conftest import french_monthly

FACTORS = ["MktRF", "SMB", "HML", "Mom"]


@pytest.fixture(scope="module")
def french_data() -> tuple[pd.DataFrame, pd.DataFrame]:
    return french_monthly()


@pytest.fixture(scope="module")
def model(french_data) -> FactorModel:
    return fit_time_series(*french_data)


@pytest.fixture(scope="module")
def book(model) -> tuple[pd.Series, pd.Series]:
    rng = np.random.default_rng(23)
    w = pd.Series(rng.dirichlet(np.full(model.n_assets, 0.5)), index=model.assets)
    b = pd.Series(1.0 / model.n_assets, index=model.assets)
    return w, b


def baskets(model: FactorModel) -> dict[str, pd.Series]:
    """An index (equal weight), a small-minus-big basket and a high-minus-low value basket of portfolios."""
    assets = list(model.assets)
    small = [a for a in assets if a.startswith("S1")]
    big = [a for a in assets if a.startswith("S5")]
    size = pd.Series({**{a: 1 / len(small) for a in small}, **{a: -1 / len(big) for a in big}})
    high = [a for a in assets if a.endswith("V5")]
    low = [a for a in assets if a.endswith("V1")]
    value = pd.Series({**{a: 1 / len(high) for a in high}, **{a: -1 / len(low) for a in low}})
    return {"index": pd.Series(1.0 / len(assets), index=model.assets), "size": size, "value": value}


def test_assets_have_the_sorts_the_baskets_use(model):
    b = baskets(model)
    assert len(b["size"]) >= 4 and len(b["value"]) >= 4


def test_one_instrument_total_risk_is_the_minimum_variance_hedge_ratio(model, book):
    # closed form: h* = −wᵀΣx / xᵀΣx (Johnson 1960; Ederington 1979), with the dense Σ = BFBᵀ + D
    w, _ = book
    x = baskets(model)["index"]
    result = trimtab.overlay(model, w, {"index": x}, minimize="total_risk")
    sigma = model.covariance().to_numpy()
    wv, xv = w.to_numpy(), x.to_numpy()
    expected = -(wv @ sigma @ xv) / (xv @ sigma @ xv)
    assert result.notional["index"] == pytest.approx(expected, abs=1e-6)
    assert result.risk.loc["after", "total"] <= result.risk.loc["before", "total"]
    # the residual variance at h* is wᵀΣw − (wᵀΣx)²/xᵀΣx (same source)
    after = np.sqrt((wv @ sigma @ wv - (wv @ sigma @ xv) ** 2 / (xv @ sigma @ xv)) * 12)
    assert result.risk.loc["after", "total"] == pytest.approx(after, rel=1e-9)


def test_hedge_ratio_matches_ols_of_simulated_returns(model, book):
    # statsmodels OLS of book returns on instrument returns drawn from N(0, Σ): the slope β is the
    # minimum-variance hedge ratio with the sign turned (Ederington 1979), within sampling error
    w, _ = book
    x = baskets(model)["size"]
    rng = np.random.default_rng(7)
    draws = rng.multivariate_normal(np.zeros(model.n_assets), model.covariance().to_numpy(), size=100_000)
    book_returns = draws @ w.to_numpy()
    instrument_returns = draws @ x.reindex(model.assets).fillna(0.0).to_numpy()
    fit = sm.OLS(book_returns, sm.add_constant(instrument_returns)).fit()
    result = trimtab.overlay(model, w, {"size": x}, minimize="total_risk")
    assert result.notional["size"] == pytest.approx(-fit.params[1], abs=5 * fit.bse[1])


def test_three_baskets_meet_zero_active_market_and_size(model, book):
    w, b = book
    result = trimtab.overlay(model, w, baskets(model), benchmark=b, targets={"MktRF": 0.0, "SMB": 0.0})
    active = model.factor_exposure(w - b + sum(h * x.reindex(model.assets).fillna(0.0) for h, x in
                                               zip(result.notional, baskets(model).values(), strict=True)))
    assert abs(active["MktRF"]) < 1e-8 and abs(active["SMB"]) < 1e-8
    assert abs(result.exposures.loc["MktRF", "after"]) < 1e-8 and abs(result.exposures.loc["SMB", "after"]) < 1e-8
    assert result.risk.loc["after", "active"] <= result.risk.loc["before", "active"] + 1e-12


def test_targets_solution_matches_a_dense_cvxpy_solve(model, book):
    # outside reference: cvxpy (Clarabel) on the dense Σ: minimise (a + Xh)ᵀΣ(a + Xh) s.t. the targets
    w, b = book
    inst = baskets(model)
    result = trimtab.overlay(model, w, inst, benchmark=b, targets={"MktRF": 0.0, "SMB": 0.0})
    X = np.column_stack([x.reindex(model.assets).fillna(0.0).to_numpy() for x in inst.values()])
    a = (w - b).to_numpy()
    sigma = model.covariance().to_numpy()
    Bm = model.exposures.to_numpy()
    h = cp.Variable(3)
    objective = cp.quad_form(a + X @ h, cp.psd_wrap(sigma * 1e3))
    cons = [Bm[:, 0] @ (a + X @ h) == 0, Bm[:, 1] @ (a + X @ h) == 0]
    cp.Problem(cp.Minimize(objective), cons).solve(solver=cp.CLARABEL)
    np.testing.assert_allclose(result.notional.to_numpy(), h.value, atol=1e-6)


def test_total_targets_without_benchmark(model, book):
    w, _ = book
    result = trimtab.overlay(model, w, baskets(model), targets={"MktRF": 0.25}, minimize="total_risk")
    assert model.factor_exposure(w)["MktRF"] + result.exposures.loc["MktRF", "overlay"] == pytest.approx(0.25, abs=1e-10)


def test_contracts_are_whole_and_rounded_notional_follows(model, book):
    w, b = book
    terms = pd.DataFrame({"price": [5012.5, 2100.0, 1500.0], "multiplier": [50, 20, 10], "cost": [2.5, 3.0, 3.0]},
                         index=["index", "size", "value"])
    nav = 250e6
    result = trimtab.overlay(model, w, baskets(model), benchmark=b, targets={"MktRF": 0.0, "SMB": 0.0},
                             contracts=terms, nav=nav, costs={"size": 0.0005})
    for name in terms.index:
        n = result.contracts[name]
        assert float(n) == int(n)
        assert result.notional_after_rounding[name] == pytest.approx(n * terms.loc[name, "price"] * terms.loc[name, "multiplier"] / nav, rel=1e-15)
        # nearest whole contract: within half a contract of the unrounded notional
        assert abs(result.notional[name] * nav - n * terms.loc[name, "price"] * terms.loc[name, "multiplier"]) <= 0.5 * terms.loc[name, "price"] * terms.loc[name, "multiplier"] + 1e-6
    expected_cost = (terms["cost"] * result.contracts.astype(float).abs()).sum() / nav + 0.0005 * abs(result.notional_after_rounding["size"])
    assert result.cost == pytest.approx(expected_cost, rel=1e-12)
    assert "Hedge overlay" in str(result)


def test_return_series_instrument_matches_statsmodels(model, french_data, book):
    # outside reference: statsmodels OLS (with a constant) of the instrument's returns on the factor
    # returns gives its exposures; SSR/(T − K − 1) its specific variance
    excess, factors = french_data
    rng = np.random.default_rng(3)
    series = excess.iloc[:, :10].mean(axis=1) + rng.normal(0.0, 0.01, len(excess))
    w, _ = book
    result = trimtab.overlay(model, w, {"future": series}, minimize="total_risk")
    fit = sm.OLS(series.to_numpy(), sm.add_constant(factors.to_numpy())).fit()
    np.testing.assert_allclose(result.instruments.loc["future", FACTORS].to_numpy(dtype=float), fit.params[1:], rtol=1e-8)
    s = fit.ssr / (len(series) - 5)
    assert result.fit.loc["future", "residual_volatility"] == pytest.approx(np.sqrt(s), rel=1e-8)
    # the hedge ratio with an uncorrelated specific part: h = −wᵀBFβ / (βᵀFβ + s)
    beta, F, Bm = fit.params[1:], model.factor_covariance.to_numpy(), model.exposures.to_numpy()
    expected = -(w.to_numpy() @ Bm @ F @ beta) / (beta @ F @ beta + s)
    assert result.notional["future"] == pytest.approx(expected, rel=1e-8)
    assert any("time-series regression" in note for note in result.notes)


def test_max_gross_caps_the_notional(model, book):
    w, b = book
    free = trimtab.overlay(model, w, baskets(model), benchmark=b)
    wide = trimtab.overlay(model, w, baskets(model), benchmark=b, max_gross=10.0)
    np.testing.assert_allclose(wide.notional, free.notional, atol=1e-6)
    cap = 0.5 * free.notional.abs().sum()
    capped = trimtab.overlay(model, w, baskets(model), benchmark=b, max_gross=cap)
    assert capped.notional.abs().sum() == pytest.approx(cap, rel=1e-6)
    assert capped.risk.loc["after", "active"] >= free.risk.loc["after", "active"]


@pytest.mark.parametrize(
    ("kwargs", "error", "match"),
    [
        ({"targets": {"beta": 0.0}}, InputError, "targets: unknown factors beta; the model's factors are MktRF"),
        ({"instruments": {"x": pd.Series({"NOPE": 1.0})}}, InputError, r"instruments\['x'\]: assets not in the risk model: NOPE"),
        ({"contracts": {"index": {"price": 0.0, "multiplier": 50}}, "nav": 1e6}, InputError, "price must be a finite number > 0"),
        ({"contracts": {"index": {"price": 10.0, "multiplier": 50}}}, InputError, "nav: needed with contract terms"),
        ({"minimize": "risk"}, InputError, "minimize: expected one of"),
        ({"targets": {"MktRF": 0.0, "SMB": 0.0, "HML": 0.0, "Mom": 0.0}}, InfeasibleError, "cannot reach all 4 target exposures"),
    ],
    ids=["unknown-factor", "unknown-asset", "price-zero", "nav-missing", "bad-minimize", "unreachable"],
)
def test_bad_input_is_named(model, book, kwargs, error, match):
    w, b = book
    args = {"instruments": {"index": baskets(model)["index"]}, **kwargs}
    with pytest.raises(error, match=match):
        trimtab.overlay(model, w, args.pop("instruments"), benchmark=b, **args)


def test_risk_parts_match_the_dense_covariance(model, book):
    # outside reference: the dense Σ = BFBᵀ + D with numpy; parts: factor (a+Xh)ᵀBFBᵀ(a+Xh), specific (a+Xh)ᵀD(a+Xh)
    w, b = book
    inst = baskets(model)
    result = trimtab.overlay(model, w, inst, benchmark=b, targets={"MktRF": 0.0})
    X = np.column_stack([x.reindex(model.assets).fillna(0.0).to_numpy() for x in inst.values()])
    Bm, F, D = model.exposures.to_numpy(), model.factor_covariance.to_numpy(), np.diag(model.specific_variance.to_numpy())
    overlay = X @ result.notional.to_numpy()
    for column, base in (("total", w.to_numpy()), ("active", (w - b).to_numpy())):
        for row, v in (("before", base), ("after", base + overlay)):
            factor = v @ Bm @ F @ Bm.T @ v * 12
            specific = v @ D @ v * 12
            assert result.risk.loc[row, f"{column}_factor"] == pytest.approx(np.sqrt(factor), rel=1e-10)
            assert result.risk.loc[row, f"{column}_specific"] == pytest.approx(np.sqrt(specific), rel=1e-10)
            assert result.risk.loc[row, column] == pytest.approx(np.sqrt(factor + specific), rel=1e-10)
    assert result.added_specific_risk == pytest.approx(np.sqrt(overlay @ D @ overlay * 12), rel=1e-10)


def test_redundant_instruments_still_solve(model, book):
    # two copies of one basket: the notional is split (minimum norm), the total is the single-basket hedge
    w, _ = book
    x = baskets(model)["index"]
    one = trimtab.overlay(model, w, {"a": x}, minimize="total_risk")
    two = trimtab.overlay(model, w, {"a": x, "b": x.copy()}, minimize="total_risk")
    assert two.notional.sum() == pytest.approx(one.notional["a"], rel=1e-9)
    assert two.notional["a"] == pytest.approx(two.notional["b"], rel=1e-9)


def test_percentages_are_caught(model, french_data, book):
    # a basket or return series written in percent (a fact of the trade: data vendors often do) is refused
    w, _ = book
    excess, _ = french_data
    with pytest.raises(InputError, match=r"basket weights sum to 100 .*not percentages"):
        trimtab.overlay(model, w, {"index": baskets(model)["index"] * 100})
    with pytest.raises(InputError, match=r"instruments\['future'\]: a return of .* not percentages"):
        trimtab.overlay(model, w, {"future": excess.iloc[:, 0] * 100})


def test_return_series_uses_the_models_half_life(french_data, book):
    # outside reference: statsmodels WLS with weights 0.5^((T−1−t)/h), as the model itself was fitted
    excess, factors = french_data
    h = 60.0
    model = fit_time_series(excess, factors, half_life=h)
    rng = np.random.default_rng(5)
    series = excess.iloc[:, 3] * 0.5 + excess.iloc[:, 20] * 0.5 + rng.normal(0.0, 0.01, len(excess))
    result = trimtab.overlay(model, book[0], {"future": series})
    weights = 0.5 ** ((len(series) - 1 - np.arange(len(series))) / h)
    fit = sm.WLS(series.to_numpy(), sm.add_constant(factors.to_numpy()), weights=weights).fit()
    np.testing.assert_allclose(result.instruments.loc["future", FACTORS].to_numpy(dtype=float), fit.params[1:], rtol=1e-8)


def test_max_gross_too_small_for_the_targets_is_infeasible(model, book):
    w, b = book
    free = trimtab.overlay(model, w, baskets(model), benchmark=b, targets={"MktRF": 0.0, "SMB": 0.0})
    with pytest.raises(InfeasibleError, match="max_gross"):
        trimtab.overlay(model, w, baskets(model), benchmark=b, targets={"MktRF": 0.0, "SMB": 0.0},
                        max_gross=0.2 * free.notional.abs().sum())


def test_contracts_held_today_count_before_and_in_the_trade(model, book):
    w, b = book
    terms = pd.DataFrame({"price": [5012.5, 2100.0, 1500.0], "multiplier": [50, 20, 10], "cost": [2.5, 3.0, 3.0],
                          "held": [-100, 0, 40]}, index=["index", "size", "value"])
    nav = 250e6
    args = dict(benchmark=b, targets={"MktRF": 0.0, "SMB": 0.0}, contracts=terms, nav=nav)
    result = trimtab.overlay(model, w, baskets(model), **args)
    flat = trimtab.overlay(model, w, baskets(model), **{**args, "contracts": terms.assign(held=0)})
    # the position to hold does not depend on what is held; the trade is the difference
    assert list(result.contracts) == list(flat.contracts)
    assert list(result.trades["trade"]) == [int(n - h) for n, h in zip(result.contracts, terms["held"], strict=True)]
    size = terms["price"] * terms["multiplier"]
    held_notional = (terms["held"] * size / nav).to_numpy()
    X = np.column_stack([x.reindex(model.assets).fillna(0.0).to_numpy() for x in baskets(model).values()])
    before = model.factor_exposure((w - b).to_numpy() + X @ held_notional)
    np.testing.assert_allclose(result.exposures["before"], before.to_numpy(), atol=1e-14)
    expected_cost = (terms["cost"] * (result.contracts.astype(float) - terms["held"]).abs()).sum() / nav
    assert result.cost == pytest.approx(expected_cost, rel=1e-12)
    with pytest.raises(InputError, match="held must be a whole number"):
        trimtab.overlay(model, w, baskets(model), **{**args, "contracts": terms.assign(held=[0.5, 0, 0])})
