"""Boundary checks for the time-series estimator: the two return tables, their dates and the factors."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.units import check_returns
from trimtab.errors import InputError
from trimtab.model._panel import check_date_frame, date_label

OWNER = "fit_time_series"


def _cells(mask: np.ndarray, index: pd.Index, columns: pd.Index) -> str:
    """'column on date' for the first few True cells of ``mask`` (rows = dates), date order."""
    rows, cols = np.nonzero(mask)
    cells = [f"{columns[c]} on {date_label(index[r])}" for r, c in zip(rows, cols)]
    return list_labels(cells)


def validated_returns(asset_returns: Any, factor_returns: Any) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Check both tables and return them on the common calendar (float64, same dates).

    The calendar is every date on which at least one asset has a return; factor returns must exist
    and be finite on each of those dates (their other dates are ignored).
    """
    # Values are checked here, cell by cell: asset returns may be NaN, factor returns only off the calendar.
    assets = check_date_frame(asset_returns, f"{OWNER}: asset_returns", "assets", finite=False, nonempty=True)
    factors = check_date_frame(factor_returns, f"{OWNER}: factor_returns", "factors", finite=False, nonempty=True)
    values = assets.to_numpy(dtype=np.float64)
    check_returns(assets, f"{OWNER}: asset_returns", key=None)
    check_returns(factors, f"{OWNER}: factor_returns", what="factor returns", key=None)
    infinite = np.isinf(values)
    if infinite.any():
        raise InputError(
            f"{OWNER}: asset_returns has infinite values: {_cells(infinite, assets.index, assets.columns)}; "
            "expected finite returns (NaN marks a missing one)"
        )
    has_return = ~np.isnan(values).all(axis=1)
    if not has_return.any():
        raise InputError(f"{OWNER}: asset_returns has no returns at all (every value is NaN)")
    calendar = assets.index[has_return]
    common = calendar.intersection(factors.index)
    if len(common) == 0:
        raise InputError(
            f"{OWNER}: asset_returns and factor_returns have no dates in common "
            f"(asset dates {date_label(calendar[0])}…{date_label(calendar[-1])} [{calendar.dtype}], "
            f"factor dates {date_label(factors.index[0])}…{date_label(factors.index[-1])} [{factors.index.dtype}])"
        )
    missing = calendar.difference(factors.index)
    if len(missing):
        raise InputError(
            f"{OWNER}: factor_returns has no row for {len(missing)} date(s) with asset returns: "
            f"{list_labels([date_label(d) for d in missing])}"
        )
    factor_values = factors.loc[calendar].astype(np.float64)
    fv = factor_values.to_numpy()
    bad = ~np.isfinite(fv)
    if bad.any():
        raise InputError(
            f"{OWNER}: factor_returns has NaN or infinite values on dates with asset returns: "
            f"{_cells(bad, calendar, factor_values.columns)}; factor returns must be complete"
        )
    if has_return.all():
        asset_values = assets.astype(np.float64)
    else:
        asset_values = assets.loc[calendar].astype(np.float64)
    return asset_values, factor_values


def check_factor_rank(factors: np.ndarray, names: pd.Index, n_dates: int) -> None:
    """Raise if a factor is constant or the factors are (numerically) collinear with the intercept."""
    n_factors = factors.shape[1]
    if n_dates < n_factors + 2:
        raise InputError(
            f"{OWNER}: {n_dates} dates with returns, fewer than the {n_factors + 2} needed for "
            f"{n_factors} factors + intercept + 1 residual degree of freedom"
        )
    spread = np.ptp(factors, axis=0)
    constant = names[spread == 0]
    if len(constant):
        raise InputError(
            f"{OWNER}: factor_returns columns are constant over the {n_dates} dates used "
            f"(collinear with the intercept): {list_labels(constant)}"
        )
    centred = factors - factors.mean(axis=0)
    standardised = centred / np.sqrt(np.mean(centred**2, axis=0))
    _, singular, vt = np.linalg.svd(standardised, full_matrices=False)
    # condition number above 10⁶ on standardised columns: numerically collinear
    null = singular < 1e-6 * singular[0]
    if null.any():
        involved = np.abs(vt[null]).max(axis=0) > 1e-6
        raise InputError(
            f"{OWNER}: factor_returns columns are perfectly collinear over the {n_dates} dates used "
            f"(one is a linear combination of the others and the intercept): {list_labels(names[involved])}"
        )
