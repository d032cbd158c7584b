"""Reading scenario and fit-config YAML: ``extends`` chains, path anchoring, one-line errors.

Every data path in a file is made absolute relative to the folder of the file that wrote it *before*
files are merged, so a base scenario in another folder keeps pointing at its own data.
"""

from __future__ import annotations

import datetime
import difflib
import os
import types
import typing
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ValidationError

from trimtab.scenario._strict_yaml import read_yaml
from trimtab._validation import number_as_text
from trimtab.errors import Problem, ScenarioError

#: Key paths (within a scenario) whose value is a file path or a table spec with a ``path``.
SCENARIO_PATHS: tuple[tuple[str, ...], ...] = (
    ("model",),
    ("model", "fit", "returns"),
    ("model", "fit", "factor_returns"),
    ("model", "fit", "exposures"),
    ("data", "holdings"),
    ("data", "benchmark"),
    ("data", "alpha"),
    ("data", "attributes"),
    ("output", "dir"),
    ("stress",),
    ("constraints", "stress_loss", "shocks"),
    ("overlay", "instruments"),
    ("overlay", "contracts"),
)
#: The same for a standalone fit config.
FIT_PATHS: tuple[tuple[str, ...], ...] = (("returns",), ("factor_returns",), ("exposures",))

#: Keys that belong to one file and are never inherited through ``extends``.
NOT_INHERITED: tuple[tuple[str, ...], ...] = (("name",), ("output", "dir"))


def read_yaml_mapping(path: Path, what: str = "scenario") -> dict[str, Any]:
    """Read ``path`` with the strict loader (:func:`trimtab.scenario._strict_yaml.read_yaml`); the top level
    must be a mapping with text keys."""
    raw = read_yaml(path, what)
    if raw is None:
        raise ScenarioError(f"{path}: the {what} file is empty; expected a mapping of keys")
    if not isinstance(raw, dict):
        raise ScenarioError(f"{path}: expected a mapping of keys at the top level, got {_kind(raw)}")
    bad = [k for k in raw if not isinstance(k, str)]
    if bad:
        raise ScenarioError(f"{path}: keys must be text, got {bad[0]!r}")
    return raw


def _kind(value: Any) -> str:
    """The YAML word for the type of ``value``."""
    if isinstance(value, list):
        return "a list"
    if isinstance(value, str):
        return f"text {_short(value)}"
    return f"{_short(value)}"


def anchor_paths(raw: dict[str, Any], folder: Path, key_paths: tuple[tuple[str, ...], ...]) -> dict[str, Any]:
    """Return a copy of ``raw`` with every relative file path made absolute against ``folder``."""
    return map_paths(raw, key_paths, lambda value: _absolute(value, folder))


def relative_paths(raw: dict[str, Any], folder: Path, key_paths: tuple[tuple[str, ...], ...]) -> dict[str, Any]:
    """Return a copy of ``raw`` with every absolute file path written relative to ``folder``."""
    return map_paths(raw, key_paths, lambda value: os.path.relpath(value, folder) if os.path.isabs(value) else value)


def map_paths(raw: dict[str, Any], key_paths: tuple[tuple[str, ...], ...], change: Any) -> dict[str, Any]:
    """A copy of ``raw`` with ``change`` applied to the path at each key path (string or ``path`` key)."""
    out = _deep_copy(raw)
    for key_path in key_paths:
        parent: Any = out
        for key in key_path[:-1]:
            parent = parent.get(key) if isinstance(parent, dict) else None
        if not isinstance(parent, dict) or key_path[-1] not in parent:
            continue
        last = key_path[-1]
        value = parent[last]
        if isinstance(value, str):
            parent[last] = change(value)
        elif isinstance(value, dict) and isinstance(value.get("path"), str):
            value["path"] = change(value["path"])
    return out


def _absolute(value: str, folder: Path) -> str:
    p = Path(os.path.expanduser(value))
    return os.path.normpath(p if p.is_absolute() else folder / p)


