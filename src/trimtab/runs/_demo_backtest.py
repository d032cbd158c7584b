"""The demo's backtest: the base scenario and its alpha-factor variant side by side on the invented
alpha history (:mod:`trimtab.scenario._demo_alpha`), written to ``results/backtest`` of the demo folder.

It is what ``trimtab backtest base.yaml alpha_factor.yaml --fit fit_backtest.yaml --alpha-history
data/alpha_history.csv`` runs in that folder (same window, dates and costs).
"""

from __future__ import annotations

from pathlib import Path

from trimtab.demo import DEMO_BACKTEST
from trimtab.report._pages import write_backtest
from trimtab.runs._backtest import backtest, fit_settings_mapping
from trimtab.runs._backtest_result import BacktestResult
from trimtab.scenario import load_fit_config, load_inputs, load_returns, load_scenario
from trimtab.scenario._demo_alpha import EVERY, WINDOW
from trimtab.scenario._run import variant_limits
from trimtab.scenario._schema import ReturnsFile

#: Linear cost per unit traded in the demo backtest (10 bp, the command's default).
DEMO_COST = 10e-4


def run_demo_backtest(folder: str | Path) -> BacktestResult:
    """Backtest :data:`trimtab.demo.DEMO_BACKTEST` in the demo ``folder`` and write its report."""
    root = Path(folder)
    loaded = [load_scenario(root / f"{name}.yaml") for name in DEMO_BACKTEST]
    settings = load_fit_config(root / "fit_backtest.yaml")
    returns = load_returns(settings.returns, what="returns")
    factors = load_returns(settings.factor_returns, what="factor returns") if settings.factor_returns is not None else None
    history_file = root / "data" / "alpha_history.csv"
    alpha = load_returns(ReturnsFile.model_validate({"path": str(history_file), "value_column": "alpha"}), what="alpha history")
    first = load_inputs(loaded[0])
    inputs = [first] + [load_inputs(s, model=first.model) for s in loaded[1:]]
    mappings = {i.scenario.name: {**i.scenario.rebalance_mapping(),
                                  "backtest": {"when_infeasible": i.scenario.spec.backtest.when_infeasible}} for i in inputs}
    result = backtest(
        returns, alpha, mappings, window=WINDOW, frequency=EVERY, factor_returns=factors,
        fit=fit_settings_mapping(settings), benchmark=first.benchmark, initial_holdings=first.holdings,
        attributes=first.attributes, nav=first.nav, costs=DEMO_COST,
        changed_limits={i.scenario.name: variant_limits(i.scenario) for i in inputs},
    )
    write_backtest(result, root / "results" / "backtest",
                   inputs=[*(s.path for s in loaded), root / "fit_backtest.yaml", history_file],
                   title="Demo backtest: the alpha history, without and with the alpha factor")
    return result
