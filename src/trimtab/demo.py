"""An invented demo fund, simulated from a known factor model (deterministic from a seed).

Everything here is made up: the stock codes, the industry groups, the benchmark and the fund. The
returns are drawn from

    rₜ = B·fₜ + εₜ,   fₜ ~ N(μ, F),   εᵢₜ = √dᵢ · tᵢₜ·√((ν − 2)/ν),   tᵢₜ ~ Student-t(ν = 5),

with factors market, size, value, momentum, low_risk and ten industries, so an estimator's output can
be checked against the truth (:attr:`DemoFund.exposures`, :attr:`DemoFund.factor_covariance`,
:attr:`DemoFund.specific_variance`). The generator is pure: :func:`trimtab.scenario.write_demo`
writes the files.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd

from trimtab.errors import InputError

#: Invented industry groups (display name → factor name). Not any real classification.
INDUSTRIES: dict[str, str] = {
    "Harbour Logistics": "harbour_logistics",
    "Orchard Foods": "orchard_foods",
    "Lantern Software": "lantern_software",
    "Copperfern Materials": "copperfern_materials",
    "Willowmere Health": "willowmere_health",
    "Emberwell Energy": "emberwell_energy",
    "Stonewick Builders": "stonewick_builders",
    "Ledgerlark Finance": "ledgerlark_finance",
    "Brightstall Retail": "brightstall_retail",
    "Murmur Media": "murmur_media",
}
STYLES: tuple[str, ...] = ("size", "value", "momentum", "low_risk")

#: Annualised factor volatilities of the simulation.
FACTOR_VOLATILITY: dict[str, float] = {"market": 0.16, "size": 0.05, "value": 0.05, "momentum": 0.08, "low_risk": 0.05}
INDUSTRY_VOLATILITY = 0.07
#: Degrees of freedom of the Student-t specific returns (kurtosis 3 + 6/(ν − 4) = 9).
SPECIFIC_DOF = 5.0
#: The information coefficient of the alpha scores: alpha = IC · specific volatility · score.
INFORMATION_COEFFICIENT = 0.05
PERIODS_PER_YEAR = 252
#: The fund's value and its cash, in invented currency units (base.yaml repeats the cash figure).
DEMO_NAV = 500e6
DEMO_CASH = 6e6

# Stock codes: consonant, vowel, one of J/Q/X/Z, vowel (e.g. "BOXA", "TIQE"). Codes that spell an
# English word or a listed ticker we know of are left out (the list is from memory, not a database).
_FIRST = "BDFGHKLMNPRSTVW"
_VOWEL = "AEIOUY"
_MIDDLE = "JQXZ"
_LAST = "AEIOY"
_BLOCKED = frozenset(
    """TAXI MAXI TOXI LEXI SEXY SEXI FOXY BOXY MOXY NEXA PIXY DIXY ROXY MAZE DAZE HAZE GAZE RAZE LAZY
    HAZY DOZE SIZE FUZE MOJO DOJO BAJA RAJA FIJI HIJA ROJO ROJA LIZA GAZA WAXY LEXA HEXA PIXI BIXI""".split()
)


def stock_codes(n_assets: int, rng: np.random.Generator) -> list[str]:
    """``n_assets`` distinct invented four-letter codes, in random order."""
    codes = [a + b + c + d for a in _FIRST for b in _VOWEL for c in _MIDDLE for d in _LAST]
    codes = [c for c in codes if c not in _BLOCKED]
    if n_assets > len(codes):
        raise InputError(f"demo: n_assets must be at most {len(codes)} (the invented codes run out), got {n_assets}")
    picked = rng.choice(len(codes), size=n_assets, replace=False)
    return [codes[i] for i in picked]


@dataclass(frozen=True, eq=False)
class DemoFund:
    """The simulated market, benchmark and fund; ``exposures``, ``factor_covariance`` and
    ``specific_variance`` are the true model the returns were drawn from (per day)."""

    seed: int
    returns: pd.DataFrame
    factor_returns: pd.DataFrame
    exposures: pd.DataFrame
    factor_covariance: pd.DataFrame
    specific_variance: pd.Series
    attributes: pd.DataFrame
    characteristics: pd.DataFrame
    benchmark: pd.Series
    targets: pd.Series
    shares: pd.Series
    cash: float
    alpha: pd.Series
    next_year_specific: pd.Series

    @property
    def assets(self) -> pd.Index:
        """The stock codes."""
        return self.exposures.index

    @property
    def factor_groups(self) -> dict[str, str]:
        """Factor → group (market, style, industry)."""
        groups = {"market": "market", **{s: "style" for s in STYLES}}
        groups.update({f: "industry" for f in INDUSTRIES.values()})
        return groups

    @cached_property
    def holdings_weights(self) -> pd.Series:
        """The fund's weights of NAV (shares·price / NAV, NAV including cash)."""
        value = self.shares * self.attributes.loc[self.shares.index, "price"]
        return (value / (value.sum() + self.cash)).rename("weight")

    @property
    def nav(self) -> float:
        """Net asset value: positions at the last price plus cash."""
        return float((self.shares * self.attributes.loc[self.shares.index, "price"]).sum() + self.cash)


