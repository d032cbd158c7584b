"""The whole demo job: simulate the invented fund, write it, fit, rebalance every demo scenario,
compare them and write the reports, all into one folder that appears only when complete."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from trimtab.demo import DEMO_SCENARIOS, DemoFund, make_demo_fund
from trimtab.scenario._demo_files import write_demo
from trimtab.scenario._fit import fit_model, load_fit_config
from trimtab._output import output_folder
from trimtab.scenario._run import ScenarioRun, load_all, solve, write_comparison, write_rebalance
from trimtab.scenario._scenario import ScenarioInputs, load_scenario


@dataclass(frozen=True, eq=False)
class DemoRun:
    """What the demo computed: the fund, today's attribution (active risk of the base scenario's
    inputs), the base scenario's inputs and one run per demo scenario."""

    fund: DemoFund
    n_holdings: int
    pre_trade: Any
    base: ScenarioInputs
    runs: list[ScenarioRun]


def run_demo(out: str | Path, *, seed: int = 7, n_assets: int = 1500, step: Callable[[str], None] | None = None) -> DemoRun:
    """Run the demo into ``out`` (replacing an earlier demo there, never anything else).

    Parameters
    ----------
    out : str or Path
        The folder; written under a temporary name and renamed when complete.
    seed, n_assets : int
        Passed to :func:`trimtab.demo.make_demo_fund`; the fund holds a fifth of the universe, at
        most 300 names.
    step : callable, optional
        Called with a label before each stage.
    """
    note = step or (lambda _label: None)
    n_holdings = min(300, max(10, n_assets // 5))
    with output_folder(out) as tmp:
        note("simulating the invented fund")
        fund = make_demo_fund(n_assets=n_assets, n_holdings=n_holdings, seed=seed)
        note("writing the data files")
        write_demo(fund, tmp)
        note("fitting the risk model")
        fit_model(load_fit_config(tmp / "fit.yaml"), tmp / "fit.yaml").save(tmp / "model")
        note("reading the scenarios")
        all_inputs = load_all([load_scenario(tmp / f"{name}.yaml") for name in DEMO_SCENARIOS])
        base = all_inputs[0]
        pre_trade = base.model.attribute(base.holdings, base.benchmark, attributes=base.attributes)
        runs = []
        for inputs in all_inputs:
            note(f"rebalancing: {inputs.scenario.name}")
            runs.append(solve(inputs))
        note("writing the reports")
        if runs[0].error is not None:
            raise runs[0].error
        write_rebalance(runs[0], tmp / "results" / "base")
        write_comparison(runs, tmp / "results" / "compare")
    return DemoRun(fund, n_holdings, pre_trade, base, runs)


def headline_rows(done: DemoRun) -> list[dict[str, Any]]:
    """Today's book, then each scenario: tracking error, active alpha αᵀ(w − b) (annualised), one-way
    turnover, the cost of the trades (once, fraction of NAV) and the names held; NaN where a
    scenario did not solve."""
    base = done.base
    assets = base.model.assets
    bench = base.benchmark.reindex(assets, fill_value=0.0) if base.benchmark is not None else 0.0
    active = base.holdings.reindex(assets, fill_value=0.0) - bench
    alpha = base.alpha.reindex(assets, fill_value=0.0) if base.alpha is not None else active * 0.0
    rows = [
        {
            "scenario": "today's book",
            "status": "-",
            "tracking_error": float(done.pre_trade.risk),
            "active_alpha": float((alpha * active).sum()),
            "turnover": 0.0,
            "cost": 0.0,
            "names": int((base.holdings.abs() > 1e-8).sum()),
        }
    ]
    nan = float("nan")
    for run in done.runs:
        row: dict[str, Any] = dict(scenario=run.name, status=run.status, tracking_error=nan, active_alpha=nan, turnover=nan, cost=nan, names=nan)
        if run.result is not None:
            result = run.result
            row.update(
                tracking_error=float(result.post_trade.risk),
                active_alpha=float(result.objective["alpha"]),
                turnover=float(result.turnover),
                cost=-float(result.objective.get("costs", 0.0)),
                names=int(result.n_names),
            )
        rows.append(row)
    return rows
