"""Readers for the data files a scenario names: returns, holdings, alpha, benchmark, attributes.

Each reader returns labelled pandas objects with string asset ids and raises :class:`InputError`
with one line naming the file, the column and what was expected.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from trimtab.scenario._strict_yaml import check_regular
from trimtab.units import check_alpha, check_book, check_returns, unit_scale
from trimtab._validation import list_labels
from trimtab.errors import InputError
from trimtab.scenario._schema import AttributesFile, HoldingsFile, ReturnsFile, SeriesFile, _FileSpec

_CSV = (".csv", ".txt")
_PARQUET = (".parquet", ".pq")


def read_table(path: str | Path, file_format: str = "auto", *, what: str = "data") -> pd.DataFrame:
    """Read a CSV or Parquet file into a DataFrame, with one-line errors naming the file.

    Parameters
    ----------
    path : str or Path
        The file.
    file_format : {"auto", "csv", "parquet"}
        ``auto`` goes by the extension (.csv/.txt, .parquet/.pq).
    what : str
        What the file holds, for messages ("holdings", "alpha", …).

    Raises
    ------
    InputError
        The file is missing, is a folder, has an unknown extension, cannot be parsed or is empty.
    """
    p = Path(path)
    if not p.exists():
        raise InputError(f"{p}: {what} file not found")
    if p.is_dir():
        raise InputError(f"{p}: is a folder; expected a {what} file (CSV or Parquet)")
    check_regular(p, p.stat().st_mode, what)
    fmt = file_format
    if fmt == "auto":
        suffix = p.suffix.lower()
        if suffix in _CSV:
            fmt = "csv"
        elif suffix in _PARQUET:
            fmt = "parquet"
        else:
            raise InputError(
                f"{p}: cannot tell the {what} file's format from extension {p.suffix!r}; "
                "expected .csv or .parquet (or set format: csv|parquet)"
            )
    try:
        if fmt == "csv":
            frame = pd.read_csv(p)
        else:
            frame = pd.read_parquet(p)
    except pd.errors.EmptyDataError:
        raise InputError(f"{p}: the {what} file is empty; expected a header row and data") from None
    except OSError as err:
        if err.errno is not None:  # permission denied, I/O error: the environment, reported as such
            raise OSError(err.errno, err.strerror, str(p)) from None
        raise InputError(f"{p}: could not read the {what} file as {fmt.upper()}: {err}") from None
    except (pd.errors.ParserError, UnicodeDecodeError, ValueError) as err:
        first = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
        raise InputError(f"{p}: could not read the {what} file as {fmt.upper()}: {first}") from None
    except Exception as err:  # noqa: BLE001 - pyarrow raises its own classes for corrupt files
        raise InputError(f"{p}: could not read the {what} file as {fmt.upper()}: {type(err).__name__}: {err}") from None
    if frame.shape[0] == 0:
        raise InputError(f"{p}: the {what} file has a header but no rows")
    frame.columns = [str(c) for c in frame.columns]
    return frame


def _require_columns(frame: pd.DataFrame, columns: list[str], path: Path, what: str, hint: str = "") -> None:
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        found = list_labels(list(frame.columns))
        raise InputError(
            f"{path}: {what} file lacks column{'s' if len(missing) > 1 else ''} {', '.join(map(repr, missing))}; "
            f"found columns: {found}{hint}"
        )


def _asset_ids(frame: pd.DataFrame, column: str, path: Path, what: str) -> pd.Index:
    values = frame[column]
    if values.isna().any():
        rows = [int(i) + 2 for i in np.flatnonzero(values.isna().to_numpy())]
        raise InputError(f"{path}: {what} column {column!r} has empty asset ids on lines {list_labels(rows)}")
    ids = pd.Index(values.astype(str).str.strip(), name=None)
    if not ids.is_unique:
        raise InputError(f"{path}: {what} file lists these assets more than once: {list_labels(ids[ids.duplicated()].unique())}")
    return ids


def _numbers(values: pd.Series, path: Path, column: str, what: str) -> np.ndarray:
    """Convert a column to float64 (empty cells become NaN), naming entries that are not numbers."""
    converted = pd.to_numeric(values, errors="coerce")
    bad = converted.isna() & values.notna()
    if bad.any():
        shown = list_labels(values[bad].astype(str).unique())
        raise InputError(f"{path}: {what} column {column!r} has values that are not numbers: {shown}")
    arr = converted.to_numpy(dtype=np.float64, na_value=np.nan)
    if np.isinf(arr).any():
        raise InputError(f"{path}: {what} column {column!r} has infinite values")
    return arr


def _series(frame: pd.DataFrame, spec: _FileSpec, column: str, path: Path, what: str) -> pd.Series:
    _require_columns(frame, [spec.asset_column, column], path, what)
    ids = _asset_ids(frame, spec.asset_column, path, what)
    values = _numbers(frame[column], path, column, what)
    out = pd.Series(values, index=ids, name=column)
    if np.isnan(values).any():
        raise InputError(f"{path}: {what} column {column!r} is empty for assets: {list_labels(out.index[np.isnan(values)])}")
    return out


def load_series(spec: SeriesFile, what: str, default_column: str) -> pd.Series:
    """Read a one-number-per-asset file (alpha, benchmark weights) as a Series by asset."""
    path = Path(spec.path)
    frame = read_table(path, spec.format, what=what)
    column = spec.column or default_column
    hint = "" if spec.column else f" (set column: to name the {what} column)"
    _require_columns(frame, [spec.asset_column, column], path, what, hint)
    values = _series(frame, spec, column, path, what)
    if what == "alpha":
        return check_alpha(values, str(path), unit=spec.unit)
    values = values * unit_scale(spec.unit, f"{path}: unit")
    check_book(values.to_numpy(), str(path), what)
    return values


def load_attributes(spec: AttributesFile) -> pd.DataFrame:
    """Read the per-asset attributes table, indexed by asset id."""
    path = Path(spec.path)
    frame = read_table(path, spec.format, what="attributes")
    _require_columns(frame, [spec.asset_column], path, "attributes")
    ids = _asset_ids(frame, spec.asset_column, path, "attributes")
    out = frame.drop(columns=spec.asset_column)
    out.index = ids
    return out


@dataclass(frozen=True, eq=False)
class Holdings:
    """Today's book as weights of NAV, with the share counts and prices when the file gave them.

    Attributes
    ----------
    weights : pandas.Series
        Position value / NAV, by asset.
    nav : float or None
        Net asset value in currency, when known (given, or Σ shares·price + cash).
    shares, prices : pandas.Series or None
        The share counts and prices the weights were computed from (``kind: shares``).
    cash : float
        Cash in currency besides the positions.
    """

    weights: pd.Series
    nav: float | None
    shares: pd.Series | None = None
    prices: pd.Series | None = None
    cash: float = 0.0


def load_holdings(spec: HoldingsFile, attributes: pd.DataFrame | None = None) -> Holdings:
    """Read holdings as weights, or as shares valued at prices (from the file or the attributes).

    With ``kind: shares``, weight = shares·price / NAV and NAV = ``nav`` if given, else
    Σ shares·price + cash.
    """
    path = Path(spec.path)
    frame = read_table(path, spec.format, what="holdings")
    if spec.kind == "weights":
        column = spec.column or "weight"
        hint = "" if spec.column else " (holdings as weights need asset, weight; or set kind: shares)"
        _require_columns(frame, [spec.asset_column, column], path, "holdings", hint)
        weights = _series(frame, spec, column, path, "holdings")
        check_book(weights.to_numpy(), str(path))
        return Holdings(weights.rename("weight"), spec.nav, cash=spec.cash)

    column = spec.column or "shares"
    _require_columns(frame, [spec.asset_column, column], path, "holdings")
    shares = _series(frame, spec, column, path, "holdings").rename("shares")
    if spec.price_column in frame.columns:
        prices = _series(frame, spec, spec.price_column, path, "holdings").rename("price")
    elif attributes is not None and spec.price_column in attributes.columns:
        missing = shares.index.difference(attributes.index)
        if len(missing):
            raise InputError(
                f"{path}: no price for held assets {list_labels(missing)}: they are not in the attributes file"
            )
        prices = pd.Series(
            _numbers(attributes[spec.price_column].loc[shares.index], path, spec.price_column, "attributes"),
            index=shares.index,
            name="price",
        )
    else:
        raise InputError(
            f"{path}: holdings given as shares need prices: add a {spec.price_column!r} column to this file "
            "or give an attributes file that has one"
        )
    bad = prices.index[~(prices.to_numpy() > 0)]
    if len(bad):
        raise InputError(f"{path}: prices must be positive; not so for {list_labels(bad)}")
    value = shares * prices
    nav = float(spec.nav) if spec.nav is not None else float(value.sum() + spec.cash)
    if not (np.isfinite(nav) and nav > 0):
        raise InputError(f"{path}: the book's value Σ shares·price + cash is {nav:g}; expected a positive, finite NAV")
    weights = (value / nav).rename("weight")
    check_book(weights.to_numpy(), str(path))
    return Holdings(weights, nav, shares=shares, prices=prices, cash=spec.cash)


def load_returns(spec: ReturnsFile, what: str = "returns", periods_per_year: float | None = None) -> pd.DataFrame:
    """Read returns as a dates × names DataFrame from a wide or a long file.

    Wide: a date column and one column per asset (or factor). Long: columns date, asset, return
    (names configurable). ``layout: auto`` reads a file as long when it has exactly those columns.
    Dates must parse and be unique; returns must be numbers (empty cells are missing data) and
    fractions, or declared ``unit: percent`` (:func:`trimtab.units.check_returns`).
    """
    frame = load_dated_table(spec, what)
    return check_returns(frame, str(spec.path), unit=spec.unit, what=what, periods_per_year=periods_per_year)


def load_dated_weights(spec: ReturnsFile, what: str = "weights") -> pd.DataFrame:
    """Read dates × assets weights (as :func:`load_returns` reads its layouts): no empty cell, and
    every row a book by :func:`trimtab.units.check_book`."""
    frame = load_dated_table(spec, what)
    path = Path(spec.path)
    empty = frame.isna()
    if empty.to_numpy().any():
        cells = [f"{c} on {d.date()}" for d, row in empty.iterrows() for c in row.index[row.to_numpy()]]
        raise InputError(f"{path}: {what} file has empty or NaN weights (write 0 for no position): {list_labels(cells)}")
    frame = frame * unit_scale(spec.unit, f"{path}: unit")
    for date, row in frame.iterrows():
        check_book(row.to_numpy(), f"{path}: row {date.date()}", what)
    return frame


def load_dated_table(spec: ReturnsFile, what: str) -> pd.DataFrame:
    """A dates × names table from a wide or a long file, numbers unchecked for their unit."""
    path = Path(spec.path)
    frame = read_table(path, spec.format, what=what)
    long_cols = {spec.date_column, spec.asset_column, spec.value_column}
    layout = spec.layout
    if layout == "auto":
        layout = "long" if long_cols <= set(frame.columns) and frame.shape[1] == 3 else "wide"
    if spec.date_column not in frame.columns:
        raise InputError(
            f"{path}: {what} file lacks the date column {spec.date_column!r}; found columns: "
            f"{list_labels(list(frame.columns))} (set date_column to name yours)"
        )
    dates = _dates(frame[spec.date_column], path, spec.date_column, what)
    if layout == "long":
        _require_columns(frame, sorted(long_cols), path, what, " (a long file needs date, asset, return)")
        ids = frame[spec.asset_column].astype(str).str.strip()
        values = _numbers(frame[spec.value_column], path, spec.value_column, what)
        long = pd.DataFrame({"date": dates, "asset": ids.to_numpy(), "value": values})
        dup = long.duplicated(["date", "asset"])
        if dup.any():
            first = long.loc[dup].iloc[0]
            raise InputError(
                f"{path}: {what} file has {int(dup.sum())} repeated (date, asset) rows, "
                f"first {first['date'].date()} {first['asset']}"
            )
        wide = long.pivot(index="date", columns="asset", values="value").sort_index()
        wide.columns = pd.Index([str(c) for c in wide.columns])
        wide.columns.name = None
        wide.index.name = None
        return wide
    if pd.Index(dates).duplicated().any():
        dup = pd.Index(dates)[pd.Index(dates).duplicated()]
        raise InputError(f"{path}: {what} file repeats dates: {list_labels([str(d.date()) for d in dup])}")
    columns = [c for c in frame.columns if c != spec.date_column]
    if not columns:
        raise InputError(f"{path}: {what} file has a date column but no return columns")
    data = {c: _numbers(frame[c], path, c, what) for c in columns}
    wide = pd.DataFrame(data, index=pd.DatetimeIndex(dates))
    wide.index.name = None
    return wide.sort_index()


def _dates(values: pd.Series, path: Path, column: str, what: str) -> pd.DatetimeIndex:
    try:
        parsed = pd.to_datetime(values, errors="coerce", format="mixed")
    except (TypeError, ValueError):
        parsed = pd.Series(pd.NaT, index=values.index)
    bad = parsed.isna()
    if bad.any():
        shown = list_labels(values[bad].astype(str).unique())
        raise InputError(f"{path}: {what} column {column!r} has entries that are not dates: {shown}")
    return pd.DatetimeIndex(parsed)
