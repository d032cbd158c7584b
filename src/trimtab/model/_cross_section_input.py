"""Boundary checks for the cross-sectional estimator: exposures, static or long, with industries and weights.

A static table (assets × styles) gives one :class:`Snapshot` used on every date; a long table
(``date``, ``asset``, styles…) gives one snapshot per exposure date, in date order.
"""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_unique, list_labels
from trimtab.errors import InputError
from trimtab.model._panel import date_label

OWNER = "fit_cross_section"


@dataclasses.dataclass(frozen=True, eq=False)
class Snapshot:
    """Exposures known on one date (or for the whole window when static)."""

    date: Any
    assets: pd.Index
    styles: np.ndarray  # n × S
    codes: np.ndarray  # n industry codes (0..J−1), empty when there are no industries
    weight: np.ndarray  # n regression weights


def _label_column(
    source: Any, frame: pd.DataFrame, assets: pd.Index, name: str, *, numeric: bool
) -> tuple[np.ndarray | None, str | None]:
    """Values of ``industry`` / ``weights`` aligned to ``assets`` and a description for settings."""
    if source is None:
        return None, None
    if isinstance(source, str):
        if source not in frame.columns:
            raise InputError(f"{OWNER}: {name}={source!r} is not a column of exposures; columns: {list_labels(frame.columns)}")
        values = frame[source].reset_index(drop=True)
        values.index = assets
        described = f"column {source}"
    elif isinstance(source, pd.Series):
        check_unique(source.index, "asset ids", f"{OWNER}: {name}")
        missing = assets.difference(source.index, sort=False)
        if len(missing):
            raise InputError(f"{OWNER}: {name}: exposures missing for assets: {list_labels(missing)}")
        values = source.reindex(assets)
        described = "series"
    else:
        raise InputError(f"{OWNER}: {name} must be a Series by asset, a column name or None, got {type(source).__name__}")
    blank = values.isna().to_numpy()
    if blank.any():
        raise InputError(f"{OWNER}: {name}: missing values for assets: {list_labels(assets[blank])}")
    if not numeric:
        return values.to_numpy(dtype=object), described
    if not pd.api.types.is_numeric_dtype(values):
        raise InputError(f"{OWNER}: {name}: expected positive numbers, got dtype {values.dtype}")
    arr = values.to_numpy(dtype=np.float64)
    bad = ~np.isfinite(arr) | (arr <= 0)
    if bad.any():
        raise InputError(f"{OWNER}: {name}: regression weights must be positive and finite; bad for assets: {list_labels(assets[bad])}")
    return arr, described


def _style_matrix(frame: pd.DataFrame, styles: list[Any], dates: pd.Series | None) -> np.ndarray:
    bad = [c for c in styles if not pd.api.types.is_numeric_dtype(frame[c]) or pd.api.types.is_bool_dtype(frame[c])]
    if bad:
        raise InputError(f"{OWNER}: exposures: non-numeric columns: {list_labels(bad)}; expected numbers")
    values = frame[styles].to_numpy(dtype=np.float64)
    finite = np.isfinite(values)
    if not finite.all():
        rows, cols = np.nonzero(~finite)
        assets = frame["asset"].to_numpy() if dates is not None else frame.index.to_numpy()
        where = [
            (f"{date_label(dates.iloc[r])}/" if dates is not None else "") + f"{assets[r]}/{styles[c]}"
            for r, c in zip(rows[:6], cols[:6])
        ]
        raise InputError(
            f"{OWNER}: exposures: {len(rows)} NaN or infinite values, at {list_labels(where)} "
            "(date/asset/column); every exposure must be a number"
        )
    return values


def parse_exposures(
    exposures: Any, industry: Any, weights: Any, date_index: pd.Index
) -> tuple[list[Snapshot], list[str], list[Any], dict[str, Any]]:
    """Snapshots in date order, industry labels, style names and a description of the inputs."""
    if not isinstance(exposures, pd.DataFrame):
        raise InputError(f"{OWNER}: exposures must be a DataFrame (assets × factors, or long with date and asset columns), got {type(exposures).__name__}")
    check_unique(exposures.columns, "columns", f"{OWNER}: exposures")
    long = "date" in exposures.columns and "asset" in exposures.columns
    special = {c for c in (industry, weights) if isinstance(c, str)}
    if long:
        frame = exposures.reset_index(drop=True)
        dates = frame["date"]
        if isinstance(date_index, pd.DatetimeIndex):
            try:
                dates = pd.to_datetime(dates)
            except (TypeError, ValueError) as err:
                raise InputError(f"{OWNER}: exposures: the date column cannot be read as dates: {err}") from err
        pairs = pd.MultiIndex.from_arrays([dates, frame["asset"]])
        if not pairs.is_unique:
            dups = [f"{date_label(d)}/{a}" for d, a in pairs[pairs.duplicated()].unique()]
            raise InputError(f"{OWNER}: exposures: duplicate (date, asset) rows: {list_labels(dups)}")
        assets_all = pd.Index(frame["asset"]).rename(None)
        styles = [c for c in frame.columns if c not in {"date", "asset"} | special]
    else:
        frame = exposures
        check_unique(frame.index, "asset ids", f"{OWNER}: exposures")
        dates = None
        assets_all = frame.index
        styles = [c for c in frame.columns if c not in special]
    style_values = _style_matrix(frame, styles, dates)
    labels, industry_desc = _label_column(industry, frame, assets_all, "industry", numeric=False)
    weight_values, weight_desc = _label_column(weights, frame, assets_all, "weights", numeric=True)
    if weight_values is None:
        weight_values = np.ones(len(assets_all))
    if labels is None:
        industries: list[Any] = []
        codes = np.zeros(0, dtype=np.int64)
    else:
        industries = sorted(pd.unique(labels), key=str)
        codes = pd.Index(industries).get_indexer(labels).astype(np.int64)
    snapshots: list[Snapshot] = []
    if dates is None:
        snapshots.append(Snapshot(None, pd.Index(assets_all), style_values, codes, weight_values))
    else:
        try:
            order = np.argsort(dates.to_numpy(), kind="stable")
        except TypeError as err:
            raise InputError(f"{OWNER}: exposures: dates cannot be ordered: {err}") from err
        sorted_dates = dates.to_numpy()[order]
        unique_dates, starts = np.unique(sorted_dates, return_index=True)
        bounds = list(starts) + [len(order)]
        for j, date in enumerate(unique_dates):
            rows = order[bounds[j]:bounds[j + 1]]
            snapshots.append(
                Snapshot(
                    pd.Timestamp(date) if isinstance(date, np.datetime64) else date,
                    pd.Index(assets_all[rows]),
                    style_values[rows],
                    codes[rows] if len(codes) else codes,
                    weight_values[rows],
                )
            )
    described = {
        "exposure_format": "long" if long else "static",
        "industry": industry_desc,
        "weights": weight_desc or "equal",
    }
    return snapshots, industries, styles, described
