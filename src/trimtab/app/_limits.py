"""The limits a scenario lets the explorer move: dotted key paths, values, checks and the saved diff.

A limit is a number in the scenario's ``constraints`` (``tracking_error.max``, ``weight.max``,
``group.bounds.default.0``: a numeric part indexes a list, as in ``trimtab sweep``), the objective's
``risk_aversion`` when it has one, or an optional factor bound the scenario does not set yet
(``factor_exposure.bounds.momentum.1``), off until given. Nothing here solves or touches files.
"""

from __future__ import annotations

import copy
import difflib
import math
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from trimtab.errors import InputError
from trimtab.runs._sweep import apply_point

#: Largest magnitude a limit may take (every limit is a fraction, an exposure or a count).
MAX_MAGNITUDE = 1e6
#: Objective keys the built problem re-solves with a new value.
OBJECTIVE_LIMITS = ("risk_aversion",)
#: Sections of the page, in order, by the constraint key a limit sits under.
SECTIONS = {
    "tracking_error": "Risk", "active_risk": "Risk", "total_risk": "Risk", "risk_aversion": "Risk",
    "turnover": "Trading", "liquidity": "Trading", "trade": "Trading", "max_names": "Positions",
    "weight": "Positions", "active_weight": "Positions", "long_only": "Positions", "leverage": "Positions",
    "factor_exposure": "Factor exposure", "beta": "Factor exposure", "group": "Groups", "stress_loss": "Risk",
}
#: Numbers under these key paths define inputs (a stress limit's inline shocks), not limits.
NOT_LIMITS = (("stress_loss", "shocks"),)
SIDE = {"0": "lower", "1": "upper"}


@dataclass(frozen=True)
class Limit:
    """One movable number of the scenario.

    Attributes
    ----------
    key : str
        The dotted key path (``tracking_error.max``), as ``trimtab sweep`` takes it.
    value : float or None
        The scenario's value; None for an optional bound the scenario does not set.
    section : str
        Where the page shows it (Risk, Trading, Positions, Factor exposure, Groups, Other).
    label : str
        How the page names it.
    unit : str
        ``fraction`` (shown as %), ``exposure``, ``count`` or ``number``.
    low, high : float
        The slider's range (any finite value the scenario's rules accept may be typed).
    optional : bool
        Not in the scenario: setting it adds the bound, null removes it.
    """

    key: str
    value: float | None
    section: str
    label: str
    unit: str
    low: float
    high: float
    optional: bool = False

    def as_dict(self) -> dict[str, Any]:
        return {"key": self.key, "value": self.value, "section": self.section, "label": self.label,
                "unit": self.unit, "low": self.low, "high": self.high, "optional": self.optional}


def scenario_limits(mapping: Mapping[str, Any], factors: Sequence[str], *, has_benchmark: bool) -> list[Limit]:
    """Every limit of a scenario's ``{"objective", "constraints"}`` mapping, in scenario order,
    then an optional bound for each model factor the scenario leaves unbounded."""
    limits: list[Limit] = []
    objective = mapping.get("objective") or {}
    for key in OBJECTIVE_LIMITS:
        if _is_number(objective.get(key)):
            limits.append(_limit(key, (key,), float(objective[key])))
    constraints = mapping.get("constraints") or {}
    for path, value in _numbers(constraints, ()):
        if any(path[: len(prefix)] == prefix for prefix in NOT_LIMITS):
            continue
        limits.append(_limit(".".join(path), path, value))
    section = constraints.get("factor_exposure")
    bounded: set[str] = set()
    if isinstance(section, Mapping):
        bounds = section.get("bounds") or {}
        bounded = set(map(str, bounds)) if "default" not in bounds else set(map(str, factors))
    if section is None or isinstance(section, Mapping):
        if section is not None or has_benchmark:
            for factor in factors:
                if str(factor) in bounded:
                    continue
                for side in ("0", "1"):
                    path = ("factor_exposure", "bounds", str(factor), side)
                    limits.append(_limit(".".join(path), path, None, optional=True))
    return limits


