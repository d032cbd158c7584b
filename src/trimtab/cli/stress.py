"""The ``trimtab stress``, ``trimtab replay`` and ``trimtab attribute-returns`` commands.

:func:`register` adds them to the main app. They follow its conventions: one line on stderr naming
the file, key or column and exit code 2 for bad input, never a traceback; ``--json`` and ``--quiet``
before the command; outputs (``--out``) written to a temporary folder, then renamed.
"""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace
from typing import TYPE_CHECKING, Annotated, Any

import typer

from trimtab.cli._app import add_commands, family
from trimtab.cli._book import AttributesOpt, BenchmarkOpt, CashOpt, HoldingsOpt, ModelOpt, NavOpt, OutOpt, read_book, show
from trimtab.errors import InputError

if TYPE_CHECKING:  # pandas is imported inside the commands: registering them keeps `trimtab --help` light
    import pandas as pd


def _groups(attributes: pd.DataFrame | None, column: str | None) -> pd.Series | None:
    if column is None:
        return None
    if attributes is None:
        raise InputError(f"--group-by {column}: needs --attributes (the file with that column)")
    if column not in attributes.columns:
        raise InputError(f"--group-by {column}: the attributes file has no column {column!r}; it has: {', '.join(map(str, attributes.columns))}")
    return attributes[column]


# ---------------------------------------------------------------------- stress
def stress_command(
    ctx: typer.Context,
    model: ModelOpt,
    holdings: HoldingsOpt,
    shocks: Annotated[Path, typer.Option("--shocks", help="A shock file (YAML): shocks: {name: {factors: {factor: move}}}.", show_default=False)],
    benchmark: BenchmarkOpt = None,
    attributes: AttributesOpt = None,
    cash: CashOpt = 0.0,
    nav: NavOpt = None,
    unconditional: Annotated[bool, typer.Option("--unconditional", help="Move only the named factors (default: the others move as the model says they co-move).", metavar="")] = False,
    horizon: Annotated[float | None, typer.Option("--horizon", help="Length of a shock in the model's periods, for plausibility (default one month).", min=0.0, show_default=False)] = None,
    group_by: Annotated[str | None, typer.Option("--group-by", help="Attributes column whose labels a shock's specific moves may name.", show_default=False)] = None,
    out: OutOpt = None,
) -> None:
    """Run the book through named factor shocks: book, benchmark and active return under each.

    Factors a shock does not name move by their conditional expectation under the model (Gaussian
    conditioning). Each shock's plausibility is its Mahalanobis distance under the model over the
    horizon, with its χ² tail probability.
    """
    from trimtab import FactorModel
    from trimtab.report._stress_pages import write_stress
    from trimtab.scenario._shocks import load_shocks
    from trimtab.stresstest import stress
    from trimtab.stresstest._entries import factor_moves, specific_moves

    fm = FactorModel.load(model)
    entries = load_shocks(shocks)
    book = read_book(fm, holdings, benchmark, attributes, cash, nav)
    result = stress(fm, book.holdings, factor_moves(entries), benchmark=book.benchmark, conditional=not unconditional,
                    horizon=horizon, specific=specific_moves(entries), groups=_groups(book.attributes, group_by))
    files = None
    if out is not None:
        settings = {"model": str(model), "holdings": str(holdings), "shocks": str(shocks), "conditional": result.conditional,
                    "horizon": result.horizon}
        files = write_stress(result, out, [model, holdings, shocks, *(p for p in (benchmark, attributes) if p)], settings=settings)
    show(ctx, result.summary().as_text(), {"shocks": result.table(), "factor_moves": result.factor_moves}, out, files)


# ---------------------------------------------------------------------- replay
def _windows(values: list[str] | None) -> dict[str, tuple[str, str]]:
    out: dict[str, tuple[str, str]] = {}
    for value in values or []:
        name, sep, span = value.partition("=")
        start, colon, end = span.partition(":")
        if not sep or not colon or not name or not start or not end:
            raise InputError(f"--window: expected NAME=START:END (dates YYYY-MM-DD), got {value!r}")
        if name in out:
            raise InputError(f"--window: the name {name!r} is given twice")
        out[name] = (start, end)
    return out


