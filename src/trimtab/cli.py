"""The ``trimtab`` command line: fit, risk, rebalance, compare, check and the demo.

Exit codes: 0 ok; 1 infeasible (the relaxation table is printed); 2 bad input (one line on stderr
naming the file, key or column); 3 solver failure; 4 an internal error (a bug: please report it).
Everything printed goes through this module; the work is done by :mod:`trimtab.scenario`.
"""

from __future__ import annotations

import inspect

import functools
import json
import sys
import time
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Annotated, Any, TypeVar

from typing import TYPE_CHECKING

import typer

from trimtab._cli_guard import EXIT_BAD_INPUT, EXIT_INFEASIBLE, EXIT_INTERNAL, EXIT_SOLVER, guarded  # noqa: F401 - re-exported
from trimtab._cli_guard import fail as _fail
from trimtab._version import __version__
from trimtab.errors import InfeasibleError, InputError, SolverError

if TYPE_CHECKING:  # imported where used: `trimtab --help` loads neither pandas nor the optimizer
    from rich.console import Console
    from rich.table import Table


app = typer.Typer(
    name="trimtab",
    help=(
        "Rebalance a fund to a risk budget on a factor risk model: fit the model, report a book's "
        "risk, rebalance under a scenario's limits, compare scenarios. Start with `trimtab demo`."
    ),
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    context_settings={"help_option_names": ["-h", "--help"]},
)

F = TypeVar("F", bound=Callable[..., Any])


# ---------------------------------------------------------------------- output and progress
@dataclass
class Ui:
    """How to print: JSON on stdout, quiet, verbose; rich tables otherwise."""

    json: bool = False
    quiet: bool = False
    verbose: bool = False
    started: float = field(default_factory=time.perf_counter)

    @functools.cached_property
    def out(self) -> Console:
        from rich.console import Console

        return Console(file=sys.stdout, width=_width(), highlight=False, soft_wrap=False)

    @functools.cached_property
    def err(self) -> Console:
        from rich.console import Console

        return Console(file=sys.stderr, width=_width(), highlight=False)

    @property
    def chatty(self) -> bool:
        """Human-readable output wanted on stdout."""
        return not (self.json or self.quiet)

    def say(self, text: str) -> None:
        if self.chatty:
            self.out.print(text)

    def note(self, text: str) -> None:
        """Detail shown with --verbose only (on stderr, so --json output stays clean)."""
        if self.verbose:
            self.err.print(f"[dim]{text}[/dim]")

    def table(self, table: Table) -> None:
        if self.chatty:
            self.out.print(table)

    def emit(self, document: Any) -> None:
        if self.json:
            from trimtab.scenario._jsonable import jsonable

            sys.stdout.write(json.dumps(jsonable(document), indent=2) + "\n")

    @contextmanager
    def progress(self, total: int | None = None) -> Iterator[Callable[[str], None]]:
        """A rich spinner (or bar, with ``total``) on stderr; yields ``step(label)``."""
        from rich.progress import BarColumn, Progress, SpinnerColumn, TextColumn, TimeElapsedColumn

        bar = Progress(
            SpinnerColumn(),
            TextColumn("{task.description}"),
            *( [BarColumn()] if total else []),
            TimeElapsedColumn(),
            console=self.err,
            transient=True,
            disable=self.quiet or not self.err.is_terminal,
        )
        t0 = time.perf_counter()
        with bar:
            task = bar.add_task("starting", total=total)

            def step(label: str) -> None:
                self.note(f"  {label} (after {time.perf_counter() - t0:.1f} s)")
                bar.update(task, description=label, advance=1 if total else None)

            yield step


def _width() -> int | None:
    """The terminal's width on a terminal (rich decides); 160 columns when piped, so tables do not wrap."""
    return None if sys.stdout.isatty() else 160


def _ui(ctx: typer.Context) -> Ui:
    root = ctx.find_root()
    if not isinstance(root.obj, Ui):
        root.obj = Ui()
    return root.obj


def _guarded(fn: F) -> F:
    """Turn trimtab's errors into one stderr line and their exit code; never a traceback."""
    return guarded(fn, on_infeasible=lambda ctx, err: _print_relaxation(_ui(ctx) if ctx is not None else Ui(), None, err))


