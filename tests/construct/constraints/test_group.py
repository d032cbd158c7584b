from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build, expression_values, random_weights


@pytest.mark.parametrize("active", [False, True])
def test_group_sums(active):
    fund, problem, c = build("group", {"by": "industry", "active": active,
                                       "bounds": {"default": [-0.1, 0.1], "birch": [0.0, 0.3]}})
    (rows,) = c.rows
    w = random_weights(fund.model.n_assets)
    a = w - fund.benchmark.to_numpy() if active else w
    groups = fund.attributes["industry"]
    expected = [a[(groups == g).to_numpy()].sum() for g in rows.labels]
    np.testing.assert_allclose(rows.evaluate(w), expected)
    np.testing.assert_allclose(expression_values(problem, rows, w), expected)
    assert rows.upper[list(rows.labels).index("birch")] == 0.3
