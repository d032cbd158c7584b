"""The output folder of a many-account run: tables, orders per account and in one file, an HTML overview.

Written into a temporary folder beside the target and renamed into place when complete, so a run that
stops leaves the previous output (or nothing), never half of one.
"""

from __future__ import annotations

import json
import re
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from trimtab.report._pages import PALETTE, _figure, _percent, _svg, figure_block, html_table, write_page
from trimtab.runs.accounts._result import AccountsResult

#: Accounts listed as the worst by tracking error and by expected alpha.
WORST = 10
#: Names shown in the blocks-against-ADV chart.
BLOCK_BARS = 30
_PERCENT = ("tracking_error", "expected_alpha", "turnover", "cost", "given_up", "pct_adv", "impact_price")


def file_stem(name: str) -> str:
    """A file name for an account: letters, digits, ``-``, ``_`` and ``.`` kept, the rest ``_``."""
    stem = re.sub(r"[^A-Za-z0-9_.-]", "_", str(name)).strip(".") or "account"
    return stem[:100]


def write_accounts(result: AccountsResult, target: str | Path, *, inputs: Sequence[str | Path] = (),
                   title: str = "Accounts") -> list[str]:
    """summary.csv, orders.csv, orders/<account>.csv, blocks.csv, given_up.csv, weights.csv,
    convergence.csv, relaxations.csv (when an account is infeasible), result.json and report.html into
    ``target``; returns the files written."""
    from trimtab._output import output_folder

    files: list[str] = []
    with output_folder(Path(target), inputs) as tmp:
        tables = {"summary": result.summary, "blocks": result.blocks, "given_up": result.given_up,
                  "weights": result.weights, "convergence": result.convergence}
        for name, table in tables.items():
            table.to_csv(tmp / f"{name}.csv")
            files.append(f"{name}.csv")
        if len(result.relaxations):
            result.relaxations.to_csv(tmp / "relaxations.csv", index=False)
            files.append("relaxations.csv")
        result.orders.to_csv(tmp / "orders.csv", index=False)
        files.append("orders.csv")
        (tmp / "orders").mkdir()
        stems: dict[str, str] = {}
        for name, own in result.orders.groupby("account", sort=False):
            stem = file_stem(str(name))
            if stem in stems.values():  # two names that clean to the same file name
                stem = f"{stem}-{len(stems)}"
            stems[str(name)] = stem
            own.to_csv(tmp / "orders" / f"{stem}.csv", index=False)
            files.append(f"orders/{stem}.csv")
        document = {
            "settings": result.settings, "rounds": result.rounds, "converged": result.converged,
            "n_accounts": len(result.summary), "n_solved": result.n_solved,
            "failed": json.loads(result.failed.reset_index().to_json(orient="records")),
            "order_files": stems,
        }
        (tmp / "result.json").write_text(json.dumps(document, indent=2, default=str), encoding="utf-8")
        files.append("result.json")
        write_page(tmp / "report.html", title, overview_sections(result), notes=[
            "Tracking error and expected alpha are forecasts from the model, recomputed from each account's target "
            "weights; turnover is one-way, ½·Σ|trade|; costs are estimates and include the pooled market impact.",
        ])
        files.append("report.html")
    return files


