"""The inputs of a many-account rebalance: the accounts and the aggregate section, checked at the boundary.

Two kinds of mistake are kept apart. A mistake in the shared inputs or in the *shape* of the
``accounts`` mapping (not a mapping, an unknown key, a repeated name) is the caller's and raises an
:class:`~trimtab.errors.InputError` before anything is solved. A mistake in one account's own data
(holdings of an asset the model does not know, a NAV of zero, an override the scenario refuses) is
that account's: it is reported in its row of the summary and the other accounts go on.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_known_keys, list_labels
from trimtab.errors import InputError

#: The keys an account's mapping may hold.
ACCOUNT_KEYS = ("holdings", "kind", "cash", "nav", "limits", "exclude")
#: The keys of the ``aggregate`` section.
AGGREGATE_KEYS = ("max_adv_fraction", "impact", "adv_column", "price_column", "tolerance", "max_rounds")
HOLDINGS_KINDS = ("weights", "shares")


@dataclass(frozen=True)
class Account:
    """One account as the workers receive it (its own data, not yet checked against the model).

    Attributes
    ----------
    name : str
    holdings : pandas.Series
        Weights of NAV, or share counts when ``kind == "shares"``.
    kind : {"weights", "shares"}
    nav : float or None
        Net asset value (currency); for shares, default Σ shares·price + cash.
    cash : float
        Cash besides the positions (currency; shares only).
    limits : dict
        Dotted key paths under ``constraints`` → new values (``{"tracking_error.max": 0.02}``).
    exclude : tuple of str
        Assets the account must not hold at the end (it sells them to zero and buys none).
    """

    name: str
    holdings: pd.Series
    kind: str = "weights"
    nav: Any = None
    cash: Any = 0.0
    limits: dict[str, Any] = field(default_factory=dict)
    exclude: tuple[Any, ...] = ()


@dataclass(frozen=True)
class Aggregate:
    """The ``aggregate`` section: limits and costs over all accounts together.

    Attributes
    ----------
    max_adv_fraction : float or None
        Cap on the gross shares traded per name over all accounts, as a fraction of its ADV.
    impact : float, str or None
        Square-root impact coefficient η (a number, or an attribute column): a pooled block of G
        shares moves the price by η·√(G/ADV) of the price, paid on every share of the block.
    adv_column, price_column : str
        Attribute columns with ADV (shares a day) and prices.
    tolerance : float
        The pooled trades have settled when no name's impact price moves by more than this
        (fraction of the price) from one round to the next.
    max_rounds : int
        Rounds of the equilibrium before it stops and reports that it did not settle.
    """

    max_adv_fraction: float | None = None
    impact: float | str | None = None
    adv_column: str = "adv"
    price_column: str = "price"
    tolerance: float = 1e-7
    max_rounds: int = 60

    @property
    def active(self) -> bool:
        return self.max_adv_fraction is not None or self.impact is not None


def _number(value: Any, where: str, *, low: float, high: float = np.inf, whole: bool = False) -> float:
    ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    if ok:
        ok = bool(np.isfinite(float(value))) and low <= float(value) <= high and (not whole or float(value) == int(value))
    if not ok:
        kind = "a whole number" if whole else "a number"
        raise InputError(f"{where}: expected {kind} in [{low:g}, {high:g}], got {value!r}")
    return float(value)


def check_aggregate(aggregate: Mapping[str, Any] | None) -> Aggregate:
    """The ``aggregate`` mapping checked: known keys, numbers in range (1 = 100% of ADV)."""
    if aggregate is None:
        return Aggregate()
    if not isinstance(aggregate, Mapping):
        raise InputError(f"aggregate: expected a mapping like {{max_adv_fraction: 0.05}}, got {type(aggregate).__name__}")
    check_known_keys(aggregate, AGGREGATE_KEYS, "aggregate")
    out: dict[str, Any] = {}
    if aggregate.get("max_adv_fraction") is not None:
        out["max_adv_fraction"] = _number(aggregate["max_adv_fraction"], "aggregate.max_adv_fraction", low=0.0, high=1.0)
    impact = aggregate.get("impact")
    if impact is not None:
        out["impact"] = impact if isinstance(impact, str) else _number(impact, "aggregate.impact", low=0.0, high=10.0)
    for key in ("adv_column", "price_column"):
        if key in aggregate:
            if not isinstance(aggregate[key], str) or not aggregate[key]:
                raise InputError(f"aggregate.{key}: expected an attribute column name, got {aggregate[key]!r}")
            out[key] = aggregate[key]
    if "tolerance" in aggregate:
        out["tolerance"] = _number(aggregate["tolerance"], "aggregate.tolerance", low=1e-14, high=0.01)
    if "max_rounds" in aggregate:
        out["max_rounds"] = int(_number(aggregate["max_rounds"], "aggregate.max_rounds", low=1, high=1000, whole=True))
    return Aggregate(**out)


def check_accounts(accounts: Mapping[str, Any]) -> list[Account]:
    """The accounts mapping in order, its shape checked (names, known keys); each account's values
    are checked where it is solved, so one bad account does not stop the others."""
    if not isinstance(accounts, Mapping):
        raise InputError(f"accounts: expected a mapping of account name to its holdings and nav, got {type(accounts).__name__}")
    if not accounts:
        raise InputError("accounts: no accounts given")
    out: list[Account] = []
    seen: set[str] = set()
    for name, body in accounts.items():
        label = str(name)
        if not label.strip():
            raise InputError(f"accounts: an account name is empty ({name!r})")
        if label in seen:
            raise InputError(f"accounts: account {label!r} is given twice")
        seen.add(label)
        if not isinstance(body, Mapping):
            raise InputError(f"accounts[{label!r}]: expected a mapping with holdings and nav, got {type(body).__name__}")
        check_known_keys(body, ACCOUNT_KEYS, f"accounts[{label!r}]")
        if "holdings" not in body:
            raise InputError(f"accounts[{label!r}]: holdings missing (a Series of weights, or of shares with kind='shares')")
        kind = body.get("kind", "weights")
        if kind not in HOLDINGS_KINDS:
            raise InputError(f"accounts[{label!r}].kind: expected one of {', '.join(HOLDINGS_KINDS)}, got {kind!r}")
        limits = body.get("limits") or {}
        if not isinstance(limits, Mapping) or not all(isinstance(k, str) for k in limits):
            raise InputError(f"accounts[{label!r}].limits: expected dotted key paths to values, like "
                             f"{{'tracking_error.max': 0.02}}, got {limits!r}")
        exclude = body.get("exclude") or ()
        if isinstance(exclude, str) or not isinstance(exclude, (list, tuple, set, frozenset, pd.Index)):
            raise InputError(f"accounts[{label!r}].exclude: expected a list of asset ids, got {exclude!r}")
        out.append(Account(label, body["holdings"], kind, body.get("nav"), body.get("cash", 0.0),
                           dict(limits), tuple(exclude)))
    return out


def holdings_weights(account: Account, prices: pd.Series | None) -> tuple[pd.Series, float]:
    """The account's holdings as weights of NAV, and its NAV; raises InputError naming the account."""
    where = f"account {account.name}"
    holdings = account.holdings
    if not isinstance(holdings, pd.Series):
        raise InputError(f"{where}: holdings: expected a pandas Series by asset, got {type(holdings).__name__}")
    if not pd.api.types.is_numeric_dtype(holdings) or not np.isfinite(holdings.to_numpy(dtype=np.float64)).all():
        bad = holdings.index[~np.isfinite(pd.to_numeric(holdings, errors="coerce").to_numpy(dtype=np.float64))]
        raise InputError(f"{where}: holdings: expected finite numbers; bad for assets: {list_labels(bad)}")
    nav = account.nav
    if account.kind == "shares":
        if prices is None:
            raise InputError(f"{where}: holdings in shares need prices (an attributes price column)")
        missing = holdings.index.difference(prices.index)
        if len(missing):
            raise InputError(f"{where}: holdings: no price for assets: {list_labels(missing)}")
        value = holdings * prices.reindex(holdings.index)
        cash = _number(account.cash, f"{where}: cash", low=0.0)
        if nav is None:
            nav = float(value.sum()) + cash
    if nav is None:
        raise InputError(f"{where}: nav missing (the account's value, currency)")
    nav = _number(nav, f"{where}: nav", low=0.0)
    if nav <= 0:
        raise InputError(f"{where}: nav: expected a positive value (currency), got {nav!r}")
    weights = (value / nav) if account.kind == "shares" else holdings.astype(np.float64)
    return weights.rename("weight"), nav
