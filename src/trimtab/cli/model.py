"""``trimtab fit`` and ``trimtab risk``: estimate a risk model, and attribute a book's risk on it."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from trimtab.cli._app import _optional_report, _ui, add_commands, family
from trimtab.errors import InputError

# ---------------------------------------------------------------------- fit
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
    alpha: Annotated[Path | None, typer.Option("--alpha", help="Alpha file: asset, alpha. Adds how much of it the model's factors span.")] = None,
) -> None:
    """Attribute a book's risk to factors, factor groups and positions.

    With --benchmark the risk attributed is active risk (tracking error); --alpha adds how much of the alpha the factors span.
    """
    from trimtab import FactorModel, alpha_alignment
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
        scores = load_series(SeriesFile.model_validate({"path": str(alpha)}), "alpha", "alpha") if alpha is not None else None
        aligned = align_inputs(
            fm.assets, holdings=book.weights, benchmark=bench, alpha=scores, attributes=attrs,
            files={"holdings": str(holdings), "benchmark": str(benchmark), "alpha": str(alpha)},
        )
        step("attributing risk")
        attribution = fm.attribute(aligned.holdings, aligned.benchmark, attributes=aligned.attributes)
        fit_of_alpha = alpha_alignment(fm, aligned.alpha) if aligned.alpha is not None else None
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
                **({"alpha_alignment": fit_of_alpha.as_json()} if fit_of_alpha is not None else {}),
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
        if fit_of_alpha is not None:
            ui.out.print(fit_of_alpha.summary().as_text(), markup=False)
        if out is not None:
            ui.say(f"Wrote the tables, result.json and report.html to {out}")



@family
def register(app: typer.Typer) -> None:
    """Add ``fit`` and ``risk`` to the command line."""
    add_commands(app, {"fit": fit, "risk": risk})