def replay_command(
    ctx: typer.Context,
    model: ModelOpt,
    holdings: HoldingsOpt,
    benchmark: BenchmarkOpt = None,
    attributes: AttributesOpt = None,
    cash: CashOpt = 0.0,
    nav: NavOpt = None,
    length: Annotated[int | None, typer.Option("--length", help="Find the worst windows of this many periods (e.g. 21 days).", min=1, show_default=False)] = None,
    worst: Annotated[int, typer.Option("--worst", help="How many worst windows to find (they do not overlap).", min=1)] = 5,
    window: Annotated[list[str] | None, typer.Option("--window", help="A named date range to replay, NAME=START:END; repeat for more.", show_default=False)] = None,
    out: OutOpt = None,
) -> None:
    """Replay the model's own factor-return history on today's exposures.

    Each window's summed factor returns are applied to the book's exposures today; --length finds
    the worst non-overlapping windows for the book (and, with --benchmark, for the active book).
    Without --length or --window the worst month (a twelfth of a year of periods) is searched.
    """
    import pandas as pd

    from trimtab import FactorModel
    from trimtab.report._stress_pages import write_replay
    from trimtab.stresstest import factor_history, replay

    fm = FactorModel.load(model)
    book = read_book(fm, holdings, benchmark, attributes, cash, nav)
    chosen = _windows(window)
    if length is None and not chosen:
        length = max(1, round(fm.periods_per_year / 12))
    result = replay(fm, book.holdings, benchmark=book.benchmark, windows=chosen or None, length=length, k=worst)
    files = None
    if out is not None:
        history = factor_history(fm)
        x = fm.factor_exposure(book.holdings).to_numpy()
        cumulative = pd.DataFrame({"book": (history.to_numpy() @ x).cumsum()}, index=history.index)
        if book.benchmark is not None:
            xa = x - fm.factor_exposure(book.benchmark).to_numpy()
            cumulative["active"] = (history.to_numpy() @ xa).cumsum()
        settings = {"model": str(model), "holdings": str(holdings), "length": length, "worst": worst, "windows": chosen}
        files = write_replay(result, out, [model, holdings, *(p for p in (benchmark, attributes) if p)],
                             cumulative=cumulative, settings=settings)
    show(ctx, result.summary().as_text(), {"windows": result.windows, "factor_moves": result.factor_moves}, out, files)


# ---------------------------------------------------------------------- attribute-returns
def _backtest_tables(folder: Path) -> SimpleNamespace:
    """history, exposures and risk_contributions of a ``trimtab backtest`` output folder."""
    import pandas as pd

    tables = {}
    for name in ("history", "exposures", "risk_contributions"):
        path = folder / f"{name}.csv"
        if not path.exists():
            raise InputError(f"{folder}: not a backtest output folder ({name}.csv missing)")
        frame = pd.read_csv(path)
        if list(frame.columns[:2]) != ["scenario", "date"]:
            raise InputError(f"{path}: expected the columns scenario, date first (as `trimtab backtest` writes them)")
        frame["date"] = pd.to_datetime(frame["date"])
        tables[name] = frame.set_index(["scenario", "date"])
    return SimpleNamespace(**tables)


def _dated_file(path: Path, what: str, unit: str = "fraction") -> pd.DataFrame:
    from trimtab.scenario import load_returns
    from trimtab.scenario._schema import ReturnsFile
    from trimtab.units import UNITS

    if unit not in UNITS:
        raise InputError(f"--unit: expected one of {', '.join(UNITS)}, got {unit!r}")
    return load_returns(ReturnsFile.model_validate({"path": str(path), "unit": unit}), what=what)


def _span(frame: pd.DataFrame, start: str | None, end: str | None) -> pd.DataFrame:
    import pandas as pd

    try:
        begin = pd.Timestamp(start) if start else None
        finish = pd.Timestamp(end) if end else None
    except ValueError:
        raise InputError(f"--start/--end: expected dates YYYY-MM-DD, got {start!r} and {end!r}") from None
    out = frame.loc[begin:finish]  # type: ignore[misc]
    if out.empty:
        raise InputError(f"--start {start} --end {end}: no date of the returns in that span")
    return out