def alpha_scores(target: np.ndarray, information_coefficient: float, rng: np.random.Generator) -> np.ndarray:
    """Scores z = IC·t + √(1 − IC²)·e with e ~ N(0, 1): for a standardised target t, corr(z, t) = IC
    and Var(z) = 1."""
    ic = float(information_coefficient)
    return ic * target + np.sqrt(1.0 - ic**2) * rng.normal(size=target.shape)


def _correlation(n: int, rng: np.random.Generator, scale: float) -> np.ndarray:
    loadings = rng.normal(scale=scale, size=(n, n))
    cov = np.eye(n) + loadings @ loadings.T
    sd = np.sqrt(np.diag(cov))
    return cov / np.outer(sd, sd)


def _standardize(x: np.ndarray) -> np.ndarray:
    return (x - x.mean()) / x.std()


def make_demo_fund(
    *,
    n_assets: int = 1500,
    n_days: int = 4 * PERIODS_PER_YEAR,
    n_holdings: int = 300,
    seed: int = 7,
) -> DemoFund:
    """Simulate the invented demo fund.

    Parameters
    ----------
    n_assets : int, default 1500
        Stocks in the universe (at most the number of invented codes).
    n_days : int, default 1008
        Trading days of returns (four years of 252).
    n_holdings : int, default 300
        Names the fund holds.
    seed : int, default 7
        Seed of :func:`numpy.random.default_rng`; the same seed gives the same fund.

    Returns
    -------
    DemoFund

    Notes
    -----
    Exposures: market beta ~ N(1, 0.25²) clipped to [0.3, 2]; size is the standardised log market
    cap; value and momentum are independent N(0, 1); low_risk is standardised −0.6·z(beta) + 0.8·N(0, 1);
    each stock has exposure 1 to its industry. Specific volatility is 22% a year scaled by
    exp(−0.2·size + 0.25·N(0, 1)), clipped to [8%, 70%]. About 2% of stocks list late and have
    between 260 and 750 days of history. The benchmark is cap-weighted over the universe. The fund's
    targets weight its names by cap^0.6; it has since drifted with six months of realised returns.
    Alpha scores: a year of specific returns after the data ends, uᵢ·σᵢ with uᵢ ~ N(0, 1), is drawn
    (:attr:`DemoFund.next_year_specific`, not given to the fund); the scores zᵢ = IC·uᵢ + √(1 − IC²)·eᵢ
    correlate with it at IC = 0.05, and alpha = IC · σᵢ · zᵢ (the Grinold–Kahn rule of thumb, from
    memory); 5% of stocks have no score.
    """
    if n_holdings > n_assets or n_holdings < 10:
        raise InputError(f"demo: n_holdings must be between 10 and n_assets ({n_assets}), got {n_holdings}")
    if n_days < 300:
        raise InputError(f"demo: n_days must be at least 300, got {n_days}")
    rng = np.random.default_rng(seed)
    assets = stock_codes(n_assets, rng)
    industry_names = list(INDUSTRIES)
    factors = ["market", *STYLES, *INDUSTRIES.values()]
    n_factors = len(factors)

    # --- exposures
    beta = np.clip(rng.normal(1.0, 0.25, n_assets), 0.3, 2.0)
    log_cap = rng.normal(np.log(4e9), 1.1, n_assets)
    size = _standardize(log_cap)
    value = rng.normal(size=n_assets)
    momentum = rng.normal(size=n_assets)
    low_risk = _standardize(-0.6 * _standardize(beta) + 0.8 * rng.normal(size=n_assets))
    industry = rng.choice(len(industry_names), size=n_assets, p=rng.dirichlet(np.full(len(industry_names), 8.0)))
    dummies = np.zeros((n_assets, len(industry_names)))
    dummies[np.arange(n_assets), industry] = 1.0
    B = np.column_stack([beta, size, value, momentum, low_risk, dummies])
    exposures = pd.DataFrame(B, index=assets, columns=factors)

    # --- factor covariance (daily) and factor returns
    vols = np.array([FACTOR_VOLATILITY.get(f, INDUSTRY_VOLATILITY) for f in factors]) / np.sqrt(PERIODS_PER_YEAR)
    corr = _correlation(n_factors, rng, 0.2)
    F = corr * np.outer(vols, vols)
    mean = np.zeros(n_factors)
    mean[0] = 0.06 / PERIODS_PER_YEAR
    dates = pd.bdate_range("2022-01-03", periods=n_days)
    f = rng.multivariate_normal(mean, F, size=n_days)
    factor_returns = pd.DataFrame(f, index=dates, columns=factors)

    # --- specific returns: fat-tailed Student-t scaled to variance d
    specific_vol = np.clip(0.22 * np.exp(-0.2 * size + 0.25 * rng.normal(size=n_assets)), 0.08, 0.70)
    d = specific_vol**2 / PERIODS_PER_YEAR
    t = rng.standard_t(SPECIFIC_DOF, size=(n_days, n_assets)) * np.sqrt((SPECIFIC_DOF - 2) / SPECIFIC_DOF)
    returns_arr = f @ B.T + t * np.sqrt(d)
    n_late = max(1, n_assets // 50)
    late = rng.choice(n_assets, size=n_late, replace=False)
    shortest, longest = min(260, n_days // 2), min(750, n_days - 50)
    for i in late:
        history = int(rng.integers(shortest, longest + 1))
        returns_arr[: n_days - history, i] = np.nan
    returns = pd.DataFrame(returns_arr, index=dates, columns=assets)

    # --- market data at the last date
    price = np.exp(rng.normal(np.log(40.0), 0.9, n_assets)).round(2).clip(1.0, None)
    cap = np.exp(log_cap)
    daily_turnover = 0.004 * np.exp(rng.normal(0.0, 0.4, n_assets))
    adv = np.round(cap * daily_turnover / price, -2).clip(100.0, None)
    # bid-ask spread as a fraction of the price: about 8 bp for a median stock, wider for small ones
    spread = (np.clip(8.0 * (cap / 4e9) ** -0.35 * np.exp(0.2 * rng.normal(size=n_assets)), 1.0, 80.0) / 1e4).round(6)
    attributes = pd.DataFrame(
        {
            "industry": [industry_names[k] for k in industry],
            "price": price,
            "adv": adv,
            "spread": spread,
            "market_cap": np.round(cap, -5).clip(1e5, None),
        },
        index=assets,
    )
    characteristics = pd.DataFrame(
        {"size": size, "value": value, "momentum": momentum, "low_risk": low_risk, "industry": attributes["industry"]},
        index=assets,
    )

    listed_cap = attributes["market_cap"].to_numpy()
    benchmark = pd.Series(listed_cap / listed_cap.sum(), index=assets, name="weight")

    # --- the fund: cap^0.6 targets on 300 names, drifted with the last 126 days of returns
    listed_all_along = np.setdiff1d(np.arange(n_assets), late)
    chosen = rng.choice(listed_all_along, size=n_holdings, replace=False, p=None)
    target = cap[chosen] ** 0.6
    target = target / target.sum()
    drift_window = min(126, n_days // 4)
    growth = np.prod(1.0 + returns_arr[-drift_window:, chosen], axis=0)
    drifted = target * growth
    drifted = drifted / drifted.sum() * (DEMO_NAV - DEMO_CASH)
    shares = pd.Series(np.round(drifted / price[chosen]), index=[assets[i] for i in chosen], name="shares")
    cash = DEMO_CASH
    targets = pd.Series(target, index=shares.index, name="target")

    # --- alpha: scores that forecast next year's specific returns with correlation IC
    next_year = specific_vol * rng.normal(size=n_assets)
    score = alpha_scores(next_year / specific_vol, INFORMATION_COEFFICIENT, rng)
    alpha = pd.Series(INFORMATION_COEFFICIENT * specific_vol * score, index=assets, name="alpha")
    no_score = rng.choice(n_assets, size=n_assets // 20, replace=False)
    alpha = alpha.drop(alpha.index[no_score])

    return DemoFund(
        seed=seed,
        returns=returns,
        factor_returns=factor_returns,
        exposures=exposures,
        factor_covariance=pd.DataFrame(F, index=factors, columns=factors),
        specific_variance=pd.Series(d, index=assets, name="specific_variance"),
        attributes=attributes,
        characteristics=characteristics,
        benchmark=benchmark,
        targets=targets,
        shares=shares,
        cash=cash,
        alpha=alpha,
        next_year_specific=pd.Series(next_year, index=assets, name="next_year_specific"),
    )


# ---------------------------------------------------------------------- the demo's config files
# These are also the files in the repository's scenarios/ folder (a test keeps the two identical).
_GROUP_LINES = "\n".join(
    f"  {factor}: {group}"
    for factor, group in {"market": "market", **{s: "style" for s in STYLES}, **{f: "industry" for f in INDUSTRIES.values()}}.items()
)

DEMO_FILES: dict[str, str] = {
    "fit.yaml": f"""\
# Risk model of the invented demo fund: each stock's daily returns regressed on the daily factor
# returns (market, four styles, ten industries); `trimtab fit fit.yaml --out model` writes model/.
method: time_series
returns: data/returns.parquet
factor_returns: data/factor_returns.csv
min_periods: 126
factor_groups:
{_GROUP_LINES}
""",
    "fit_cross_section.yaml": """\
# The alternative risk model: the demo's stock characteristics (size, value, momentum, low_risk and
# the industry) as exposures, factor returns estimated date by date by cross-sectional regression.
# `trimtab fit fit_cross_section.yaml --out model_cross_section` writes it; the demo uses fit.yaml.
method: cross_section
returns: data/returns.parquet
exposures: data/characteristics.csv
exposure_columns: [size, value, momentum, low_risk]
industry_column: industry
""",
    "base.yaml": """\
# Rebalance the demo fund to a 3% tracking-error budget: maximise alpha net of trading costs (half
# the bid-ask spread on every trade) inside the budget and the mandate (long only, fully invested,
# position and industry bands), with a turnover cap and a liquidity limit. The other demo
# scenarios extend this one.
description: Demo fund, rebalanced to a 3% tracking-error budget
model: model
data:
  holdings: {path: data/holdings.csv, kind: shares, cash: 6000000}
  benchmark: data/benchmark.csv
  alpha: data/alpha.csv
  attributes: data/attributes.csv
objective:
  maximize: alpha
  costs: {spread: spread}
constraints:
  fully_invested: true
  long_only: true
  weight: {min: 0.0, max: 0.03}
  active_weight: {min: -0.015, max: 0.015}
  group: {by: industry, active: true, bounds: {default: [-0.03, 0.03]}}
  tracking_error: {max: 0.03}
  turnover: {max: 0.25}
  liquidity: {max_adv_fraction: 0.10, days: 1}
stress: shocks.yaml
replay: {length: 21, count: 3}
output:
  tables: csv
""",
    "neutral_size_momentum.yaml": """\
# As base, but with no active exposure to size or momentum: the fund is not paid for either bet.
extends: base.yaml
description: Base, with active size and momentum exposures held at zero
constraints:
  factor_exposure: {active: true, bounds: {size: [0, 0], momentum: [0, 0]}}
""",
    "overlay.yaml": """\
# As base, with no active market or size exposure, and the demo's hedge instruments (an index future
# on the benchmark, a small-cap and a value basket) sized in the same problem: the overlay carries
# the market and size hedge instead of the stock selection. It is exempt from the budget, long-only
# and the book's position, group, turnover and liquidity limits, and inside the tracking-error,
# exposure and stress limits (docs/overlay.md, "With the rebalance").
extends: base.yaml
description: Base, market and size neutral, hedged by an overlay of the demo instruments
constraints:
  factor_exposure: {active: true, bounds: {market: [0, 0], size: [0, 0]}}
overlay:
  instruments: data/instruments.csv
  contracts: data/contracts.csv
  max_gross: 0.5
""",
    "low_turnover.yaml": """\
# As base, but trading at most 10% of the fund one way: what does a lighter touch give up?
extends: base.yaml
description: Base, with one-way turnover capped at 10%
constraints:
  turnover: {max: 0.10}
""",
    "infeasible.yaml": """\
# Deliberately impossible: a 0.5% tracking-error cap for a book that starts far further from its
# benchmark, with only 2% one-way turnover allowed to get there. trimtab stops with exit code 1,
# names the limits that cannot all hold, and prints how far each would have to move on its own.
extends: base.yaml
description: Conflicting limits, to show the conflict set and the relaxation options
constraints:
  tracking_error: {max: 0.005}
  turnover: {max: 0.02}
""",
    "shocks.yaml": """\
# Named shocks for the demo fund: each moves the named factors by a return over about a month (the
# model's other factors move as the model says they co-move with them). The base scenario reports
# every shock before and after the trade (stress: shocks.yaml), with the three worst months of the
# model's history (replay:); stress_limit.yaml caps the shocks' losses.
# `trimtab stress --model model --holdings data/holdings.csv --attributes data/attributes.csv --cash 6000000
#  --benchmark data/benchmark.csv --shocks shocks.yaml` runs them alone (from the demo folder).
description: Invented demo shocks (returns over about a month)
shocks:
  equity_selloff:
    description: The market falls 10%
    factors: {market: -0.10}
  momentum_reversal:
    description: Last year's winners give back 8% against losers while the market slips 4%
    factors: {market: -0.04, momentum: -0.08}
  small_caps_hit:
    description: Small companies fall 4% against large ones in a 6% market fall
    factors: {market: -0.06, size: -0.04}
  value_rebound:
    description: Cheap stocks beat expensive ones by 3%
    factors: {value: 0.03}
  energy_spike:
    description: Emberwell Energy stocks jump 8% while the market falls 3%
    factors: {emberwell_energy: 0.08, market: -0.03}
""",
    "fit_backtest.yaml": f"""\
# The risk model of the demo backtest: as fit.yaml, re-fitted at every rebalance date on the market
# of the backtest (data/backtest_returns.parquet: the demo's returns plus a theme the model's factors
# do not carry). `trimtab backtest base.yaml alpha_factor.yaml --fit fit_backtest.yaml
# --alpha-history data/alpha_history.csv` runs the two scenarios side by side.
method: time_series
returns: data/backtest_returns.parquet
factor_returns: data/factor_returns.csv
min_periods: 126
factor_groups:
{_GROUP_LINES}
""",
    "alpha_factor.yaml": """\
# As base, but the part of the alpha the model's factors do not span is risked as one more factor of
# 3% a year (Ceria, Saxena and Stubbs 2012): the optimizer no longer treats it as diversifiable,
# so realised tracking error stays nearer the forecast (see the demo backtest).
extends: base.yaml
description: Base, with the unspanned alpha priced as a factor of 3% volatility
alpha_factor: {volatility: 0.03}
""",
    "stress_limit.yaml": """\
# As base, but no shock in shocks.yaml may cost more than 0.1% of NAV against the benchmark: the
# optimizer trades to the alpha inside the tracking-error budget and these stress limits.
extends: base.yaml
description: Base, with the active loss under each demo shock capped at 0.1% of NAV
constraints:
  stress_loss: {shocks: shocks.yaml, max: 0.001, active: true}
""",
}

#: The scenarios ``trimtab demo`` runs, in the order of its comparison table.
DEMO_SCENARIOS: tuple[str, ...] = ("base", "neutral_size_momentum", "low_turnover", "infeasible")
#: The demo backtest: these scenarios side by side on the alpha history (trimtab.scenario._demo_alpha).
DEMO_BACKTEST: tuple[str, ...] = ("base", "alpha_factor")
