"""The limits a scenario offers the explorer, the checks on requested values and the saved diff (#15)."""

from __future__ import annotations

import math

import pytest

from trimtab.app._limits import apply, changed, check_changes, saved_changes, scenario_limits, update_arguments
from trimtab.errors import InputError

MAPPING = {
    "objective": {"maximize": "utility", "risk_aversion": 4.0},
    "constraints": {
        "fully_invested": True,
        "weight": {"min": 0.0, "max": 0.05},
        "tracking_error": {"max": 0.03},
        "group": {"by": "industry", "active": True, "bounds": {"default": [-0.03, 0.03]}},
        "factor_exposure": {"active": True, "bounds": {"size": [0, 0]}},
    },
}
FACTORS = ["market", "size", "momentum"]


@pytest.fixture
def known():
    return {limit.key: limit for limit in scenario_limits(MAPPING, FACTORS, has_benchmark=True)}


def test_every_number_is_a_limit_with_its_sweep_key_path(known) -> None:
    assert {k: v.value for k, v in known.items() if not v.optional} == {
        "risk_aversion": 4.0, "weight.min": 0.0, "weight.max": 0.05, "tracking_error.max": 0.03,
        "group.bounds.default.0": -0.03, "group.bounds.default.1": 0.03,
        "factor_exposure.bounds.size.0": 0.0, "factor_exposure.bounds.size.1": 0.0,
    }
    # the factors the scenario leaves unbounded can be bounded from the page (off until given)
    assert sorted(k for k, v in known.items() if v.optional) == [
        "factor_exposure.bounds.market.0", "factor_exposure.bounds.market.1",
        "factor_exposure.bounds.momentum.0", "factor_exposure.bounds.momentum.1",
    ]
    assert known["factor_exposure.bounds.momentum.1"].label == "momentum exposure (upper)"
    assert known["tracking_error.max"].section == "Risk"
    assert known["tracking_error.max"].low <= 0.03 <= known["tracking_error.max"].high


def test_no_optional_factor_bounds_without_a_benchmark_or_a_section() -> None:
    mapping = {"objective": {"minimize": "total_risk"}, "constraints": {"weight": {"max": 0.1}}}
    limits = scenario_limits(mapping, FACTORS, has_benchmark=False)
    assert [limit.key for limit in limits] == ["weight.max"]


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({"tracking_error.mx": 0.02}, r"limits\.tracking_error\.mx: not a limit of this scenario \(did you mean tracking_error\.max\?\)"),
        ({"nothing.like.it": 0.02}, r"GET /api/scenario lists its limits"),
        ({"tracking_error.max": "0.02"}, r"limits\.tracking_error\.max: expected a number, got '0\.02'"),
        ({"tracking_error.max": True}, r"expected a number, got True"),
        ({"tracking_error.max": math.nan}, r"expected a finite number"),
        ({"tracking_error.max": math.inf}, r"expected a finite number"),
        ({"weight.max": 1e9}, r"within ±1e\+06"),
        ({"tracking_error.max": None}, r"limits\.tracking_error\.max: a number is required, got null"),
    ],
    ids=["typo", "unknown", "text", "bool", "nan", "inf", "huge", "null-cap"],
)
def test_bad_requests_name_the_key(known, changes, message) -> None:
    with pytest.raises(InputError, match=message):
        check_changes(known, changes)


def test_a_bound_side_may_be_opened_and_unchanged_values_drop_out(known) -> None:
    clean = check_changes(known, {"group.bounds.default.0": None, "weight.max": 0.05, "tracking_error.max": 0.02})
    assert changed(known, clean) == {"group.bounds.default.0": None, "tracking_error.max": 0.02}


def test_interval_ends_may_be_written_min_and_max_as_trimtab_sweep_reads_them(known) -> None:
    # the same dotted key paths as `trimtab sweep --grid` (its _list_index reads min/max as 0/1)
    clean = check_changes(known, {"factor_exposure.bounds.momentum.max": -0.05, "group.bounds.default.min": -0.02})
    assert clean == {"factor_exposure.bounds.momentum.1": -0.05, "group.bounds.default.0": -0.02}
    with pytest.raises(InputError, match=r"limits.weight.maximum: not a limit"):
        check_changes(known, {"weight.maximum": 0.1})


def test_list_items_are_re_solved_through_their_list_and_new_bounds_rebuild() -> None:
    built = {"group": [{"by": "industry", "active": True, "bounds": {"default": [-0.03, 0.03]}}],
             "tracking_error": {"max": 0.03}, "factor_exposure": {"active": True, "bounds": {"size": [0.0, 0.0]}}}
    arguments = update_arguments(MAPPING, {"group.bounds.default.1": 0.02, "risk_aversion": 2.0,
                                           "factor_exposure.bounds.size.1": 0.1}, built)
    assert arguments == {
        "risk_aversion": 2.0,
        "limits": {"group": {"by": "industry", "active": True, "bounds": {"default": [-0.03, 0.02]}},
                   "factor_exposure.bounds.size": [0, 0.1]},
    }
    assert update_arguments(MAPPING, {"factor_exposure.bounds.momentum.1": 0.1}, built) is None


def test_apply_adds_and_removes_an_optional_bound_and_keeps_the_input() -> None:
    added = apply(MAPPING, {"factor_exposure.bounds.momentum.1": 0.2})
    assert added["constraints"]["factor_exposure"]["bounds"] == {"size": [0, 0], "momentum": [None, 0.2]}
    removed = apply(MAPPING, {"factor_exposure.bounds.momentum.0": None, "factor_exposure.bounds.momentum.1": None})
    assert removed["constraints"]["factor_exposure"]["bounds"] == {"size": [0, 0]}
    assert "momentum" not in MAPPING["constraints"]["factor_exposure"]["bounds"]
    fresh = apply({"objective": {}, "constraints": {}}, {"factor_exposure.bounds.momentum.1": 0.2})
    assert fresh["constraints"]["factor_exposure"] == {"active": True, "bounds": {"momentum": [None, 0.2]}}


def test_saved_changes_hold_only_what_differs() -> None:
    new = apply(MAPPING, {"tracking_error.max": 0.025, "group.bounds.default.0": -0.02, "risk_aversion": 3.0})
    assert saved_changes(MAPPING, new) == {
        "objective": {"risk_aversion": 3.0},
        "constraints": {"tracking_error": {"max": 0.025}, "group": {"bounds": {"default": [-0.02, 0.03]}}},
    }
    assert saved_changes(MAPPING, apply(MAPPING, {})) == {}


def test_a_stress_limit_is_a_risk_limit_and_its_inline_shocks_are_not() -> None:
    mapping = {"objective": {"maximize": "alpha"},
               "constraints": {"stress_loss": {"max": 0.01, "active": True,
                                               "shocks": {"selloff": {"factors": {"market": -0.1}}}}}}
    limits = scenario_limits(mapping, [], has_benchmark=True)
    assert [(limit.key, limit.section, limit.value) for limit in limits] == [("stress_loss.max", "Risk", 0.01)]