def _numbers(node: Any, path: tuple[str, ...]) -> Iterator[tuple[tuple[str, ...], float]]:
    if isinstance(node, Mapping):
        for key, value in node.items():
            yield from _numbers(value, (*path, str(key)))
    elif isinstance(node, list):
        for i, value in enumerate(node):
            yield from _numbers(value, (*path, str(i)))
    elif _is_number(node):
        yield path, float(node)


def _is_number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(float(value))


def _limit(key: str, path: tuple[str, ...], value: float | None, *, optional: bool = False) -> Limit:
    section = SECTIONS.get(path[0], "Other")
    unit = _unit(path)
    low, high = slider_range(value, unit, path)
    return Limit(key, value, section, _label(path), unit, low, high, optional)


def _unit(path: tuple[str, ...]) -> str:
    head, last = path[0], path[-1]
    if head == "factor_exposure" or head == "beta":
        return "exposure"
    if head == "risk_aversion":
        return "number"
    if last in ("max_names", "min_names", "days") or head == "max_names":
        return "count"
    return "fraction"


def _label(path: tuple[str, ...]) -> str:
    parts = list(path)
    side = ""
    if parts[-1] in SIDE and len(parts) > 1:
        side = f" ({SIDE[parts.pop()]})"
    if parts[0] == "factor_exposure" and len(parts) >= 3 and parts[1] == "bounds":
        return f"{'every factor' if parts[2] == 'default' else parts[2]} exposure{side}"
    if parts[0] == "group" and "bounds" in parts:
        label = parts[parts.index("bounds") + 1]
        return f"group {'band' if label == 'default' else label}{side}"
    text = " ".join(p.replace("_", " ") for p in parts)
    return f"{text}{side}"


def slider_range(value: float | None, unit: str, path: Sequence[str]) -> tuple[float, float]:
    """A slider range around the scenario's value: 0 to three times a cap, symmetric for bounds."""
    if unit == "exposure":
        span = max(1.0, 3 * abs(value or 0.0))
        return -span, span
    if unit == "count":
        return 0.0, max(10.0, 3 * (value or 0.0))
    v = value or 0.0
    if unit == "number":
        return 0.0, max(10.0, 4 * v)
    if v < 0 or path[-1] in ("min", "0"):  # a lower side: either sign
        span = max(0.05, 3 * abs(v))
        return -span, span
    return 0.0, max(0.05, 3 * v)


# ---------------------------------------------------------------------- requests
def check_changes(known: Mapping[str, Limit], changes: Mapping[str, Any]) -> dict[str, float | None]:
    """The requested values, each a known key with a finite number (null only for a bound side).

    Raises
    ------
    InputError
        One line naming the first unknown key or bad value.
    """
    clean: dict[str, float | None] = {}
    for written, value in changes.items():
        key = _interval_end(known, str(written))
        limit = known.get(key)
        if limit is None:
            close = difflib.get_close_matches(str(key), list(known), n=1)
            hint = f"did you mean {close[0]}?" if close else "GET /api/scenario lists its limits"
            raise InputError(f"limits.{key}: not a limit of this scenario ({hint})")
        if value is None:
            if not (limit.optional or key.rsplit(".", 1)[-1] in SIDE):
                raise InputError(f"limits.{key}: a number is required, got null")
            clean[key] = None
            continue
        if isinstance(value, bool) or not isinstance(value, (int, float)):
            raise InputError(f"limits.{key}: expected a number, got {value!r}")
        number = float(value)
        if not math.isfinite(number) or abs(number) > MAX_MAGNITUDE:
            raise InputError(f"limits.{key}: expected a finite number within ±{MAX_MAGNITUDE:g}, got {value!r}")
        clean[key] = number
    return clean


