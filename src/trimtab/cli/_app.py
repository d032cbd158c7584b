"""The one ``typer`` app of the ``trimtab`` command line, its global options and what commands share.

The command families (:mod:`trimtab.cli.model`, :mod:`~trimtab.cli.rebalance`, …) each register their
commands on :data:`app` through :func:`add_commands`, which wraps every command in the one guard
(:func:`trimtab.cli._guard.guarded`): one line on stderr and the documented exit code, never a
traceback. Exit codes: 0 ok; 1 infeasible (the relaxation table is printed); 2 bad input (one line
on stderr naming the file, key or column); 3 solver failure; 4 an internal error (a bug: please
report it). Everything printed goes through the cli package; the work is done by
:mod:`trimtab.scenario`.
"""

from __future__ import annotations

import inspect
import math
from pathlib import Path

import functools
import json
import sys
import time
from collections.abc import Callable, Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Annotated, Any, TypeVar

from typing import TYPE_CHECKING

import typer

from trimtab.cli._guard import guarded
from trimtab.cli._usage import OneLineGroup
from trimtab._version import __version__
from trimtab.errors import InfeasibleError

if TYPE_CHECKING:  # imported where used: `trimtab --help` loads neither pandas nor the optimizer
    import pandas as pd
    from rich.console import Console
    from rich.table import Table

    from trimtab.runs._executors import Executor, Outcome



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
    cls=OneLineGroup,  # one-line usage errors, global options in either place, plain help placeholders
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
    """Global options go before or after the command: `trimtab --json check base.yaml`."""
    ctx.obj = Ui(json=json_output, quiet=quiet, verbose=verbose)


# ---------------------------------------------------------------------- formatting helpers
def _print_relaxation(ui: Ui, name: str | None, err: InfeasibleError) -> None:
    """The relaxation table in each limit's unit (weights as % of NAV), unless --json or --quiet."""
    if not ui.chatty:
        return
    _report_module().print_relaxation(err, console=ui.out, name=name)


def _report_module() -> Any:
    from trimtab.scenario._run import report_writers

    return report_writers()


def _optional_report() -> Any:
    try:
        import trimtab.report as report
    except ImportError:
        return None
    return report


def _print_warnings(ui: Ui, subject: Any) -> None:
    """Warnings on stderr, one line each (also with --json; not with --quiet): one result's, or a
    comparison's (scenario name → result) with a shared warning printed once."""
    if not ui.quiet and subject is not None:
        _report_module().print_warnings(subject, console=ui.err)


#: The order of ``trimtab --help``; commands not listed follow in the order their families register.
HELP_ORDER = ("demo", "check", "fit", "risk", "rebalance", "compare", "sweep", "frontier", "backtest", "accounts", "explore",
              "stress", "replay", "attribute-returns")


#: The ``register(app)`` of each command family imported so far; cli/__init__.py imports every family
#: and calls them on :data:`app`.
FAMILIES: list[Callable[[typer.Typer], None]] = []


def family(register: Callable[[typer.Typer], None]) -> Callable[[typer.Typer], None]:
    """Mark a module's ``register(app)`` as a command family's, for the package to call on its app."""
    FAMILIES.append(register)
    return register


def add_commands(app: typer.Typer, commands: dict[str, Callable[..., Any]], *, guard: Callable[[F], F] = _guarded) -> None:
    """Register each command (its name on the command line → its function) on ``app``, wrapped in the guard."""
    for name, command in commands.items():
        app.command(name)(guard(command))


def finish(app: typer.Typer) -> None:
    """Put the registered commands in the order of ``--help`` and reflow their help text."""
    rank = {name: i for i, name in enumerate(HELP_ORDER)}
    app.registered_commands.sort(key=lambda c: rank.get(c.name or "", len(rank)))
    _reflow_help(app)


def _reflow_help(app: typer.Typer) -> None:
    """Each command's help from its docstring with every paragraph on one line.

    typer keeps a docstring's line breaks, so a paragraph wrapped at 100 columns in the source broke
    mid-sentence in ``--help``; the terminal then wraps the joined paragraph to its own width.
    """
    for command in app.registered_commands:
        if command.help is None and command.callback is not None and command.callback.__doc__:
            paragraphs = inspect.cleandoc(command.callback.__doc__).split("\n\n")
            command.help = "\n\n".join(" ".join(p.split()) for p in paragraphs)


