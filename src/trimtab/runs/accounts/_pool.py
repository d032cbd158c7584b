"""The pooled trade: its size per name, the impact price it sets, and the sharing of an aggregate cap.

Pure numpy, no solver. With qₖᵢ = tₖᵢ·NAVₖ/priceᵢ the shares account k trades in name i:

- pooled gross Gᵢ = Σₖ |qₖᵢ| (buys and sells are not crossed between client accounts: crossing
  between managed accounts is restricted in many jurisdictions, and not crossing is the cautious
  assumption for impact);
- impact price πᵢ = ηᵢ·√(Gᵢ/ADVᵢ) as a fraction of the price (the square-root law of market
  impact, common practice; coefficient from the user), paid on every share of the block, so account
  k pays πᵢ·|tₖᵢ| of its NAV;
- the equilibrium: the accounts solved at prices π give trades whose pool sets the same prices,
  π = η·√(G(π)/ADV) (O'Cinneide, Scherer and Xu, "Pooling trades in a quantitative investment
  process", J. Portfolio Management, 2006; cited from memory). Each account takes the price as given,
  so the equilibrium is also the optimum of one joint problem, Σₖ NAVₖ·Uₖ − κ·Σᵢ priceᵢ·∫₀^{Gᵢ} ηᵢ√(x/ADVᵢ) dx
  (the pool's impact cost counted at ⅔ of its value; docs/accounts.md explains the difference with a
  joint solve that charges the full cost).

An aggregate cap C = f·ADV binds on a name when the accounts' demands D (their trades before the cap
was imposed on that name, at the prices of that round) sum over C. The cap is then shared: a forced
trade (selling an excluded name) is granted first, in full; the rest of the cap goes pro rata to the
remaining demand |Dₖ| − forcedₖ. A forced trade is the least trade that brings a position inside
the account's own position limits (an excluded name sold to zero, a weight above its cap sold down).
"""

from __future__ import annotations

import numpy as np


def pooled_shares(trades: np.ndarray, navs: np.ndarray, prices: np.ndarray) -> np.ndarray:
    """Shares traded, accounts × assets (signed), from trades in weights of each account's NAV."""
    return trades * navs[:, None] / prices[None, :]


def impact_price(eta: np.ndarray, gross: np.ndarray, adv: np.ndarray) -> np.ndarray:
    """πᵢ = ηᵢ·√(Gᵢ/ADVᵢ): the impact of the pooled block, a fraction of the price (0 where ADV is 0)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        out = eta * np.sqrt(np.where(adv > 0, gross / adv, 0.0))
    return np.nan_to_num(out, nan=0.0, posinf=0.0)


def share_cap(cap: float, demand: np.ndarray, forced: np.ndarray) -> np.ndarray:
    """Shares of one name allotted to each account under a cap of ``cap`` shares.

    Parameters
    ----------
    cap : float
        Gross shares all accounts together may trade.
    demand : numpy.ndarray
        Each account's |shares| wanted in this name before the cap.
    forced : numpy.ndarray
        Shares each account must trade to meet its own position limits; granted first.

    Returns
    -------
    numpy.ndarray
        Allotted shares, Σ ≤ cap: forced trades first (pro rata among themselves when they alone
        exceed the cap, so those accounts cannot solve and are reported), the rest pro rata to
        demand − forced.
    """
    demand = np.abs(demand)
    forced = np.abs(forced)
    if float(forced.sum()) >= cap:
        return forced * (cap / float(forced.sum())) if forced.sum() > 0 else np.zeros_like(forced)
    left = cap - float(forced.sum())
    extra = np.maximum(demand - forced, 0.0)
    total = float(extra.sum())
    if total <= 0.0:
        return forced.copy()
    return forced + extra * min(1.0, left / total)
