"""Build one constraint on an invented fund and compare its cvxpy form, its numpy check and a naive formula."""

from __future__ import annotations

import numpy as np

from trimtab.construct import build_problem
from trimtab.construct._variables import Variables
from trimtab.construct.constraints import REGISTRY

from ..conftest import make_fund


def build(key, options, *, seed=0, n_assets=30, n_factors=4):
    fund = make_fund(n_assets, n_factors, seed=seed)
    problem = build_problem(fund.model, {"objective": {"minimize": "total_risk"}, "constraints": {key: options}},
                            **fund.kwargs())
    constraint = next(c for c in problem.constraints if isinstance(c, REGISTRY[key]))
    return fund, problem, constraint


def random_weights(n, seed=1):
    rng = np.random.default_rng(seed)
    return rng.normal(0.03, 0.05, n)


def expression_values(problem, rows, w):
    """The cvxpy expression at w (y, trades and short part set to their tight values), in value units."""
    v = Variables(problem.data)
    expr = rows.expression(v)
    v.w.value = w
    v.y.value = problem.data.exposures.T @ w
    t = w - problem.data.holdings
    if "_trades" in v.__dict__:
        v.buy.value, v.sell.value = np.maximum(t, 0), np.maximum(-t, 0)
    if "short" in v.__dict__:
        v.short.value = np.maximum(-w, 0)
    return np.atleast_1d(np.asarray(expr.value, dtype=float)) / rows.factor
