"""The ``trimtab sweep``, ``trimtab frontier`` and ``trimtab backtest`` commands.

:func:`register` adds them to the main command-line app. They follow its conventions: exit codes
0 ok, 1 infeasible, 2 bad input, 3 solver failure; one line on stderr naming the file or key and
what was expected, never a traceback; outputs written to a temporary folder, then renamed;
``--json`` and ``--quiet``; a progress bar on stderr; ``--executor``, ``--workers``, ``--scheduler``.
"""

from __future__ import annotations

import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, TypeVar

import typer

from trimtab.cli._guard import EXIT_BAD_INPUT, EXIT_INFEASIBLE, EXIT_SOLVER, guarded
from trimtab.cli._app import (  # noqa: F401 - the conventions every many-run command shares
    ExecutorOpt, JsonOpt, QuietOpt, ScenarioArg, SchedulerOpt, WorkersOpt, _emit, _executor, _flags, _jsonable, _say,
    _say_table, add_commands, family, progress_bar,
)
from trimtab.cli._guard import fail as _fail
from trimtab.errors import InputError

if TYPE_CHECKING:  # numpy, pandas and yaml are imported where used: registering the commands stays light
    import pandas as pd

F = TypeVar("F", bound=Callable[..., Any])


def _default_out(scenario: Any, command: str) -> Path:
    return scenario.path.resolve().parent / "results" / f"{command}-{scenario.name}"


# ---------------------------------------------------------------------------------------------
# Parsing grids
# ---------------------------------------------------------------------------------------------
def parse_values(text: str, owner: str) -> list[Any]:
    """``a:b:n`` (n evenly spaced values), ``[v1, v2]`` (a YAML list) or ``v1,v2,…`` (YAML scalars)."""
    import numpy as np

    from trimtab.scenario._strict_yaml import load_yaml_text

    body = text.strip()
    if not body:
        raise InputError(f"{owner}: no values given; expected v1,v2,… or start:stop:count or [v1, v2]")
    try:
        if body.startswith("["):
            values = load_yaml_text(body, owner)
            if not isinstance(values, list) or not values:
                raise InputError(f"{owner}: expected a non-empty YAML list, got {body!r}")
            return values
        if ":" in body and "," not in body:
            parts = body.split(":")
            if len(parts) != 3:
                raise InputError(f"{owner}: a range is start:stop:count, got {body!r}")
            start, stop, count = float(parts[0]), float(parts[1]), int(parts[2])
            if count < 2:
                raise InputError(f"{owner}: a range needs a count ≥ 2, got {count}")
            return [round(float(x), 12) for x in np.linspace(start, stop, count)]  # 0.045, not 0.045000000000000005
        return [load_yaml_text(part.strip(), owner) for part in body.split(",")]
    except ValueError as err:
        raise InputError(f"{owner}: could not read {body!r} as values ({str(err).splitlines()[0]})") from None


def parse_grid(items: Sequence[str], grid_file: Path | None) -> dict[str, list[Any]] | list[dict[str, Any]]:
    """``--grid KEY=VALUES`` options (every combination), or a grid file (a mapping or a list of points)."""
    from trimtab.scenario._strict_yaml import read_yaml

    if grid_file is not None:
        if items:
            raise InputError("--grid and --grid-file: give one, not both")
        loaded = read_yaml(grid_file, "grid")
        if not isinstance(loaded, (dict, list)) or not loaded:
            raise InputError(f"{grid_file}: expected a mapping parameter → list of values, or a list of points")
        return loaded
    if not items:
        raise InputError("sweep: give at least one --grid KEY=VALUES (for example --grid tracking_error.max=0.01:0.05:5)")
    grid: dict[str, list[Any]] = {}
    for item in items:
        key, sep, values = item.partition("=")
        if not sep or not key.strip():
            raise InputError(f"--grid {item}: expected KEY=VALUES, for example risk_aversion=1,5,10")
        grid[key.strip()] = parse_values(values, f"--grid {key.strip()}")
    return grid


def _check_floats(values: list[Any], owner: str) -> list[float]:
    try:
        return [float(v) for v in values]
    except (TypeError, ValueError):
        raise InputError(f"{owner}: expected numbers, got {values!r}") from None


