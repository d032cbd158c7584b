from __future__ import annotations

import numpy as np

from ._helpers import build, expression_values, random_weights


def test_bounds_act_on_y_minus_benchmark_exposure():
    fund, problem, c = build("factor_exposure", {"active": True, "bounds": {"f1": [0, 0], "f3": [-0.1, 0.1]}})
    (rows,) = c.rows
    assert rows.labels == ["f1", "f3"]
    w = random_weights(fund.model.n_assets)
    B = fund.model.exposures.to_numpy()
    expected = (B.T @ (w - fund.benchmark.to_numpy()))[[1, 3]]
    np.testing.assert_allclose(rows.evaluate(w), expected)
    np.testing.assert_allclose(expression_values(problem, rows, w), expected)