def _version(value: bool) -> None:
    if value:
        sys.stdout.write(f"trimtab {__version__}\n")
        raise typer.Exit()


@app.callback()
def _root(
    ctx: typer.Context,
    json_output: Annotated[bool, typer.Option("--json", help="Print one JSON document on stdout instead of tables.", metavar="")] = False,
    quiet: Annotated[bool, typer.Option("--quiet", "-q", help="Print nothing but errors (and --json output).", metavar="")] = False,
    verbose: Annotated[bool, typer.Option("--verbose", "-v", help="Print each step with its timing (on stderr).", metavar="")] = False,
    version: Annotated[
        bool, typer.Option("--version", callback=_version, is_eager=True, help="Print the version and exit.", metavar="")
    ] = False,
) -> None:
    """Global options go before the command: `trimtab --json check base.yaml`."""
    ctx.obj = Ui(json=json_output, quiet=quiet, verbose=verbose)


# ---------------------------------------------------------------------- formatting helpers
def _print_relaxation(ui: Ui, name: str | None, err: InfeasibleError) -> None:
    """The relaxation table in each limit's unit (weights as % of NAV), unless --json or --quiet."""
    if not ui.chatty:
        return
    _report_module().print_relaxation(err, console=ui.out, name=name)


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


def _report_module() -> Any:
    from trimtab.scenario._run import report_writers

    return report_writers()


# ---------------------------------------------------------------------- check
ScenarioArg = Annotated[Path, typer.Argument(help="A scenario YAML file.", metavar="SCENARIO.yaml", show_default=False)]


@_guarded
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


# ---------------------------------------------------------------------- fit
@_guarded
def fit(
    ctx: typer.Context,
    config: Annotated[Path, typer.Argument(help="A fit config YAML file.", metavar="CONFIG.yaml", show_default=False)],
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder to write the model into.", show_default=False)],
    file_format: Annotated[str, typer.Option("--format", help="Table format of the saved model: parquet or csv.", metavar="parquet|csv")] = "parquet",
    overwrite: Annotated[bool, typer.Option("--overwrite", help="Replace a model already saved in --out.", metavar="")] = False,
) -> None:
    """Estimate a risk model from return files and save it to a folder."""
    from trimtab.scenario import check_inputs_outside, load_fit_config
    from trimtab.scenario._fit import fit_model, fit_summary

    ui = _ui(ctx)
    if file_format not in ("parquet", "csv"):
        raise InputError(f"--format: expected parquet or csv, got {file_format!r}")
    with ui.progress() as step:
        step("reading the fit config")
        settings = load_fit_config(config)
        check_inputs_outside(out, [config, settings.returns.path, *(s.path for s in (settings.factor_returns, settings.exposures) if s)])
        if (Path(out) / "manifest.json").exists() and not overwrite:
            raise InputError(f"{out}: already holds a model; pass --overwrite to replace it")
        step(f"fitting a {settings.method} model")
        model = fit_model(settings, config)
        step("saving the model")
        model.save(out, file_format=file_format, overwrite=overwrite)
    document = fit_summary(model, out)
    ui.emit(document)
    if ui.chatty:
        window = document.get("window")
        when = f", {window[0]} to {window[1]}" if window else ""
        ui.say(f"Fitted a {document['method']} model: {model.n_assets:,} assets × {model.n_factors} factors{when}")
        if document.get("r_squared_median") is not None:
            ui.say(f"R² of the asset regressions: median {document['r_squared_median']:.2f}")
        dropped = document["dropped"]
        if dropped:
            ui.say(f"Dropped {len(dropped)} assets: " + "; ".join(f"{a} ({r})" for a, r in list(dropped.items())[:5]))
        ui.say(f"Saved to {out}")


