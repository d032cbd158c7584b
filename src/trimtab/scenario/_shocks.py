"""Shock files: named factor shocks in YAML, read through the scenario YAML reader.

A shock file holds ``shocks:`` (name → ``{factors: {factor: move}, description, specific}``) and
optionally ``description:``. Scenario files name one as ``stress: <file>`` or under
``constraints.stress_loss.shocks``; the path is relative to the file that names it.
"""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path
from typing import Any

from trimtab.errors import ScenarioError
from trimtab.construct._spec_fields import Path as KeyPath
from trimtab.construct._spec_fields import unknown_keys
from trimtab.scenario._yaml import read_yaml_mapping

FILE_KEYS = ("shocks", "description")


def load_shocks(path: str | Path) -> dict[str, dict[str, Any]]:
    """The validated shocks of a shock file: name → {factors, description, specific}.

    Raises
    ------
    ScenarioError
        One line naming the file and the key path: missing file, bad YAML, unknown keys, a shock
        without factors, a non-numeric or percentage-sized move.
    """
    from trimtab.stresstest._entries import shock_entries

    source = Path(path)
    raw = read_yaml_mapping(source, "shock")
    unknown = [k for k in raw if k not in FILE_KEYS]
    if unknown:
        raise unknown_keys(KeyPath(str(source)), unknown, FILE_KEYS)
    if "shocks" not in raw:
        raise ScenarioError(f"{source}: shocks: required key missing (name → {{factors: {{factor: move}}}})")

    def fail(keys: tuple[str, ...], message: str) -> Exception:
        return ScenarioError(f"{source}: {'.'.join(('shocks', *keys))}: {message}")

    return shock_entries(raw["shocks"], fail)


def resolve_shock_files(mapping: Mapping[str, Any]) -> dict[str, Any]:
    """A copy of a rebalance mapping with every shock-file path (``stress`` and
    ``constraints.stress_loss.shocks``, already absolute) replaced by the file's shocks."""
    out = dict(mapping)
    if isinstance(out.get("stress"), str):
        out["stress"] = load_shocks(out["stress"])
    constraints = out.get("constraints")
    limit = constraints.get("stress_loss") if isinstance(constraints, Mapping) else None
    if isinstance(limit, Mapping) and isinstance(limit.get("shocks"), str):
        out["constraints"] = {**constraints, "stress_loss": {**limit, "shocks": load_shocks(limit["shocks"])}}  # type: ignore[dict-item]
    return out
