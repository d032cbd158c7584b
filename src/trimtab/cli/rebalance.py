"""``trimtab check``, ``rebalance`` and ``compare``: validate a scenario, solve it, run scenarios side by side."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Annotated, Any

import typer

from trimtab.cli._app import Ui, _optional_report, _print_relaxation, _print_warnings, _report_module, _ui, add_commands, family
from trimtab.cli._guard import EXIT_INFEASIBLE, EXIT_NOT_FIT, EXIT_SOLVER
from trimtab.cli._guard import fail as _fail
from trimtab.errors import InfeasibleError, InputError, SolverError

def _relaxation_rows(err: InfeasibleError) -> list[dict[str, Any]]:
    from trimtab.scenario._jsonable import jsonable
    from trimtab.scenario._run import relaxation_frame

    return jsonable(relaxation_frame(err))  # type: ignore[no-any-return]


def _infeasible_line(err: InfeasibleError) -> str:
    """'infeasible: these limits cannot all hold: a, b (…)' from the conflict set, else the error's text."""
    if err.conflict:
        from trimtab._format import compact_limits

        return f"infeasible: these limits cannot all hold: {compact_limits(err.conflict)} (the table above shows how far each must move)"
    return str(err)



# ---------------------------------------------------------------------- check
ScenarioArg = Annotated[Path, typer.Argument(help="A scenario YAML file.", metavar="SCENARIO.yaml", show_default=False)]


def check(ctx: typer.Context, scenario: ScenarioArg) -> None:
    """Validate a scenario and every file it names, without solving.

    Reads the scenario (and the files it extends), the model (or fits it, when the scenario gives
    fit settings), the holdings, benchmark, alpha and attributes, aligns their asset ids to the
    model, reports what was dropped or filled and why, and builds the optimizer's problem, which
    checks every limit against the model and the data (factor names, attribute columns, asset ids).
    """
    from trimtab.scenario import load_inputs, load_scenario
    from trimtab.scenario._run import build, describe

    from trimtab._format import frame_table as _frame_table

    ui = _ui(ctx)
    with ui.progress() as step:
        step("reading the scenario")
        loaded = load_scenario(scenario)
        inputs = load_inputs(loaded, step=step)
        step("checking the limits against the model and the data")
        build(inputs)
    document = describe(inputs)
    ui.emit({**document, "status": "ok"})
    if not ui.chatty:
        return
    bases = f" (extends {', '.join(p.name for p in loaded.chain[1:])})" if len(loaded.chain) > 1 else ""
    ui.say(f"[bold]Scenario {loaded.name}[/bold]{bases}: {loaded.spec.description or ''}")
    model = inputs.model
    ui.say(f"Model: {model.n_assets:,} assets × {model.n_factors} factors")
    sizes = inputs.alignment.sizes.copy()
    sizes.index.name = "input"
    ui.table(_frame_table(sizes.astype(int), "Inputs aligned to the model's assets"))
    if not inputs.alignment.table.empty:
        ui.say(inputs.alignment.summary(changes_only=True))
    ui.say("Objective: " + "; ".join(
        f"{k}: " + (", ".join(f"{a}={b}" for a, b in v.items()) if isinstance(v, dict) else str(v))
        for k, v in loaded.spec.objective.items()
    ))
    ui.say(f"Constraints: {', '.join(loaded.spec.constraints) or 'none'}")
    ui.say(f"Outputs would go to {loaded.output_dir}")
    ui.say("[green]OK[/green]: the scenario and its files are valid.")



# ---------------------------------------------------------------------- rebalance
OutOption = Annotated[
    Path | None,
    typer.Option("--out", "-o", help="Output folder (default: the scenario's output.dir, else results/<name> next to it).", show_default=False),
]


