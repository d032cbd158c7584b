"""Group bounds by any attribute column: Σ_{i∈g} wᵢ (absolute) or Σ_{i∈g} (wᵢ − bᵢ) (active)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import scipy.sparse as sp

from trimtab._validation import list_labels
from trimtab.construct.constraints._base import Constraint, Rows, interval_arrays, linear_rows


class Group(Constraint):
    """For each grouping ``by`` an attribute column: lower_g ≤ G·(w − b·active) ≤ upper_g.

    ``bounds`` maps group labels to [lower, upper]; ``default`` applies to every other group.
    """

    key = "group"
    kind = "group"

    def make_rows(self) -> list[Rows]:
        out = []
        many = len(self.options) > 1
        for i, options in enumerate(self.options):
            path = self.path / str(i) if many else self.path
            if options["active"] and self.data.benchmark is None:
                raise (path / "active").fail("active group bounds need a benchmark (pass benchmark=...)")
            column = self.data.column(options["by"], path / "by", numeric=False)
            codes, groups = pd.factorize(column, sort=True)
            bounds = dict(options["bounds"])
            default = bounds.pop("default", None)
            unknown = [g for g in bounds if g not in set(groups)]
            if unknown:
                raise (path / "bounds").fail(
                    f"unknown group(s) {list_labels(unknown)} in column {options['by']!r}; known: {list_labels(groups)}"
                )
            if default is not None:  # with a default every group is bounded
                bounds = {g: bounds.get(g, default) for g in groups}
            chosen = [g for g in groups if g in bounds]
            if not chosen:
                continue
            lower, upper = interval_arrays([bounds[g] for g in chosen])
            where = {g: k for k, g in enumerate(groups)}
            rows_of = np.array([where[g] for g in chosen])
            n = self.data.n_assets
            full = sp.csr_matrix((np.ones(n), (codes, np.arange(n))), shape=(len(groups), n))
            matrix = full[rows_of]
            constant = -(matrix @ self.data.bench) if options["active"] else 0.0
            kind = "active_group" if options["active"] else "group"
            out.append(linear_rows(f"{self.key}.{options['by']}", kind, matrix, lower, upper, list(chosen),
                                   soft=self.soft_penalty if options["soft"] is None else options["soft"]["penalty"],
                                   constant=constant))
        return out
