"""Reading the accounts of ``trimtab accounts``: one account per row, long-format holdings, overrides.

- accounts file (CSV or Parquet): ``account`` (required), ``nav``, ``cash``, ``exclude`` (asset ids
  separated by ``;``) and any number of limit columns named by their dotted key path under
  ``constraints`` (``tracking_error.max``, ``turnover.max``); an empty cell leaves the scenario's limit;
- holdings file: ``account``, ``asset`` and ``weight`` (fractions of NAV) or ``shares`` (priced from
  the scenario's attributes);
- overrides file (YAML, optional): ``{account: {limits: {key: value}, exclude: [asset, …]}}``.

A mistake in a file (a missing or unknown column, a repeated account or row, a value the scenario
refuses) is one line naming the file, the column and the account; what only the model can judge
(an asset it does not know) is left to the account's own solve, which reports it and lets the
others go on.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_known_keys, closest_key_hint, list_labels
from trimtab.errors import InputError, ScenarioError

#: Columns of the accounts file besides the limit overrides.
ACCOUNT_COLUMNS = ("account", "nav", "cash", "exclude")
OVERRIDE_KEYS = ("limits", "exclude")


def read_accounts(accounts_path: Path, holdings_path: Path, spec: Any, *,
                  overrides_path: Path | None = None) -> dict[str, dict[str, Any]]:
    """The ``accounts`` mapping :func:`trimtab.rebalance_accounts` takes, read from the files."""
    from trimtab.scenario._loaders import read_table

    table = read_table(accounts_path, what="accounts")
    if "account" not in table.columns:
        raise InputError(f"{accounts_path}: no 'account' column; columns: {list_labels(table.columns)}")
    names = table["account"].astype(str).str.strip()
    if (names == "").any() or table["account"].isna().any():
        row = int(np.flatnonzero(table["account"].isna().to_numpy() | (names == "").to_numpy())[0]) + 2
        raise InputError(f"{accounts_path}: column 'account': empty account name on line {row}")
    repeated = names[names.duplicated()]
    if len(repeated):
        raise InputError(f"{accounts_path}: column 'account': accounts given twice: {list_labels(repeated.unique())}")
    limit_columns = [c for c in table.columns if c not in ACCOUNT_COLUMNS]
    holdings = _read_holdings(holdings_path, set(names))
    kind = "shares" if "shares" in holdings.columns else "weights"
    yaml_overrides = _read_overrides(overrides_path, set(names)) if overrides_path is not None else {}
    out: dict[str, dict[str, Any]] = {}
    by_account = {str(k): g for k, g in holdings.groupby(holdings["account"].astype(str), sort=False)}
    for i, name in enumerate(names):
        row = table.iloc[i]
        where = f"{accounts_path}: account {name!r}"
        body: dict[str, Any] = {"kind": kind}
        own = by_account.get(name)
        values = own.set_index("asset")[kind] if own is not None else pd.Series(dtype=np.float64)
        body["holdings"] = values.astype(np.float64).rename("weight" if kind == "weights" else "shares")
        if "nav" in table.columns and pd.notna(row["nav"]):
            body["nav"] = _cell_number(row["nav"], f"{where}: column 'nav'", positive=True)
        elif kind == "weights":
            raise InputError(f"{where}: column 'nav': the account's value is needed for holdings given as weights")
        if "cash" in table.columns and pd.notna(row["cash"]):
            body["cash"] = _cell_number(row["cash"], f"{where}: column 'cash'", positive=False)
        if "exclude" in table.columns and pd.notna(row["exclude"]) and str(row["exclude"]).strip():
            body["exclude"] = [a.strip() for a in str(row["exclude"]).split(";") if a.strip()]
        limits = {c: _cell_value(row[c], f"{where}: column {c!r}") for c in limit_columns if pd.notna(row[c])}
        extra = yaml_overrides.get(name, {})
        for key in extra.get("limits", {}):
            if key in limits:
                raise InputError(f"{overrides_path}: {name}.limits.{key}: also set in {accounts_path} column {key!r}; give it once")
        limits.update(extra.get("limits", {}))
        if "exclude" in extra:
            body["exclude"] = [*body.get("exclude", []), *extra["exclude"]]
        if limits:
            _check_limits(spec, limits, where)
            body["limits"] = limits
        out[name] = body
    return out


def _read_holdings(path: Path, known: set[str]) -> pd.DataFrame:
    from trimtab.scenario._loaders import read_table

    frame = read_table(path, what="holdings")
    missing = [c for c in ("account", "asset") if c not in frame.columns]
    if missing:
        raise InputError(f"{path}: no {missing[0]!r} column (long format: account, asset, weight or shares); "
                         f"columns: {list_labels(frame.columns)}")
    value = [c for c in ("weight", "shares") if c in frame.columns]
    if len(value) != 1:
        raise InputError(f"{path}: give one of the columns 'weight' or 'shares', got "
                         f"{'both' if value else 'neither'}; columns: {list_labels(frame.columns)}")
    column = value[0]
    numbers = pd.to_numeric(frame[column], errors="coerce")
    bad = frame.loc[~np.isfinite(numbers.to_numpy(dtype=np.float64)), ["account", "asset"]]
    if len(bad):
        first = bad.iloc[0]
        raise InputError(f"{path}: column {column!r}: not a finite number for account {first['account']!r}, "
                         f"asset {first['asset']!r} (line {int(bad.index[0]) + 2})")
    frame = frame.assign(**{column: numbers, "account": frame["account"].astype(str).str.strip(),
                            "asset": frame["asset"].astype(str).str.strip()})
    unknown = sorted(set(frame["account"]) - known)
    if unknown:
        raise InputError(f"{path}: column 'account': accounts not in the accounts file: {list_labels(unknown)}")
    twice = frame[frame.duplicated(["account", "asset"])]
    if len(twice):
        first = twice.iloc[0]
        raise InputError(f"{path}: account {first['account']!r} holds asset {first['asset']!r} on two lines")
    return frame.rename(columns={"weight": "weights"})


def _read_overrides(path: Path, known: set[str]) -> dict[str, dict[str, Any]]:
    from trimtab.scenario._strict_yaml import read_yaml

    body = read_yaml(path, what="overrides")
    if not isinstance(body, dict):
        raise InputError(f"{path}: expected a mapping of account to {{limits: …, exclude: […]}}")
    out: dict[str, dict[str, Any]] = {}
    for name, entry in body.items():
        label = str(name)
        if label not in known:
            raise InputError(f"{path}: {label}: not an account of the accounts file; {closest_key_hint(label, sorted(known))}")
        if not isinstance(entry, dict):
            raise InputError(f"{path}: {label}: expected limits: and/or exclude:, got {entry!r}")
        check_known_keys(entry, OVERRIDE_KEYS, f"{path}: {label}")
        limits = entry.get("limits") or {}
        if not isinstance(limits, dict):
            raise InputError(f"{path}: {label}.limits: expected dotted key paths to values, got {limits!r}")
        exclude = entry.get("exclude") or []
        if not isinstance(exclude, list):
            raise InputError(f"{path}: {label}.exclude: expected a list of asset ids, got {exclude!r}")
        out[label] = {"limits": {str(k): v for k, v in limits.items()}, "exclude": [str(a) for a in exclude]}
    return out


def _check_limits(spec: Any, limits: dict[str, Any], where: str) -> None:
    """The overrides as the scenario takes them: a key it lacks or a value it refuses is this file's mistake."""
    try:
        spec.with_limits(limits)
    except ScenarioError as err:
        text = str(err).strip().splitlines()[0]
        raise InputError(f"{where}: {text}") from None


def _cell_number(value: Any, where: str, *, positive: bool) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{where}: expected a number, got {value!r}") from None
    if not np.isfinite(number) or number < 0 or (positive and number == 0):
        raise InputError(f"{where}: expected a {'positive' if positive else 'non-negative'} number, got {value!r}")
    return number


def _cell_value(value: Any, where: str) -> Any:
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, float, np.integer, np.floating)):
        return float(value)
    text = str(value).strip()
    try:
        return float(text)
    except ValueError:
        raise InputError(f"{where}: expected a number, got {value!r}") from None
