"""CovarianceSettings: every bad value is refused with a message naming the parameter and what it allows."""

from __future__ import annotations

import pytest

from trimtab.errors import ScenarioError
from trimtab.model._covariance_settings import CovarianceSettings


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"volatility_half_life": -3}, "volatility_half_life must be a positive number of periods or None, got -3"),
        ({"correlation_half_life": float("nan")}, "correlation_half_life must be a positive number"),
        ({"newey_west_lags": -1}, "newey_west_lags must be a whole number of lags >= 0, got -1"),
        ({"newey_west_lags": True}, "newey_west_lags must be a whole number"),
        ({"shrinkage": "oracle"}, r"shrinkage must be None or one of \['ledoit_wolf'\], got 'oracle'"),
        ({"eigenvalue_floor": 1.5}, r"eigenvalue_floor must be a fraction of the mean eigenvalue in \(0, 1\]"),
        ({"specific_shrinkage": 1.2}, r"specific_shrinkage must be an intensity in \[0, 1\], got 1.2"),
        ({"specific_floor": -1e-4}, "specific_floor must be a non-negative variance"),
        ({"specific_floor_mode": "median"}, r"specific_floor_mode must be one of \['absolute', 'relative'\]"),
        ({"specific_floor": 2.0, "specific_floor_mode": "relative"}, r"specific_floor must be a fraction in \[0, 1\] of the median"),
    ],
)
def test_settings_validation(kwargs: dict, match: str) -> None:
    with pytest.raises(ScenarioError, match="CovarianceSettings: " + match):
        CovarianceSettings(**kwargs)


def test_settings_are_keyword_only_and_from_mapping() -> None:
    with pytest.raises(TypeError):
        CovarianceSettings(12)  # type: ignore[misc]
    settings = CovarianceSettings.from_mapping({"volatility_half_life": 12, "shrinkage": "ledoit_wolf"})
    assert settings == CovarianceSettings(volatility_half_life=12, shrinkage="ledoit_wolf")
    assert settings.refines_factor_covariance and not CovarianceSettings().refines_factor_covariance
    assert repr(settings) == "CovarianceSettings(volatility_half_life=12, shrinkage='ledoit_wolf')"
    with pytest.raises(ScenarioError, match="risk: unknown keys halflife; allowed: "):
        CovarianceSettings.from_mapping({"halflife": 3}, owner="risk")
