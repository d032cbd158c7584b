from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build, expression_values, random_weights


def test_long_only_is_a_box_at_zero():
    fund, problem, c = build("long_only", True)
    (rows,) = c.rows
    assert rows.box and np.all(rows.lower == 0) and np.all(np.isinf(rows.upper))


def test_gross_net_short_values():
    fund, problem, c = build("leverage", {"gross": 1.5, "net": [0.9, 1.0], "short": 0.25})
    w = random_weights(fund.model.n_assets)
    by_name = {r.name: r for r in c.rows}
    naive = {"leverage.gross": np.abs(w).sum(), "leverage.net": w.sum(), "leverage.short": np.maximum(-w, 0).sum()}
    for name, value in naive.items():
        rows = by_name[name]
        assert rows.evaluate(w)[0] == pytest.approx(value)
        # Σw + 2Σs with s = max(−w, 0) equals Σ|w| (tight short part)
        np.testing.assert_allclose(expression_values(problem, rows, w), value)