# ---------------------------------------------------------------------------------------------
# Shared options
# ---------------------------------------------------------------------------------------------
def _out_option(command: str) -> Any:
    """``--out`` of one command, its default folder spelled out."""
    return typer.Option("--out", "-o", help=f"Output folder (default: results/{command}-<name> next to the scenario).", show_default=False)


def _load(scenario: Path) -> Any:
    from trimtab.scenario import load_inputs, load_scenario

    return load_inputs(load_scenario(scenario))


def _exit_for_points(table: pd.DataFrame) -> None:
    """0 when any point solved; else 1 (all infeasible), 3 (a solver failure) or 2."""
    if (table["status"] == "solved").any():
        return
    first = table.iloc[0]
    code = {"infeasible": EXIT_INFEASIBLE, "solver failure": EXIT_SOLVER}.get(str(first["status"]), EXIT_BAD_INPUT)
    _fail(f"no point solved; first: {table.index[0]}: {first['status']}: {first['error']}", code)


def _report_failures(table: pd.DataFrame, label: Callable[[Any], str] = str) -> None:
    for key, row in table[table["status"] != "solved"].head(5).iterrows():
        sys.stderr.write(f"trimtab: warning: {label(key)}: {row['status']}: {row['error']}\n")
    extra = int((table["status"] != "solved").sum()) - 5
    if extra > 0:
        sys.stderr.write(f"trimtab: warning: and {extra} more points did not solve (see the table)\n")


