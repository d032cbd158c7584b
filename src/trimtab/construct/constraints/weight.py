"""Per-asset weight bounds: absolute (min ≤ wᵢ ≤ max) and active (min ≤ wᵢ − bᵢ ≤ max), with overrides."""

from __future__ import annotations

from typing import Any

import numpy as np

from trimtab.construct.constraints._base import Constraint, Rows, box_rows


def bound_vectors(constraint: Constraint, options: Any) -> tuple[np.ndarray, np.ndarray]:
    """Default bounds for every asset, then the per-asset ``overrides`` (unknown ids raise)."""
    n = constraint.data.n_assets
    lower = np.full(n, -np.inf if options["min"] is None else options["min"])
    upper = np.full(n, np.inf if options["max"] is None else options["max"])
    overrides = options.get("overrides") or {}
    if overrides:
        pos = constraint.data.index_of(list(overrides), constraint.path / "overrides")
        for p, (lo, hi) in zip(pos, overrides.values()):
            lower[p] = -np.inf if lo is None else lo
            upper[p] = np.inf if hi is None else hi
    return lower, upper


class Weight(Constraint):
    """min ≤ wᵢ ≤ max, per-asset overrides [lower, upper]."""

    key = "weight"
    kind = "weight"

    def make_rows(self) -> list[Rows]:
        lower, upper = bound_vectors(self, self.options)
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets, soft=self.soft_penalty)]


class ActiveWeight(Constraint):
    """min ≤ wᵢ − bᵢ ≤ max, per-asset overrides [lower, upper]."""

    key = "active_weight"
    kind = "active_weight"
    needs_benchmark = True

    def make_rows(self) -> list[Rows]:
        lower, upper = bound_vectors(self, self.options)
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets,
                         offset=self.data.bench, soft=self.soft_penalty)]
