"""What the three estimators share: checks of a dates × columns panel, date labels, the sampling
frequency, per-asset fit statistics, the left-out-assets warning and the assembly of the model.
"""

from __future__ import annotations

import dataclasses
import warnings
from collections.abc import Mapping
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_finite_frame, check_unique, list_labels
from trimtab._version import __version__
from trimtab.units import check_returns
from trimtab.errors import DataWarning, InputError
from trimtab.model._arguments import is_positive_number
from trimtab.model._covariance_settings import CovarianceSettings
from trimtab.model._factor_model import FactorModel
from trimtab.model._fit_report import FitReport

#: Median spacing of the dates in days → periods per year, for :func:`infer_periods_per_year`.
#: Closed intervals tried in order (so 4.5 days is daily); business-daily data has 1–4 day gaps.
#: Common practice (no source).
SPACINGS: tuple[tuple[float, float, float, str], ...] = (
    (0.5, 4.5, 252.0, "daily"),
    (4.5, 9.5, 52.0, "weekly"),
    (26.0, 33.0, 12.0, "monthly"),
    (85.0, 95.0, 4.0, "quarterly"),
    (360.0, 370.0, 1.0, "annual"),
)

_KNOWN_SPACINGS = ", ".join(f"{name} {per_year:g}" for _, _, per_year, name in SPACINGS)


# ---------------------------------------------------------------------------------------------
# Dates
# ---------------------------------------------------------------------------------------------


def date_label(value: Any) -> str:
    """A date as ISO text (just the day when there is no time of day), anything else as ``str``."""
    if isinstance(value, (pd.Timestamp, np.datetime64)):
        stamp = pd.Timestamp(value)
        return str(stamp.date()) if stamp == stamp.normalize() else stamp.isoformat()
    return str(value)


def check_dates(index: pd.Index, owner: str) -> None:
    """Raise unless the dates are unique and strictly increasing, naming the first offending pair."""
    check_unique(index, "dates", owner)
    if index.is_monotonic_increasing:
        return
    values = index.to_numpy()
    try:
        first = next(i for i in range(1, len(index)) if not values[i] > values[i - 1])
    except TypeError:
        raise InputError(f"{owner}: dates of mixed types cannot be ordered; expected increasing dates") from None
    raise InputError(
        f"{owner}: dates must be increasing; {date_label(index[first])} comes after "
        f"{date_label(index[first - 1])} (sort with sort_index() first)"
    )


def check_date_frame(
    frame: Any, owner: str, what: str, *, allow_nan: bool = False, finite: bool = True, nonempty: bool = False
) -> pd.DataFrame:
    """Raise unless ``frame`` is a DataFrame of dates × ``what`` with numeric columns; return it.

    Checks, in order: the type; with ``nonempty``, at least one row and one column; unique
    columns; unique, increasing dates (:func:`check_dates`); numeric columns and, with ``finite``,
    no infinite value and (unless ``allow_nan``) no NaN (``trimtab._validation.check_finite_frame``).
    ``finite=False`` leaves the values to the caller (the time-series estimator names the cells).
    """
    if not isinstance(frame, pd.DataFrame):
        raise InputError(f"{owner}: expected a DataFrame of dates × {what}, got {type(frame).__name__}")
    if nonempty and (frame.shape[0] == 0 or frame.shape[1] == 0):
        raise InputError(f"{owner} is empty (shape {frame.shape}); expected at least one date and one {what[:-1]}")
    check_unique(frame.columns, what, owner)
    check_dates(frame.index, owner)
    if finite:
        check_finite_frame(frame, owner, allow_nan=allow_nan)
    else:
        bad = [c for c, dtype in zip(frame.columns, frame.dtypes) if not pd.api.types.is_numeric_dtype(dtype)]
        if bad:
            raise InputError(f"{owner}: non-numeric columns: {list_labels(bad)}; expected numbers")
    return frame


def check_returns_panel(asset_returns: Any, owner: str) -> pd.DataFrame:
    """Validate a dates × assets return panel (NaN allowed) and return it as float64."""
    check_date_frame(asset_returns, f"{owner}: asset_returns", "assets", allow_nan=True)
    if asset_returns.shape[1] == 0:
        raise InputError(f"{owner}: asset_returns has no asset columns")
    return check_returns(asset_returns.astype(np.float64), f"{owner}: asset_returns", key=None)