# ---------------------------------------------------------------------- risk
@_guarded
def risk(
    ctx: typer.Context,
    model: Annotated[Path, typer.Option("--model", "-m", help="A model folder written by `trimtab fit`.", show_default=False)],
    holdings: Annotated[Path, typer.Option("--holdings", help="Holdings file: asset, weight (or asset, shares with prices).", show_default=False)],
    benchmark: Annotated[Path | None, typer.Option("--benchmark", help="Benchmark file: asset, weight. Gives active risk.")] = None,
    attributes: Annotated[Path | None, typer.Option("--attributes", help="Attributes file (prices for shares; groups).")] = None,
    cash: Annotated[float, typer.Option("--cash", help="Cash besides the positions (currency), for holdings given as shares.", min=0.0)] = 0.0,
    nav: Annotated[float | None, typer.Option("--nav", help="Net asset value (currency); default Σ shares·price + cash.", min=0.0)] = None,
    top: Annotated[int, typer.Option("--top", help="How many top contributors to list.", min=1)] = 10,
    out: Annotated[Path | None, typer.Option("--out", "-o", help="Also write the tables, JSON and HTML report to this folder.")] = None,
) -> None:
    """Attribute a book's risk to factors, factor groups and positions.

    With --benchmark the risk attributed is active risk (tracking error).
    """
    from trimtab import FactorModel
    from trimtab.scenario import align_inputs, load_attributes, load_holdings, load_series, read_table
    from trimtab.scenario._run import write_attribution
    from trimtab.scenario._schema import AttributesFile, HoldingsFile, SeriesFile

    ui = _ui(ctx)
    with ui.progress() as step:
        step("loading the model")
        fm = FactorModel.load(model)
        step("reading the holdings")
        # model_validate: type checkers do not see the file specs' positional Field defaults
        attrs = load_attributes(AttributesFile.model_validate({"path": str(attributes)})) if attributes is not None else None
        columns = set(read_table(holdings, what="holdings").columns)
        kind = "weights" if "weight" in columns or "shares" not in columns else "shares"
        if nav is not None and nav <= 0:
            raise InputError(f"--nav: expected a positive net asset value, got {nav:g}")
        book = load_holdings(HoldingsFile.model_validate({"path": str(holdings), "kind": kind, "cash": cash, "nav": nav}), attrs)
        bench = load_series(SeriesFile.model_validate({"path": str(benchmark)}), "benchmark", "weight") if benchmark is not None else None
        aligned = align_inputs(
            fm.assets, holdings=book.weights, benchmark=bench, attributes=attrs,
            files={"holdings": str(holdings), "benchmark": str(benchmark)},
        )
        step("attributing risk")
        attribution = fm.attribute(aligned.holdings, aligned.benchmark, attributes=aligned.attributes)
        if out is not None:
            step("writing the report")
            from trimtab.report._desk import holdings_line

            write_attribution(attribution, out, [model, holdings, *(p for p in (benchmark, attributes) if p)],
                              notes=[holdings_line(kind, book.nav, book.cash, nav is not None)])
    if ui.json:
        ui.emit(
            {
                "kind": "active" if bench is not None else "total",
                "headline": attribution.headline(),
                "by_factor": attribution.by_factor,
                "by_factor_group": attribution.by_factor_group,
                "top_assets": attribution.top_assets(top),
            }
        )
        return
    if ui.chatty:
        report = _optional_report()
        if report is not None and hasattr(report, "print_attribution"):
            report.print_attribution(attribution, console=ui.out, top=top)
        else:
            ui.out.print(attribution.summary(top=top).as_text())
        from trimtab.report._desk import holdings_line

        ui.say(holdings_line(kind, book.nav, book.cash, nav is not None))
        if out is not None:
            ui.say(f"Wrote the tables, result.json and report.html to {out}")


def _optional_report() -> Any:
    try:
        import trimtab.report as report
    except ImportError:
        return None
    return report


# ---------------------------------------------------------------------- rebalance
OutOption = Annotated[
    Path | None,
    typer.Option("--out", "-o", help="Output folder (default: the scenario's output.dir, else results/<name> next to it).", show_default=False),
]


@_guarded
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
        from trimtab._cli_guard import EXIT_NOT_FIT
        from trimtab.construct._orders import not_fit_line

        _fail(f"{loaded.path}: {not_fit_line(run.result.trade_list)}", EXIT_NOT_FIT)


def _print_warnings(ui: Ui, subject: Any) -> None:
    """Warnings on stderr, one line each (also with --json; not with --quiet): one result's, or a
    comparison's (scenario name → result) with a shared warning printed once."""
    if not ui.quiet and subject is not None:
        _report_module().print_warnings(subject, console=ui.err)


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
@_guarded
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


