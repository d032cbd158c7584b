from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build, expression_values, random_weights


def test_beta_against_dense_formula():
    # predicted beta (textbook): β = wᵀΣb / bᵀΣb
    fund, problem, c = build("beta", {"min": 0.9, "max": 1.1})
    (rows,) = c.rows
    sigma = fund.model.covariance().to_numpy()
    b = fund.benchmark.to_numpy()
    w = random_weights(fund.model.n_assets)
    assert rows.evaluate(w)[0] == pytest.approx(w @ sigma @ b / (b @ sigma @ b))
    np.testing.assert_allclose(expression_values(problem, rows, w), rows.evaluate(w))