def rebalance(ctx: typer.Context, scenario: ScenarioArg, out: OutOption = None) -> None:
    """Rebalance the book under a scenario and write the trade list and reports.

    Solves, verifies every limit on the returned weights, and writes the weights, trades, constraint
    table, pre- and post-trade attributions, result.json and report.html. An infeasible scenario
    prints its relaxation table, writes nothing and exits with 1. Orders that no book in whole lots
    can make hold every limit are written as trades_not_fit_to_send.csv and the command exits with 6.
    """
    from trimtab.scenario import load_inputs, load_scenario
    from trimtab.scenario._run import solve, write_rebalance

    ui = _ui(ctx)
    with ui.progress() as step:
        step("reading the scenario")
        loaded = load_scenario(scenario)
        inputs = load_inputs(loaded, step=step)
        step("solving")
        run = solve(inputs)
    if isinstance(run.error, InfeasibleError):
        _print_relaxation(ui, loaded.name, run.error)
        ui.emit({"scenario": loaded.name, "status": "infeasible", "conflict": list(run.error.conflict or []), "relaxation": _relaxation_rows(run.error)})
        _fail(f"{loaded.path}: {_infeasible_line(run.error)}", EXIT_INFEASIBLE)
    if run.error is not None:
        raise run.error
    with ui.progress() as step:
        step("writing the outputs")
        written = write_rebalance(run, out)
    _print_warnings(ui, run.result)
    fit = run.result.trade_list is None or run.result.trade_list.ok
    ui.emit({"scenario": loaded.name, "status": "solved" if fit else "not_fit_to_send", "output": str(written.folder),
             "files": written.files, **_result_document(run.result)})
    if ui.chatty:
        _print_result(ui, run.result)
        ui.say(f"Wrote {len(written.files)} files to {written.folder}")
    if not fit:
        from trimtab.construct._orders import not_fit_line

        _fail(f"{loaded.path}: {not_fit_line(run.result.trade_list)}", EXIT_NOT_FIT)



def _result_document(result: Any) -> dict[str, Any]:
    """The documented report document (docs/outputs.md) under the key ``report``."""
    return {"report": _report_module().report_document(result)}


def _print_result(ui: Ui, result: Any) -> None:
    report = _optional_report()
    if report is not None and hasattr(report, "print_rebalance"):
        report.print_rebalance(result, console=ui.out)
    else:
        ui.out.print(str(result.summary()))


# ---------------------------------------------------------------------- compare
def compare(
    ctx: typer.Context,
    scenarios: Annotated[list[Path], typer.Argument(help="One or more scenario YAML files (each with its own name).", metavar="SCENARIO.yaml", show_default=False)],
    out: Annotated[Path | None, typer.Option("--out", "-o", help="Output folder (default: results/compare next to the first scenario).", show_default=False)] = None,
) -> None:
    """Run what-if scenarios side by side: one table and one HTML report.

    An infeasible scenario does not stop the others; it shows as infeasible in the table, its
    relaxation table is printed, and the exit code is 1.
    """
    from trimtab.scenario import load_scenario
    from trimtab.scenario._run import comparison_table, load_all, solve, write_comparison

    ui = _ui(ctx)
    with ui.progress(total=None) as step:
        step("reading the scenarios")
        loaded = [load_scenario(s) for s in scenarios]
        names = [s.name for s in loaded]
        dup = {n for n in names if names.count(n) > 1}
        if dup:
            raise InputError(f"compare: scenario names must differ; {', '.join(sorted(dup))} appears twice (set name: in the files)")
        all_inputs = load_all(loaded, step)
        runs = []
        for inputs in all_inputs:
            step(f"solving {inputs.scenario.name}")
            runs.append(solve(inputs))
        step("writing the comparison")
        target = out if out is not None else loaded[0].path.resolve().parent / "results" / "compare"
        written = write_comparison(runs, target)
    _print_warnings(ui, {r.name: r.result for r in runs if r.result is not None})
    table = comparison_table(runs)
    ui.emit({"scenarios": names, "status": {r.name: r.status for r in runs}, "comparison": table, "output": str(written.folder)})
    if ui.chatty:
        _print_comparison(ui, runs)
        ui.say(f"Wrote the comparison to {written.folder}")
        unsolved = [r.name for r in runs if r.error is not None]
        if unsolved:
            ui.say(f"report.html shows every scenario; {', '.join(f'{n}/relaxation.csv' for n in unsolved)} hold the raw relaxation numbers")
    _exit_for(runs)


def _print_comparison(ui: Ui, runs: Sequence[Any]) -> None:
    """Every scenario side by side; an unsolved one shows its status, then its relaxation table."""
    from trimtab.scenario._run import comparison_subjects

    _report_module().print_comparison(comparison_subjects(runs), console=ui.out)


def _exit_for(runs: Sequence[Any]) -> None:
    errors = [r.error for r in runs if r.error is not None]
    if any(isinstance(e, SolverError) for e in errors):
        _fail(next(f"{r.name}: {r.error}" for r in runs if isinstance(r.error, SolverError)), EXIT_SOLVER)
    if errors:
        bad = [r.name for r in runs if r.error is not None]
        _fail(f"{len(bad)} of {len(runs)} scenarios infeasible: {', '.join(bad)} (see the relaxation table above)", EXIT_INFEASIBLE)



@family
def register(app: typer.Typer) -> None:
    """Add ``check``, ``rebalance`` and ``compare`` to the command line."""
    add_commands(app, {"check": check, "rebalance": rebalance, "compare": compare})
