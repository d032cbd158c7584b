"""Write the invented demo fund (:mod:`trimtab.demo`) as the data files and scenarios a user runs."""

from __future__ import annotations

from pathlib import Path

import pandas as pd

from trimtab.demo import DEMO_FILES, DemoFund
from trimtab.scenario._demo_accounts import demo_account_tables


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
        folder/data/accounts.csv           200 invented accounts: account, nav, cash, exclude, overrides
        folder/data/account_holdings.csv   account, asset, shares (long format)
        folder/data/truth/                 the simulated model: exposures, factor_covariance,
                                           specific_variance (per day), and next_year_specific:
                                           the specific returns the alpha scores forecast

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
    for name, table in demo_account_tables(fund).items():  # the accounts of `trimtab accounts`
        table.to_csv(data / f"{name}.csv", index=False, float_format="%.10g")
        written[name] = data / f"{name}.csv"
    csv(fund.exposures, "exposures", truth)
    csv(fund.factor_covariance, "factor_covariance", truth, index_label="factor")
    csv(fund.specific_variance.to_frame("specific_variance"), "specific_variance", truth)
    csv(fund.next_year_specific.to_frame("next_year_specific"), "next_year_specific", truth)
    for name, text in DEMO_FILES.items():
        path = root / name
        path.write_text(text, encoding="utf-8")
        written[name] = path
    return written
