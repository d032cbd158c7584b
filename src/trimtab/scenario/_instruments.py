"""Reading instrument and contract files for ``trimtab overlay`` (formats in docs/overlay.md).

Instruments: a long basket file (instrument, asset, weight) or a return-series file (a ``date``
column and one column per instrument, or long: date, instrument, return). Contracts: instrument,
price, multiplier and optional cost (currency per contract).
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import InputError


def _baskets(frame: pd.DataFrame, path: Path, assets: pd.Index) -> dict[str, pd.Series]:
    missing = [c for c in ("instrument", "asset", "weight") if c not in frame.columns]
    if missing:
        raise InputError(f"{path}: a basket file needs the columns instrument, asset, weight; missing {list_labels(missing)} "
                         f"(a return-series file has a date column instead)")
    extra = [c for c in frame.columns if c not in ("instrument", "asset", "weight")]
    if extra:
        raise InputError(f"{path}: unknown columns {list_labels(extra)}; a basket file has instrument, asset, weight")
    names = frame["instrument"].astype(str).str.strip()
    ids = frame["asset"].astype(str).str.strip()
    weights = pd.to_numeric(frame["weight"], errors="coerce")
    bad = ~np.isfinite(weights.to_numpy(dtype=float))
    if bad.any():
        rows = [f"row {i + 2}" for i in np.flatnonzero(bad)]
        raise InputError(f"{path}: column weight: not a finite number in {list_labels(rows)}")
    long = pd.DataFrame({"instrument": names, "asset": ids, "weight": weights})
    repeated = long.duplicated(["instrument", "asset"])
    if repeated.any():
        pairs = [f"{n}/{a}" for n, a in long.loc[repeated, ["instrument", "asset"]].itertuples(index=False)]
        raise InputError(f"{path}: an instrument lists an asset twice: {list_labels(pairs)}")
    out: dict[str, pd.Series] = {}
    for name, rows in long.groupby("instrument", sort=False):
        unknown = pd.Index(rows["asset"]).difference(assets)
        if len(unknown):
            raise InputError(f"{path}: instrument {name}: assets not in the risk model: {list_labels(unknown)}")
        out[str(name)] = pd.Series(rows["weight"].to_numpy(), index=pd.Index(rows["asset"], name="asset"), name=str(name))
    return out


def _series(path: Path) -> dict[str, pd.Series]:
    from trimtab.scenario._loaders import load_returns
    from trimtab.scenario._schema import ReturnsFile

    frame = load_returns(ReturnsFile.model_validate({"path": str(path), "asset_column": "instrument"}), what="instrument returns")
    return {str(c): frame[c].dropna() for c in frame.columns}


def read_instruments(paths: Sequence[Path], assets: pd.Index) -> dict[str, pd.Series]:
    """Every instrument of ``paths``: name → basket weights by asset, or returns by date."""
    from trimtab.scenario._loaders import read_table

    out: dict[str, pd.Series] = {}
    seen: dict[str, Path] = {}
    for path in paths:
        frame = read_table(path, what="instruments")
        found = _series(path) if "date" in frame.columns else _baskets(frame, path, assets)
        for name, values in found.items():
            if name in seen:
                raise InputError(f"{path}: instrument {name} is also given in {seen[name]}")
            seen[name] = path
            out[name] = values
    if not out:
        raise InputError(f"{', '.join(map(str, paths))}: no instrument found")
    return out


def read_contracts(path: Path, instruments: Sequence[str]) -> pd.DataFrame:
    """The contract table, checked: known instruments, price and multiplier > 0, cost ≥ 0."""
    from trimtab.scenario._loaders import read_table

    frame = read_table(path, what="contracts")
    allowed = ("instrument", "price", "multiplier", "cost", "held")
    missing = [c for c in allowed[:3] if c not in frame.columns]
    if missing:
        raise InputError(f"{path}: missing columns {list_labels(missing)} (a contract file has instrument, price, multiplier, optional cost and held)")
    extra = [c for c in frame.columns if c not in allowed]
    if extra:
        raise InputError(f"{path}: unknown columns {list_labels(extra)}; allowed: {', '.join(allowed)}")
    frame = frame.assign(instrument=frame["instrument"].astype(str).str.strip())
    repeated = frame["instrument"][frame["instrument"].duplicated()]
    if len(repeated):
        raise InputError(f"{path}: instruments listed twice: {list_labels(repeated.unique())}")
    unknown = pd.Index(frame["instrument"]).difference(pd.Index(instruments))
    if len(unknown):
        raise InputError(f"{path}: instruments not in --instruments: {list_labels(unknown)}")
    table = frame.set_index("instrument")
    if "held" in table.columns:
        held = pd.to_numeric(table["held"], errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(held) | (held != np.round(held))
        if bad.any():
            raise InputError(f"{path}: column held must be a whole number of contracts; not for {list_labels(table.index[bad])}")
        table["held"] = held
    for column, rule in (("price", "> 0"), ("multiplier", "> 0"), ("cost", ">= 0")):
        if column not in table.columns:
            continue
        values = pd.to_numeric(table[column], errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(values) | ((values <= 0) if rule == "> 0" else (values < 0))
        if bad.any():
            raise InputError(f"{path}: column {column} must be {rule}; not for {list_labels(table.index[bad])}")
        table[column] = values
    return table


def parse_targets(values: Sequence[str] | None, factors: pd.Index) -> dict[str, float]:
    """``--target FACTOR=VALUE`` options as a mapping, each factor known and given once."""
    out: dict[str, float] = {}
    for value in values or []:
        name, sep, number = value.partition("=")
        name = name.strip()
        try:
            parsed: Any = float(number)
        except ValueError:
            parsed = None
        if not sep or not name or parsed is None or not np.isfinite(parsed):
            raise InputError(f"--target: expected FACTOR=NUMBER (e.g. market=0), got {value!r}")
        if name not in factors:
            raise InputError(f"--target {value}: unknown factor {name!r}; the model's factors are {list_labels(factors, 20)}")
        if name in out:
            raise InputError(f"--target: the factor {name!r} is given twice")
        out[name] = parsed
    return out


def read_overlay(section: Any, assets: pd.Index, source: Path | str = "scenario") -> dict[str, Any]:
    """The scenario's ``overlay:`` section with its files read: the ``overlay`` argument of
    :func:`trimtab.rebalance` (basket instruments only: a return series cannot join the rebalance)."""
    path = Path(section.instruments)
    instruments = read_instruments([path], assets)
    series = [name for name, values in instruments.items() if isinstance(values.index, pd.DatetimeIndex)]
    if series:
        raise InputError(f"{path}: overlay.instruments: return-series instruments cannot join the rebalance yet "
                         f"({list_labels(series)}); give basket weights (instrument, asset, weight), or size them "
                         "after the rebalance with trimtab overlay")
    notional = dict(section.notional or {})
    unknown = [name for name in notional if name not in instruments]
    if unknown:
        raise InputError(f"{source}: overlay.notional.{unknown[0]}: not an instrument of {path} "
                         f"(it has {list_labels(list(instruments))})")
    out: dict[str, Any] = {"instruments": instruments, "max_gross": section.max_gross,
                           "notional": {k: list(v) for k, v in notional.items()}}
    if section.contracts is not None:
        out["contracts"] = read_contracts(Path(section.contracts), list(instruments))
    return out


def refuse_overlay(scenario: Any, command: str) -> None:
    """Stop (exit 2) a command that cannot carry a scenario's ``overlay:`` rather than drop it silently."""
    if scenario.spec.overlay is not None:
        raise InputError(f"{scenario.path.name}: overlay: trimtab {command} does not take a hedge overlay yet "
                         "(rebalance, compare, sweep and explore do); remove the section for this run")