def attribute_returns_command(
    ctx: typer.Context,
    model: Annotated[Path | None, typer.Option("--model", "-m", help="A model folder written by `trimtab fit` (its factor history is the default factor returns).", show_default=False)] = None,
    returns: Annotated[Path | None, typer.Option("--returns", help="Asset returns file (dates × assets, wide or long).", show_default=False)] = None,
    weights: Annotated[Path | None, typer.Option("--weights", help="Weights at the start of each period (dates × assets).", show_default=False)] = None,
    holdings: Annotated[Path | None, typer.Option("--holdings", help="Instead of --weights: one holdings file held fixed.", show_default=False)] = None,
    benchmark: BenchmarkOpt = None,
    attributes: AttributesOpt = None,
    factor_returns: Annotated[Path | None, typer.Option("--factor-returns", help="Factor returns file (dates × factors); default the model's own history.", show_default=False)] = None,
    backtest: Annotated[Path | None, typer.Option("--backtest", help="Attribute a `trimtab backtest` output folder instead.", show_default=False)] = None,
    scenario: Annotated[str | None, typer.Option("--scenario", help="With --backtest: which scenario (when it ran several).", show_default=False)] = None,
    start: Annotated[str | None, typer.Option("--start", help="First date to attribute.", metavar="YYYY-MM-DD", show_default=False)] = None,
    end: Annotated[str | None, typer.Option("--end", help="Last date to attribute.", metavar="YYYY-MM-DD", show_default=False)] = None,
    linking: Annotated[str, typer.Option("--linking", help="How periods are linked: carino (logarithmic) or sum.", metavar="carino|sum")] = "carino",
    group_by: Annotated[str | None, typer.Option("--group-by", help="Attributes column to sum the asset contributions by.", show_default=False)] = None,
    unit: Annotated[str, typer.Option("--unit", help="Unit of the --returns and --factor-returns files: fraction (0.01 is 1%) or percent (divided by 100).",
                                      metavar="fraction|percent")] = "fraction",
    out: OutOpt = None,
) -> None:
    """Explain a realised active return factor by factor, and what stock picking added.

    Each period's active return splits exactly into factor contributions, the assets' intercepts and a
    specific part; the periods are linked (Carino) so the components add up to the compounded active
    return. Beside each factor: its share of the ex-ante active risk over the same span. With
    --backtest, a backtest's stored history is attributed (factor returns from --factor-returns or
    the model's history).
    """
    from trimtab import FactorModel
    from trimtab.report._stress_pages import write_return_attribution
    from trimtab.attribution import attribute_backtest_returns, attribute_returns

    fm = FactorModel.load(model) if model is not None else None
    factors = _dated_file(factor_returns, "factor returns", unit) if factor_returns is not None else None
    inputs = [p for p in (model, returns, weights, holdings, benchmark, attributes, factor_returns, backtest) if p is not None]
    groups = None
    if backtest is not None:
        if factors is None:
            if fm is None or fm.factor_history is None:
                raise InputError("--backtest: give --factor-returns (or --model with a factor history)")
            factors = fm.factor_history
        if start is not None or end is not None:
            raise InputError("--start/--end: with --backtest the whole backtest is attributed; run the backtest over the span you want")
        tables = _backtest_tables(backtest)
        ran = list(dict.fromkeys(tables.history.index.get_level_values(0)))  # (scenario, date) rows
        if scenario is None and len(ran) > 1:
            raise InputError(f"{backtest}: the backtest ran {len(ran)} scenarios; add --scenario " + " or --scenario ".join(map(str, ran)))
        if scenario is not None and scenario not in ran:
            raise InputError(f"--scenario {scenario}: not in {backtest}; it ran " + ", ".join(map(str, ran)))
        result = attribute_backtest_returns(tables, factors, scenario=scenario, linking=linking)
    else:
        if fm is None or returns is None:
            raise InputError("attribute-returns: give --model and --returns (or --backtest FOLDER)")
        if (weights is None) == (holdings is None):
            raise InputError("attribute-returns: give exactly one of --weights (dates × assets) or --holdings (held fixed)")
        all_returns = _dated_file(returns, "returns", unit)
        asset_returns = _span(all_returns, start, end)
        if holdings is not None:
            book = read_book(fm, holdings, benchmark, attributes, 0.0, None)
            held: Any = book.holdings
            bench = book.benchmark
            attrs = book.attributes
        else:
            assert weights is not None
            from trimtab.attribution._periods import weights_per_period
            from trimtab.scenario._loaders import load_dated_weights
            from trimtab.scenario._schema import ReturnsFile

            book_rows = load_dated_weights(ReturnsFile.model_validate({"path": str(weights)}))
            held = weights_per_period(book_rows, all_returns.index, asset_returns.index, str(weights))
            bench, attrs = _benchmark_and_attributes(fm, benchmark, attributes)
        result = attribute_returns(fm, held, asset_returns, factors, benchmark=bench, linking=linking)
        groups = _groups(attrs, group_by)
    text = result.summary().as_text()
    if backtest is not None:
        chained = float((1.0 + result.returns["active"]).prod() - 1.0)
        text += (f"\n\nThe backtest's own totals compound the active returns instead: ∏(1 + Rₜ − Rbₜ) − 1 = {chained:.2%} "
                 "(the two differ by how book and benchmark growth compound together).")
    if groups is not None:
        by_group = result.by_group(groups)
        text += "\n\nBy " + str(group_by) + " (linked)\n" + by_group.to_string(float_format=lambda v: f"{v:.2%}")
    files = None
    if out is not None:
        settings = {"linking": linking, "start": start, "end": end, "backtest": str(backtest) if backtest else None}
        files = write_return_attribution(result, out, inputs, settings=settings)
    document: dict[str, Any] = {"linked": result.factor_table(), "total": float(result.linked["total"])}
    if backtest is not None:
        document["compounded_active_returns"] = chained
    show(ctx, text, document, out, files, realised=True)


def _benchmark_and_attributes(model: Any, benchmark: Path | None, attributes: Path | None) -> tuple[pd.Series | None, pd.DataFrame | None]:
    from trimtab.scenario import load_attributes, load_series
    from trimtab.scenario._schema import AttributesFile, SeriesFile

    bench = load_series(SeriesFile.model_validate({"path": str(benchmark)}), "benchmark", "weight") if benchmark is not None else None
    attrs = load_attributes(AttributesFile.model_validate({"path": str(attributes)})) if attributes is not None else None
    return bench, None if attrs is None else attrs.reindex(model.assets)


@family
def register(app: typer.Typer) -> None:
    """Add ``stress``, ``replay`` and ``attribute-returns`` to the main command-line app."""
    add_commands(app, {"stress": stress_command, "replay": replay_command, "attribute-returns": attribute_returns_command})
