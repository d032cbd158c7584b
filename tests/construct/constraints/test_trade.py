from __future__ import annotations

import numpy as np

from ._helpers import build


def test_trade_bounds_offset_by_holdings():
    fund, problem, c = build("trade", {"min": -0.01, "max": 0.02, "overrides": {"A0000": [0, 0]}})
    (rows,) = c.rows
    w = np.full(fund.model.n_assets, 0.03)
    np.testing.assert_allclose(rows.evaluate(w), w - fund.holdings.to_numpy())
    assert rows.lower[0] == rows.upper[0] == 0
