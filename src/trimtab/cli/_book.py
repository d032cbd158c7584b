"""What the book-reading command families share: the options naming a model, a book and an output
folder, reading the book they name, and printing a result with the caution.

Used by ``stress``, ``replay``, ``attribute-returns`` (:mod:`trimtab.cli.stress`) and ``overlay``
(:mod:`trimtab.cli.overlay`); family modules do not import one another, so this lives apart.
"""

from __future__ import annotations

from pathlib import Path
from types import SimpleNamespace
from typing import Annotated, Any

import typer

from trimtab.cli._app import _ui
from trimtab.errors import InputError

ModelOpt = Annotated[Path, typer.Option("--model", "-m", help="A model folder written by `trimtab fit`.", show_default=False)]
HoldingsOpt = Annotated[Path, typer.Option("--holdings", help="Holdings file: asset, weight (or asset, shares with prices).", show_default=False)]
BenchmarkOpt = Annotated[Path | None, typer.Option("--benchmark", help="Benchmark file: asset, weight. Adds the benchmark and active figures.")]
AttributesOpt = Annotated[Path | None, typer.Option("--attributes", help="Attributes file (prices for shares; group columns).")]
CashOpt = Annotated[float, typer.Option("--cash", help="Cash besides the positions (currency), for holdings given as shares.", min=0.0)]
NavOpt = Annotated[float | None, typer.Option("--nav", help="Net asset value (currency); default Σ shares·price + cash.", min=0.0)]
OutOpt = Annotated[Path | None, typer.Option("--out", "-o", help="Write the tables, result.json and report.html to this folder.", show_default=False)]


def read_book(model: Any, holdings: Path, benchmark: Path | None, attributes: Path | None, cash: float, nav: float | None,
              column: str | None = None) -> SimpleNamespace:
    """Holdings (weights or shares; weights from ``column`` when given), benchmark and attributes read and
    aligned to the model's assets."""
    from trimtab.scenario import align_inputs, load_attributes, load_holdings, load_series, read_table
    from trimtab.scenario._schema import AttributesFile, HoldingsFile, SeriesFile

    if nav is not None and not nav > 0:
        raise InputError(f"--nav: expected a positive net asset value, got {nav:g}")
    attrs = load_attributes(AttributesFile.model_validate({"path": str(attributes)})) if attributes is not None else None
    columns = set(read_table(holdings, what="holdings").columns)
    kind = "weights" if column is not None or "weight" in columns or "shares" not in columns else "shares"
    book = load_holdings(HoldingsFile.model_validate({"path": str(holdings), "kind": kind, "cash": cash, "nav": nav, "column": column}), attrs)
    bench = load_series(SeriesFile.model_validate({"path": str(benchmark)}), "benchmark", "weight") if benchmark is not None else None
    aligned = align_inputs(model.assets, holdings=book.weights, benchmark=bench, attributes=attrs,
                           files={"holdings": str(holdings), "benchmark": str(benchmark)})
    return SimpleNamespace(holdings=aligned.holdings, benchmark=aligned.benchmark, attributes=aligned.attributes, nav=book.nav)


def show(ctx: typer.Context, text: str, document: dict[str, Any], out: Path | None, files: list[str] | None,
         realised: bool = False) -> None:
    """Emit ``document`` (``--json``) or print ``text``, the files written and the caution (the realised-return
    caution when ``realised``)."""
    ui = _ui(ctx)
    ui.emit({**document, "output": str(out) if out is not None else None, "files": files})
    if ui.chatty:
        ui.out.print(text, markup=False, highlight=False)
        if out is not None and files:
            ui.say(f"Wrote {len(files)} files to {out}")
        from trimtab.report import CAUTION, REALISED_CAUTION

        ui.out.print(f"[italic]{REALISED_CAUTION if realised else CAUTION}[/italic]")
