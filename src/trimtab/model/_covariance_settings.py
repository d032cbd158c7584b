"""How the factor covariance F and the specific variances d are refined: one frozen settings object.

:class:`CovarianceSettings` is read by :func:`~trimtab.model.factor_covariance` and
:func:`~trimtab.model.specific_variance`; the public helpers of the refinements check their own
arguments against the same table of constraints, so a bad value reads the same everywhere.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, fields
from typing import Any

import numpy as np

from trimtab._validation import list_labels
from trimtab.errors import ScenarioError
from trimtab.model._arguments import is_number, is_whole_number

SHRINKAGE_METHODS = ("ledoit_wolf",)
SPECIFIC_FLOOR_MODES = ("absolute", "relative")


def _positive_or_none(value: Any) -> bool:
    return value is None or (is_number(value) and np.isfinite(value) and value > 0)


def _non_negative_int(value: Any) -> bool:
    return is_whole_number(value) and value >= 0


def _unit_interval(value: Any) -> bool:
    return is_number(value) and 0.0 <= value <= 1.0


def _floor_fraction_or_none(value: Any) -> bool:
    return value is None or (is_number(value) and 0.0 < value <= 1.0)


def _non_negative_or_none(value: Any) -> bool:
    return value is None or (is_number(value) and np.isfinite(value) and value >= 0)


#: Parameter → (test, what is allowed). Checked by :func:`check_parameters`.
_CONSTRAINTS: dict[str, tuple[Callable[[Any], bool], str]] = {
    "volatility_half_life": (_positive_or_none, "a positive number of periods or None"),
    "correlation_half_life": (_positive_or_none, "a positive number of periods or None"),
    "newey_west_lags": (_non_negative_int, "a whole number of lags >= 0"),
    "shrinkage": (lambda v: v is None or v in SHRINKAGE_METHODS, f"None or one of {list(SHRINKAGE_METHODS)}"),
    "eigenvalue_floor": (_floor_fraction_or_none, "a fraction of the mean eigenvalue in (0, 1] or None"),
    "specific_shrinkage": (_unit_interval, "an intensity in [0, 1]"),
    "specific_floor": (_non_negative_or_none, "a non-negative variance (or fraction) or None"),
    "specific_floor_mode": (lambda v: v in SPECIFIC_FLOOR_MODES, f"one of {list(SPECIFIC_FLOOR_MODES)}"),
    # Argument names of the public helpers.
    "half_life": (_positive_or_none, "a positive number of periods or None"),
    "lags": (_non_negative_int, "a whole number of lags >= 0"),
    "floor": (lambda v: v is not None and _floor_fraction_or_none(v), "a fraction of the mean eigenvalue in (0, 1]"),
}


def check_parameters(owner: str, values: Mapping[str, Any]) -> None:
    """Raise ScenarioError for the first value that breaks its constraint in :data:`_CONSTRAINTS`."""
    for name, value in values.items():
        test, allowed = _CONSTRAINTS[name]
        if not test(value):
            raise ScenarioError(f"{owner}: {name} must be {allowed}, got {value!r}")


@dataclass(frozen=True, kw_only=True)
class CovarianceSettings:
    """How to refine the factor covariance F and the specific variances d.

    Parameters
    ----------
    volatility_half_life : float, optional
        Half-life, in periods, of the EWMA weights for variances (of factors and of residuals).
        None gives equal weights.
    correlation_half_life : float, optional
        Half-life of the EWMA weights for factor correlations. None uses ``volatility_half_life``
        (so one half-life gives one plain EWMA covariance).
    newey_west_lags : int, default 0
        Lags of the Bartlett-kernel Newey–West adjustment of F for serial correlation.
    shrinkage : {None, "ledoit_wolf"}, default None
        Shrink F toward a scaled identity with the Ledoit–Wolf (2004) intensity.
    eigenvalue_floor : float, optional
        Raise eigenvalues of F below ``eigenvalue_floor`` × mean eigenvalue to that level.
    specific_shrinkage : float, default 0.0
        Intensity κ in [0, 1] of shrinking each specific variance toward the mean of its group
        (or of all assets).
    specific_floor : float, optional
        Lower bound for the specific variances: an absolute per-period variance, or (with
        ``specific_floor_mode="relative"``) a fraction of their cross-sectional median.
    specific_floor_mode : {"absolute", "relative"}, default "absolute"
        How ``specific_floor`` is read.

    Raises
    ------
    ScenarioError
        If a value is outside what its parameter allows (the message names both).

    Examples
    --------
    >>> CovarianceSettings(volatility_half_life=36, correlation_half_life=120, newey_west_lags=2)
    CovarianceSettings(volatility_half_life=36, correlation_half_life=120, newey_west_lags=2)
    """

    volatility_half_life: float | None = None
    correlation_half_life: float | None = None
    newey_west_lags: int = 0
    shrinkage: str | None = None
    eigenvalue_floor: float | None = None
    specific_shrinkage: float = 0.0
    specific_floor: float | None = None
    specific_floor_mode: str = "absolute"

    def __post_init__(self) -> None:
        check_parameters("CovarianceSettings", {f.name: getattr(self, f.name) for f in fields(self)})
        if self.specific_floor_mode == "relative" and self.specific_floor is not None and self.specific_floor > 1:
            raise ScenarioError(
                "CovarianceSettings: specific_floor must be a fraction in [0, 1] of the median when "
                f"specific_floor_mode='relative', got {self.specific_floor!r}"
            )

    def __repr__(self) -> str:
        changed = [f"{f.name}={getattr(self, f.name)!r}" for f in fields(self) if getattr(self, f.name) != f.default]
        return f"CovarianceSettings({', '.join(changed)})"

    @classmethod
    def from_mapping(cls, values: Mapping[str, Any], owner: str = "covariance settings") -> CovarianceSettings:
        """Build settings from a mapping (for instance a scenario section), rejecting unknown keys."""
        known = {f.name for f in fields(cls)}
        unknown = [k for k in values if k not in known]
        if unknown:
            raise ScenarioError(f"{owner}: unknown keys {list_labels(unknown)}; allowed: {list_labels(sorted(known), 10)}")
        return cls(**dict(values))

    @property
    def refines_factor_covariance(self) -> bool:
        """True if any setting changes F away from the sample covariance."""
        return (
            self.volatility_half_life is not None
            or self.correlation_half_life is not None
            or self.newey_west_lags > 0
            or self.shrinkage is not None
            or self.eigenvalue_floor is not None
        )


_DEFAULT = CovarianceSettings()


def settings_or_default(settings: CovarianceSettings | None, owner: str) -> CovarianceSettings:
    """``settings``, or the default (plain sample estimates) when None; raise on any other type."""
    if settings is None:
        return _DEFAULT
    if not isinstance(settings, CovarianceSettings):
        raise ScenarioError(f"{owner}: settings must be a CovarianceSettings or None, got {type(settings).__name__}")
    return settings
