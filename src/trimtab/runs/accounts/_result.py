"""The result of a many-account rebalance: one summary row per account, the targets, the orders, the blocks."""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError
from trimtab.runs.accounts._worker import ORDER_NOISE, STATUS_SOLVED

#: The summary's columns, in order.
SUMMARY_COLUMNS = ("status", "reason", "conflict", "nav", "tracking_error", "expected_alpha", "turnover", "cost",
                   "orders", "cash_after", "given_up", "solver", "iterations", "seconds")


@dataclass(frozen=True, eq=False)
class AccountsResult:
    """Many accounts rebalanced together on one model.

    Attributes
    ----------
    summary : pandas.DataFrame
        One row per account (input order): ``status`` (solved, infeasible, failed, solver failure),
        ``reason`` and ``conflict`` (the limits that cannot all hold) when not solved, ``nav``,
        forecast ``tracking_error`` and ``expected_alpha`` (annualised, from the weights),
        one-way ``turnover``, estimated ``cost`` (fraction of NAV, pooled impact included),
        ``orders`` (names traded), ``cash_after`` (currency, after the trades and their
        estimated costs), ``given_up`` (notional
        the aggregate cap cut from the account's trades, fraction of its NAV), ``seconds``.
    weights : pandas.DataFrame
        Target weights, assets × solved accounts.
    orders : pandas.DataFrame
        account, asset, side (buy/sell), shares (> 0), price, notional (currency, > 0), cost
        (currency, estimated).
    blocks : pandas.DataFrame
        By asset traded: bought, sold, net, gross (shares), adv, pct_adv (gross/ADV), cap (shares;
        NaN without an aggregate cap), capped (the cap was shared out), impact_price (fraction of
        the price).
    given_up : pandas.DataFrame
        For every capped name and account: demand (shares wanted before the cap), allotted,
        given_up (shares) and given_up_notional (currency).
    rounds : int
        Rounds of the equilibrium (one solve of every account each).
    converged : bool
        The pooled trades settled within the tolerance (always True without pooled impact).
    convergence : pandas.DataFrame
        Per round: price_change (largest move of an impact price, fraction of the price),
        capped (names capped so far), solved.
    relaxations : pandas.DataFrame
        For every infeasible account, its relaxation options (the rebalance's relaxation table with
        an ``account`` column first): which limit to move, and how far, to make it solvable.
    """

    summary: pd.DataFrame
    weights: pd.DataFrame
    orders: pd.DataFrame
    blocks: pd.DataFrame
    given_up: pd.DataFrame
    rounds: int
    converged: bool
    convergence: pd.DataFrame
    settings: Mapping[str, Any] = field(default_factory=dict)
    _results: dict[str, Any] = field(default_factory=dict, repr=False)
    _resolve: Callable[[str], Any] | None = field(default=None, repr=False)
    relaxations: pd.DataFrame = field(default_factory=lambda: pd.DataFrame(columns=["account"]))

    def __getitem__(self, name: str) -> Any:
        """The account's own :class:`~trimtab.RebalanceResult` (re-solved here when it ran on workers)."""
        if name not in self.summary.index:
            raise InputError(f"accounts: no account {name!r}")
        if self.summary.at[name, "status"] != STATUS_SOLVED:
            raise InputError(f"accounts: account {name!r} was not solved ({self.summary.at[name, 'status']}: "
                             f"{self.summary.at[name, 'reason']})")
        if name not in self._results and self._resolve is not None:
            self._results[name] = self._resolve(name)
        return self._results[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self.summary.index)

    def __len__(self) -> int:
        return len(self.summary)

    @property
    def failed(self) -> pd.DataFrame:
        """The accounts that were not solved, with status, reason and conflict set."""
        bad = self.summary[self.summary["status"] != STATUS_SOLVED]
        return bad[["status", "reason", "conflict"]]

    @property
    def n_solved(self) -> int:
        return int((self.summary["status"] == STATUS_SOLVED).sum())

    def describe(self) -> str:
        """A few lines: how many solved, the spread of TE and alpha, the rounds, the binding caps."""
        s = self.summary
        solved = s[s["status"] == STATUS_SOLVED]
        lines = [f"{self.n_solved} of {len(s)} accounts solved; {len(self.orders)} orders in {len(self.blocks)} names"]
        if len(solved):
            te, al = solved["tracking_error"], solved["expected_alpha"]
            lines.append(f"tracking error {te.min():.2%} to {te.max():.2%} (median {te.median():.2%}); "
                         f"expected alpha {al.min():.2%} to {al.max():.2%} (median {al.median():.2%})")
        state = "settled" if self.converged else "did NOT settle"
        lines.append(f"pooled trades {state} after {self.rounds} round{'s' if self.rounds != 1 else ''}")
        if len(self.blocks) and self.blocks["capped"].any():
            lines.append(f"aggregate cap shared out in {int(self.blocks['capped'].sum())} names; "
                         f"{int((self.given_up['given_up'] > 0).sum())} account-name pairs gave up trades")
        for name, row in self.failed.iterrows():
            lines.append(f"  {name}: {row['status']}: {row['reason']}")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.describe()