def _interval_end(known: Mapping[str, Limit], key: str) -> str:
    """``….min``/``….max`` of an interval [lower, upper] as its position ``….0``/``….1``, as
    ``trimtab sweep`` reads them (``factor_exposure.bounds.momentum.max`` is ``….momentum.1``)."""
    head, _, last = key.rpartition(".")
    if key not in known and last in ("min", "max") and f"{head}.0" in known and f"{head}.1" in known:
        return f"{head}.{0 if last == 'min' else 1}"
    return key


def changed(known: Mapping[str, Limit], settings: Mapping[str, float | None]) -> dict[str, float | None]:
    """The settings that differ from the scenario's own values (in key order of the scenario)."""
    return {k: settings[k] for k in known if k in settings and settings[k] != known[k].value}


def apply(mapping: Mapping[str, Any], changes: Mapping[str, float | None]) -> dict[str, Any]:
    """The ``{"objective", "constraints"}`` mapping with the changes applied (a deep copy).

    An optional factor bound is added with both sides (the side not given stays open); a bound
    with both sides open is removed.
    """
    out = copy.deepcopy(dict(mapping))
    constraints = out.setdefault("constraints", {})
    point: dict[str, Any] = {}
    for key, value in changes.items():
        parts = key.split(".")
        if parts[0] in OBJECTIVE_LIMITS:
            point[f"objective.{key}"] = value
            continue
        if parts[0] == "factor_exposure" and len(parts) == 4 and parts[1] == "bounds":
            section = constraints.setdefault("factor_exposure", {"active": True, "bounds": {}})
            bounds = section.setdefault("bounds", {})
            pair = list(bounds.get(parts[2]) or [None, None])
            pair[int(parts[3])] = value
            bounds[parts[2]] = pair
            continue
        point[f"constraints.{key}"] = value
    out = apply_point(out, point) if point else out
    section = out["constraints"].get("factor_exposure")
    if isinstance(section, dict) and isinstance(section.get("bounds"), dict):
        section["bounds"] = {k: v for k, v in section["bounds"].items() if not (isinstance(v, list) and v == [None, None])}
        if not section["bounds"] and not (mapping.get("constraints") or {}).get("factor_exposure"):
            del out["constraints"]["factor_exposure"]
    return out


def update_arguments(
    mapping: Mapping[str, Any], changes: Mapping[str, float | None], built: Mapping[str, Any]
) -> dict[str, Any] | None:
    """``RebalanceProblem.update`` keywords for changes of numbers the scenario has, or None when a
    change adds or removes a limit (then the problem is rebuilt).

    ``built`` is the built problem's own constraints mapping (``spec.mapping["constraints"]``):
    a change is passed at the deepest key path it holds as mappings, with the new value there (a
    list, or a section the validator normalises, such as ``group``).
    """
    new = apply(mapping, changes)
    arguments: dict[str, Any] = {}
    limits: dict[str, Any] = {}
    for key in changes:
        parts = key.split(".")
        if parts[0] in OBJECTIVE_LIMITS:
            arguments[parts[0]] = new["objective"][parts[0]]
            continue
        node: Any = built
        reach: list[str] = []
        for part in parts:
            if isinstance(node, list):
                break
            if not isinstance(node, Mapping) or part not in node:
                return None
            node = node[part]
            reach.append(part)
        value: Any = new["constraints"]
        for part in reach:
            value = value[part]
        limits[".".join(reach)] = value
    if limits:
        arguments["limits"] = limits
    return arguments


def saved_changes(base: Mapping[str, Any], new: Mapping[str, Any]) -> dict[str, Any]:
    """Only what differs from ``base``, nested as in a scenario file (lists whole, as they replace)."""
    out: dict[str, Any] = {}
    for key, value in new.items():
        old = base.get(key) if isinstance(base, Mapping) else None
        if isinstance(value, Mapping) and isinstance(old, Mapping):
            inner = saved_changes(old, value)
            if inner:
                out[key] = inner
        elif value != old:
            out[key] = copy.deepcopy(value)
    return out
