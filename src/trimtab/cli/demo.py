"""``trimtab demo``: simulate the invented demo fund and run the whole job on it."""

from __future__ import annotations

import time
from pathlib import Path
from typing import Annotated

import typer

from trimtab.cli._app import _print_relaxation, _print_warnings, _ui, add_commands, family
from trimtab.errors import InfeasibleError

# ---------------------------------------------------------------------- demo
def demo(
    ctx: typer.Context,
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the demo's data, model and reports.")] = Path("trimtab-demo"),
    seed: Annotated[int, typer.Option("--seed", help="Seed of the simulation; the same seed gives the same fund.")] = 7,
    n_assets: Annotated[
        int, typer.Option("--n-assets", help="Stocks in the invented universe (600 or more keeps the demo's limits feasible).", min=600, max=1762)
    ] = 1500,
) -> None:
    """Simulate the invented demo fund and run the whole job on it.

    Fits the risk model, reports today's risk, rebalances the four demo scenarios, compares them,
    backtests base against alpha_factor on an alpha history with skill and writes the HTML reports.
    """
    from rich.table import Table

    from trimtab._format import format_percent as _pct
    from trimtab.runs._demo_backtest import run_demo_backtest
    from trimtab.scenario._demo_run import headline_rows, run_demo

    ui = _ui(ctx)
    t0 = time.perf_counter()
    with ui.progress(total=11) as step:
        done = run_demo(out, seed=seed, n_assets=n_assets, step=step)
        step("backtest: the alpha history, without and with the alpha factor")
        history = run_demo_backtest(out)
    fund, pre_trade, runs, n_holdings = done.fund, done.pre_trade, done.runs, done.n_holdings
    elapsed = time.perf_counter() - t0
    _print_warnings(ui, {r.name: r.result for r in runs if r.result is not None})
    rows = headline_rows(done)
    ui.emit({"output": str(out), "seed": seed, "n_assets": n_assets, "seconds": elapsed, "pre_trade": pre_trade.headline(), "scenarios": rows,
             "backtest_bias": history.bias.to_dict(orient="index")})
    if not ui.chatty:
        return
    ui.say(
        f"[bold]trimtab demo[/bold]: an invented fund of {n_holdings} names in a universe of {n_assets:,} invented stocks "
        f"(seed {seed}); the model was fitted on {len(fund.returns):,} days of simulated returns."
    )
    ui.say(f"Today's book: tracking error {_pct(pre_trade.risk)} against its cap-weighted benchmark.")
    table = Table(title="Demo scenarios (risk and alpha annualised; cost once, % of NAV)", title_justify="left", header_style="bold")
    for col in ("scenario", "status", "tracking error", "active alpha", "one-way turnover", "cost of trades", "names held"):
        table.add_column(col, justify="left" if col in ("scenario", "status") else "right", no_wrap=col == "scenario")
    for row in rows:
        table.add_row(
            row["scenario"], row["status"], _pct(row["tracking_error"]), _pct(row["active_alpha"]),
            _pct(row["turnover"], 1), _pct(row["cost"], 3), "–" if row["names"] != row["names"] else f"{row['names']:,}",
        )
    ui.table(table)
    for run in runs:
        if isinstance(run.error, InfeasibleError):
            why = "is impossible on purpose (a 0.5% tracking-error cap with 2% turnover)" if run.name == "infeasible" else "is infeasible"
            ui.say(f"\n[bold]{run.name}[/bold] {why}:")
            _print_relaxation(ui, run.name, run.error)
    ui.say("\n" + history.summary())
    files = [
        ("data/", "the invented fund: returns, factor returns, holdings, benchmark, alpha, alpha history, attributes"),
        ("", "and an index future and two style baskets for `trimtab overlay` (instruments.csv, contracts.csv)"),
        ("", "and 200 invented accounts for `trimtab accounts` (accounts.csv, account_holdings.csv)"),
        ("model/", "the fitted risk model"),
        ("results/base/report.html", "the base rebalance: risk budget, trades, constraints, risk before and after"),
        ("results/base/", "its tables (trades.csv, constraints.csv, …) and result.json"),
        ("results/compare/report.html", "the four scenarios side by side, linking to each one's own report"),
        ("results/compare/*/", "one folder each (infeasible/report.html shows its relaxation table)"),
        ("results/backtest/report.html", "base and alpha_factor backtested side by side on the alpha history"),
        ("*.yaml", "the scenarios and fit configs, ready to edit and rerun"),
    ]
    width = max(len(name) for name, _ in files) + 2
    ui.say(f"\nFiles in {out}/ (replaced by the next `trimtab demo` with the same --out):")
    for name, text in files:
        ui.say(f"  {name:<{width}}{text}")
    ui.say(f"Next: trimtab rebalance {out}/low_turnover.yaml   or   trimtab check {out}/base.yaml")
    ui.say(f"Done in {elapsed:.1f} s.")



@family
def register(app: typer.Typer) -> None:
    """Add ``demo`` to the command line."""
    add_commands(app, {"demo": demo})
