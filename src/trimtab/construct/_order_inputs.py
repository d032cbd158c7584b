"""The per-asset inputs of the order-ready trade list (price, lot, average daily volume), checked.

A value the orders use must be a finite number > 0: the price and the lot size of every asset held
or traded, and the ADV of every asset traded when the list reports % of ADV. A bad value there is an
:class:`~trimtab.errors.InputError` naming the column and the assets (at most five, then "and N
more"); the scenario layer puts the attributes file's name in front. A bad value on an asset neither
held nor traded is not used: it is a warning, never replaced silently by another number.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError


@dataclass(frozen=True, eq=False)
class OrderInputs:
    """Checked arrays in model order; NaN where a value is bad on an asset the orders do not touch."""

    price: np.ndarray
    lot: np.ndarray | None
    adv: np.ndarray | None
    unused_bad: tuple[str, ...] = ()

    @property
    def usable(self) -> np.ndarray:
        """Assets whose price and lot are good (the only ones rounding may trade)."""
        ok = np.isfinite(self.price) & (self.price > 0)
        if self.lot is not None:
            ok &= np.isfinite(self.lot) & (self.lot > 0)
        return ok


def _numbers(attrs: pd.DataFrame, column: str) -> np.ndarray:
    """A column as float64; text that is not a number becomes NaN (then reported as bad)."""
    return pd.to_numeric(attrs[column], errors="coerce").to_numpy(dtype=np.float64)


def _bad(values: np.ndarray) -> np.ndarray:
    return ~(np.isfinite(values) & (values > 0))


def _describe(values: np.ndarray, assets: pd.Index, mask: np.ndarray) -> str:
    """``LAXI (0), KEZA (nan)`` for at most five assets, then "and N more"."""
    idx = np.flatnonzero(mask)
    return list_labels([f"{assets[i]} ({values[i]:g})" for i in idx], limit=5)


def check_order_inputs(
    attrs: pd.DataFrame,
    assets: pd.Index,
    used: np.ndarray,
    traded: np.ndarray,
    *,
    price_column: str,
    lot_column: str | None,
    adv_column: str | None,
) -> OrderInputs:
    """Read and check the order columns.

    Parameters
    ----------
    attrs : pandas.DataFrame
        The attributes, reindexed to the model's assets.
    used, traded : ndarray of bool, shape (N,)
        Assets held or traded (price and lot are used), and assets traded (ADV is used).
    price_column, lot_column, adv_column : str
        Column names; ``lot_column``/``adv_column`` None or absent: not used.

    Raises
    ------
    InputError
        ``attributes: column 'price' must be a number > 0 for assets held or traded: LAXI (0)``.
    """
    unused: list[str] = []
    out: dict[str, np.ndarray | None] = {}
    for role, column, where, what in (("price", price_column, used, "held or traded"),
                                      ("lot", lot_column, used, "held or traded"),
                                      ("adv", adv_column, traded, "traded")):
        if column is None or column not in attrs.columns:
            out[role] = None
            continue
        values = _numbers(attrs, column)
        bad = _bad(values)
        if (bad & where).any():
            raise InputError(
                f"attributes: column {column!r} must be a number > 0 for assets {what}: "
                f"{_describe(values, assets, bad & where)}"
            )
        if (bad & ~where).any():
            unused.append(f"column {column!r} is not a number > 0 for {int((bad & ~where).sum())} assets neither "
                          f"held nor traded (not used): {_describe(values, assets, bad & ~where)}")
        out[role] = np.where(bad, np.nan, values)
    price = out["price"]
    if price is None:
        raise InputError(f"attributes: no column {price_column!r}: the orders need a price per share")
    return OrderInputs(price=price, lot=out["lot"], adv=out["adv"], unused_bad=tuple(unused))
