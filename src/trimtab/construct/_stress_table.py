"""Pre- and post-trade stress of a rebalance: every shock of the scenario, before and after the trade.

The shocks are those of the ``stress_loss`` limit (moved as the limit says: conditional or not, with
its cap beside), of the scenario's ``stress`` list (conditional moves, specific moves on top) and,
with ``replay: {length, count}``, the worst windows of the model's factor history for the book held
before the trade (active when there is a benchmark), replayed on the book before and after.
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
    replay = scenario.get("replay")
    if not groups and not replay:
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
    if replay and model.factor_history is not None:
        frames.append(_replayed(model, holdings, weights, benchmark, int(replay["length"]), int(replay["count"])))
    if not frames:
        return None
    return pd.concat(frames)[list(STRESS_COLUMNS)]


def check_listed_shocks(model: FactorModel, scenario: Mapping[str, Any], source: str) -> None:
    """Check the scenario's ``stress`` list against the model before any solve, as the report will
    move it (factor names, finite moves, the conditioning, specific moves on model assets), so that
    ``trimtab check`` names a bad shock and no report silently goes without its stress table. The
    ``stress_loss`` shocks are checked by their limit."""
    from trimtab.errors import InputError
    from trimtab.stresstest._entries import factor_moves, specific_moves
    from trimtab.stresstest._stress import shock_moves

    listed = scenario.get("stress") or {}
    if not listed:
        return
    try:
        shock_moves(model, factor_moves(listed), conditional=True, specific=specific_moves(listed))
    except InputError as err:
        raise type(err)(f"{source}: {err}") from None


def _replayed(model: FactorModel, holdings: pd.Series, weights: pd.Series, benchmark: pd.Series | None,
              length: int, count: int) -> pd.DataFrame:
    """The ``count`` worst windows of ``length`` periods for the book before the trade, replayed before and after."""
    from trimtab.stresstest import replay

    length = min(length, len(model.factor_history))  # type: ignore[arg-type]
    pre = replay(model, holdings, benchmark=benchmark, length=length, k=count)
    which = "worst for active" if benchmark is not None else "worst for book"
    found = pre.windows[pre.windows["found"] == which]
    spans = {f"history {_day(r.start)} to {_day(r.end)}": (r.start, r.end) for r in found.itertuples()}
    before = replay(model, holdings, benchmark=benchmark, windows=spans)
    after = replay(model, weights, benchmark=benchmark, windows=spans)
    kind = "active book" if benchmark is not None else "book"
    frame = pd.DataFrame({
        "source": "replay",
        "description": [f"worst {length}-period window of the model's history for the {kind} before the trade"] * len(spans),
        "pre_book": before.windows["book"], "post_book": after.windows["book"],
        "pre_active": before.windows["active"], "post_active": after.windows["active"],
        "limit": np.nan, "limit_on": None,
        "specific_band_active": after.windows["specific_band_active"],
        "tail_probability": np.nan,
    }, index=pd.Index(list(spans), name="shock"))
    frame["change_active"] = frame["post_active"] - frame["pre_active"]
    return frame


def _day(value: Any) -> str:
    stamp = pd.Timestamp(value)
    return str(stamp.date()) if stamp == stamp.normalize() else str(stamp)