def _deep_copy(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _deep_copy(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_deep_copy(v) for v in value]
    return value


def deep_merge(base: Mapping[str, Any], child: Mapping[str, Any]) -> dict[str, Any]:
    """Merge ``child`` over ``base``: mappings merge key by key, lists and scalars replace, and a
    key set to null in the child removes it."""
    out = _deep_copy(dict(base))
    for key, value in child.items():
        if value is None:
            out.pop(key, None)
        elif isinstance(value, dict) and isinstance(out.get(key), dict):
            out[key] = deep_merge(out[key], value)
        else:
            out[key] = _deep_copy(value)
    return out


def _drop_key_path(raw: dict[str, Any], key_path: tuple[str, ...]) -> None:
    parent: Any = raw
    for key in key_path[:-1]:
        parent = parent.get(key) if isinstance(parent, dict) else None
    if isinstance(parent, dict):
        parent.pop(key_path[-1], None)


def _origins(raw: Mapping[str, Any], source: Path, prefix: tuple[str, ...] = ()) -> dict[tuple[str, ...], Path]:
    out: dict[tuple[str, ...], Path] = {}
    for key, value in raw.items():
        out[prefix + (key,)] = source
        if isinstance(value, dict):
            out.update(_origins(value, source, prefix + (key,)))
    return out


def load_merged(path: Path) -> tuple[dict[str, Any], tuple[Path, ...], dict[tuple[str, ...], Path]]:
    """Read ``path`` and its ``extends`` chain; return the merged mapping, the chain (the file
    first, its furthest base last) and which file set each key path."""
    chain: list[Path] = []
    layers: list[dict[str, Any]] = []
    current: Path | None = path.resolve() if path.exists() else path
    while current is not None:
        if current in chain:
            via = " → ".join(p.name for p in [*chain, current])
            raise ScenarioError(f"{chain[0]}: scenario {chain[0].name} extends itself (via {via})")
        raw = read_yaml_mapping(current)
        chain.append(current)
        extends = raw.pop("extends", None)
        layers.append(anchor_paths(raw, current.parent, SCENARIO_PATHS))
        if extends is None:
            current = None
        elif not isinstance(extends, str) or not extends.strip():
            raise ScenarioError(f"{current}: extends: expected the path of a base scenario file, got {extends!r}")
        else:
            base = Path(_absolute(extends, current.parent))
            if not base.exists():
                raise ScenarioError(f"{current}: extends: base scenario {extends!r} not found (looked at {base})")
            current = base.resolve()
    merged: dict[str, Any] = {}
    origins: dict[tuple[str, ...], Path] = {}
    for depth, (layer, source) in enumerate(zip(reversed(layers), reversed(chain))):
        is_leaf = depth == len(layers) - 1
        if not is_leaf:
            layer = _deep_copy(layer)
            for key_path in NOT_INHERITED:
                _drop_key_path(layer, key_path)
        merged = deep_merge(merged, layer)
        origins.update(_origins(layer, source))
    merged.setdefault("name", path.stem)
    return merged, tuple(chain), origins


# ---------------------------------------------------------------------- pydantic errors → one line
def validate_model(
    cls: type[BaseModel],
    raw: Mapping[str, Any],
    source: Path,
    origins: Mapping[tuple[str, ...], Path] | None = None,
) -> BaseModel:
    """Validate ``raw`` against ``cls``; every problem found goes into one ScenarioError line."""
    try:
        return cls.model_validate(raw)
    except ValidationError as err:
        raise ScenarioError.of(validation_problems(err, cls, source, origins)) from None


def validation_problems(
    err: ValidationError,
    cls: type[BaseModel],
    source: Path,
    origins: Mapping[tuple[str, ...], Path] | None = None,
) -> list[Problem]:
    """One :class:`Problem` per pydantic error: the file that set the key, the key path, the text."""
    out: list[Problem] = []
    seen: set[tuple[str, ...]] = set()
    for problem in err.errors(include_url=False):
        loc = tuple(str(part) for part in problem["loc"])
        if loc in seen:
            continue
        seen.add(loc)
        kind = problem["type"]
        file = source
        if origins:
            for n in range(len(loc), 0, -1):
                if loc[:n] in origins:
                    file = origins[loc[:n]]
                    break
        text = _problem_text(problem, kind, cls, loc)
        out.append(Problem(str(file), ".".join(loc) if loc else "(top level)", text, kind == "extra_forbidden"))
    return out


#: pydantic error type → what a YAML user was expected to write.
_EXPECTED = {
    "dict_type": "a mapping",
    "model_type": "a mapping",
    "model_attributes_type": "a mapping",
    "list_type": "a list",
    "string_type": "text",
    "float_type": "a number",
    "float_parsing": "a number",
    "int_type": "a whole number",
    "int_parsing": "a whole number",
    "int_from_float": "a whole number",
    "bool_type": "true or false",
    "bool_parsing": "true or false",
    "finite_number": "a finite number",
}


def _problem_text(problem: Any, kind: str, cls: type[BaseModel], loc: tuple[str, ...]) -> str:
    value = problem.get("input")
    if kind == "missing":
        return "required key missing"
    if kind == "extra_forbidden":
        allowed = _allowed_keys(cls, loc[:-1])
        close = difflib.get_close_matches(loc[-1], allowed, n=1, cutoff=0.6) if loc else []
        if close:
            return f"unknown key; did you mean {close[0]}?"
        return "unknown key" + (f"; allowed here: {', '.join(allowed)}" if allowed else "")
    if kind in _EXPECTED:
        if isinstance(value, str) and kind.startswith(("float", "int")):
            return number_as_text(value)
        if isinstance(value, int) and not isinstance(value, bool) and abs(value) > 10**300:
            return f"expected a number of sensible size, got one with {len(str(abs(value))):,} digits"
        return f"expected {_EXPECTED[kind]}, got {_short(value)}"
    context = problem.get("ctx") or {}
    bounds = {"greater_than": ">", "greater_than_equal": "≥", "less_than": "<", "less_than_equal": "≤"}
    if kind in bounds:
        limit = next(iter(context.values()), "")
        shown = f"{limit:g}" if isinstance(limit, (int, float)) else limit
        return f"must be {bounds[kind]} {shown} (got {_short(value)})"
    message = str(problem["msg"])
    for prefix in ("Value error, ", "Input should be "):
        if message.startswith(prefix):
            message = message[len(prefix):]
    if kind.startswith(("literal", "string_too", "too_", "enum")):
        message = f"expected {message}"
    return f"{message}, got {_short(value)}" if kind != "value_error" else message


def _short(value: Any, limit: int = 60) -> str:
    text = value.isoformat() if isinstance(value, (datetime.date, datetime.datetime)) else repr(value)
    return text if len(text) <= limit else text[: limit - 1] + "…"


def _allowed_keys(cls: type[BaseModel], loc: tuple[str, ...]) -> list[str]:
    """The keys the model accepts at ``loc`` (walking nested models), by their file spelling."""
    current: Any = cls
    for part in loc:
        model = _model_in(current)
        if model is None or part not in _keys_of(model):
            return []
        current = _keys_of(model)[part]
    model = _model_in(current)
    return sorted(_keys_of(model)) if model is not None else []


def _keys_of(model: type[BaseModel]) -> dict[str, Any]:
    return {(f.alias or name): f.annotation for name, f in model.model_fields.items()}


def _model_in(annotation: Any) -> type[BaseModel] | None:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    if typing.get_origin(annotation) in (typing.Union, types.UnionType):
        for arg in typing.get_args(annotation):
            found = _model_in(arg)
            if found is not None:
                return found
    return None
