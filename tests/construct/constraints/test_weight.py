from __future__ import annotations

import numpy as np


from ._helpers import build


def test_overrides_replace_the_default():
    fund, problem, c = build("weight", {"min": 0.0, "max": 0.05, "overrides": {"A0003": [0.01, 0.2]}})
    (rows,) = c.rows
    assert rows.upper[3] == 0.2 and rows.lower[3] == 0.01
    assert np.all(np.delete(rows.upper, 3) == 0.05)


def test_active_weight_offsets_by_the_benchmark():
    fund, problem, c = build("active_weight", {"min": -0.01, "max": 0.01})
    (rows,) = c.rows
    w = np.full(fund.model.n_assets, 1.0 / fund.model.n_assets)
    np.testing.assert_allclose(rows.evaluate(w), w - fund.benchmark.to_numpy())
