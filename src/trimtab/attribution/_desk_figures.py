"""The names the desk views share: the desk figures' keys, labels and units, and the warning kinds
(no imports: the optimizer computes them, the reports lay them out, and neither needs the other to
know their names)."""

from __future__ import annotations

#: Figure key → (label, unit); units as in :func:`trimtab.attribution.format_figure`
#: ("fraction" shows as %, "ratio" as a plain number, "count" whole, "amount" in currency).
DESK_FIGURES: dict[str, tuple[str, str]] = {
    "expected_alpha": ("Expected active return (alpha)", "fraction"),
    "information_ratio": ("Information ratio", "ratio"),
    "tracking_error": ("Tracking error", "fraction"),
    "total_risk": ("Total risk", "fraction"),
    "beta": ("Beta", "ratio"),
    "turnover": ("Turnover (one-way)", "fraction"),
    "cost": ("Estimated cost (of NAV)", "fraction"),
    "cost_amount": ("Estimated cost (currency)", "amount"),
    "names_bought": ("Names bought", "count"),
    "names_sold": ("Names sold", "count"),
    "names_held": ("Names held", "count"),
}

#: Every warning kind (docs/outputs.md, "Warnings"), with what it means.
WARNING_KINDS: dict[str, str] = {
    "dropped_assets": "holdings or benchmark positions the risk model lacks were dropped or sold outside the optimizer",
    "zeroed_alpha": "model assets without an alpha score were given alpha 0",
    "solver_fallback": "the first solver was not used or its answer was rejected; another solver's was accepted",
    "heuristic": "a post-solve heuristic (max_names, min_trade, round_lots) changed the book",
    "passive_breach": "a position the market carried past its per-asset limit cannot be traded back inside in one rebalance; it is traded back as far as the trading limits allow",
    "rounding": "rounding the trades to whole shares or lots moved a limited quantity past its limit",
    "factor_concentration": "one factor takes more than the set share of the (active) variance",
    "asset_concentration": "one position takes more than the set share of the (active) variance",
    "pinned_at_cap": "positions sit at an upper weight limit",
    "unspanned_alpha": "most of the alpha is outside the risk model's factor span: the model prices it as diversifiable specific risk (scenario key alpha_factor prices it)",
}
