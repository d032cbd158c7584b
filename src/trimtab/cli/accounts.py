"""The ``trimtab accounts`` command: many accounts rebalanced on one scenario, their trades pooled.

:func:`register` adds it to the main app. It follows the app's conventions: bad input is one line on
stderr naming the file, column and account, exit 2; outputs go to a temporary folder, then are
renamed; ``--json``/``--quiet``; a progress bar on stderr; ``--executor``, ``--workers``,
``--scheduler``. Exit 0 when every account solved, 1 when any did not (the outputs are still written,
and the summary lists each with its reason).
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from trimtab.cli._app import (
    ExecutorOpt, JsonOpt, QuietOpt, ScenarioArg, SchedulerOpt, WorkersOpt, _emit, _executor, _flags, _say, _say_table,
    add_commands, family, progress_bar,
)
from trimtab.cli._guard import EXIT_INFEASIBLE
from trimtab.cli._guard import fail as _fail

AccountsOpt = Annotated[Path, typer.Option("--accounts", help="One account per row: account, nav, cash, exclude (a;b;c) and limit columns such as tracking_error.max.", show_default=False)]
HoldingsOpt = Annotated[Path, typer.Option("--holdings", help="Long format: account, asset, and weight or shares.", show_default=False)]
OverridesOpt = Annotated[Path | None, typer.Option("--overrides", help="YAML: account → {limits: {key: value}, exclude: \\[assets]}.", show_default=False)]
CapOpt = Annotated[float | None, typer.Option("--max-adv-fraction", help="Cap on the shares traded per name over all accounts, a fraction of ADV (0.05 = 5%).", min=0.0, max=1.0, show_default=False)]
ImpactOpt = Annotated[float | None, typer.Option("--impact", help="Square-root impact coefficient: a pooled block of G shares moves the price by impact·√(G/ADV).", min=0.0, show_default=False)]
OutOpt = Annotated[Path | None, typer.Option("--out", "-o", help="Output folder (default: results/accounts-<name> next to the scenario).", show_default=False)]


def accounts_command(
    ctx: typer.Context,
    scenario: ScenarioArg,
    accounts: AccountsOpt,
    holdings: HoldingsOpt,
    overrides: OverridesOpt = None,
    max_adv_fraction: CapOpt = None,
    impact: ImpactOpt = None,
    out: OutOpt = None,
    executor: ExecutorOpt = None,
    workers: WorkersOpt = None,
    scheduler: SchedulerOpt = None,
    json_output: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Rebalance many accounts on one scenario and model, their trades pooled.

    Each account brings its holdings, NAV, exclusions and limit overrides. The trades of all accounts
    are priced with the impact of the pooled block (rounds until the pooled trades settle) and held
    under --max-adv-fraction per name together. Writes summary.csv, orders.csv and orders/<account>.csv,
    blocks.csv, given_up.csv, weights.csv and report.html. Exits 1 when any account did not solve.
    """
    from trimtab.runs.accounts import rebalance_accounts
    from trimtab.scenario._accounts import read_accounts
    from trimtab.runs.accounts._writer import write_accounts
    from trimtab.scenario import load_inputs, load_scenario
    from trimtab.scenario._instruments import refuse_overlay

    as_json, quiet = _flags(ctx, json_output, quiet)
    loaded = load_scenario(scenario)
    refuse_overlay(loaded, "accounts")
    inputs = load_inputs(loaded)
    mapping = inputs.scenario.rebalance_mapping()
    from trimtab.construct import validate_scenario

    spec = validate_scenario(mapping, source=str(scenario))
    book = read_accounts(accounts, holdings, spec, overrides_path=overrides)
    aggregate = {k: v for k, v in {"max_adv_fraction": max_adv_fraction, "impact": impact}.items() if v is not None}
    with _executor(executor, workers, scheduler) as runner, progress_bar(None, "accounts", quiet) as tick:  # type: ignore[arg-type]
        result = rebalance_accounts(inputs.model, spec, book, alpha=inputs.alpha, benchmark=inputs.benchmark,
                                    attributes=inputs.attributes, aggregate=aggregate or None, executor=runner,
                                    progress=tick)
    target = out if out is not None else loaded.path.resolve().parent / "results" / f"accounts-{loaded.name}"
    inputs_read = [scenario, accounts, holdings, *([overrides] if overrides else [])]
    files = write_accounts(result, target, inputs=inputs_read, title=f"Accounts: {loaded.name}")
    if as_json:
        _emit({"scenario": loaded.name, "output": str(target), "files": files, "rounds": result.rounds,
               "converged": result.converged, "summary": result.summary})
    if not (as_json or quiet):
        _say(result.describe(), True)
        worst = result.summary[result.summary["status"] == "solved"].sort_values("tracking_error", ascending=False)
        columns = ["tracking_error", "expected_alpha", "turnover", "orders"]
        _say_table(worst[columns].head(10).reset_index(), "Highest tracking error", True)
        from trimtab.report import CAUTION

        _say(f"Wrote {len(files)} files to {target}\n{CAUTION}", True)
    failed = result.failed
    if len(failed):
        for name, row in failed.head(5).iterrows():
            sys.stderr.write(f"trimtab: warning: account {name}: {row['status']}: {row['reason']}\n")
        _fail(f"{len(failed)} of {len(result.summary)} accounts did not solve (listed in {target / 'summary.csv'}); "
              "the others' orders are written", EXIT_INFEASIBLE)


@family
def register(app: typer.Typer) -> None:
    """Add ``accounts`` to the command line."""
    add_commands(app, {"accounts": accounts_command})
