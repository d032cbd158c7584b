"""Scenario validation: every message names the key path, what is allowed and what was received."""

from __future__ import annotations

import hashlib
import json

import pytest

from trimtab.construct import validate_scenario
from trimtab.construct._spec import VALIDATORS
from trimtab.construct.constraints import HEURISTIC_KEYS, REGISTRY
from trimtab.errors import ScenarioError

UTILITY = {"maximize": "utility", "risk_aversion": 10}


def check(constraints=None, objective=None, source="scenario"):
    body = {"objective": objective if objective is not None else UTILITY}
    if constraints is not None:
        body["constraints"] = constraints
    return validate_scenario(body, source=source)


def test_registry_and_validators_cover_the_same_keys():
    assert set(VALIDATORS) == set(REGISTRY) | set(HEURISTIC_KEYS)


def test_the_issue_example_validates_and_normalises():
    spec = check({
        "fully_invested": True, "long_only": True, "weight": {"min": 0.0, "max": 0.05},
        "active_weight": {"min": -0.02, "max": 0.02},
        "factor_exposure": {"active": True, "bounds": {"size": [-0.1, 0.1], "momentum": [0, 0]}},
        "group": {"by": "industry", "active": True, "bounds": {"default": [-0.05, 0.05]}},
        "tracking_error": {"max": 0.03}, "total_risk": {"max": 0.20}, "turnover": {"max": 0.25},
        "liquidity": {"max_adv_fraction": 0.10, "days": 1},
    })
    assert spec.objective["kind"] == "utility"
    assert spec.constraints["weight"] == {"min": 0.0, "max": 0.05, "soft": None, "overrides": {}}
    assert spec.constraints["group"][0]["bounds"]["default"] == [-0.05, 0.05]
    assert spec.constraints["liquidity"]["adv_column"] == "adv"
    # the normalised mapping validates again to itself
    assert validate_scenario(spec.mapping).mapping == spec.mapping


def test_scenario_hash_is_sha256_of_canonical_json():
    spec = check({"turnover": {"max": 0.1}})
    text = json.dumps(spec.mapping, sort_keys=True, separators=(",", ":"))
    assert spec.scenario_hash == hashlib.sha256(text.encode()).hexdigest()
    assert check({"turnover": {"max": 0.1}}).scenario_hash == spec.scenario_hash
    assert check({"turnover": {"max": 0.2}}).scenario_hash != spec.scenario_hash


