"""What a run should tell the desk before it trades: dropped positions, zeroed alpha, solver
fall-backs, heuristics applied, rounding, concentrated risk and positions pinned at their caps.

Each is a :class:`RunWarning` (kind, one-line message, details). The result carries them as a list
(:attr:`RebalanceResult.warnings`); the edges print them on stderr, write them to result.json under
``warnings`` and show them as a report section. The kinds are listed in :data:`KINDS` and in
docs/outputs.md. Pure: no printing, no files.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from trimtab.attribution._desk_figures import WARNING_KINDS

#: Every warning kind, with what it means.
KINDS = WARNING_KINDS

#: How many names a message lists before "and n more".
SHOWN = 5


@dataclass(frozen=True)
class AlertSettings:
    """Thresholds of the concentration alerts (the scenario's ``alerts`` section).

    Attributes
    ----------
    factor_share : float, default 0.5
        Alert when one factor's Euler contribution exceeds this share of the (active) variance.
    asset_share : float, default 0.2
        Alert when one position's contribution exceeds this share.
    pinned_positions : int, default 1
        Alert when at least this many positions sit at an upper weight limit (0 turns it off).
    """

    factor_share: float = 0.5
    asset_share: float = 0.2
    pinned_positions: int = 1


@dataclass(frozen=True)
class RunWarning:
    """One warning: its kind (a key of :data:`KINDS`), a one-line message and plain details."""

    kind: str
    message: str
    details: Mapping[str, Any] = field(default_factory=dict)

    def as_dict(self) -> dict[str, Any]:
        """``{"kind", "message", "details"}``, JSON-ready."""
        return {"kind": self.kind, "message": self.message, "details": dict(self.details)}


def names(labels: Iterable[Any], shown: int = SHOWN) -> str:
    """``A, B, C and 4 more``."""
    items = [str(x) for x in labels]
    text = ", ".join(items[:shown])
    return text + (f" and {len(items) - shown:,} more" if len(items) > shown else "")


def solver_warnings(notes: Sequence[str], skipped: Sequence[str], solver: str) -> list[RunWarning]:
    """A fall-back: solvers passed over (with the reason) or whose answers were rejected."""
    out = []
    for text in skipped:
        out.append(RunWarning("solver_fallback", f"{text}; solved with {solver}", {"solver": solver, "reason": text}))
    for note in notes:
        if note.startswith("solver:"):
            reason = note.removeprefix("solver:").strip()
            out.append(RunWarning("solver_fallback", reason, {"solver": solver, "reason": reason}))
    return out


def heuristic_warnings(notes: Sequence[str]) -> list[RunWarning]:
    """One warning per heuristic step the run applied, and one per passive breach the rebalance could
    not cure in full (both from the outcome's notes): the target book is then outside a mandate limit."""
    out = []
    for note in notes:
        key = note.split(":", 1)[0]
        if key in ("max_names", "min_trade", "round_lots"):
            out.append(RunWarning("heuristic", note, {"heuristic": key}))
        elif key == "passive breach":
            out.append(RunWarning("passive_breach", note.removeprefix("passive breach:").strip(), {}))
    return out


def pinned_positions(rows: Sequence[Any], weights: np.ndarray) -> pd.Series:
    """Assets sitting at a finite upper weight limit (weight or active weight), asset → limit name."""
    found: dict[str, str] = {}
    for r in rows:
        if not (r.per_asset and r.kind in ("weight", "active_weight") and r.soft is None):
            continue
        value = np.asarray(r.evaluate(weights), dtype=np.float64)
        upper = np.asarray(r.upper, dtype=np.float64)
        at_cap = np.isfinite(upper) & (upper > 0) & (value >= upper - r.tolerance())
        for label in np.asarray(r.labels, dtype=object)[at_cap]:
            found.setdefault(str(label), r.name)
    return pd.Series(found, dtype=object, name="limit")


def share_text(percent: float, threshold: float) -> str:
    """``percent`` with as few decimals as show it above ``threshold`` (50.3%, not 50% above 50%)."""
    for decimals in range(5):
        text = f"{percent:.{decimals}f}"
        if float(text) > 100 * threshold:
            return f"{text}%"
    return f"{percent:.6g}%"


def concentration_warnings(attribution: Any, pinned: pd.Series | None, settings: AlertSettings) -> list[RunWarning]:
    """Factor and position shares of the variance above the thresholds; positions pinned at caps.

    ``attribution`` is a :class:`~trimtab.attribution.RiskAttribution` (read duck-typed: ``by_factor``
    and ``by_asset`` with a ``percent`` column, Euler shares of the variance in percent).
    """
    out: list[RunWarning] = []
    what = "active" if getattr(attribution, "kind", "total") == "active" else "total"
    if attribution is not None and not getattr(attribution, "is_zero_risk", False):
        factors = attribution.by_factor["percent"].dropna()
        for factor, pct in factors[factors > 100 * settings.factor_share].sort_values(ascending=False).items():
            exposure = attribution.by_factor.loc[factor, "active_exposure"]
            out.append(RunWarning(
                "factor_concentration",
                f"factor {factor} takes {share_text(pct, settings.factor_share)} of the {what} variance (alert above {settings.factor_share:.0%}; "
                f"exposure {exposure:+.3f})",
                {"factor": str(factor), "share": float(pct) / 100, "threshold": settings.factor_share,
                 "exposure": float(exposure)},
            ))
        assets = attribution.by_asset["percent"].dropna()
        big = assets[assets > 100 * settings.asset_share].sort_values(ascending=False)
        for asset, pct in big.items():
            out.append(RunWarning(
                "asset_concentration",
                f"position {asset} takes {share_text(pct, settings.asset_share)} of the {what} variance (alert above {settings.asset_share:.0%})",
                {"asset": str(asset), "share": float(pct) / 100, "threshold": settings.asset_share},
            ))
    if pinned is not None and settings.pinned_positions > 0 and len(pinned) >= settings.pinned_positions:
        by_limit = {limit: list(group.index) for limit, group in pinned.groupby(pinned, sort=False)}
        text = "; ".join(f"{limit}: {names(assets)}" for limit, assets in by_limit.items())
        out.append(RunWarning(
            "pinned_at_cap",
            f"{len(pinned)} position{'s' if len(pinned) != 1 else ''} at an upper weight limit ({text})",
            {"count": int(len(pinned)), "assets": {k: [str(a) for a in v] for k, v in by_limit.items()},
             "threshold": settings.pinned_positions},
        ))
    return out
