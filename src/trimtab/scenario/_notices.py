"""Warnings about a scenario's inputs (positions dropped, alpha set to zero) and its alert thresholds,
handed to the result so every edge shows them with the run's own warnings."""

from __future__ import annotations

from typing import Any

from trimtab.construct._warnings import AlertSettings, RunWarning, names
from trimtab.scenario._align import AlignmentReport


def alignment_warnings(report: AlignmentReport, files: dict[str, str] | None = None) -> tuple[RunWarning, ...]:
    """``dropped_assets`` per weighted input (ids, % of NAV) and ``zeroed_alpha`` (count, names)."""
    table = report.table
    out: list[RunWarning] = []
    if table.empty:
        return ()
    files = files or {}
    for name in ("holdings", "benchmark"):
        rows = table[(table["input"] == name) & table["action"].isin(["dropped", "sold"])]
        if rows.empty:
            continue
        weight = float(rows["weight"].fillna(0.0).sum())
        sold = bool((rows["action"] == "sold").any())
        verb = "sold to zero outside the optimizer" if sold else "dropped"
        where = f" ({files[name]})" if name in files else ""
        scaled = "; the rest is scaled back to its total" if name == "benchmark" and not sold else ""
        out.append(RunWarning(
            "dropped_assets",
            f"{name}{where}: {len(rows)} asset{'s' if len(rows) != 1 else ''} not in the risk model {verb}, "
            f"{weight:.2%} of NAV: {names(rows['asset'])}{scaled}",
            {"input": name, "action": "sold" if sold else "dropped", "n_assets": int(len(rows)),
             "weight": weight, "assets": [str(a) for a in rows["asset"]],
             "reasons": sorted(set(str(r) for r in rows["reason"]))},
        ))
    alpha_dropped = table[(table["input"] == "alpha") & (table["action"] == "dropped")]
    if len(alpha_dropped):
        out.append(RunWarning(
            "dropped_assets",
            f"alpha: {len(alpha_dropped)} score{'s' if len(alpha_dropped) != 1 else ''} for assets not in the risk model "
            f"dropped: {names(alpha_dropped['asset'])}",
            {"input": "alpha", "action": "dropped", "n_assets": int(len(alpha_dropped)), "weight": None,
             "assets": [str(a) for a in alpha_dropped["asset"]], "reasons": ["not in the risk model"]},
        ))
    zeroed = table[(table["input"] == "alpha") & (table["action"] == "filled")]
    if len(zeroed):
        out.append(RunWarning(
            "zeroed_alpha",
            f"alpha set to 0 for {len(zeroed)} model asset{'s' if len(zeroed) != 1 else ''} without a score: "
            f"{names(zeroed['asset'])}",
            {"n_assets": int(len(zeroed)), "assets": [str(a) for a in zeroed["asset"]]},
        ))
    return tuple(out)


def alert_settings(section: Any) -> AlertSettings:
    """The scenario's ``alerts`` section as :class:`AlertSettings`."""
    return AlertSettings(
        factor_share=float(section.factor_share),
        asset_share=float(section.asset_share),
        pinned_positions=int(section.pinned_positions),
    )
