"""Per-asset trade bounds on wᵢ − w0ᵢ, with overrides."""

from __future__ import annotations

from trimtab.construct.constraints._base import Constraint, Rows, box_rows
from trimtab.construct.constraints.weight import bound_vectors


class Trade(Constraint):
    """min ≤ wᵢ − w0ᵢ ≤ max (weights of NAV), per-asset overrides [lower, upper]."""

    key = "trade"
    kind = "trade"

    def make_rows(self) -> list[Rows]:
        lower, upper = bound_vectors(self, self.options)
        return [box_rows(self.key, self.kind, lower, upper, self.data.assets,
                         offset=self.data.holdings, soft=self.soft_penalty)]
