"""An invented alpha history with real skill for the demo's backtest (deterministic from the fund's seed).

At each rebalance date t the alpha has two parts:

- **skill**: scores zᵢₜ = IC·uᵢₜ + √(1 − IC²)·eᵢₜ, where uᵢₜ is asset i's specific return over the
  next holding period (t, t + h], standardised by its true volatility, and eᵢₜ ~ N(0, 1); so
  corr(zₜ, uₜ) = IC. The alpha is IC·σᵢ·√(P/h)·zᵢₜ, annualised: the expected specific return over
  the period given the score (Grinold's rule, alpha = IC × volatility × score, from memory);
- **theme**: a tilt c·qᵢ toward a characteristic q ~ N(0, 1) the risk model does not carry. The
  backtest's market moves with it: its returns are the demo's returns plus θₜ·qᵢ, θₜ ~ N(0, σ²/P)
  less their sample mean, so the tilt costs risk and earns exactly nothing over the sample (any
  value added is the skill's). That is the part of the alpha
  deliberately outside the factor span: the model calls it specific and diversifiable, the market
  does not.

Pure: :func:`trimtab.scenario._demo_files.write_demo` writes the files.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from trimtab.demo import INFORMATION_COEFFICIENT, PERIODS_PER_YEAR, DemoFund

#: Information coefficient of the skill scores against the next period's specific returns.
HISTORY_IC = INFORMATION_COEFFICIENT
#: The backtest's schedule: a trailing window of this many days, then a rebalance every EVERY days.
WINDOW = 250
EVERY = 21
#: Annualised alpha per unit of the theme characteristic q.
THEME_TILT = 0.01
#: Annualised volatility of the theme's return θ (mean 0).
THEME_VOLATILITY = 0.065


@dataclass(frozen=True, eq=False)
class AlphaHistory:
    """The demo's alpha by rebalance date and the market the backtest runs on.

    Attributes
    ----------
    alpha : pandas.DataFrame
        Rebalance dates × assets, annualised alpha (skill + theme); NaN before an asset lists.
    scores : pandas.DataFrame
        The skill scores z (dates × assets).
    realised : pandas.DataFrame
        uᵢₜ: each asset's specific return over the holding period after each date, standardised by
        its true volatility (what the scores forecast; NaN when the asset has no return then).
    theme_exposure : pandas.Series
        q by asset, the characteristic the risk model does not carry.
    theme_returns : pandas.Series
        θ by day.
    returns : pandas.DataFrame
        The backtest's market: the fund's returns plus θₜ·qᵢ.
    information_coefficient : float
    """

    alpha: pd.DataFrame
    scores: pd.DataFrame
    realised: pd.DataFrame
    theme_exposure: pd.Series
    theme_returns: pd.Series
    returns: pd.DataFrame
    information_coefficient: float


def make_alpha_history(fund: DemoFund, *, information_coefficient: float = HISTORY_IC) -> AlphaHistory:
    """Simulate the alpha history of the demo fund's backtest (see the module notes).

    The generator draws from its own stream (seeded by the fund's seed), so the fund itself is the
    one :func:`trimtab.demo.make_demo_fund` gives.
    """
    rng = np.random.default_rng([fund.seed, 24])
    returns = fund.returns
    dates, assets = returns.index, returns.columns
    specific = returns.to_numpy() - fund.factor_returns.to_numpy() @ fund.exposures.to_numpy().T
    vol = np.sqrt(fund.specific_variance.reindex(assets).to_numpy())  # per day
    ic = float(information_coefficient)
    schedule = list(range(WINDOW - 1, len(dates), EVERY))
    scores, realised, alpha = [], [], []
    q = rng.normal(size=len(assets))
    listed = ~np.isnan(returns.to_numpy())
    for k, row in enumerate(schedule):
        end = schedule[k + 1] if k + 1 < len(schedule) else len(dates) - 1
        h = max(end - row, 1)
        held = specific[row + 1 : end + 1]
        have = listed[row + 1 : end + 1].all(axis=0) & listed[row] if end > row else np.zeros(len(assets), bool)
        u = np.where(have, np.nansum(held, axis=0) / (vol * np.sqrt(h)), np.nan)
        z = ic * np.nan_to_num(u) + np.sqrt(1.0 - ic**2) * rng.normal(size=len(assets))
        skill = ic * vol * np.sqrt(PERIODS_PER_YEAR) * np.sqrt(PERIODS_PER_YEAR / h) * z
        value = np.where(listed[row], skill + THEME_TILT * q, np.nan)
        scores.append(z)
        realised.append(u)
        alpha.append(value)
    index = dates[schedule]
    theta = rng.normal(0.0, THEME_VOLATILITY / np.sqrt(PERIODS_PER_YEAR), size=len(dates))
    theta -= theta.mean()  # the theme earns exactly nothing over the sample: it adds risk, not return
    market = returns + np.outer(theta, q)
    return AlphaHistory(
        alpha=pd.DataFrame(alpha, index=index, columns=assets),
        scores=pd.DataFrame(scores, index=index, columns=assets),
        realised=pd.DataFrame(realised, index=index, columns=assets),
        theme_exposure=pd.Series(q, index=assets, name="theme"),
        theme_returns=pd.Series(theta, index=dates, name="theme"),
        returns=market,
        information_coefficient=ic,
    )


def alpha_long(history: AlphaHistory) -> pd.DataFrame:
    """The alpha history as a long table: date (YYYY-MM-DD), asset, alpha; assets not yet listed left out."""
    frame = history.alpha.copy()
    frame.index = pd.DatetimeIndex(frame.index).strftime("%Y-%m-%d")
    long = frame.rename_axis(index="date", columns="asset").stack().rename("alpha").reset_index()
    return long.dropna(subset=["alpha"])
