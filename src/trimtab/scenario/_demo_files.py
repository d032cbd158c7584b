"""Write the invented demo fund (:mod:`trimtab.demo`) as the data files and scenarios a user runs."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from trimtab.demo import DEMO_FILES, DemoFund
from trimtab.hedge._demo import demo_instruments
from trimtab.scenario._demo_accounts import demo_account_tables
from trimtab.scenario._demo_alpha import alpha_long, make_alpha_history


def write_demo(fund: DemoFund, folder: str | Path) -> dict[str, Path]:
    """Write the demo's data files, truth tables and config files into ``folder``.

    Layout::

        folder/fit.yaml, fit_cross_section.yaml, base.yaml, neutral_size_momentum.yaml, low_turnover.yaml, infeasible.yaml
        folder/data/returns.parquet        dates × stocks (wide; empty before a stock listed; the
                                           date column is a Parquet timestamp)
        folder/data/factor_returns.csv     dates × factors (dates as YYYY-MM-DD text)
        folder/data/holdings.csv           asset, shares
        folder/data/benchmark.csv          asset, weight
        folder/data/alpha.csv              asset, alpha (annualised)
        folder/data/attributes.csv         asset, industry, price, adv, spread, market_cap
        folder/data/characteristics.csv    asset, size, value, momentum, low_risk, industry
        folder/data/alpha_history.csv      date, asset, alpha (annualised, long): the backtest's alpha
                                           at each rebalance date (skill plus a theme tilt)
        folder/data/backtest_returns.parquet  the returns plus the theme the model does not carry
        folder/data/instruments.csv        instrument, asset, weight: an index future and two style
                                           baskets for ``trimtab overlay``
        folder/data/contracts.csv          instrument, price, multiplier, cost (invented terms)
        folder/data/accounts.csv           200 invented accounts: account, nav, cash, exclude, overrides
        folder/data/account_holdings.csv   account, asset, shares (long format)
        folder/data/truth/                 the simulated model: exposures, factor_covariance,
                                           specific_variance (per day), and next_year_specific:
                                           the specific returns the alpha scores forecast; theme:
                                           the backtest theme's exposures and daily returns

    Returns
    -------
    dict
        File label → path written.
    """
    root = Path(folder)
    data = root / "data"
    truth = data / "truth"
    truth.mkdir(parents=True, exist_ok=True)
    written: dict[str, Path] = {}

    def csv(frame: pd.DataFrame, name: str, where: Path = data, index_label: str = "asset") -> None:
        path = where / f"{name}.csv"
        frame.to_csv(path, index_label=index_label, float_format="%.10g")
        written[name] = path

    # Parquet has a date type: the dates go in as datetime64, so a reader gets dates, not text.
    returns = fund.returns.copy()
    returns.index = pd.DatetimeIndex(returns.index).normalize()
    returns.rename_axis("date").reset_index().to_parquet(data / "returns.parquet", index=False)
    written["returns"] = data / "returns.parquet"
    factor_returns = fund.factor_returns.copy()
    factor_returns.index = factor_returns.index.strftime("%Y-%m-%d")
    csv(factor_returns, "factor_returns", index_label="date")
    csv(fund.shares.astype("int64").to_frame("shares"), "holdings")
    csv(fund.benchmark.to_frame("weight"), "benchmark")
    csv(fund.alpha.to_frame("alpha"), "alpha")
    csv(fund.attributes, "attributes")
    csv(fund.characteristics, "characteristics")
    baskets, contracts = demo_instruments(fund)  # the overlay's index future and style baskets
    baskets.to_csv(data / "instruments.csv", index=False, float_format="%.10g")
    written["instruments"] = data / "instruments.csv"
    csv(contracts, "contracts", index_label="instrument")
    for name, table in demo_account_tables(fund).items():  # the accounts of `trimtab accounts`
        table.to_csv(data / f"{name}.csv", index=False, float_format="%.10g")
        written[name] = data / f"{name}.csv"
    csv(fund.exposures, "exposures", truth)
    csv(fund.factor_covariance, "factor_covariance", truth, index_label="factor")
    csv(fund.specific_variance.to_frame("specific_variance"), "specific_variance", truth)
    csv(fund.next_year_specific.to_frame("next_year_specific"), "next_year_specific", truth)
    history = make_alpha_history(fund)
    alpha_long(history).to_csv(data / "alpha_history.csv", index=False, float_format="%.10g")
    written["alpha_history"] = data / "alpha_history.csv"
    market = history.returns.copy()
    market.index = pd.DatetimeIndex(market.index).normalize()
    market.rename_axis("date").reset_index().to_parquet(data / "backtest_returns.parquet", index=False)
    written["backtest_returns"] = data / "backtest_returns.parquet"
    csv(history.theme_exposure.to_frame("theme"), "theme_exposure", truth)
    theme = history.theme_returns.to_frame("theme")
    theme.index = pd.DatetimeIndex(theme.index).strftime("%Y-%m-%d")
    csv(theme, "theme_returns", truth, index_label="date")
    for name, text in DEMO_FILES.items():
        path = root / name
        path.write_text(text, encoding="utf-8")
        written[name] = path
    return written