@pytest.mark.parametrize(
    "constraints,objective,message",
    [
        ({"weight": {"min": 0.02, "max": 0.01}}, None,
         r"^fund\.yaml: constraints\.weight\.max: must be ≥ constraints\.weight\.min \(got 0\.01 < 0\.02\)$"),
        ({"tracking_error": {"max": -0.01}}, None, r"constraints\.tracking_error\.max: must be ≥ 0 \(got -0\.01\)"),
        ({"turnover": {}}, None, r"constraints\.turnover: missing required key\(s\) max"),
        ({"turnover": {"max": 0.1, "min": 0.0}}, None, r"constraints\.turnover\.min: unknown key; allowed here: max, soft"),
        ({"colour": True}, None, r"constraints\.colour: unknown key; allowed here: fully_invested"),
        ({"weight": {"max": "big"}}, None, r"constraints\.weight\.max: expected a number, got 'big'"),
        ({"weight": {"max": float("nan")}}, None, r"constraints\.weight\.max: expected a finite number"),
        ({"weight": {}}, None, r"constraints\.weight: give min, max or both"),
        ({"weight": {"overrides": {"A0001": [0.1, 0.0]}}}, None,
         r"constraints\.weight\.overrides\.A0001: upper must be ≥ lower \(got \[0\.1, 0\]\)"),
        ({"group": {"by": "industry", "bounds": {"default": [0.1]}}}, None,
         r"constraints\.group\.bounds\.default: expected \[lower, upper\]"),
        ({"group": {"by": "industry", "bounds": {}}}, None, r"constraints\.group\.bounds: expected a mapping name"),
        ({"group": {"by": 5, "bounds": {"default": [0, 1]}}}, None, r"constraints\.group\.by: expected a name \(text\), got 5"),
        ({"group": {"by": "industry", "active": "yes", "bounds": {"default": [0, 1]}}}, None,
         r"constraints\.group\.active: expected true or false, got 'yes'"),
        ({"group": [{"by": "industry", "bounds": {"default": [0, 1]}}, {"by": "industry", "bounds": {"default": [0, 1]}}]},
         None, r"constraints\.group: each attribute column may be grouped once"),
        ({"fully_invested": True, "cash": {"min": 0.0, "max": 0.02}}, None,
         r"constraints\.cash: give fully_invested or a cash range, not both"),
        ({"long_only": True, "weight": {"min": -0.01}}, None, r"constraints\.weight\.min: must be ≥ 0 with long_only \(got -0\.01\)"),
        ({"long_only": True, "leverage": {"short": 0.2}}, None, r"constraints\.leverage\.short: must be 0 with long_only"),
        ({"leverage": {}}, None, r"constraints\.leverage: give gross, net, short or several"),
        ({"leverage": {"net": [1.1, 0.9]}}, None, r"constraints\.leverage\.net: upper must be ≥ lower"),
        ({"turnover": {"max": 0.1, "soft": {"penalty": 0}}}, None, r"constraints\.turnover\.soft\.penalty: must be > 0 \(got 0\)"),
        ({"turnover": {"max": 0.1, "soft": {"weight": 1}}}, None, r"constraints\.turnover\.soft\.weight: unknown key; allowed here: penalty"),
        ({"long_only": "yes"}, None, r"constraints\.long_only: expected a mapping, got 'yes'"),
        ({"no_buy": []}, None, r"constraints\.no_buy: expected a non-empty list of asset ids"),
        ({"no_buy": ["A", "B", "A"]}, None, r"constraints\.no_buy: duplicate asset ids: A"),
        ({"no_sell": [None]}, None, r"constraints\.no_sell: expected asset ids \(text or numbers\), got None"),
        ({"must_hold": {"assets": ["A"]}}, None, r"constraints\.must_hold: missing required key\(s\) min_weight"),
        ({"must_hold": {"assets": ["A"], "min_weight": 0}}, None, r"constraints\.must_hold\.min_weight: must be > 0"),
        ({"max_names": 0}, None, r"constraints\.max_names: must be ≥ 1 \(got 0\)"),
        ({"max_names": 2.5}, None, r"constraints\.max_names: expected a whole number, got 2\.5"),
        ({"min_trade": {"weight": -0.001}}, None, r"constraints\.min_trade\.weight: must be > 0"),
        ({"liquidity": {"days": 1}}, None, r"constraints\.liquidity: missing required key\(s\) max_adv_fraction"),
        ({"liquidity": {"max_adv_fraction": 0.1, "days": 0}}, None, r"constraints\.liquidity\.days: must be > 0"),
        ({"round_lots": {"lots": "lot"}}, None, r"constraints\.round_lots\.lots: unknown key; allowed here: lot_column, price_column"),
        ({"factor_risk": {"max": 0.02, "active": 1}}, None, r"constraints\.factor_risk\.active: expected true or false"),
        ({"beta": {"min": 1.1, "max": 0.9}}, None, r"constraints\.beta\.max: must be ≥ constraints\.beta\.min"),
        ([1, 2], None, r"constraints: expected a mapping, got \[1, 2\]"),
        (None, {"maximize": "utility"}, r"objective\.risk_aversion: required with maximize: utility"),
        (None, {"maximize": "utility", "risk_aversion": -1}, r"objective\.risk_aversion: must be ≥ 0 \(got -1\)"),
        (None, {"minimize": "active_risk", "risk_aversion": 3}, r"objective\.risk_aversion: only maximize: utility takes"),
        (None, {"maximize": "sharpe"}, r"objective\.maximize: expected one of utility, alpha, got 'sharpe'"),
        (None, {"minimize": "active_risk", "maximize": "alpha"}, r"objective: give exactly one of .* \(got maximize, minimize\)"),
        (None, {"risk_aversion": 3}, r"objective: give exactly one of .* \(got none\)"),
        (None, {"maximize": "alpha", "costs": {}}, r"objective\.costs: name at least one of spread, commission, impact"),
        (None, {"maximize": "alpha", "costs": {"fees": "x"}}, r"objective\.costs\.fees: unknown key; allowed here: spread, commission, impact"),
        (None, {"maximize": "alpha", "cost_aversion": -2}, r"objective\.cost_aversion: must be ≥ 0"),
        (None, {"risk_budget": {"budgets": {"A": 0}}}, r"objective\.risk_budget\.budgets\.A: must be > 0"),
        (None, {"risk_budget": {"budgets": {}}}, r"objective\.risk_budget\.budgets: expected a mapping label"),
        (None, {"risk_budget": {}, "costs": True}, r"objective\.costs: risk budgeting takes no costs"),
        ({"turnover": {"max": 0.1}}, {"risk_budget": "equal"},
         r"constraints: risk budgeting combines only with fully_invested, long_only \(got turnover\)"),
    ],
)
def test_bad_scenarios_name_the_key_path(constraints, objective, message):
    with pytest.raises(ScenarioError, match=message):
        check(constraints, objective, source="fund.yaml")


