"""Orders that keep the mandate and the cash, end to end through ``trimtab rebalance`` (issue #19).

An invented fund (the small demo: 120 names in a universe of 600) in lots of 100 shares, with the
demo's mandate plus momentum held neutral, beta in [0.98, 1.02] and active industry bands of ±1%. At
NAV 50M every limit holds on the book the orders produce (within the rounding tolerance) and the run
succeeds; at NAV 20k the lots are too coarse: each limit that cannot hold is named, the orders are
written as not fit to send and the command exits with 6. In both, the cash after orders and costs,
recomputed from the orders file, is not negative.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pandas as pd
import pytest
from typer.testing import CliRunner

from tests.demo_helpers import make_demo_folder
from trimtab.cli import app

runner = CliRunner()
NOT_FIT = 6

MANDATE = """extends: base.yaml
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


@pytest.fixture(scope="module")
def fund(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = make_demo_folder(tmp_path_factory.mktemp("orders-demo"))
    attrs = pd.read_csv(folder / "data" / "attributes.csv")
    attrs["lot"] = 100
    attrs.to_csv(folder / "data" / "attributes_lots.csv", index=False)
    shares = pd.read_csv(folder / "data" / "holdings.csv").set_index("asset")["shares"]
    value = shares * attrs.set_index("asset")["price"].reindex(shares.index)
    (value / (value.sum() * 1.012)).rename("weight").to_csv(folder / "data" / "holdings_w.csv")  # 1.2% cash
    return folder


def _run(fund: Path, tmp_path: Path, nav: float) -> tuple[object, Path]:
    work = tmp_path / "fund"
    shutil.copytree(fund, work)
    (work / "mandate.yaml").write_text(MANDATE.format(nav=nav), encoding="utf-8")
    out = work / "out"
    return runner.invoke(app, ["rebalance", str(work / "mandate.yaml"), "--out", str(out)]), out


def _cash_after(out: Path, orders_file: str) -> float:
    """cash before − buys + sells − costs, from the orders file and the cash before in result.json."""
    orders = pd.read_csv(out / orders_file)
    cash_before = json.loads((out / "result.json").read_text())["rounding"]["cash_before"]
    buys = orders.loc[orders["side"] == "buy", "notional"].sum()
    sells = orders.loc[orders["side"] == "sell", "notional"].sum()
    return float(cash_before - buys + sells - orders["cost"].sum())


def test_at_nav_50m_every_limit_holds_on_the_rounded_book(fund: Path, tmp_path: Path) -> None:
    result, out = _run(fund, tmp_path, 50_000_000)
    assert result.exit_code == 0, result.stderr
    assert (out / "trades.csv").exists() and not (out / "trades_not_fit_to_send.csv").exists()
    limits = pd.read_csv(out / "limits.csv")
    assert limits["ok"].all(), limits[~limits["ok"]]
    assert {"beta", "factor_exposure[momentum]", "cash_after_costs"} <= set(limits["limit"])
    shares = pd.read_csv(out / "trades.csv")
    exits = shares["weight_after"].abs() <= 1e-12
    assert (shares.loc[~exits, "shares"] % 100 == 0).all()  # whole lots
    cash = _cash_after(out, "trades.csv")
    assert cash >= 0.0
    assert "Cash after trades and costs:" in result.stdout


def test_at_nav_20k_each_limit_that_cannot_hold_is_named_and_the_run_fails(fund: Path, tmp_path: Path) -> None:
    result, out = _run(fund, tmp_path, 20_000)
    assert result.exit_code == NOT_FIT, (result.exit_code, result.stderr)
    limits = pd.read_csv(out / "limits.csv")
    breached = limits.loc[~limits["ok"], "limit"].tolist()
    assert breached
    lines = result.stderr.strip().splitlines()
    assert lines[-1].startswith("trimtab: error: ") and "orders NOT FIT TO SEND" in lines[-1]
    for name in breached:  # each one named on stderr, with its value
        assert any(line.startswith("trimtab: warning: orders not fit to send") and name in line for line in lines)
        assert name in lines[-1]
    document = json.loads((out / "result.json").read_text())
    assert document["run"]["status"] == "orders not fit to send" and document["rounding"]["fit_to_send"] is False
    assert [b["name"] for b in document["rounding"]["breached"]] == breached
    assert "ORDERS NOT FIT TO SEND" in (out / "report.html").read_text()
    assert not (out / "trades.csv").exists() and (out / "trades_not_fit_to_send.csv").exists()
    assert _cash_after(out, "trades_not_fit_to_send.csv") >= 0.0
