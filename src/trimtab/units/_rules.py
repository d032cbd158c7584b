"""Unit sense: returns, alpha, weights and shock moves are fractions, and a percent is caught.

One place holds the rules every reader applies (the fit, rebalance, risk, stress, replay,
attribute-returns, the explore page and the Python API), so a file in the wrong unit is refused the
same way by every command. Pure checks on numbers: numpy and pandas only, no files, no printing.

The thresholds below are judgement, set far from both units: a percent file is 100 times its
fraction, and each threshold sits where the fraction would already be implausible for an equity
portfolio, while the same data in percent is many times over it (docs/scenarios.md, "Units").

- Returns: the median over columns of each column's typical size annualised,
  1.4826·median|r|·√ppy (the median absolute deviation about 0 scaled to a standard deviation
  for normal data, common practice), above :data:`RETURN_SIZE_LIMIT` (200% a year). Stocks run
  at 20–60% a year and factors at 5–20% (common practice); in percent they read 2,000–6,000.
- Alpha: the cross-sectional standard deviation of annual expected returns above
  :data:`ALPHA_SPREAD_LIMIT` (50% a year). Alpha forecasts typically spread by a few percent a
  year (judgement); in percent the spread reads in the hundreds.
- A book: net Σw above 1 (its positions worth more than its NAV) or gross Σ|w| above
  :data:`MAX_GROSS` (3, a 200/100 long/short book; judgement). A book in percent sums to ~100.
- A shock move of 100% or more (a factor cannot lose more than all of it in one shock).
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import DataWarning, InputError

#: The units a returns or alpha file may declare (``unit:`` in the file's section).
UNITS = ("fraction", "percent")
#: Median annualised typical size of a returns file above which it cannot be fractions (200% a year).
RETURN_SIZE_LIMIT = 2.0
#: Cross-sectional standard deviation of annual alpha above which it cannot be fractions (50% a year).
ALPHA_SPREAD_LIMIT = 0.5
#: The largest gross Σ|w| a book may have (200% long, 100% short).
MAX_GROSS = 3.0
#: Slack on net Σw ≤ 1: weights rounded in a file, and a solver's fully invested book (Σw = 1 to its
#: tolerance) drifted with returns and fed back as the next date's holdings. A tenth of a percent of
#: NAV is far below every unit slip the rule exists for (percent: 100; weights counted twice: 2).
NET_TOL = 1e-3
#: The smallest shock move, in absolute value, that is refused as a percentage typed as a fraction.
MOVE_LIMIT = 1.0
#: Normal-consistency factor of the median absolute deviation (1/Φ⁻¹(3/4); common practice).
_MAD_TO_SD = 1.4826


def unit_scale(unit: Any, where: str) -> float:
    """1.0 for ``fraction``, 0.01 for ``percent``; anything else is an error naming ``where`` (the setting)."""
    if unit == "fraction":
        return 1.0
    if unit == "percent":
        return 0.01
    raise InputError(f"{where} must be one of {', '.join(UNITS)}, got {unit!r}")


def periods_per_year_of(index: pd.Index) -> float | None:
    """A rough periods-per-year from the median date spacing (252 for daily, else 365.25 / days), or None.

    Rough on purpose: it only sets the scale of the unit check, where a factor of 1.5 cannot turn
    a fraction into a percent.
    """
    if not isinstance(index, pd.DatetimeIndex) or len(index) < 2:
        return None
    ordered = index.sort_values()
    days = float(np.median((ordered[1:] - ordered[:-1]).total_seconds())) / 86_400.0
    if days <= 0:
        return None
    return 252.0 if days <= 1.5 else 365.25 / days  # trading days: ~252 a year (common practice)


def typical_annual_size(frame: pd.DataFrame, periods_per_year: float) -> float:
    """Median over columns of 1.4826·median|r|·√ppy: a returns table's typical yearly size."""
    values = frame.to_numpy(dtype=np.float64, na_value=np.nan)
    if values.size == 0 or np.isnan(values).all():
        return 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a column of NaN has no median
        per_column = np.nanmedian(np.abs(values), axis=0)
    per_column = per_column[np.isfinite(per_column)]
    if per_column.size == 0:
        return 0.0
    return float(_MAD_TO_SD * np.median(per_column) * np.sqrt(periods_per_year))


