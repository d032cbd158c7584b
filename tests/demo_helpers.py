"""Build a small demo folder (data, scenarios and a fitted model) for the command-line tests."""

from __future__ import annotations

from pathlib import Path

from trimtab.demo import make_demo_fund
from trimtab.scenario import fit_model, load_fit_config, write_demo

SMALL = {"n_assets": 600, "n_holdings": 120, "n_days": 600, "seed": 3}


def make_demo_folder(folder: Path, **overrides: int) -> Path:
    """Write a small demo fund into ``folder`` and fit its model into ``folder/model``."""
    settings = {**SMALL, **overrides}
    fund = make_demo_fund(**settings)
    write_demo(fund, folder)
    config = folder / "fit.yaml"
    fit_model(load_fit_config(config), config).save(folder / "model")
    return folder


#: A mandate on the demo fund in lots of 100 shares (issue #19): the demo's limits plus momentum held
#: neutral, beta in [0.98, 1.02] and active industry bands of ±1%. Whole lots hold every limit at NAV
#: 50M; at NAV 20k they are too coarse and the orders are not fit to send.
LOTS_MANDATE = """extends: base.yaml
data:
  holdings: {{path: data/holdings_w.csv, kind: weights, nav: {nav}}}
  benchmark: data/benchmark.csv
  alpha: data/alpha.csv
  attributes: data/attributes_lots.csv
constraints:
  factor_exposure: {{active: true, bounds: {{momentum: [0, 0]}}}}
  beta: {{min: 0.98, max: 1.02}}
  group: {{by: industry, active: true, bounds: {{default: [-0.01, 0.01]}}}}
"""


def add_lots_fund(folder: Path) -> Path:
    """Give a demo folder lots of 100 shares (``data/attributes_lots.csv``) and its holdings as
    weights with 1.2% cash (``data/holdings_w.csv``), the inputs of :data:`LOTS_MANDATE`."""
    import pandas as pd

    attrs = pd.read_csv(folder / "data" / "attributes.csv")
    attrs["lot"] = 100
    attrs.to_csv(folder / "data" / "attributes_lots.csv", index=False)
    shares = pd.read_csv(folder / "data" / "holdings.csv").set_index("asset")["shares"]
    value = shares * attrs.set_index("asset")["price"].reindex(shares.index)
    (value / (value.sum() * 1.012)).rename("weight").to_csv(folder / "data" / "holdings_w.csv")  # 1.2% cash
    return folder
