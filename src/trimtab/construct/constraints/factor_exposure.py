"""Factor exposure bounds by factor name on y = Bᵀw (absolute) or y − Bᵀb (active); [0, 0] neutralises."""

from __future__ import annotations

import numpy as np

from trimtab._validation import list_labels
from trimtab.construct.constraints._base import Constraint, Linear, Rows, interval_arrays


class FactorExposure(Constraint):
    """lower_k ≤ y_k − (Bᵀb)_k·active ≤ upper_k, bounding the exposure variable y directly.

    ``default`` applies to every factor not named.
    """

    key = "factor_exposure"
    kind = "factor_exposure"

    def make_rows(self) -> list[Rows]:
        o = self.options
        if o["active"] and self.data.benchmark is None:
            raise (self.path / "active").fail("active factor bounds need a benchmark (pass benchmark=...)")
        factors = list(self.data.model.factors)
        bounds = dict(o["bounds"])
        default = bounds.pop("default", None)
        unknown = [k for k in bounds if k not in set(factors)]
        if unknown:
            raise (self.path / "bounds").fail(
                f"unknown factor(s) {list_labels(unknown)}; the model has: {list_labels(factors)}"
            )
        if default is not None:  # with a default every factor is bounded
            bounds = {k: bounds.get(k, default) for k in factors}
        chosen = [k for k in factors if k in bounds]
        if not chosen:
            return []
        idx = np.array([factors.index(k) for k in chosen])
        lower, upper = interval_arrays([bounds[k] for k in chosen])
        base = self.data.bench_exposure[idx] if o["active"] else np.zeros(len(idx))
        B = self.data.exposures
        whole = len(idx) == len(factors)
        return [Rows(
            name=self.key, kind="active_factor_exposure" if o["active"] else self.kind, unit="exposure",
            labels=chosen, lower=lower, upper=upper,
            evaluate=lambda w: (B.T @ w)[idx] - base,
            expression=lambda v: (v.y if whole else v.y[idx]) - base,
            soft=self.soft_penalty, linear=Linear(y=np.eye(len(factors))[idx], constant=-base),
        )]