def infer_periods_per_year(index: pd.Index, periods_per_year: Any, owner: str) -> float:
    """``periods_per_year`` as given (checked positive), or inferred from the median date spacing.

    Median gap in days (:data:`SPACINGS`, common practice, no source): 0.5–4.5 → 252 (daily,
    business or calendar), 4.5–9.5 → 52, 26–33 → 12, 85–95 → 4, 360–370 → 1; a PeriodIndex is
    read at its period starts. Anything else raises, asking for ``periods_per_year``.
    """
    if periods_per_year is not None:
        if not is_positive_number(periods_per_year):
            raise InputError(f"{owner}: periods_per_year must be a positive number or None, got {periods_per_year!r}")
        return float(periods_per_year)
    if isinstance(index, pd.PeriodIndex):
        index = index.to_timestamp()
    if not isinstance(index, pd.DatetimeIndex):
        raise InputError(
            f"{owner}: cannot infer periods_per_year from an index of type {type(index).__name__} "
            f"(dtype {index.dtype}) with {len(index)} entries; read the dates as dates (parse_dates) "
            f"or pass periods_per_year ({_KNOWN_SPACINGS})"
        )
    if len(index) < 2:
        raise InputError(
            f"{owner}: cannot infer periods_per_year from {len(index)} date(s); need at least 2, "
            "or pass periods_per_year"
        )
    days = float(np.median((index[1:] - index[:-1]).total_seconds())) / 86_400.0
    for low, high, per_year, _ in SPACINGS:
        if low <= days <= high:
            return per_year
    raise InputError(
        f"{owner}: cannot infer periods_per_year from a median date spacing of {days:.3g} days "
        f"(known: {_KNOWN_SPACINGS}); pass periods_per_year explicitly"
    )


# ---------------------------------------------------------------------------------------------
# Fit statistics and the assembled model
# ---------------------------------------------------------------------------------------------


def settings_record(covariance: CovarianceSettings | None, owner: str) -> dict[str, Any] | None:
    """The covariance settings as a plain dict (for provenance and the manifest)."""
    if covariance is None:
        return None
    if not isinstance(covariance, CovarianceSettings):
        raise InputError(f"{owner}: covariance: expected CovarianceSettings or None, got {type(covariance).__name__}")
    return dataclasses.asdict(covariance)


def observed_at_least(frame: pd.DataFrame, minimum: int) -> pd.Index:
    """Columns of ``frame`` with at least ``minimum`` non-NaN values."""
    counts = frame.notna().sum(axis=0).to_numpy()
    return frame.columns[counts >= minimum]


def per_asset_fit(returns: np.ndarray, residuals: np.ndarray) -> dict[str, np.ndarray]:
    """n_observations, residual volatility and 1 − var(u)/var(r) per column over the observed dates.

    Both inputs are T × N with NaN where the asset was not in the fit; variances use divisor n − 1.
    """
    observed = np.isfinite(residuals)
    n_obs = observed.sum(axis=0)
    safe = np.maximum(n_obs - 1, 1).astype(np.float64)

    def _var(values: np.ndarray) -> np.ndarray:
        filled = np.where(observed, values, 0.0)
        mean = filled.sum(axis=0) / np.maximum(n_obs, 1)
        centred = np.where(observed, values - mean, 0.0)
        return (centred * centred).sum(axis=0) / safe

    var_u, var_r = _var(residuals), _var(returns)
    with np.errstate(divide="ignore", invalid="ignore"):
        r_squared = np.where((n_obs > 1) & (var_r > 0), 1.0 - var_u / var_r, np.nan)
    return {
        "n_observations": n_obs.astype(np.int64),
        "residual_volatility": np.where(n_obs > 1, np.sqrt(var_u), np.nan),
        "r_squared": r_squared,
    }


def warn_dropped(dropped: pd.Series, owner: str) -> None:
    """One DataWarning summarising the assets an estimator left out, by reason."""
    if len(dropped) == 0:
        return
    parts = [f"{reason}: {list_labels(group.index)}" for reason, group in dropped.groupby(dropped, sort=True)]
    warnings.warn(f"{owner}: {len(dropped)} assets left out ({'; '.join(parts)})", DataWarning, stacklevel=3)


def assemble_model(
    method: str,
    exposures: pd.DataFrame,
    factor_cov: pd.DataFrame,
    specific: pd.Series,
    fit: tuple[pd.DataFrame, pd.DataFrame, pd.Series, pd.DataFrame],
    settings: Mapping[str, Any],
    extra: Mapping[str, Any],
    *,
    periods_per_year: float,
    factor_groups: Mapping[str, str] | None,
    exposure_history: pd.DataFrame | None = None,
    estimator: str | None = None,
    provenance: Mapping[str, Any] | None = None,
) -> FactorModel:
    """The FactorModel with its FitReport and provenance (estimator, settings, window, version).

    ``fit`` is (per-asset table, residuals, dropped assets, factor returns). The provenance names
    ``estimator`` (default ``method``), and ``provenance`` adds entries after the standard ones.
    """
    assets, residuals, dropped, factor_returns = fit
    report = FitReport(
        method, assets, residuals, dropped, factor_returns, exposure_history, settings=settings, extra=extra
    )
    dates = report.residuals.index
    return FactorModel(
        exposures,
        factor_cov,
        specific,
        periods_per_year=periods_per_year,
        factor_groups=factor_groups,
        fit_report=report,
        provenance={
            "estimator": method if estimator is None else estimator,
            "settings": dict(report.settings),
            "window": [date_label(dates[0]), date_label(dates[-1])],
            "version": __version__,
            **dict(provenance or {}),
        },
    )
