"""The as-of view: a dated table that cannot return a row dated after its date.

Every read of dated data that feeds a backtest decision goes through :class:`AsOf`, so a decision
at date t can only use data up to and including t.
"""

from __future__ import annotations

from typing import Any

import pandas as pd


class AsOf:
    """A read-only view of a dated table that only returns rows dated on or before ``date``.

    Parameters
    ----------
    frame : pandas.DataFrame
        Rows indexed by increasing dates.
    date : label
        The view's date; rows dated after it are out of reach.

    Examples
    --------
    >>> frame = pd.DataFrame({"x": [1.0, 2.0, 3.0]}, index=pd.to_datetime(["2024-01-01", "2024-01-02", "2024-01-03"]))
    >>> AsOf(frame, pd.Timestamp("2024-01-02")).tail(5)["x"].tolist()
    [1.0, 2.0]
    """

    __slots__ = ("_frame", "_end", "date")

    def __init__(self, frame: pd.DataFrame, date: Any) -> None:
        self._frame = frame
        self.date = date
        self._end = int(frame.index.searchsorted(date, side="right"))

    @property
    def n_rows(self) -> int:
        """How many rows are dated on or before the date."""
        return self._end

    def tail(self, n_rows: int) -> pd.DataFrame:
        """The last ``n_rows`` rows dated ≤ the date (a copy)."""
        return self._frame.iloc[max(0, self._end - n_rows) : self._end].copy()

    def last(self) -> pd.Series | None:
        """The latest row dated ≤ the date, or None when there is none."""
        return None if self._end == 0 else self._frame.iloc[self._end - 1].copy()

    def last_date(self) -> Any:
        """The date of :meth:`last`'s row, or None when there is none."""
        return None if self._end == 0 else self._frame.index[self._end - 1]
