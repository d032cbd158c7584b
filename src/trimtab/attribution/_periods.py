"""Which weights are held over which return period, for weights given on some dates only.

The rule (docs/attribution.md): a weights row dated t is the book held over the return period
dated t and every later period until the next weights row. So every weights date must be a date
of the returns, and the first attributed period needs a row dated on or before it.
"""

from __future__ import annotations

import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError


def _day(stamp: pd.Timestamp) -> str:
    return str(stamp.date()) if stamp == stamp.normalize() else str(stamp)


def _span(dates: pd.DatetimeIndex) -> str:
    if len(dates) == 1:
        return f"the period dated {_day(dates[0])}"
    return f"the {len(dates)} periods dated {_day(dates[0])} to {_day(dates[-1])}"


def weights_per_period(weights: pd.DataFrame, returns_dates: pd.DatetimeIndex, periods: pd.DatetimeIndex,
                       source: str = "weights") -> pd.DataFrame:
    """``weights`` carried forward onto ``periods`` (the attributed return dates).

    Parameters
    ----------
    weights : pandas.DataFrame
        Dates × assets, the book from each row's date on.
    returns_dates : pandas.DatetimeIndex
        Every date of the returns file (a weights date must be one of them).
    periods : pandas.DatetimeIndex
        The return periods attributed (a span of ``returns_dates``).
    source : str
        The weights file, for messages.

    Raises
    ------
    InputError
        Weights dated outside the returns, or periods before the first weights row; naming the dates.
    """
    outside = weights.index.difference(returns_dates)
    if len(outside):
        raise InputError(
            f"{source}: weights dated {list_labels([_day(d) for d in outside])} are not dates of the returns "
            f"({_day(returns_dates[0])} to {_day(returns_dates[-1])}); a weights row carries the date of the first "
            "return period it is held over"
        )
    first = weights.index.min()
    uncovered = periods[periods < first]
    if len(uncovered):
        raise InputError(
            f"{source}: no weights for {_span(uncovered)}: the first weights "
            f"row is dated {_day(first)}; add a row dated {_day(uncovered[0])} or start later (--start {_day(first)})"
        )
    return weights.sort_index().reindex(periods, method="ffill")