def test_top_level_shape_errors():
    with pytest.raises(ScenarioError, match=r"^scenario: \(top level\): missing required key\(s\) objective$"):
        validate_scenario({"constraints": {}})
    with pytest.raises(ScenarioError, match=r"scenario: data: unknown key; allowed here: objective, constraints"):
        validate_scenario({"objective": UTILITY, "data": {}})
    with pytest.raises(ScenarioError, match=r"scenario: \(top level\): expected a mapping, got 3"):
        validate_scenario(3)


def test_with_limits_revalidates():
    spec = check({"turnover": {"max": 0.1}})
    assert spec.with_limits({"turnover.max": 0.3}).constraints["turnover"]["max"] == 0.3
    with pytest.raises(ScenarioError, match=r"constraints\.turnover\.max: must be ≥ 0 \(got -1\)"):
        spec.with_limits({"turnover.max": -1})
    with pytest.raises(ScenarioError, match=r"constraints\.weight\.max: no such limit in this scenario"):
        spec.with_limits({"weight.max": 0.1})


# issue #12: limits held in lists (group bands, factor bounds) change in re-solves and sweeps
def test_with_limits_reaches_limits_held_in_lists() -> None:
    spec = validate_scenario({"objective": {"minimize": "active_risk"}, "constraints": {
        "group": {"by": "industry", "active": True, "bounds": {"default": [-0.03, 0.03]}},
        "factor_exposure": {"bounds": {"size": [-0.1, 0.1]}}}})
    changed = spec.with_limits({"group.bounds.default.max": 0.05, "factor_exposure.bounds.size.min": -0.2})
    assert changed.constraints["group"][0]["bounds"]["default"] == [-0.03, 0.05]
    assert changed.constraints["factor_exposure"]["bounds"]["size"] == [-0.2, 0.1]
    whole = spec.with_limits({"group.bounds.default": [-0.01, 0.02], "group.0.bounds.default.0": -0.02})
    assert whole.constraints["group"][0]["bounds"]["default"] == [-0.02, 0.02]
    with pytest.raises(ScenarioError, match=r"constraints\.group\.bounds\.tech: no such limit in this scenario"):
        spec.with_limits({"group.bounds.tech": [0, 1]})
