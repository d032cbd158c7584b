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

The prices are found by a damped fixed-point (Krasnosel'skiĭ–Mann) iteration, π ← π + θ·(π̂(π) − π),
π̂ = η√(G(π)/ADV), one step size θᵢ per name (:func:`damped_prices`). Its fixed points are those of π̂
for any θ > 0, so damping changes how the rounds get there, not where they end. It is needed because
an account's trade can fall steeply, or jump, as its price rises (an objective linear in the weights
moves its turnover from one name to another at a threshold): the plain step π ← π̂ then overshoots
back and forth for ever. Each θᵢ starts at 1 (the plain step), is halved when name i's residual
changes sign (the step overshot), and grows by 1.25 (up to 1) while it keeps its sign, so a name that
settles steadily is not slowed for good (the sign rule of adaptive step sizes, common practice in
iterative methods). Halving also when a residual grows was tried: other names' moves make residuals
grow without an overshoot, the steps collapsed and the 3-account test case stalled near 6e-8.

An aggregate cap C = f·ADV binds on a name when the accounts' demands D (their trades in the first
round, before any cap) sum over C. From then on every name's cap is shared out (:func:`share_caps`),
so no name can go over its cap as the accounts move their trades elsewhere: where the demands exceed
the cap, a forced trade is granted first, in full, and the rest of the cap goes pro rata to the
remaining demand |Dₖ| − forcedₖ; where the cap has room, each account keeps its demand and the room
is shared by NAV. A forced trade is the least trade that brings a position inside
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


def share_caps(cap: np.ndarray, demand: np.ndarray, forced: np.ndarray, navs: np.ndarray) -> np.ndarray:
    """Shares of every name allotted to each account under the caps (accounts × names).

    Parameters
    ----------
    cap : numpy.ndarray
        Gross shares all accounts together may trade, per name.
    demand : numpy.ndarray
        Each account's |shares| wanted per name before the caps (accounts × names).
    forced : numpy.ndarray
        Shares each account must trade to meet its own position limits (accounts × names).
    navs : numpy.ndarray
        The accounts' NAVs.

    Returns
    -------
    numpy.ndarray
        Allotted shares; every column sums to at most its cap. Where the demands exceed the cap:
        forced trades first (pro rata among themselves when they alone exceed it), the rest pro rata
        to demand − forced. Where the cap has room: each account keeps its demand, and the room left
        is shared by NAV, so an account can still move into a name it did not want at first.
    """
    demand = np.maximum(np.abs(demand), np.abs(forced))
    forced = np.abs(forced)
    total = demand.sum(axis=0)
    out = demand + np.maximum(cap - total, 0.0)[None, :] * (navs / navs.sum())[:, None]
    for i in np.flatnonzero(total > cap):
        need = float(forced[:, i].sum())
        if need >= cap[i]:
            out[:, i] = forced[:, i] * (cap[i] / need) if need > 0 else 0.0
            continue
        extra = demand[:, i] - forced[:, i]
        out[:, i] = forced[:, i] + extra * min(1.0, (cap[i] - need) / float(extra.sum()))
    return out


#: Step-size rule of :func:`damped_prices`: halve on an overshoot, grow by this while the sign holds.
THETA_SHRINK, THETA_GROW = 0.5, 1.25


def damped_prices(current: np.ndarray, target: np.ndarray,
                  memory: tuple[np.ndarray, np.ndarray] | None) -> tuple[np.ndarray, tuple[np.ndarray, np.ndarray]]:
    """The next impact prices, π ← max(π + θ·(π̂ − π), 0), θᵢ per name, and the memory for the next call.

    Parameters
    ----------
    current : numpy.ndarray
        πʳ, the prices the round's solves saw.
    target : numpy.ndarray
        π̂ = η√(G/ADV), the prices their pooled trade sets.
    memory : tuple, optional
        (θ, last residual) from the previous call; None in the first round (from zero prices the
        plain step, θ = 1, is taken).

    Notes
    -----
    θᵢ is halved when rᵢ = π̂ᵢ − πᵢ changes sign against the previous round (the step overshot), and
    multiplied by 1.25, up to 1, when it keeps its sign. Any θ > 0 leaves the fixed points π = π̂(π)
    unchanged.
    """
    residual = target - current
    if memory is None:
        theta = np.ones_like(current)
    else:
        theta, before = memory
        overshot = residual * before < 0
        theta = np.where(overshot, theta * THETA_SHRINK, np.minimum(theta * THETA_GROW, 1.0))
    return np.maximum(current + theta * residual, 0.0), (theta, residual)
