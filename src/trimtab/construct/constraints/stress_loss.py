"""Stress limits: the loss under each named shock at most ``max``, a linear row on y = Bᵀw.

With m the shock's full factor move (the named moves and, with ``conditional``, the others'
conditional expectations F_US·F_SS⁻¹·s), the loss of w − b (``active``) or of w is

    loss = −mᵀBᵀ(w − b) = −mᵀy + mᵀ(Bᵀb) ≤ max,

one row per shock with only a factor-space coefficient, so the factor-form interior-point method
takes it as it takes factor exposure bounds.
"""

from __future__ import annotations

import numpy as np

from trimtab.construct.constraints._base import Constraint, Linear, Rows
from trimtab.errors import InputError
from trimtab.stresstest import full_moves, shock_set


class StressLoss(Constraint):
    """−mⱼᵀ(y − Bᵀb·active) ≤ max for every shock j."""

    key = "stress_loss"
    kind = "stress_loss"

    def make_rows(self) -> list[Rows]:
        o = self.options
        if o["active"] and self.data.benchmark is None:
            raise (self.path / "active").fail("active stress limits need a benchmark (pass benchmark=... or set active: false)")
        factors = list(self.data.model.factors)
        moves_by_name = {name: entry["factors"] for name, entry in o["shocks"].items()}
        try:
            named = shock_set(moves_by_name, factors, owner="stress_loss")
        except InputError as err:
            raise (self.path / "shocks").fail(str(err).removeprefix("stress_loss: shocks: ")) from None
        names = named.names
        M = full_moves(self.data.model._F, named.named.to_numpy(dtype=np.float64), conditional=o["conditional"],
                       names=names, factors=factors)
        base = M @ self.data.bench_exposure if o["active"] else np.zeros(len(names))
        B = self.data.exposures
        upper = np.full(len(names), float(o["max"]))
        return [Rows(
            name=self.key, kind="active_stress_loss" if o["active"] else self.kind,
            unit="weight (loss under the shock)", labels=names,
            lower=np.full(len(names), -np.inf), upper=upper,
            evaluate=lambda w: base - M @ (B.T @ w),
            expression=lambda v: base - M @ v.y,
            soft=self.soft_penalty, linear=Linear(y=-M, constant=base),
        )]
