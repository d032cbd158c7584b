from __future__ import annotations

import numpy as np

from ._helpers import build


def test_cap_from_adv_price_and_nav():
    # common practice (no source): trade at most a fraction of average daily volume per day
    fund, problem, c = build("liquidity", {"max_adv_fraction": 0.1, "days": 2})
    (rows,) = c.rows
    cap = 0.1 * 2 * fund.attributes["adv"].to_numpy() * fund.attributes["price"].to_numpy() / fund.nav
    np.testing.assert_allclose(rows.upper, cap)
    np.testing.assert_allclose(rows.lower, -cap)
    np.testing.assert_allclose(rows.offset, fund.holdings.to_numpy())