# ---------------------------------------------------------------------- demo
@_guarded
def demo(
    ctx: typer.Context,
    out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the demo's data, model and reports.")] = Path("trimtab-demo"),
    seed: Annotated[int, typer.Option("--seed", help="Seed of the simulation; the same seed gives the same fund.")] = 7,
    n_assets: Annotated[
        int, typer.Option("--n-assets", help="Stocks in the invented universe (600 or more keeps the demo's limits feasible).", min=600, max=1762)
    ] = 1500,
) -> None:
    """Simulate the invented demo fund and run the whole job on it.

    Fits the risk model, reports today's risk, rebalances the four demo scenarios, compares them and
    writes the HTML reports; prints the headline table and where the files went.
    """
    from rich.table import Table

    from trimtab._format import format_percent as _pct
    from trimtab.scenario._demo_run import headline_rows, run_demo

    ui = _ui(ctx)
    t0 = time.perf_counter()
    with ui.progress(total=10) as step:
        done = run_demo(out, seed=seed, n_assets=n_assets, step=step)
    fund, pre_trade, runs, n_holdings = done.fund, done.pre_trade, done.runs, done.n_holdings
    elapsed = time.perf_counter() - t0
    _print_warnings(ui, {r.name: r.result for r in runs if r.result is not None})
    rows = headline_rows(done)
    ui.emit({"output": str(out), "seed": seed, "n_assets": n_assets, "seconds": elapsed, "pre_trade": pre_trade.headline(), "scenarios": rows})
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
    files = [
        ("data/", "the invented fund: returns, factor returns, holdings, benchmark, alpha, attributes"),
        ("model/", "the fitted risk model"),
        ("results/base/report.html", "the base rebalance: risk budget, trades, constraints, risk before and after"),
        ("results/base/", "its tables (trades.csv, constraints.csv, …) and result.json"),
        ("results/compare/report.html", "the four scenarios side by side, the impossible one with its relaxation"),
        ("", "table (comparison.csv and one folder each; infeasible/relaxation.csv holds the raw numbers)"),
        ("*.yaml", "the scenarios and fit configs, ready to edit and rerun"),
    ]
    width = max(len(name) for name, _ in files) + 2
    ui.say(f"\nFiles in {out}/ (replaced by the next `trimtab demo` with the same --out):")
    for name, text in files:
        ui.say(f"  {name:<{width}}{text}")
    ui.say(f"Next: trimtab rebalance {out}/low_turnover.yaml   or   trimtab check {out}/base.yaml")
    ui.say(f"Done in {elapsed:.1f} s.")


# ---------------------------------------------------------------------- registration, in the order of --help
for _command in (demo, check, fit, risk, rebalance, compare):
    app.command()(_command)


def _register_run_commands() -> None:
    """sweep, frontier and backtest come from :mod:`trimtab.runs` (when that part is installed)."""
    try:
        from trimtab.runs._commands import register
    except ImportError:
        return
    register(app)


_register_run_commands()
from trimtab._cli_explore import register as _register_explore  # noqa: E402 - the live what-if page
_register_explore(app)

from trimtab._cli_stress import register as _register_stress_commands  # noqa: E402 - needs app and _guarded above

_register_stress_commands(app)  # stress, replay, attribute-returns


def _reflow_help() -> None:
    """Each command's help from its docstring with every paragraph on one line.

    typer keeps a docstring's line breaks, so a paragraph wrapped at 100 columns in the source broke
    mid-sentence in ``--help``; the terminal then wraps the joined paragraph to its own width.
    """
    for command in app.registered_commands:
        if command.help is None and command.callback is not None and command.callback.__doc__:
            paragraphs = inspect.cleandoc(command.callback.__doc__).split("\n\n")
            command.help = "\n\n".join(" ".join(p.split()) for p in paragraphs)


_reflow_help()


# ---------------------------------------------------------------------- entry point
def main() -> None:
    """Console-script entry point (``trimtab``): signal handlers, then the app (see :mod:`trimtab._entry`)."""
    from trimtab._entry import main as entry

    entry()


if __name__ == "__main__":  # pragma: no cover
    main()
