"""Small checkers for scenario values: numbers, intervals, key sets, label lists.

Every checker takes the key path (``constraints.weight.max``) and raises :class:`ScenarioError`
naming it, what is allowed and what was received.
"""

from __future__ import annotations

import datetime
import math
from collections.abc import Iterable, Mapping
from typing import Any

from trimtab._validation import closest_key_hint, list_labels, number_as_text
from trimtab.errors import Problem, ScenarioError


class Path:
    """A key path with the message prefix (the scenario's source) it is reported under."""

    def __init__(self, source: str, parts: tuple[str, ...] = ()) -> None:
        self.source = source
        self.parts = parts

    def __truediv__(self, key: Any) -> Path:
        return Path(self.source, (*self.parts, str(key)))

    def __str__(self) -> str:
        return ".".join(self.parts) if self.parts else "(top level)"

    def fail(self, message: str) -> ScenarioError:
        return ScenarioError(f"{self.source}: {self}: {message}", [Problem(self.source, str(self), message)])


def unknown_keys(path: Path, keys: Iterable[Any], allowed: Iterable[str]) -> ScenarioError:
    """One problem per unknown key at ``path``, each with the closest allowed key or the allowed list."""
    options = list(allowed)
    problems = [Problem(path.source, str(path / key), f"unknown key; {closest_key_hint(key, options)}", True) for key in keys]
    return ScenarioError.of(problems)


def describe(value: Any) -> str:
    """A short rendering of a received value for a message (a date as YAML writes it)."""
    text = value.isoformat() if isinstance(value, (datetime.date, datetime.datetime)) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def mapping(path: Path, value: Any, allowed: Iterable[str], required: Iterable[str] = ()) -> dict[str, Any]:
    """A mapping with string keys drawn from ``allowed``, every ``required`` key present."""
    if not isinstance(value, Mapping):
        raise path.fail(f"expected a mapping, got {describe(value)}")
    allowed = list(allowed)
    unknown = [k for k in value if k not in allowed]
    if unknown:
        raise unknown_keys(path, unknown, allowed)
    missing = [k for k in required if k not in value]
    if missing:
        raise path.fail(f"missing required key(s) {', '.join(missing)}")
    return dict(value)


def number(
    path: Path,
    value: Any,
    *,
    minimum: float | None = None,
    maximum: float | None = None,
    strict: bool = False,
    allow_none: bool = False,
    plausible: float | None = None,
) -> float | None:
    """A finite real number, optionally ≥ (or >, with ``strict``) ``minimum`` and ≤ ``maximum``.

    Numbers written as text (``"0.25"``, ``"3%"``) are refused with a hint, the same rule as for
    every other number in a scenario. ``plausible`` is the largest size a fraction of NAV can
    sensibly take here: a larger value is taken for a percentage and refused ("did you mean 0.03?").
    """
    if value is None and allow_none:
        return None
    if isinstance(value, str):
        raise path.fail(number_as_text(value))
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise path.fail(f"expected a number, got {describe(value)}")
    try:
        out = float(value)
    except OverflowError:
        raise path.fail(f"expected a number of sensible size, got one with {len(str(abs(value))):,} digits") from None
    if not math.isfinite(out):
        raise path.fail(f"expected a finite number, got {describe(value)}")
    if minimum is not None and (out < minimum or (strict and out == minimum)):
        sign = ">" if strict else "≥"
        raise path.fail(f"must be {sign} {minimum:g} (got {out:g})")
    if maximum is not None and out > maximum:
        raise path.fail(f"must be ≤ {maximum:g} (got {out:g})")
    if plausible is not None and abs(out) > plausible:
        raise path.fail(
            f"{out:g} would mean {out:.0%}; limits are fractions (0.03 is 3%): did you mean {out / 100:g}?"
        )
    return out


def integer(path: Path, value: Any, *, minimum: int = 0) -> int:
    """A whole number ≥ ``minimum``."""
    if isinstance(value, bool) or not isinstance(value, int):
        raise path.fail(f"expected a whole number, got {describe(value)}")
    if value < minimum:
        raise path.fail(f"must be ≥ {minimum} (got {value})")
    if value > 2**53:
        raise path.fail(f"expected a whole number of sensible size, got one with {len(str(value)):,} digits")
    return int(value)


def flag(path: Path, value: Any) -> bool:
    """``true`` or ``false``."""
    if not isinstance(value, bool):
        raise path.fail(f"expected true or false, got {describe(value)}")
    return value


def text(path: Path, value: Any, choices: Iterable[str] | None = None) -> str:
    """A non-empty string, optionally one of ``choices``."""
    if not isinstance(value, str) or not value:
        raise path.fail(f"expected a name (text), got {describe(value)}")
    if choices is not None:
        options = list(choices)
        if value not in options:
            raise path.fail(f"expected one of {', '.join(options)}, got {describe(value)}")
    return value


def ordered(path: Path, lower: float | None, upper: float | None, lower_key: str, upper_key: str) -> None:
    """Raise unless lower ≤ upper (None is unbounded)."""
    if lower is not None and upper is not None and upper < lower:
        base = Path(path.source, path.parts)
        raise (base / upper_key).fail(
            f"must be ≥ {base / lower_key} (got {upper:g} < {lower:g})"
        )


def interval(path: Path, value: Any, plausible: float | None = None) -> list[float | None]:
    """``[lower, upper]`` (either may be null for unbounded) or one number for ``[x, x]``."""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        x = number(path, value, plausible=plausible)
        return [x, x]
    if not isinstance(value, (list, tuple)) or len(value) != 2:
        raise path.fail(f"expected [lower, upper] (null for unbounded), got {describe(value)}")
    lower = number(path / "0", value[0], allow_none=True, plausible=plausible)
    upper = number(path / "1", value[1], allow_none=True, plausible=plausible)
    if lower is not None and upper is not None and upper < lower:
        raise path.fail(f"upper must be ≥ lower (got [{lower:g}, {upper:g}])")
    return [lower, upper]


def labels(path: Path, value: Any) -> list[Any]:
    """A non-empty list of asset ids (strings or numbers), without duplicates."""
    if not isinstance(value, (list, tuple)) or not value:
        raise path.fail(f"expected a non-empty list of asset ids, got {describe(value)}")
    for item in value:
        if isinstance(item, bool) or not isinstance(item, (str, int, float)):
            raise path.fail(f"expected asset ids (text or numbers), got {describe(item)}")
    seen: set[Any] = set()
    dups = [x for x in value if x in seen or seen.add(x)]  # type: ignore[func-returns-value]
    if dups:
        raise path.fail(f"duplicate asset ids: {list_labels(dups)}")
    return list(value)


def soft(path: Path, value: Any) -> dict[str, float]:
    """``{penalty: p}`` with p > 0: objective units per unit of breach."""
    body = mapping(path, value, ["penalty"], ["penalty"])
    return {"penalty": number(path / "penalty", body["penalty"], minimum=0.0, strict=True)}  # type: ignore[dict-item]


def overrides(path: Path, value: Any, plausible: float | None = None) -> dict[Any, list[float | None]]:
    """Per-asset ``{asset: [lower, upper]}``."""
    if not isinstance(value, Mapping):
        raise path.fail(f"expected a mapping asset → [lower, upper], got {describe(value)}")
    return {asset: interval(path / asset, bounds, plausible) for asset, bounds in value.items()}
