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
* orders below the noise floor are dropped: half a lot (half a share for the sale of a whole
  position);
* a repair then adds or removes single lots, cheapest for the objective first, until every hard limit
  holds on the rounded book within its rounding tolerance and the cash after trades and costs is at
  least ``orders.min_cash`` (:mod:`trimtab.construct._rounded_book`, :mod:`trimtab.construct._repair`);
* the rounded book is verified with plain numpy against each limit itself plus its tolerance. When
  no rounded book holds them all, the list is still returned with ``ok`` False and the breached
  limits in :attr:`TradeList.breached`: the orders are not fit to send.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import numpy as np
import pandas as pd

from trimtab.construct._lots import rounded_weights
from trimtab.construct._repair import ROUNDING_TOLERANCE
from trimtab.construct._rounded_book import BookModel, book_limits, repair_book, verification_table
from trimtab.construct.constraints._base import Rows

#: A trade no larger than this (fraction of NAV) is no trade.
TRADE_TOL = 1e-10
#: Share counts within this of a whole number are that whole number (float noise of w·NAV/price).
SHARE_SNAP = 1e-6

ORDER_COLUMNS = ["side", "shares", "lot", "price", "notional", "cost_bp", "cost", "adv_percent", "weight_before",
                 "weight_after", "weight_change"]


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
        Every hard limit on the rounded book against the limit itself plus its tolerance: name,
        kind, value, lower, upper, breach, tolerance, excess (beyond the tolerance), soft, ok; the
        row ``cash_after_costs`` holds the cash after trades and costs (fraction of NAV).
    nav : float
    cash_before, cash_optimal, cash_after : float
        NAV·(1 − Σw) of the holdings, of the optimizer's book and of the rounded book (currency,
        before costs).
    moves : pandas.DataFrame
        The largest weight changes rounding and its repair made: index asset; optimal, rounded, change.
    min_cash : float
        The least cash after trades and costs (currency).
    one_lot : float or None
        Fully invested: the cash after costs may exceed ``min_cash`` by at most this (the largest lot
        the book could still buy, currency); None when the scenario is not fully invested.
    """

    orders: pd.DataFrame
    weights: pd.Series
    verification: pd.DataFrame
    nav: float
    cash_before: float
    cash_optimal: float
    cash_after: float
    moves: pd.DataFrame
    min_cash: float = 0.0
    one_lot: float | None = None

    @property
    def ok(self) -> bool:
        """Every limit holds on the rounded book: the orders are fit to send."""
        return bool(self.verification["ok"].all())

    @property
    def breached(self) -> pd.DataFrame:
        """The limits the rounded book breaches beyond their tolerance (empty when fit to send)."""
        return self.verification[~self.verification["ok"].astype(bool)]

    def _side(self, side: str) -> float:
        rows = self.orders[self.orders["side"] == side]
        return float(rows["notional"].sum())

    @property
    def buys(self) -> float:
        """Σ notional of the buy orders (currency)."""
        return self._side("buy")

    @property
    def sells(self) -> float:
        """Σ notional of the sell orders (currency), positions sold outside the optimizer included."""
        return self._side("sell")

    @property
    def costs(self) -> float:
        """Σ estimated cost of the orders (currency; spread, commission, impact)."""
        return float(self.orders["cost"].fillna(0.0).sum())

    @property
    def cash_after_costs(self) -> float:
        """cash before − buys + sells − costs (currency), from the orders as written."""
        return self.cash_before - self.buys + self.sells - self.costs

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
    model: BookModel,
    adv: np.ndarray | None = None,
    sold_outside: pd.Series | None = None,
    min_cash: float = 0.0,
    fully_invested: bool = False,
    tolerances: Mapping[str, float] | None = None,
    method: str = "auto",
    top_moves: int = 10,
) -> TradeList:
    """Round the trades ``target − holdings`` to whole lots, repair the rounded book until every limit
    holds, and verify it.

    Parameters
    ----------
    assets : pandas.Index
        The model's assets (length N).
    holdings, target : ndarray, shape (N,)
        Weights of NAV before and after (the optimizer's verified weights).
    nav : float
        The fund's value in currency.
    price : ndarray, shape (N,)
        Prices in the fund's currency: positive on every asset held or traded, NaN on an asset whose
        price is unusable (it is then neither bought nor sold).
    lot : ndarray, shape (N,), optional
        Lot sizes in shares (positive, NaN as for price); one share when None.
    lower, upper : ndarray, shape (N,)
        The hard per-asset weight bounds, which rounding keeps.
    rows : sequence of Rows
        Every limit of the scenario, checked on the rounded book.
    model : BookModel
        The factor form, objective and cost model (:func:`trimtab.construct._rounded_book.book_model`).
    adv : ndarray, shape (N,), optional
        Average daily volume in shares (positive on every asset traded).
    sold_outside : pandas.Series, optional
        Weights of held assets the model lacks, sold outside the optimizer (``unknown_assets: zero``):
        listed as sells of the whole position with their notional; shares and price unknown (NaN).
    min_cash : float, default 0
        Least cash after trades and costs, fraction of NAV.
    fully_invested : bool, default False
        The scenario is fully invested: the cash left after costs is at most one lot above ``min_cash``.
    tolerances : mapping, optional
        Rounding tolerance per kind (weight, exposure, beta, risk); defaults ROUNDING_TOLERANCE.
    method : {"auto", "greedy", "milp"}
        The repair search (module docstring of :mod:`trimtab.construct._repair`).

    Returns
    -------
    TradeList

    Notes
    -----
    One lot of asset i is ``lotᵢ·priceᵢ / NAV`` of weight; the rounded weight is
    ``w0ᵢ + kᵢ·lotᵢ·priceᵢ / NAV`` with kᵢ whole. An order below half a lot (half a share for the
    sale of a whole odd-lot position) is noise and dropped before the repair.
    """
    lots = np.ones_like(price) if lot is None else np.asarray(lot, dtype=np.float64)
    usable = np.isfinite(price) & (price > 0) & np.isfinite(lots) & (lots > 0)
    share_w = np.where(usable, np.where(usable, price, 1.0) / nav, 0.0)
    lot_w = np.where(usable, lots, 0.0) * share_w
    still = ~usable | (np.abs(target - holdings) <= TRADE_TOL)
    safe_lot = np.where(usable, lot_w, 1.0)
    w = rounded_weights(holdings, np.where(still, holdings, target), safe_lot, lower, upper)
    w = _keep_cash(holdings, target, w, lot_w, lower, upper)
    w = drop_noise(holdings, w, lot_w, share_w, usable)
    buyable = usable & (w + lot_w <= upper + 1e-12)
    lot_room = float(np.max(lot_w[buyable], initial=0.0)) if fully_invested else None
    tol = {**ROUNDING_TOLERANCE, **dict(tolerances or {})}
    repair, boxes = book_limits(rows, model, holdings, min_cash=min_cash, fully_invested_lot=lot_room, tolerances=tol)
    exited = (np.abs(w) <= TRADE_TOL) & (np.abs(holdings) > TRADE_TOL)  # whole position sold: stays off the lot grid
    w = repair_book(w, holdings, lot_w, lower, upper, usable & ~exited, repair, model, method=method)
    w = drop_noise(holdings, w, lot_w, share_w, usable)
    trade_w = w - holdings
    shares = np.where(usable, trade_w * nav / np.where(usable, price, 1.0), 0.0)
    snapped = np.round(shares)
    shares = np.where(np.abs(shares - snapped) < SHARE_SNAP * np.maximum(1.0, np.abs(snapped)), snapped, shares)
    exits = (np.abs(w) <= TRADE_TOL) & (np.abs(holdings) > TRADE_TOL)
    shares = np.where(exits, np.round(shares), shares)
    traded = np.abs(trade_w) > TRADE_TOL
    notional = np.round(np.abs(shares) * np.where(usable, price, 0.0), 2)  # currency, to the cent
    frame = pd.DataFrame(
        {
            "side": np.where(trade_w > 0, "buy", "sell"),
            "shares": np.abs(shares),
            "lot": lots,
            "price": price,
            "notional": notional,
            "cost_bp": 0.0,
            "cost": 0.0,
            "adv_percent": np.nan,
            "weight_before": holdings,
            "weight_after": w,
            "weight_change": trade_w,
        },
        index=pd.Index(assets, name="asset"),
    )
    amount = model.cost(trade_w) * nav
    frame["cost"] = np.round(amount, 2)
    frame["cost_bp"] = np.round(np.divide(1e4 * amount, notional, out=np.zeros_like(amount), where=notional > 0), 4)
    if adv is not None:
        volume = np.where(traded, adv, 1.0)  # ADV is checked > 0 on every asset traded
        frame["adv_percent"] = np.round(100.0 * np.abs(shares) / volume, 4)
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
    soft = [r for r in rows if r.soft is not None]
    cash_before = float(nav * (1.0 - holdings.sum() - (0.0 if sold_outside is None else float(sold_outside.sum()))))
    return TradeList(
        orders=orders,
        weights=pd.Series(w, index=assets, name="weight"),
        verification=verification_table([*repair, *boxes], soft, w),
        nav=float(nav),
        cash_before=cash_before,
        cash_optimal=float(nav * (1.0 - target.sum())),
        cash_after=float(nav * (1.0 - w.sum())),
        moves=moves,
        min_cash=float(min_cash * nav),
        one_lot=None if lot_room is None else float(lot_room * nav),
    )


def drop_noise(w0: np.ndarray, w: np.ndarray, lot_w: np.ndarray, share_w: np.ndarray, usable: np.ndarray) -> np.ndarray:
    """Cancel orders below the noise floor: half a lot, or half a share for the sale of a whole
    position (an odd-lot exit); an asset without a usable price or lot keeps w0."""
    trade = np.abs(w - w0)
    exit_ = (np.abs(w) <= TRADE_TOL) & (np.abs(w0) > TRADE_TOL)
    floor = np.where(exit_, 0.5 * share_w, 0.5 * lot_w)
    return np.where(usable & (trade >= floor), w, w0)


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
