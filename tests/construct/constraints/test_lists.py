from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build


@pytest.mark.parametrize("key,lower,upper", [("no_buy", -np.inf, 0.0), ("no_sell", 0.0, np.inf), ("no_trade", 0.0, 0.0)])
def test_trade_lists(key, lower, upper):
    fund, problem, c = build(key, ["A0002", "A0005"])
    (rows,) = c.rows
    assert rows.lower[2] == lower and rows.upper[5] == upper
    assert np.isinf(rows.lower[0]) and np.isinf(rows.upper[0])
    np.testing.assert_allclose(rows.offset, fund.holdings.to_numpy())


def test_must_hold():
    fund, problem, c = build("must_hold", {"assets": ["A0001"], "min_weight": 0.004})
    (rows,) = c.rows
    assert rows.lower[1] == 0.004 and np.isinf(rows.lower[0])