def overview_sections(result: AccountsResult) -> list[tuple[str, str]]:
    """The overview page: headline cards, the spread across accounts, the worst accounts, the blocks."""
    from trimtab.report._templates import render_cards

    s = result.summary
    solved = s[s["status"] == "solved"]
    cap = result.settings.get("aggregate", {}).get("max_adv_fraction")
    cards = [
        {"key": "solved", "label": "Accounts solved", "value": f"{result.n_solved} of {len(s)}",
         "note": f"{len(s) - result.n_solved} not solved, listed below" if result.n_solved < len(s) else "all of them",
         "kind": "bad" if result.n_solved < len(s) else ""},
        {"key": "median_te", "label": "Median tracking error", "value": _pct(solved["tracking_error"].median()),
         "note": f"{_pct(solved['tracking_error'].min())} to {_pct(solved['tracking_error'].max())}"},
        {"key": "median_alpha", "label": "Median expected alpha", "value": _pct(solved["expected_alpha"].median()),
         "note": f"{_pct(solved['expected_alpha'].min())} to {_pct(solved['expected_alpha'].max())}"},
        {"key": "orders", "label": "Orders", "value": f"{len(result.orders):,}", "note": f"in {len(result.blocks):,} names"},
        {"key": "rounds", "label": "Equilibrium rounds", "value": str(result.rounds),
         "note": "pooled trades settled" if result.converged else "did NOT settle", "kind": "" if result.converged else "bad"},
    ]
    if cap is not None:
        capped = int(result.blocks["capped"].sum()) if len(result.blocks) else 0
        cards.append({"key": "capped", "label": "Names at the aggregate cap", "value": str(capped),
                      "note": f"cap {cap:.1%} of ADV, shared pro rata"})
    sections = [("Overview", render_cards(cards))]
    failed = result.failed
    if len(failed):
        sections.append(("Accounts not solved", html_table(failed)))
    if len(solved):
        sections.append(("Across accounts", figure_block(_spread_charts(solved))))
        columns = ["tracking_error", "expected_alpha", "turnover", "cost", "orders", "given_up"]
        worst_te = solved.sort_values("tracking_error", ascending=False)[columns].head(WORST)
        worst_alpha = solved.sort_values("expected_alpha")[columns].head(WORST)
        sections.append((f"Highest tracking error ({min(WORST, len(solved))} accounts)", html_table(worst_te, percent_columns=_PERCENT)))
        sections.append((f"Lowest expected alpha ({min(WORST, len(solved))} accounts)", html_table(worst_alpha, percent_columns=_PERCENT)))
    if len(result.blocks) and result.blocks["adv"].notna().any():
        sections.append(("Blocks against ADV", figure_block(_blocks_chart(result.blocks, cap))
                         + html_table(result.blocks.head(BLOCK_BARS), percent_columns=_PERCENT)))
    if len(result.given_up):
        cut = result.given_up[result.given_up["given_up"] > 0]
        by_account = cut.groupby("account").agg(names=("asset", "size"), shares=("given_up", "sum"),
                                                notional=("given_up_notional", "sum")).sort_values("notional", ascending=False)
        by_account[["shares", "notional"]] = by_account[["shares", "notional"]].round().astype("int64")  # whole units, shown 1,234
        sections.append(("Given up to the cap (largest first)", html_table(by_account.head(WORST * 2))))
    return sections


def _pct(value: Any) -> str:
    return "–" if value is None or not np.isfinite(value) else f"{100 * float(value):.2f}%"


def _spread_charts(solved: pd.DataFrame) -> dict[str, str]:
    charts = {}
    for column, label, colour in (("tracking_error", "forecast tracking error (annualised)", PALETTE[0]),
                                  ("expected_alpha", "expected alpha (annualised)", PALETTE[1])):
        fig, ax = _figure(2.6)
        ax.hist(solved[column].to_numpy(dtype=float), bins=min(40, max(5, len(solved) // 4)), color=colour)
        ax.set_xlabel(label)
        ax.set_ylabel("accounts")
        _percent(ax, "x")
        ax.grid(alpha=0.3)
        charts[f"Distribution of {label.split(' (')[0]} across {len(solved)} accounts"] = _svg(fig, f"acc-{column}")
    return charts


def _blocks_chart(blocks: pd.DataFrame, cap: float | None) -> dict[str, str]:
    top = blocks.sort_values("pct_adv", ascending=False).head(BLOCK_BARS)
    fig, ax = _figure(3.2)
    x = np.arange(len(top))
    ax.bar(x, top["bought"] / top["adv"], color=PALETTE[0], label="bought")
    ax.bar(x, top["sold"] / top["adv"], bottom=top["bought"] / top["adv"], color=PALETTE[1], label="sold")
    if cap is not None:
        ax.axhline(cap, color=PALETTE[3], linestyle="--", linewidth=1.2, label=f"aggregate cap {cap:.1%}")
    ax.set_xticks(x, [str(a) for a in top.index], rotation=90, fontsize=8)
    ax.set_ylabel("gross shares, fraction of ADV")
    _percent(ax)
    ax.grid(alpha=0.3, axis="y")
    ax.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), frameon=False, fontsize=9)
    return {f"The {len(top)} largest blocks against ADV (all accounts together)": _svg(fig, "acc-blocks")}
