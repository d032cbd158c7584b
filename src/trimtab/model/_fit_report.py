"""The estimation details an estimator attaches to the model it returns."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import pandas as pd


@dataclass(frozen=True, eq=False)
class FitReport:
    """What an estimator did and what it found, asset by asset.

    Parameters
    ----------
    method : str
        ``"time_series"``, ``"cross_section"`` or ``"statistical"``.
    assets : pandas.DataFrame
        One row per asset kept in the model. Columns include ``intercept``, ``r_squared``,
        ``residual_volatility`` (per period), ``n_observations`` and, for time-series fits,
        ``t_<factor>`` t-statistics of each exposure.
    residuals : pandas.DataFrame
        Dates × assets specific returns (NaN where an asset has no observation on a date).
    dropped : pandas.Series
        Asset → reason, for every asset the estimator left out (never silently).
    factor_returns : pandas.DataFrame or None
        Dates × factors: the observed (time series) or estimated (cross section, statistical)
        factor returns the factor covariance was computed from.
    exposure_history : pandas.DataFrame or None
        Long table ``date, asset, factor, exposure`` of rolling or exponentially weighted betas,
        when time-varying exposures were asked for.
    settings : Mapping
        The estimator's settings, as given.
    extra : Mapping
        Estimator-specific details (selected number of factors, criterion values, …).
    """

    method: str
    assets: pd.DataFrame
    residuals: pd.DataFrame
    dropped: pd.Series = field(default_factory=lambda: pd.Series(dtype=object, name="reason"))
    factor_returns: pd.DataFrame | None = None
    exposure_history: pd.DataFrame | None = None
    settings: Mapping[str, Any] = field(default_factory=dict)
    extra: Mapping[str, Any] = field(default_factory=dict)

    @property
    def window(self) -> tuple[str, str] | None:
        """First and last date of the estimation window, as ISO strings."""
        if self.residuals is None or len(self.residuals.index) == 0:
            return None
        idx = self.residuals.index
        return (str(pd.Timestamp(idx.min()).date()) if _is_datelike(idx) else str(idx.min()),
                str(pd.Timestamp(idx.max()).date()) if _is_datelike(idx) else str(idx.max()))


def _is_datelike(index: pd.Index) -> bool:
    return isinstance(index, pd.DatetimeIndex)
