"""Bad inputs fail before any solve with one clear line; the unknown-asset policies do what they say."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel
from trimtab.construct import build_problem, rebalance
from trimtab.errors import DataWarning, InputError, ModelError, ScenarioError

from .conftest import make_fund

MIN_ACTIVE = {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True, "long_only": True}}
UTILITY = {"objective": {"maximize": "utility", "risk_aversion": 5}, "constraints": {"fully_invested": True, "long_only": True}}


@pytest.fixture
def small():
    return make_fund(20, 3, seed=2)


def test_unknown_assets_error_lists_at_most_five(small):
    extra = pd.Series(0.01, index=[f"X{i}" for i in range(7)])
    holdings = pd.concat([small.holdings * 0.9, extra])
    with pytest.raises(InputError, match=r"^holdings: assets not in the risk model: X0, X1, X2, X3, X4 \(and 2 more\)"):
        rebalance(small.model, MIN_ACTIVE, holdings=holdings, benchmark=small.benchmark)


def test_drop_policy_warns_and_ignores(small):
    alpha = pd.concat([small.alpha, pd.Series({"GHOST": 0.5})])
    with pytest.warns(DataWarning, match=r"alpha: 1 assets not in the risk model dropped: GHOST"):
        result = rebalance(small.model, UTILITY, holdings=small.holdings, benchmark=small.benchmark, alpha=alpha,
                           unknown_assets="drop")
    assert "GHOST" not in result.weights.index


def test_zero_policy_sells_unknown_holdings_and_counts_their_turnover(small):
    holdings = pd.concat([small.holdings * 0.95, pd.Series({"GONE": 0.05})])
    scenario = {"objective": {"minimize": "active_risk"},
                "constraints": {"fully_invested": True, "long_only": True, "turnover": {"max": 0.1}}}
    with pytest.warns(DataWarning, match=r"holdings: 1 assets not in the risk model sold to zero outside the optimizer: GONE"):
        result = rebalance(small.model, scenario, holdings=holdings, benchmark=small.benchmark, unknown_assets="zero")
    assert result.trades.loc["GONE", "trade"] == pytest.approx(-0.05)
    assert result.trades.loc["GONE", "target_weight"] == 0.0
    # the sale outside the optimizer is part of the one-way turnover ½·Σ|trade| the cap bounds
    assert result.turnover <= 0.1 + 1e-7
    row = result.constraints.set_index("name").loc["turnover"]
    assert row["value"] == pytest.approx(result.turnover, abs=1e-9)


@pytest.mark.parametrize(
    "kwargs,message",
    [
        ({"benchmark": "sum"}, r"^benchmark: weights must sum to 1 \(got 0\.9\)$"),
        ({"alpha": "nan"}, r"^alpha: NaN or infinite values for assets: A0003$"),
        ({"holdings": "over"}, r"^rebalance: holdings weights sum to 1\.5, more than the whole NAV \(1\)"),
        ({"holdings": "frame"}, r"^holdings: expected a pandas Series by asset, got DataFrame$"),
        ({"holdings": "dup"}, r"^holdings: duplicate asset ids: A0001$"),
        ({"holdings": "text"}, r"^holdings: expected numbers, got dtype"),
        ({"nav": -5.0}, r"^rebalance: nav must be a positive, finite number \(currency\), got -5\.0$"),
        ({"unknown_assets": "ignore"}, r"^rebalance: unknown_assets must be one of error, drop, zero, got 'ignore'$"),
        ({"attributes": "list"}, r"^attributes: expected a DataFrame by asset, got list$"),
        ({"solvers": ["NOPE"]}, r"^rebalance: solvers not installed: NOPE; installed: "),
    ],
)
def test_bad_inputs(small, kwargs, message):
    args = {"holdings": small.holdings, "benchmark": small.benchmark, "alpha": small.alpha}
    value = next(iter(kwargs.values()))
    key = next(iter(kwargs))
    if key == "benchmark":
        args["benchmark"] = small.benchmark * 0.9
    elif key == "alpha":
        alpha = small.alpha.copy()
        alpha.iloc[3] = np.nan
        args["alpha"] = alpha
    elif value == "over":
        args["holdings"] = small.holdings * 1.5
    elif value == "frame":
        args["holdings"] = small.holdings.to_frame()
    elif value == "dup":
        args["holdings"] = pd.concat([small.holdings, small.holdings.iloc[[1]]])
    elif value == "text":
        args["holdings"] = small.holdings.astype(str)
    elif value == "list":
        args["attributes"] = [1, 2]
    else:
        args[key] = value
    with pytest.raises(InputError, match=message):
        rebalance(small.model, UTILITY, **args)


def test_utility_needs_alpha(small):
    with pytest.raises(InputError, match=r"^rebalance: objective utility needs alpha \(pass alpha=\.\.\.\)$"):
        rebalance(small.model, UTILITY, holdings=small.holdings)


def test_model_with_negative_variance_is_refused(small):
    m = small.model
    with pytest.raises(ModelError, match="negative specific variance for assets: A0000"):
        FactorModel(m.exposures, m.factor_covariance, m.specific_variance.mask(m.assets == "A0000", -1e-4))
    # a model whose cached arrays were tampered with after validation is caught by the optimizer too
    m.__dict__["_d"] = np.where(np.arange(m.n_assets) == 2, -1.0, m._d)
    with pytest.raises(ModelError, match=r"rebalance: the model has negative or undefined specific variance for assets: A0002"):
        rebalance(m, MIN_ACTIVE, benchmark=small.benchmark)


def test_model_must_be_a_factor_model(small):
    with pytest.raises(InputError, match=r"^rebalance: model must be a trimtab\.FactorModel, got dict$"):
        rebalance({}, MIN_ACTIVE)


@pytest.mark.parametrize(
    "constraints,message",
    [
        ({"factor_exposure": {"bounds": {"quality": [0, 0]}}}, r"constraints\.factor_exposure\.bounds: unknown factor\(s\) quality; the model has: f0"),
        ({"group": {"by": "industry", "bounds": {"oak": [0, 0.1]}}}, r"constraints\.group\.bounds: unknown group\(s\) oak in column 'industry'"),
        ({"group": {"by": "sector", "bounds": {"default": [0, 0.1]}}}, r"constraints\.group\.by: needs the attribute column 'sector' \(columns: industry"),
        ({"weight": {"max": 0.2, "overrides": {"ZZZ": [0, 0.1]}}}, r"constraints\.weight\.overrides: assets not in the risk model: ZZZ"),
        ({"no_buy": ["ZZZ", "YYY"]}, r"constraints\.no_buy: assets not in the risk model: ZZZ, YYY"),
        ({"must_hold": {"assets": ["ZZZ"], "min_weight": 0.01}}, r"constraints\.must_hold\.assets: assets not in the risk model: ZZZ"),
        ({"liquidity": {"max_adv_fraction": 0.1, "adv_column": "volume"}}, r"constraints\.liquidity\.adv_column: needs the attribute column 'volume'"),
        ({"max_names": 1, "must_hold": {"assets": ["A0001", "A0002"], "min_weight": 0.01}},
         r"constraints\.max_names\.max: must be ≥ the 2 must_hold assets \(got 1\)"),
    ],
)
def test_scenario_errors_that_need_the_data(small, constraints, message):
    scenario = {"objective": {"minimize": "active_risk"}, "constraints": constraints}
    with pytest.raises(ScenarioError, match=message):
        build_problem(small.model, scenario, **small.kwargs())


def test_constraints_needing_missing_inputs(small):
    def scenario(c):
        return {"objective": {"minimize": "total_risk"}, "constraints": c}

    with pytest.raises(ScenarioError, match=r"constraints\.active_weight: needs a benchmark \(pass benchmark=\.\.\.\)"):
        build_problem(small.model, scenario({"active_weight": {"max": 0.01}}))
    with pytest.raises(ScenarioError, match=r"constraints\.beta: needs a benchmark"):
        build_problem(small.model, scenario({"beta": {"min": 0.9}}))
    with pytest.raises(ScenarioError, match=r"constraints\.liquidity: needs the fund's NAV"):
        build_problem(small.model, scenario({"liquidity": {"max_adv_fraction": 0.1}}), attributes=small.attributes)
    with pytest.raises(ScenarioError, match=r"constraints\.round_lots: needs the fund's NAV"):
        build_problem(small.model, scenario({"round_lots": True}), attributes=small.attributes)
    with pytest.raises(ScenarioError, match=r"constraints\.group\.active: active group bounds need a benchmark"):
        build_problem(small.model, scenario({"group": {"by": "industry", "active": True, "bounds": {"default": [0, 1]}}}),
                      attributes=small.attributes)
    with pytest.raises(ScenarioError, match=r"constraints\.factor_exposure\.active: active factor bounds need a benchmark"):
        build_problem(small.model, scenario({"factor_exposure": {"active": True, "bounds": {"f0": [0, 1]}}}))
    bad = small.attributes.assign(price=small.attributes["price"].where(small.attributes.index != "A0004", -1.0))
    with pytest.raises(ScenarioError, match=r"constraints\.liquidity\.price_column: attribute column 'price' must be finite and > 0 for assets: A0004"):
        build_problem(small.model, scenario({"liquidity": {"max_adv_fraction": 0.1}}), attributes=bad, nav=1e6)
    gaps = small.attributes.assign(spread=small.attributes["spread"].where(small.attributes.index != "A0005"))
    with pytest.raises(ScenarioError, match=r"objective\.costs\.spread: attribute column 'spread' has no value for assets: A0005"):
        build_problem(small.model, {"objective": {"minimize": "total_risk", "costs": True}}, attributes=gaps)
    with pytest.raises(ScenarioError, match=r"objective\.costs\.spread: needs the attribute column 'spread' \(no attributes given\)"):
        build_problem(small.model, {"objective": {"minimize": "total_risk", "costs": True}})


def test_update_keeps_the_unknown_asset_policy(small):
    problem = build_problem(small.model, MIN_ACTIVE, holdings=small.holdings, benchmark=small.benchmark,
                            unknown_assets="drop")
    drifted = pd.concat([small.holdings * 0.9, pd.Series({"NEWCO": 0.1})])
    with pytest.warns(DataWarning, match=r"holdings: 1 assets not in the risk model dropped: NEWCO"):
        changed = problem.update(holdings=drifted)
    assert changed.unknown_assets == "drop"


def test_negative_benchmark_weight_is_named_not_reported_as_a_sum(small_model) -> None:  # type: ignore[no-untyped-def]
    # issue #11: a negative weight was reported as "weights must sum to 1"
    import pandas as pd

    import trimtab

    benchmark = pd.Series(1 / small_model.n_assets, index=small_model.assets)
    benchmark.iloc[0], benchmark.iloc[1] = -0.01, benchmark.iloc[1] + 0.01 + 1 / small_model.n_assets
    holdings = pd.Series(1 / small_model.n_assets, index=small_model.assets)
    with pytest.raises(trimtab.InputError, match=r"^benchmark: weights must be ≥ 0; negative for assets: A0000$"):
        trimtab.rebalance(small_model, {"objective": {"minimize": "active_risk"}}, holdings=holdings, benchmark=benchmark)