def check_returns(frame: pd.DataFrame, source: str, *, unit: str = "fraction", what: str = "returns",
                  periods_per_year: float | None = None, key: str | None = "unit") -> pd.DataFrame:
    """Returns as fractions: a declared percent divided by 100 (with a warning), else checked.

    Parameters
    ----------
    frame : pandas.DataFrame
        Dates × names.
    source : str
        The file or argument, for messages.
    unit : {"fraction", "percent"}
        What the file says its unit is.
    periods_per_year : float, optional
        Default: from the median date spacing (daily when there are no dates).
    key : str or None
        The file setting that declares the unit, named in the error (``unit``); None for Python
        callers, who divide by 100 themselves.

    Raises
    ------
    InputError
        When the typical annualised size exceeds :data:`RETURN_SIZE_LIMIT` as fractions.
    """
    scale = unit_scale(unit, f"{source}: {key or 'unit'}")
    if scale != 1.0:
        warnings.warn(f"{source}: {what} read as percent ({key}: percent) and divided by 100", DataWarning, stacklevel=2)
        return frame * scale
    ppy = periods_per_year or periods_per_year_of(frame.index) or 252.0
    size = typical_annual_size(frame, ppy)
    if size > RETURN_SIZE_LIMIT:
        raise InputError(
            f"{source}: {what} look like percent, not fractions: their typical size is {size:.3g} a year "
            f"({size:.0%}) at {ppy:.3g} periods a year, above the {RETURN_SIZE_LIMIT:.0%} a fraction could be; "
            f"{_fix(key)}"
        )
    return frame


def check_alpha(alpha: pd.Series, source: str, *, unit: str = "fraction", key: str | None = "unit") -> pd.Series:
    """Alpha as annual fractions: a declared percent divided by 100 (with a warning), else checked.

    Raises
    ------
    InputError
        When the cross-sectional standard deviation exceeds :data:`ALPHA_SPREAD_LIMIT`.
    """
    scale = unit_scale(unit, f"{source}: {key or 'unit'}")
    if scale != 1.0:
        warnings.warn(f"{source}: alpha read as percent ({key}: percent) and divided by 100", DataWarning, stacklevel=2)
        return alpha * scale
    values = alpha.to_numpy(dtype=np.float64, na_value=np.nan)
    values = values[np.isfinite(values)]
    spread = float(np.std(values)) if values.size > 1 else float(np.abs(values).max(initial=0.0))
    if spread > ALPHA_SPREAD_LIMIT:
        raise InputError(
            f"{source}: alpha looks like percent, not annual fractions: its spread across assets is {spread:.3g} "
            f"({spread:.0%} a year), above the {ALPHA_SPREAD_LIMIT:.0%} a fraction could be; "
            f"{_fix(key)}"
        )
    return alpha


def _fix(key: str | None) -> str:
    return f"divide by 100, or declare {key}: percent" if key else "divide by 100 (0.01 is 1%)"


def check_book(weights: Any, source: str, what: str = "holdings") -> None:
    """Refuse a book that is not weights of NAV: net Σw above 1 or gross Σ|w| above :data:`MAX_GROSS`.

    Cash is what the positions leave over (1 − Σw), so a book may sum below 1; a long/short book
    may net to 0. Refusing a net above 1 is one rule for every command (docs/scenarios.md, "Units").
    """
    w = np.asarray(weights, dtype=np.float64)
    if w.size == 0:
        return
    net = float(np.nansum(w))
    gross = float(np.nansum(np.abs(w)))
    hint = "; weights are fractions of NAV (0.05 is 5%)" + ("; these look like percent" if net > 20 or gross > 20 else "")
    label = what if "weight" in what else f"{what} weights"
    if net > 1.0 + NET_TOL:
        raise InputError(f"{source}: {label} sum to {net:.6g}, more than the whole NAV (1){hint}")
    if gross > MAX_GROSS:
        raise InputError(f"{source}: {label} have gross Σ|w| {gross:.6g}, above the {MAX_GROSS:g} a book may hold{hint}")


def move_problem(move: float) -> str | None:
    """What is wrong with a shock move of 100% or more (a percentage typed as a number), else None."""
    if abs(move) >= MOVE_LIMIT:
        return f"a move of {move:g} is {100 * move:g}%; write returns as fractions (-0.10 is -10%)"
    return None
