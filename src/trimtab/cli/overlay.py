"""The ``trimtab overlay`` command: size index futures and baskets to neutralise factor exposures.

Registered on the one app by :func:`register`, with its conventions: one line and exit code 2 for
bad input, ``--json``/``--quiet`` before the command, ``--out`` written to a temporary folder, then
renamed.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from trimtab.cli._app import add_commands, family
from trimtab.cli._book import AttributesOpt, BenchmarkOpt, CashOpt, HoldingsOpt, ModelOpt, OutOpt, read_book, show
from trimtab.cli._guard import guarded


def overlay_command(
    ctx: typer.Context,
    model: ModelOpt,
    holdings: HoldingsOpt,
    instruments: Annotated[list[Path], typer.Option("--instruments", help="Baskets (instrument, asset, weight) or return series (date, one column per instrument); repeat for more files.", metavar="FILE", show_default=False)],
    benchmark: BenchmarkOpt = None,
    attributes: AttributesOpt = None,
    cash: CashOpt = 0.0,
    holdings_column: Annotated[str | None, typer.Option("--holdings-column", help="Read weights from this column, e.g. target_weight or weight_after_orders of a rebalance's target_book.csv.", metavar="COLUMN", show_default=False)] = None,
    target: Annotated[list[str] | None, typer.Option("--target", help="Exposure wanted after the overlay (active with --benchmark, unless --minimize total_risk); repeat.", metavar="FACTOR=VALUE", show_default=False)] = None,
    minimize: Annotated[str, typer.Option("--minimize", help="Risk minimised over what the targets leave free.", metavar="active_risk|total_risk")] = "active_risk",
    contracts: Annotated[Path | None, typer.Option("--contracts", help="Contract terms: instrument, price, multiplier, optional cost per contract.", show_default=False)] = None,
    nav: Annotated[float | None, typer.Option("--nav", help="Net asset value (currency); default Σ shares·price + cash for holdings given as shares. Needed with --contracts.", min=0.0, show_default=False)] = None,
    max_gross: Annotated[float | None, typer.Option("--max-gross", help="Cap on the overlay's gross notional Σ|h|, a fraction of NAV.", min=0.0, show_default=False)] = None,
    out: OutOpt = None,
) -> None:
    """Size index futures and baskets to reach target factor exposures at least risk.

    The hedged book is the book plus each instrument's notional times its basket; the overlay meets
    the --target exposures exactly (before rounding to whole contracts) and minimises the rest of
    the active (or total) risk. An instrument given as returns gets its exposures by regression on
    the model's factor history.
    """
    from trimtab import FactorModel, overlay
    from trimtab.errors import InputError
    from trimtab.report._overlay_pages import write_overlay
    from trimtab.scenario._instruments import parse_targets, read_contracts, read_instruments

    fm = FactorModel.load(model)
    if minimize not in ("active_risk", "total_risk"):
        raise InputError(f"--minimize: expected active_risk or total_risk, got {minimize!r}")
    book = read_book(fm, holdings, benchmark, attributes, cash, nav, holdings_column)
    nav = book.nav if nav is None else nav
    wanted = parse_targets(target, fm.factors)
    baskets = read_instruments(instruments, fm.assets)
    terms = read_contracts(contracts, list(baskets)) if contracts is not None else None
    if terms is not None and nav is None:
        raise InputError("--contracts: give --nav, or holdings as shares (contracts are rounded from notional × NAV)")
    result = overlay(fm, book.holdings, baskets, benchmark=book.benchmark, targets=wanted or None, minimize=minimize,
                     contracts=terms, nav=nav, max_gross=max_gross)
    files = None
    inputs = [model, holdings, *instruments, *(p for p in (benchmark, attributes, contracts) if p)]
    if out is not None:
        settings = {"model": str(model), "holdings": str(holdings), "instruments": [str(p) for p in instruments],
                    "benchmark": str(benchmark) if benchmark else None, "targets": wanted, "minimize": minimize,
                    "contracts": str(contracts) if contracts else None, "nav": nav, "max_gross": max_gross}
        files = write_overlay(result, out, inputs, settings=settings)
    show(ctx, result.summary().as_text(), {"trades": result.trades, "exposures": result.exposures, "risk": result.risk,
                                            "added_specific_risk": result.added_specific_risk, "cost": result.cost}, out, files)


@family
def register(app: typer.Typer) -> None:
    """Add ``overlay`` to the command line (no relaxation table: an overlay's only hard limits are its
    targets and max_gross, which its one error line names)."""
    add_commands(app, {"overlay": overlay_command}, guard=guarded)
