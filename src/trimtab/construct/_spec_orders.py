"""The scenario's ``orders`` section: cash after costs, the noise floor, rounding tolerances, the repair.

Strict like every other section: an unknown or repeated key, text for a number, a value out of range
or a percentage where a fraction belongs is an error naming the key path.
"""

from __future__ import annotations

from typing import Any

from trimtab.construct import _spec_fields as f
from trimtab.construct._repair import ROUNDING_TOLERANCE

#: Plausible sizes: a cash floor above half the NAV, a noise floor above 1% of NAV, a tolerance above
#: 1% of NAV (weights), 0.1 (exposure, beta) or 1% a year (risk) are typing mistakes.
_PLAUSIBLE_TOLERANCE = {"weight": 0.01, "exposure": 0.1, "beta": 0.1, "risk": 0.01}
REPAIRS = ("auto", "greedy", "milp")


def validate_orders(path: Any, value: Any) -> dict[str, Any]:
    """``{min_cash, min_trade_weight, tolerance: {weight, exposure, beta, risk}, repair}``, normalised."""
    body = f.mapping(path, value, ["min_cash", "min_trade_weight", "tolerance", "repair"])
    out: dict[str, Any] = {}
    if "min_cash" in body:
        out["min_cash"] = f.number(path / "min_cash", body["min_cash"], minimum=0.0, maximum=0.5)
    if "min_trade_weight" in body:
        out["min_trade_weight"] = f.number(path / "min_trade_weight", body["min_trade_weight"], minimum=0.0,
                                           plausible=0.01)
    if "tolerance" in body:
        tol = f.mapping(path / "tolerance", body["tolerance"], list(ROUNDING_TOLERANCE))
        out["tolerance"] = {
            kind: f.number(path / "tolerance" / kind, tol[kind], minimum=0.0, strict=True,
                           plausible=_PLAUSIBLE_TOLERANCE[kind])
            for kind in ROUNDING_TOLERANCE if kind in tol
        }
    if "repair" in body:
        out["repair"] = f.text(path / "repair", body["repair"], REPAIRS)
    return out


__all__ = ["validate_orders"]