# ---------------------------------------------------------------------------------------------
# Conventions shared by the many-run commands (sweep, frontier, backtest, accounts)
# ---------------------------------------------------------------------------------------------
def _flags(ctx: typer.Context, json_output: bool, quiet: bool) -> tuple[bool, bool]:
    """--json / --quiet given to the command or to the main app before it."""
    root = ctx.find_root().obj
    return json_output or bool(getattr(root, "json", False)), quiet or bool(getattr(root, "quiet", False))


@contextmanager
def progress_bar(total: int, label: str, quiet: bool) -> Iterator[Callable[[Outcome], None]]:
    """A rich progress bar on stderr (off with --quiet or when stderr is not a terminal)."""
    from rich.console import Console
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    console = Console(file=sys.stderr)
    bar = Progress(
        TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
        console=console, transient=True, disable=quiet or not console.is_terminal,
    )
    with bar:
        task = bar.add_task(label, total=total)
        yield lambda outcome: bar.update(task, advance=1, description=f"{label}: {outcome.label}")


def _executor(executor: str | None, workers: int | None, scheduler: str | None) -> Executor:
    from trimtab.runs._executors import get_executor, resolve_kind

    return get_executor(resolve_kind(executor, workers, scheduler), workers=workers, scheduler=scheduler)


def _jsonable(value: Any) -> Any:
    import numpy as np
    import pandas as pd

    if isinstance(value, Mapping):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if isinstance(value, pd.DataFrame):
        return _jsonable(value.reset_index().to_dict(orient="records"))
    if isinstance(value, pd.Series):
        return _jsonable(value.to_dict())
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return None if not math.isfinite(float(value)) else float(value)
    if isinstance(value, (str, type(None))):
        return value
    if isinstance(value, pd.Timestamp):
        return value.isoformat()
    return str(value)


def _emit(document: Mapping[str, Any]) -> None:
    sys.stdout.write(json.dumps(_jsonable(document), indent=2) + "\n")


def _say(text: str, chatty: bool) -> None:
    if chatty:
        from rich.console import Console

        Console(file=sys.stdout, highlight=False, width=max(100, Console().width)).print(text, markup=False)


#: Table columns that are fractions of NAV or annualised fractions, shown as percentages.
_PERCENT_COLUMNS = ("tracking_error", "turnover", "expected_alpha", "tracking_error.max", "turnover.max", "limit",
                    "hedged_tracking_error", "overlay_gross")


def _say_table(frame: pd.DataFrame, title: str, chatty: bool) -> None:
    """A results table in rich form, fractions as percentages (see :func:`trimtab._format.frame_table`)."""
    if chatty:
        from rich.console import Console

        from trimtab._format import frame_table

        table = frame_table(frame, title, percent=_PERCENT_COLUMNS, max_rows=len(frame))
        Console(file=sys.stdout, highlight=False, width=max(100, Console().width)).print(table)


ScenarioArg = Annotated[Path, typer.Argument(help="A scenario YAML file.", metavar="SCENARIO.yaml", show_default=False)]
JsonOpt = Annotated[bool, typer.Option("--json", help="Print one JSON document on stdout instead of tables.", metavar="")]
QuietOpt = Annotated[bool, typer.Option("--quiet", "-q", help="Print nothing but errors (and --json output).", metavar="")]
ExecutorOpt = Annotated[str | None, typer.Option("--executor", help="inprocess, processes or dask (default: dask with --workers/--scheduler, else inprocess).", metavar="KIND", show_default=False)]
WorkersOpt = Annotated[int | None, typer.Option("--workers", help="Worker processes (a local Dask cluster unless --executor processes).", min=1, show_default=False)]
SchedulerOpt = Annotated[str | None, typer.Option("--scheduler", help="Address of a running Dask scheduler, e.g. tcp://10.0.0.5:8786.", metavar="ADDRESS", show_default=False)]
