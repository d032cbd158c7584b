"""Boundary checks shared by the public functions: labels, finiteness, shapes."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError

MAX_LISTED = 5


def list_labels(labels: Iterable[Any], limit: int = MAX_LISTED) -> str:
    """Format at most ``limit`` labels for an error message, with a count of the rest."""
    items = list(labels)
    shown = ", ".join(repr(x) if not isinstance(x, str) else x for x in items[:limit])
    if len(items) > limit:
        shown += f" (and {len(items) - limit} more)"
    return shown


def closest_key_hint(key: Any, allowed: Iterable[str]) -> str:
    """"did you mean X?" for the closest allowed key, else the allowed keys (for unknown-key messages)."""
    import difflib

    options = list(allowed)
    close = difflib.get_close_matches(str(key), options, n=1, cutoff=0.6)
    return f"did you mean {close[0]}?" if close else f"allowed here: {', '.join(options)}"


def check_known_keys(mapping: Any, allowed: Sequence[str], where: str) -> None:
    """Refuse the first key of ``mapping`` not in ``allowed``: "WHERE.KEY: unknown key; did you mean …?"."""
    for key in mapping:
        if key not in allowed:
            raise InputError(f"{where}.{key}: unknown key; {closest_key_hint(str(key), allowed)}")


def number_as_text(value: str) -> str:
    """The message for a number written as text: quotes removed, percentages as fractions."""
    body = value.strip()
    if body.endswith("%"):
        try:
            return f"expected a number, got text {_describe(value)}; write percentages as fractions: {float(body[:-1]) / 100:g}"
        except ValueError:
            pass
    try:
        float(body)
    except ValueError:
        return f"expected a number, got {_describe(value)}"
    return f"expected a number, got text {_describe(value)}; write it without quotes"


def _describe(value: Any, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 3] + "..."


def check_unique(index: pd.Index, what: str, owner: str) -> None:
    """Raise if ``index`` holds duplicates, naming up to five of them."""
    if not index.is_unique:
        dups = index[index.duplicated()].unique()
        if isinstance(dups, pd.DatetimeIndex):
            dups = [str(t.date()) if t == t.normalize() else str(t) for t in dups]
        raise InputError(f"{owner}: duplicate {what}: {list_labels(dups)}")


def check_finite_frame(frame: pd.DataFrame, owner: str, *, allow_nan: bool = False) -> None:
    """Raise if ``frame`` has non-numeric columns, infinities or (unless allowed) NaN."""
    dtypes = frame.dtypes
    if all(pd.api.types.is_numeric_dtype(t) for t in set(dtypes)):
        bad_cols = []
    else:
        bad_cols = [c for c, dtype in zip(frame.columns, dtypes) if not pd.api.types.is_numeric_dtype(dtype)]
    if bad_cols:
        raise InputError(f"{owner}: non-numeric columns: {list_labels(bad_cols)}; expected numbers")
    values = frame.to_numpy(dtype=float)
    if np.isinf(values).any():
        cols = frame.columns[np.isinf(values).any(axis=0)]
        raise InputError(f"{owner}: infinite values in columns: {list_labels(cols)}")
    if not allow_nan and np.isnan(values).any():
        cols = frame.columns[np.isnan(values).any(axis=0)]
        raise InputError(f"{owner}: missing (NaN) values in columns: {list_labels(cols)}")


def check_finite_series(series: pd.Series, owner: str) -> None:
    """Raise if ``series`` is non-numeric or holds NaN or infinite values, naming the labels."""
    if not pd.api.types.is_numeric_dtype(series):
        raise InputError(f"{owner}: expected numbers, got dtype {series.dtype}")
    values = series.to_numpy(dtype=float)
    bad = ~np.isfinite(values)
    if bad.any():
        raise InputError(f"{owner}: missing or infinite values for: {list_labels(series.index[bad])}")


def as_float_array(values: Any, owner: str, shape: Sequence[int] | None = None) -> np.ndarray:
    """Convert to a float64 ndarray, checking the shape (both shapes in the message) and finiteness."""
    try:
        arr = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as err:
        raise InputError(f"{owner}: expected numbers, could not convert: {err}") from err
    if shape is not None and arr.shape != tuple(shape):
        raise InputError(f"{owner}: expected shape {tuple(shape)}, got {arr.shape}")
    if not np.isfinite(arr).all():
        raise InputError(f"{owner}: contains NaN or infinite values")
    return arr
