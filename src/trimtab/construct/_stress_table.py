"""Pre- and post-trade stress of a rebalance: every shock of the scenario, before and after the trade.

The shocks are those of the ``stress_loss`` limit (moved as the limit says: conditional or not, with
its cap beside) and of the scenario's ``stress`` list (conditional moves, specific moves on top).
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

if TYPE_CHECKING:
    from trimtab.model import FactorModel

#: Columns of the table, in order.
STRESS_COLUMNS = (
    "source", "description", "pre_book", "post_book", "pre_active", "post_active", "change_active",
    "limit", "limit_on", "specific_band_active", "tail_probability",
)


def stress_table(model: FactorModel | None, holdings: pd.Series | None, weights: pd.Series, benchmark: pd.Series | None,
                 scenario: Mapping[str, Any]) -> pd.DataFrame | None:
    """Index ``shock``; columns :data:`STRESS_COLUMNS` (returns as fractions of NAV; negative is a
    loss; ``limit`` is the largest loss allowed, on ``limit_on`` = active or book). None without shocks."""
    from trimtab.stresstest import stress
    from trimtab.stresstest._entries import factor_moves, specific_moves

    if model is None or holdings is None:
        return None
    limit = (scenario.get("constraints") or {}).get("stress_loss")
    listed = scenario.get("stress") or {}
    groups: list[tuple[str, Mapping[str, Any], bool, Any]] = []
    if limit:
        groups.append(("stress_loss", limit["shocks"], bool(limit["conditional"]), limit))
    extra = {k: v for k, v in listed.items() if not (limit and k in limit["shocks"])}
    if extra:
        groups.append(("stress", extra, True, None))
    if not groups:
        return None
    frames = []
    for source, entries, conditional, cap in groups:
        moves = factor_moves(entries)
        specific = specific_moves(entries) if source == "stress" else None
        pre = stress(model, holdings, moves, benchmark=benchmark, conditional=conditional, specific=specific)
        post = stress(model, weights, moves, benchmark=benchmark, conditional=conditional, specific=specific)
        frame = pd.DataFrame({
            "source": source,
            "description": [entries[name].get("description") for name in pre.shocks],
            "pre_book": pre.returns["book"], "post_book": post.returns["book"],
            "pre_active": pre.returns["active"], "post_active": post.returns["active"],
            "limit": np.nan if cap is None else float(cap["max"]),
            "limit_on": None if cap is None else ("active" if cap["active"] else "book"),
            "specific_band_active": post.specific_band.get("active", np.nan),
            "tail_probability": post.plausibility["tail_probability"],
        }, index=pd.Index(pre.shocks, name="shock"))
        frame["change_active"] = frame["post_active"] - frame["pre_active"]
        frames.append(frame)
    return pd.concat(frames)[list(STRESS_COLUMNS)]
