"""Predicted beta to the benchmark: β = wᵀΣb / bᵀΣb, linear in w."""

from __future__ import annotations

import numpy as np

from trimtab.construct.constraints._base import Constraint, Linear, Rows, scalar


class Beta(Constraint):
    """min ≤ (Σb)ᵀw / (bᵀΣb) ≤ max, with Σb = B·F·Bᵀb + d∘b written on y: (F·Bᵀb)ᵀy + (d∘b)ᵀw."""

    key = "beta"
    kind = "beta"
    needs_benchmark = True

    def make_rows(self) -> list[Rows]:
        data = self.data
        F = data.model._F
        factor_coef = F @ data.bench_exposure
        specific_coef = data.specific_variance * data.bench
        bench_var = float(factor_coef @ data.bench_exposure + specific_coef @ data.bench)
        if bench_var <= 0:
            raise self.path.fail("the benchmark has zero predicted variance, so beta is undefined")
        held = np.flatnonzero(specific_coef)
        fc, sc = factor_coef / bench_var, specific_coef[held] / bench_var
        B = data.exposures
        return [Rows(
            name=self.key, kind=self.kind, unit="beta", labels=[self.key],
            lower=scalar(self.options["min"], -np.inf), upper=scalar(self.options["max"], np.inf),
            evaluate=lambda w: np.array([fc @ (B.T @ w) + sc @ w[held]]),
            expression=lambda v: fc @ v.y + sc @ v.w[held],
            soft=self.soft_penalty, linear=Linear(w=(specific_coef / bench_var)[None, :], y=fc[None, :]),
        )]