# ---------------------------------------------------------------------------------------------
# sweep
# ---------------------------------------------------------------------------------------------
def sweep_command(
    ctx: typer.Context,
    scenario: ScenarioArg,
    grid: Annotated[list[str] | None, typer.Option("--grid", "-g", help="KEY=VALUES, repeatable: v1,v2,… or start:stop:count or a YAML list \\[v1, v2]. Every combination is solved.", metavar="KEY=VALUES", show_default=False)] = None,
    grid_file: Annotated[Path | None, typer.Option("--grid-file", help="YAML: parameter → list of values, or a list of points.", show_default=False)] = None,
    out: Annotated[Path | None, _out_option("sweep")] = None,
    executor: ExecutorOpt = None,
    workers: WorkersOpt = None,
    scheduler: SchedulerOpt = None,
    json_output: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Solve a scenario over a grid of parameter values; one table and one HTML report.

    The grid can vary the risk aversion, the tracking-error cap, the turnover cap or any limit by its
    dotted key; every combination of the values is solved.
    """
    from trimtab.report._pages import write_sweep
    from trimtab.runs._sweep import grid_points, sweep

    as_json, quiet = _flags(ctx, json_output, quiet)
    parsed = parse_grid(grid or [], grid_file)
    n_points = len(grid_points(parsed))
    inputs = _load(scenario)
    with _executor(executor, workers, scheduler) as runner, progress_bar(min(n_points, runner.n_workers), "sweep", quiet) as tick:
        result = sweep(inputs.model, inputs.scenario.rebalance_mapping(), parsed, executor=runner, progress=tick, **inputs.rebalance_kwargs())
    target = out if out is not None else _default_out(inputs.scenario, "sweep")
    write_sweep(result, target, inputs=[scenario], title=f"Sweep: {inputs.scenario.name}")
    if as_json:
        _emit({"scenario": inputs.scenario.name, "output": str(target), "parameters": result.parameters, "table": result.table})
    _say(result.summary(), not (as_json or quiet))
    if not (as_json or quiet):
        hedged = [c for c in ("hedged_tracking_error", "overlay_gross") if c in result.table.columns]  # an overlay
        columns = [*result.parameters, "status", "tracking_error", *hedged, "turnover", "expected_alpha"]
        _say_table(result.table[columns].reset_index(drop=True), "Sweep points", True)
        _say(f"Wrote the table and report to {target}", True)
    _report_failures(result.table)
    _exit_for_points(result.table)


# ---------------------------------------------------------------------------------------------
# frontier
# ---------------------------------------------------------------------------------------------
def frontier_command(
    ctx: typer.Context,
    scenario: ScenarioArg,
    tracking_error: Annotated[str | None, typer.Option("--te", help="TE caps: v1,v2,… or start:stop:count (default: ¼ to 2× the scenario's cap).", metavar="VALUES", show_default=False)] = None,
    turnover: Annotated[str | None, typer.Option("--turnover", help="One-way turnover caps for a second frontier: v1,v2,… or start:stop:count.", metavar="VALUES", show_default=False)] = None,
    points: Annotated[int, typer.Option("--points", help="Points of the default TE grid.", min=2)] = 10,
    out: Annotated[Path | None, _out_option("frontier")] = None,
    executor: ExecutorOpt = None,
    workers: WorkersOpt = None,
    scheduler: SchedulerOpt = None,
    json_output: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Trace expected active return against tracking error (and against turnover).

    Every point is solved under the scenario's other limits; writes the tables and a report with
    the charts.
    """
    from trimtab.report._pages import write_frontier
    from trimtab.runs._frontier import frontier
    from trimtab.scenario._instruments import refuse_overlay

    as_json, quiet = _flags(ctx, json_output, quiet)
    te = _check_floats(parse_values(tracking_error, "--te"), "--te") if tracking_error else None
    caps = _check_floats(parse_values(turnover, "--turnover"), "--turnover") if turnover else None
    inputs = _load(scenario)
    refuse_overlay(inputs.scenario, "frontier")
    kwargs = inputs.rebalance_kwargs()
    if kwargs.get("alpha") is None:
        raise InputError(f"{scenario}: data.alpha: the frontier needs an alpha file (expected return is αᵀ(w − b))")
    n_te = len(te) if te else points
    with _executor(executor, workers, scheduler) as runner, progress_bar(
        min(n_te, runner.n_workers) + (min(len(caps), runner.n_workers) if caps else 0), "frontier", quiet
    ) as tick:
        result = frontier(inputs.model, inputs.scenario.rebalance_mapping(), tracking_errors=te, turnovers=caps,
                          n_points=points, executor=runner, progress=tick, **kwargs)
    target = out if out is not None else _default_out(inputs.scenario, "frontier")
    write_frontier(result, target, inputs=[scenario], title=f"Frontier: {inputs.scenario.name}")
    if as_json:
        _emit({"scenario": inputs.scenario.name, "output": str(target), "tracking_error": result.tracking_error, "turnover": result.turnover})
    if not (as_json or quiet):
        _say(result.summary(), True)
        _say_table(result.tracking_error.drop(columns=["error"]), "Frontier against tracking error (limit = TE cap)", True)
        _say(f"Wrote the tables and report to {target}", True)
    _report_failures(result.tracking_error.set_index("limit"), label=lambda cap: f"tracking-error cap {100 * float(cap):.2f}%")
    _exit_for_points(result.tracking_error.set_index("limit"))


# ---------------------------------------------------------------------------------------------
# backtest
# ---------------------------------------------------------------------------------------------
def backtest_command(
    ctx: typer.Context,
    scenarios: Annotated[list[Path], typer.Argument(help="One or more scenario YAML files, run side by side.", metavar="SCENARIO.yaml", show_default=False)],
    fit: Annotated[Path | None, typer.Option("--fit", help="Fit config (returns, factor returns, estimator); default: the first scenario's model.fit.", show_default=False)] = None,
    alpha_history: Annotated[Path | None, typer.Option("--alpha-history", help="Alpha by date (annualised): long (date, asset, alpha) or wide (date, one column per asset); default: the scenario's one alpha at every date.", show_default=False)] = None,
    window: Annotated[int, typer.Option("--window", help="Rows in the trailing estimation window.", min=2)] = 250,
    every: Annotated[int, typer.Option("--every", help="Rebalance every n-th row.", min=1)] = 21,
    start: Annotated[str | None, typer.Option("--start", help="First rebalance on or after this date.", metavar="YYYY-MM-DD", show_default=False)] = None,
    max_dates: Annotated[int | None, typer.Option("--max-dates", help="At most this many rebalance dates.", min=1, show_default=False)] = None,
    cost_bps: Annotated[float, typer.Option("--cost-bps", help="Linear cost per unit traded, basis points.", min=0)] = 10.0,
    out: Annotated[Path | None, typer.Option("--out", "-o", help="Output folder (default: results/backtest next to the first scenario).", show_default=False)] = None,
    executor: ExecutorOpt = None,
    workers: WorkersOpt = None,
    scheduler: SchedulerOpt = None,
    json_output: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    """Walk-forward backtest of one or more scenarios, re-fitting the model at each date.

    At each rebalance date the model is re-fitted on the trailing window and each scenario is
    rebalanced from its drifted book and held to the next date. Reports realised against forecast
    tracking error (the bias statistic), turnover, costs, exposures and risk contributions through
    time.
    """
    import pandas as pd

    from trimtab.runs._backtest import backtest, fit_settings_mapping
    from trimtab.report._pages import write_backtest
    from trimtab.scenario import load_fit_config, load_inputs, load_returns, load_scenario
    from trimtab.scenario._instruments import refuse_overlay
    from trimtab.scenario._run import variant_limits
    from trimtab.scenario._schema import FitSettings, ReturnsFile

    as_json, quiet = _flags(ctx, json_output, quiet)
    loaded = [load_scenario(s) for s in scenarios]
    for each in loaded:
        refuse_overlay(each, "backtest")
    names = [s.name for s in loaded]
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise InputError(f"backtest: scenario names must differ; {', '.join(dup)} appears twice (set name: in the files)")
    settings: FitSettings
    if fit is not None:
        settings = load_fit_config(fit)
    elif loaded[0].spec.model.fit is not None:
        settings = loaded[0].spec.model.fit
    else:
        raise InputError(f"{scenarios[0]}: model is a saved folder; give --fit CONFIG.yaml (the returns and estimator to re-fit with)")
    returns = load_returns(settings.returns, what="returns")
    factors = load_returns(settings.factor_returns, what="factor returns") if settings.factor_returns is not None else None
    first = load_inputs(loaded[0])
    inputs = [first] + [load_inputs(s, model=first.model) for s in loaded[1:]]
    if alpha_history is not None:
        # model_validate: type checkers do not see the file spec's positional Field defaults
        # wide (a date column, one column per asset) or long (date, asset, alpha)
        alpha = load_returns(ReturnsFile.model_validate({"path": str(alpha_history), "value_column": "alpha"}), what="alpha history")
    else:
        if first.alpha is None:
            raise InputError(f"{scenarios[0]}: data.alpha: give an alpha file or --alpha-history")
        alpha = pd.DataFrame([first.alpha], index=returns.index[:1])
    schedule = list(returns.index[window - 1 :: every])
    if start is not None:
        try:
            begin = pd.Timestamp(start)
        except ValueError:
            raise InputError(f"--start: expected a date YYYY-MM-DD, got {start!r}") from None
        schedule = [d for d in schedule if d >= begin]
    if max_dates is not None:
        schedule = schedule[:max_dates]
    if not schedule:
        raise InputError(f"--start {start}: no rebalance date left (the returns end {returns.index[-1].date()})")
    mappings = {i.scenario.name: {**i.scenario.rebalance_mapping(),
                                  "backtest": {"when_infeasible": i.scenario.spec.backtest.when_infeasible}} for i in inputs}
    with _executor(executor, workers, scheduler) as runner, progress_bar(len(mappings), "backtest", quiet) as tick:
        result = backtest(
            returns, alpha, mappings, window=window, rebalance_dates=schedule, factor_returns=factors,
            fit=fit_settings_mapping(settings), benchmark=first.benchmark, initial_holdings=first.holdings,
            attributes=first.attributes, nav=first.nav, costs=cost_bps / 1e4, executor=runner, progress=tick,
            changed_limits={i.scenario.name: variant_limits(i.scenario) for i in inputs},
        )
    target = out if out is not None else loaded[0].path.resolve().parent / "results" / "backtest"
    write_backtest(result, target, inputs=[*scenarios, *([fit] if fit else [])], title="Walk-forward backtest")
    if as_json:
        _emit({"scenarios": names, "output": str(target), "bias": result.bias, "totals": result.totals, "failures": result.failures})
    if not (as_json or quiet):
        _say(result.summary(), True)
        _say(f"Wrote the history, tables and report to {target}", True)
    for name, error in result.failures.items():
        sys.stderr.write(f"trimtab: warning: {name}: {error}\n")


@family
def register(app: typer.Typer) -> None:
    """Add ``sweep``, ``frontier`` and ``backtest`` to the main command-line app."""
    add_commands(app, {"sweep": sweep_command, "frontier": frontier_command, "backtest": backtest_command}, guard=guarded)


__all__ = ["backtest_command", "frontier_command", "parse_grid", "parse_values", "register", "sweep_command"]
