from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build, expression_values, random_weights


def test_one_way_turnover():
    fund, problem, c = build("turnover", {"max": 0.2})
    (rows,) = c.rows
    w = random_weights(fund.model.n_assets)
    expected = 0.5 * np.abs(w - fund.holdings.to_numpy()).sum()
    assert rows.evaluate(w)[0] == pytest.approx(expected)
    np.testing.assert_allclose(expression_values(problem, rows, w), expected)
