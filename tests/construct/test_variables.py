"""Factor-form variance pieces against the dense covariance."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import build_problem
from trimtab.construct._variables import variance_numpy

from .conftest import make_fund


def test_factor_and_specific_parts_sum_to_dense_variance():
    fund = make_fund(30, 4, seed=121)
    problem = build_problem(fund.model, {"objective": {"minimize": "active_risk"}}, benchmark=fund.benchmark)
    w = np.random.default_rng(122).dirichlet(np.ones(30))
    a = w - fund.benchmark.to_numpy()
    factor, specific = variance_numpy(problem.data, w, active=True)
    assert factor + specific == pytest.approx(a @ fund.model.covariance().to_numpy() @ a, rel=1e-12)
    assert specific == pytest.approx(fund.model.specific_variance.to_numpy() @ a**2, rel=1e-12)
