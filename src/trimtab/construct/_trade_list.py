"""The order-ready trade list: each trade rounded to whole shares (or whole lots), the rounded book
re-verified against every limit.

Pure: arrays and frames in, a :class:`TradeList` out; no files, no printing.

Rounding rule (see docs/outputs.md, "trades.csv"):

* a trade of t shares becomes a whole number of lots (``lot`` shares, one share when no lot size is
  known): the nearer of ⌊t/lot⌋ and ⌈t/lot⌉ that keeps the asset inside its hard weight bounds; an
  exit sells the whole position;
* the rounded book spends what the optimal one spends, as nearly as whole lots allow and never more:
  while it buys more (net), the trades rounded up furthest are rounded down; while it buys less, the
  trades rounded down furthest are rounded up when that does not overspend (so cash left ≥ the
  optimizer's, by less than the largest lot);
* the rounded book is checked with plain numpy against every limit of the scenario, plus the
  ``rounding`` check that each trade moved by less than one lot (an exit sells the whole position).
  A limit passes when its breach is within the verification tolerance (or the optimal book's own
  breach, for a book the ``round_lots`` heuristic already rounded) plus what rounding moved that quantity (each such case is a ``rounding`` warning). Anything else fails
  the run with the limit named.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
import pandas as pd

from trimtab.construct._heuristics import rounded_weights
from trimtab.construct.constraints._base import Rows, check_rows

#: A trade no larger than this (fraction of NAV) is no trade.
TRADE_TOL = 1e-10
#: Share counts within this of a whole number are that whole number (float noise of w·NAV/price).
SHARE_SNAP = 1e-6

ORDER_COLUMNS = ["side", "shares", "lot", "price", "notional", "cost_bp", "cost", "adv_percent", "weight_before",
                 "weight_after", "weight_change"]
VERIFICATION_COLUMNS = ["name", "kind", "value", "lower", "upper", "breach", "tolerance", "moved", "soft", "ok"]


@dataclass(frozen=True, eq=False)
class TradeList:
    """Orders a desk can send, and the book they produce.

    Attributes
    ----------
    orders : pandas.DataFrame
        Index ``asset``; only the assets that trade, largest notional first. Columns: ``side`` (buy or
        sell), ``shares`` (whole shares, a multiple of ``lot``), ``lot``, ``price``, ``notional``
        (shares·price, currency, to the cent), ``cost_bp`` (estimated cost in bp of the notional, four
        decimals), ``cost`` (currency, to the cent), ``adv_percent`` (shares as % of average daily
        volume, four decimals), ``weight_before``,
        ``weight_after``, ``weight_change`` (fractions of NAV). Cost and volume columns are NaN when
        the inputs lack them.
    weights : pandas.Series
        The rounded book: target weights after the orders, by model asset.
    verification : pandas.DataFrame
        Every limit on the rounded book: name, kind, value, lower, upper, breach, tolerance,
        moved (how far rounding moved the quantity), soft, ok.
    nav : float
    cash_before, cash_optimal, cash_after : float
        NAV·(1 − Σw) of the holdings, of the optimizer's book and of the rounded book (currency).
    moves : pandas.DataFrame
        The largest weight changes rounding made: index asset; optimal, rounded, change.
    """

    orders: pd.DataFrame
    weights: pd.Series
    verification: pd.DataFrame
    nav: float
    cash_before: float
    cash_optimal: float
    cash_after: float
    moves: pd.DataFrame

    @property
    def ok(self) -> bool:
        """Every limit holds on the rounded book."""
        return bool(self.verification["ok"].all())

    @property
    def n_buys(self) -> int:
        return int((self.orders["side"] == "buy").sum())

    @property
    def n_sells(self) -> int:
        return int((self.orders["side"] == "sell").sum())


def build_trade_list(
    *,
    assets: pd.Index,
    holdings: np.ndarray,
    target: np.ndarray,
    nav: float,
    price: np.ndarray,
    lot: np.ndarray | None,
    lower: np.ndarray,
    upper: np.ndarray,
    rows: Sequence[Rows],
    cost: Callable[[np.ndarray], np.ndarray] | None = None,
    adv: np.ndarray | None = None,
    sold_outside: pd.Series | None = None,
    top_moves: int = 10,
) -> TradeList:
    """Round the trades ``target − holdings`` to whole lots and verify the rounded book.

    Parameters
    ----------
    assets : pandas.Index
        The model's assets (length N).
    holdings, target : ndarray, shape (N,)
        Weights of NAV before and after (the optimizer's verified weights).
    nav : float
        The fund's value in currency.
    price : ndarray, shape (N,)
        Prices in the fund's currency, positive.
    lot : ndarray, shape (N,), optional
        Lot sizes in shares (positive); one share when None.
    lower, upper : ndarray, shape (N,)
        The hard per-asset weight bounds, which rounding keeps.
    rows : sequence of Rows
        Every limit of the scenario, checked on the rounded book.
    cost : callable, optional
        The cost model: trade weights (N,) → estimated cost per asset as a fraction of NAV.
    adv : ndarray, shape (N,), optional
        Average daily volume in shares.
    sold_outside : pandas.Series, optional
        Weights of held assets the model lacks, sold outside the optimizer (``unknown_assets: zero``):
        listed as sells of the whole position with their notional; shares and price unknown (NaN).

    Returns
    -------
    TradeList

    Notes
    -----
    One lot of asset i is ``lotᵢ·priceᵢ / NAV`` of weight; the rounded weight is
    ``w0ᵢ + kᵢ·lotᵢ·priceᵢ / NAV`` with kᵢ whole.
    """
    lots = np.ones_like(price) if lot is None else np.asarray(lot, dtype=np.float64)
    lot_w = lots * price / nav
    w = rounded_weights(holdings, target, lot_w, lower, upper)
    w = _keep_cash(holdings, target, w, lot_w, lower, upper)
    trade_w = w - holdings
    shares = trade_w * nav / price
    snapped = np.round(shares)
    shares = np.where(np.abs(shares - snapped) < SHARE_SNAP * np.maximum(1.0, np.abs(snapped)), snapped, shares)
    exits = (np.abs(w) <= TRADE_TOL) & (np.abs(holdings) > TRADE_TOL)
    shares = np.where(exits, np.round(shares), shares)
    traded = np.abs(trade_w) > TRADE_TOL
    notional = np.round(np.abs(shares) * price, 2)  # currency, to the cent
    frame = pd.DataFrame(
        {
            "side": np.where(trade_w > 0, "buy", "sell"),
            "shares": np.abs(shares),
            "lot": lots,
            "price": price,
            "notional": notional,
            "cost_bp": np.nan,
            "cost": np.nan,
            "adv_percent": np.nan,
            "weight_before": holdings,
            "weight_after": w,
            "weight_change": trade_w,
        },
        index=pd.Index(assets, name="asset"),
    )
    if cost is not None:
        amount = np.asarray(cost(trade_w), dtype=np.float64) * nav
        frame["cost"] = np.round(amount, 2)
        with np.errstate(divide="ignore", invalid="ignore"):
            frame["cost_bp"] = np.round(np.where(notional > 0, 1e4 * amount / notional, 0.0), 4)
    if adv is not None:
        with np.errstate(divide="ignore", invalid="ignore"):
            frame["adv_percent"] = np.round(100.0 * np.abs(shares) / np.asarray(adv, dtype=np.float64), 4)
    orders = frame[traded]
    if sold_outside is not None and len(sold_outside):
        extra = pd.DataFrame(
            {"side": "sell", "shares": np.nan, "lot": np.nan, "price": np.nan,
             "notional": np.round(sold_outside.to_numpy(dtype=np.float64) * nav, 2), "cost_bp": np.nan, "cost": np.nan,
             "adv_percent": np.nan, "weight_before": sold_outside.to_numpy(dtype=np.float64), "weight_after": 0.0,
             "weight_change": -sold_outside.to_numpy(dtype=np.float64)},
            index=pd.Index(sold_outside.index, name="asset"),
        )
        orders = pd.concat([orders, extra])
    orders = orders.iloc[np.argsort(-orders["notional"].to_numpy(), kind="stable")]
    for column in ("shares", "lot"):
        values = orders[column].to_numpy(dtype=np.float64)
        if np.all(np.mod(values, 1.0) == 0):
            orders = orders.astype({column: np.int64})
        elif np.all(np.mod(values[np.isfinite(values)], 1.0) == 0):
            orders = orders.astype({column: "Int64"})  # whole numbers, missing for positions sold outside
    change = w - target
    moves = pd.DataFrame({"optimal": target, "rounded": w, "change": change}, index=pd.Index(assets, name="asset"))
    moves = moves.iloc[np.argsort(-np.abs(change), kind="stable")[:top_moves]]
    moves = moves[moves["change"].abs() > 0]
    return TradeList(
        orders=orders,
        weights=pd.Series(w, index=assets, name="weight"),
        verification=verify_rounded([*rows, rounding_rows(pd.Index(assets), target, holdings, lot_w)], target, w),
        nav=float(nav),
        cash_before=float(nav * (1.0 - holdings.sum() - (0.0 if sold_outside is None else float(sold_outside.sum())))),
        cash_optimal=float(nav * (1.0 - target.sum())),
        cash_after=float(nav * (1.0 - w.sum())),
        moves=moves,
    )


def _keep_cash(w0: np.ndarray, target: np.ndarray, w: np.ndarray, lot_w: np.ndarray, lo: np.ndarray,
               hi: np.ndarray) -> np.ndarray:
    """Spend what the optimal book spends, within one lot per trade: while the rounded book buys more
    (net) than the optimal one, round down the trades rounded up furthest; while it buys less, round
    up the trades rounded down furthest, as long as that does not overspend."""
    out = w.copy()
    excess = float(out.sum() - target.sum())
    traded = np.abs(out - w0) > TRADE_TOL
    if excess > 0:
        step = out - lot_w
        can = traded & (out - target > 0) & (step >= lo - 1e-12) & (step <= hi + 1e-12)
        for i in np.flatnonzero(can)[np.argsort(-(out - target)[can], kind="stable")]:
            if excess <= 0:
                break
            out[i] -= lot_w[i]
            excess -= lot_w[i]
    elif excess < 0:
        step = out + lot_w
        can = traded & (out - target < 0) & (np.abs(target) > TRADE_TOL) & (step >= lo - 1e-12) & (step <= hi + 1e-12)
        for i in np.flatnonzero(can)[np.argsort((out - target)[can], kind="stable")]:
            if excess + lot_w[i] > 0:
                continue
            out[i] += lot_w[i]
            excess += lot_w[i]
    return out


def rounding_rows(assets: pd.Index, optimal: np.ndarray, w0: np.ndarray, lot_w: np.ndarray) -> Rows:
    """The per-asset check that rounding moved each trade by less than one lot (exits excepted)."""
    exits = (np.abs(optimal) <= TRADE_TOL) & (np.abs(w0) > TRADE_TOL)
    n = len(assets)
    return Rows(name="rounding", kind="rounding", unit="lots", labels=assets, per_asset=True,
                lower=np.full(n, -1.0), upper=np.full(n, 1.0),
                evaluate=lambda v: np.where(exits, 0.0, (v - optimal) / lot_w))


def _constant(value: np.ndarray) -> Callable[[np.ndarray], np.ndarray]:
    """An ``evaluate`` that returns a value already computed."""
    return lambda _weights: value


def verify_rounded(rows: Sequence[Rows], optimal: np.ndarray, rounded: np.ndarray) -> pd.DataFrame:
    """Every limit on the rounded book, with how far rounding moved it (the module docstring's rule)."""
    records = []
    for r in rows:
        if r.kind == "rounding":  # its own limit, no allowance
            record = check_rows(r, rounded)
            records.append({**record, "moved": 0.0})
            continue
        before = np.asarray(r.evaluate(optimal), dtype=np.float64)
        after = np.asarray(r.evaluate(rounded), dtype=np.float64)
        record = check_rows(replace(r, evaluate=_constant(after)), rounded)  # evaluated once
        moved = float(np.max(np.abs(after - before), initial=0.0))
        # the optimal book passed its own verification (a round_lots book with its rounding allowance)
        breach_before = float(np.max(r.breach(before), initial=0.0))
        within = record["breach"] <= max(record["tolerance"], breach_before) + moved
        record["moved"] = moved
        record["ok"] = bool(record["soft"] or record["ok"] or within)
        records.append(record)
    return pd.DataFrame.from_records(records, columns=VERIFICATION_COLUMNS)


def weight_orders(trades: pd.DataFrame) -> pd.DataFrame:
    """The trade list in weights, for a fund without NAV or prices: only the assets that trade,
    largest first; columns side, weight_before, weight_after, weight_change (fractions of NAV) and,
    when known, cost (fraction of NAV)."""
    moved = trades[trades["trade"].abs() > TRADE_TOL]
    frame = pd.DataFrame(
        {
            "side": np.where(moved["trade"] > 0, "buy", "sell"),
            "weight_before": moved["initial_weight"],
            "weight_after": moved["target_weight"],
            "weight_change": moved["trade"],
        },
        index=moved.index,
    )
    if "cost" in moved.columns:
        frame["cost_of_nav"] = moved["cost"]
    frame.index.name = "asset"
    return frame.iloc[np.argsort(-frame["weight_change"].abs().to_numpy(), kind="stable")]