def build_result(
    answers: Mapping[str, dict[str, Any]], order: list[str], model: Any, prices: np.ndarray | None,
    adv: np.ndarray | None, cap: np.ndarray | None, capped: np.ndarray, pool_price: np.ndarray | None,
    given_up: pd.DataFrame, rounds: int, converged: bool, convergence: list[dict[str, Any]],
    settings: Mapping[str, Any], resolve: Callable[[str], Any] | None,
) -> AccountsResult:
    """Assemble the tables from the final round's answers."""
    assets = model.assets
    rows, weights, order_frames, results, relaxations = [], {}, [], {}, []
    cut = given_up.groupby("account")["given_up_notional"].sum() if len(given_up) else pd.Series(dtype=float)
    for name in order:
        a = answers[name]
        row = {k: a.get(k) for k in SUMMARY_COLUMNS}
        row["conflict"] = "; ".join(a["conflict"]) if a.get("conflict") else ""
        if a["status"] == STATUS_SOLVED:
            w = a["weights"]
            weights[name] = w
            row["given_up"] = float(cut.get(name, 0.0)) / a["nav"]
            order_frames.append(_orders(name, w - a["holdings"], a["nav"], prices, a.get("costs"), assets))
            if "result" in a:
                results[name] = replace(a["result"], _model=model)
        if a.get("relaxation") is not None:
            relaxations.append(a["relaxation"].assign(account=name))
        rows.append(row)
    summary = pd.DataFrame(rows, index=pd.Index(order, name="account"), columns=list(SUMMARY_COLUMNS))
    weight_frame = pd.DataFrame(weights, index=assets)
    weight_frame.columns.name = "account"
    orders = pd.concat(order_frames, ignore_index=True) if order_frames else _orders("", np.zeros(0), 1.0, None, None, assets[:0])
    blocks = _blocks(orders, assets, adv, cap, capped, pool_price)
    return AccountsResult(summary, weight_frame, orders, blocks, given_up, rounds, converged,
                          pd.DataFrame(convergence).set_index("round") if convergence else pd.DataFrame(),
                          dict(settings), results, resolve, relaxations=_relaxations(relaxations))


def _relaxations(frames: list[pd.DataFrame]) -> pd.DataFrame:
    """Every infeasible account's relaxation options, the account first."""
    if not frames:
        return pd.DataFrame(columns=["account"])
    table = pd.concat(frames, ignore_index=True)
    return table[["account", *[c for c in table.columns if c != "account"]]]


def _orders(name: str, trade: np.ndarray, nav: float, prices: np.ndarray | None, costs: np.ndarray | None,
            assets: pd.Index) -> pd.DataFrame:
    where = np.flatnonzero(np.abs(trade) > ORDER_NOISE)
    t = trade[where]
    notional = np.abs(t) * nav
    price = prices[where] if prices is not None else np.full(len(where), np.nan)
    cost = costs[where] * nav if costs is not None else np.zeros(len(where))
    return pd.DataFrame({
        "account": name, "asset": assets[where], "side": np.where(t > 0, "buy", "sell"),
        "shares": notional / price, "price": price, "notional": notional, "cost": cost,
    })


def _blocks(orders: pd.DataFrame, assets: pd.Index, adv: np.ndarray | None, cap: np.ndarray | None,
            capped: np.ndarray, pool_price: np.ndarray | None) -> pd.DataFrame:
    signed = orders["shares"].where(orders["side"] == "buy", -orders["shares"])
    frame = pd.DataFrame({"asset": orders["asset"], "bought": orders["shares"].where(orders["side"] == "buy", 0.0),
                          "sold": orders["shares"].where(orders["side"] == "sell", 0.0), "net": signed})
    blocks = frame.groupby("asset", sort=False)[["bought", "sold", "net"]].sum()
    blocks["gross"] = blocks["bought"] + blocks["sold"]
    pos = assets.get_indexer(blocks.index)
    blocks["adv"] = adv[pos] if adv is not None else np.nan
    with np.errstate(divide="ignore", invalid="ignore"):
        blocks["pct_adv"] = blocks["gross"] / blocks["adv"]
    blocks["cap"] = cap[pos] if cap is not None else np.nan
    blocks["capped"] = capped[pos] if len(capped) else False
    blocks["impact_price"] = pool_price[pos] if pool_price is not None else 0.0
    blocks.index.name = "asset"
    return blocks.sort_values("pct_adv", ascending=False) if adv is not None else blocks
