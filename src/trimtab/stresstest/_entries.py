"""The shape of a named-shock list as scenario files and shock files write it (validation only, no I/O).

Each shock is ``name: {factors: {factor: move}, description: text, specific: {asset or group: move}}``
with ``factors`` required. Messages name the key path in the file's own words.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from typing import Any

from trimtab.units import move_problem
from trimtab._validation import closest_key_hint, list_labels

ENTRY_KEYS = ("factors", "description", "specific")
Fail = Callable[[tuple[str, ...], str], Exception]


def shock_entries(value: Any, fail: Fail) -> dict[str, dict[str, Any]]:
    """Validated shocks: name → {factors, description, specific}; ``fail(key_path, message)`` makes the error."""
    if not isinstance(value, Mapping) or not value:
        raise fail((), f"expected a mapping of shock name → {{factors: {{factor: move}}}}, got {_short(value)}")
    out: dict[str, dict[str, Any]] = {}
    for name, entry in value.items():
        if not isinstance(name, str) or not name:
            raise fail((), f"a shock name must be non-empty text, got {name!r}")
        if not isinstance(entry, Mapping):
            raise fail((name,), f"expected a mapping with factors: {{factor: move}}, got {_short(entry)}")
        if is_short_form(entry):
            entry = {"factors": entry}
        unknown = [k for k in entry if k not in ENTRY_KEYS]
        if unknown:
            raise fail((name, str(unknown[0])), f"unknown key; {closest_key_hint(unknown[0], ENTRY_KEYS)}"
                       + (f" (and {len(unknown) - 1} more unknown: {list_labels(unknown[1:])})" if len(unknown) > 1 else ""))
        if "factors" not in entry:
            raise fail((name,), "missing required key factors (factor → move, a return over the shock)")
        description = entry.get("description")
        if description is not None and not isinstance(description, str):
            raise fail((name, "description"), f"expected text, got {_short(description)}")
        out[name] = {
            "factors": _moves(entry["factors"], fail, (name, "factors"), "factor"),
            "description": description,
            "specific": _moves(entry["specific"], fail, (name, "specific"), "asset or group") if entry.get("specific") else {},
        }
    return out


def is_short_form(entry: Mapping[Any, Any]) -> bool:
    """True for a shock written as ``{factor: move}`` (no factors/description/specific key): the short
    spelling :func:`trimtab.stress` has always taken, accepted wherever shocks are written."""
    return bool(entry) and not any(k in ENTRY_KEYS for k in entry)


def split_shocks(shocks: Any) -> tuple[Any, dict[str, dict[Any, float]] | None]:
    """Shocks in either spelling → (name → {factor: move}, name → {asset or group: move} or None).

    ``{crash: {MktRF: -0.1}}`` and ``{crash: {factors: {MktRF: -0.1}, specific: {...}}}`` are the
    same shock; anything else (a DataFrame, a bad value) is passed on unchanged for the checks.
    """
    if not isinstance(shocks, Mapping):
        return shocks, None
    factors: dict[Any, Any] = {}
    specific: dict[str, dict[Any, float]] = {}
    for name, entry in shocks.items():
        if isinstance(entry, Mapping) and entry and not is_short_form(entry) and all(k in ENTRY_KEYS for k in entry):
            factors[name] = entry.get("factors") or {}
            if entry.get("specific"):
                specific[name] = dict(entry["specific"])
        else:
            factors[name] = entry
    return factors, specific or None


def _moves(value: Any, fail: Fail, where: tuple[str, ...], what: str) -> dict[Any, float]:
    if not isinstance(value, Mapping) or not value:
        raise fail(where, f"expected a mapping {what} → move (a return, 0.05 is 5%), got {_short(value)}")
    out: dict[Any, float] = {}
    for key, move in value.items():
        if isinstance(move, bool) or not isinstance(move, (int, float)) or not math.isfinite(float(move)):
            raise fail((*where, str(key)), f"expected a finite number (a return, -0.10 is -10%), got {_short(move)}")
        problem = move_problem(float(move)) if what == "factor" else None
        if problem:
            raise fail((*where, str(key)), problem)
        out[key] = float(move)
    return out


def factor_moves(entries: Mapping[str, Mapping[str, Any]]) -> dict[str, dict[str, float]]:
    """name → {factor: move}, as :func:`trimtab.stress` takes them."""
    return {name: dict(entry["factors"]) for name, entry in entries.items()}


def specific_moves(entries: Mapping[str, Mapping[str, Any]]) -> dict[str, dict[Any, float]] | None:
    """name → {asset or group: move} for the shocks that give any (None when none does)."""
    out = {name: dict(entry["specific"]) for name, entry in entries.items() if entry.get("specific")}
    return out or None


def _short(value: Any, limit: int = 60) -> str:
    text = repr(value)
    return text if len(text) <= limit else text[: limit - 1] + "…"
