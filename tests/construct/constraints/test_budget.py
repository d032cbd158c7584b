from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build, expression_values, random_weights


@pytest.mark.parametrize("key,options,formula", [
    ("fully_invested", True, lambda w: w.sum()),
    ("cash", {"min": 0.0, "max": 0.05}, lambda w: 1 - w.sum()),
])
def test_value_three_ways(key, options, formula):
    fund, problem, c = build(key, options)
    w = random_weights(fund.model.n_assets)
    (rows,) = c.rows
    assert rows.evaluate(w)[0] == pytest.approx(formula(w))
    np.testing.assert_allclose(expression_values(problem, rows, w), rows.evaluate(w))
