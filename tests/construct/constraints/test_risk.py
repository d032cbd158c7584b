from __future__ import annotations

import numpy as np
import pytest

from ._helpers import build, expression_values, random_weights


@pytest.mark.parametrize("key,options", [
    ("tracking_error", {"max": 0.03}), ("total_risk", {"max": 0.2}),
    ("factor_risk", {"max": 0.02}), ("specific_risk", {"max": 0.02, "active": False}),
])
def test_risk_caps_against_dense_covariance(key, options):
    fund, problem, c = build(key, options)
    (rows,) = c.rows
    m = fund.model
    w = random_weights(m.n_assets)
    b = fund.benchmark.to_numpy()
    B, F, d = m.exposures.to_numpy(), m.factor_covariance.to_numpy(), m.specific_variance.to_numpy()
    active = {"tracking_error": True, "total_risk": False, "factor_risk": True, "specific_risk": False}[key]
    a = w - b if active else w
    matrix = {"tracking_error": B @ F @ B.T + np.diag(d), "total_risk": B @ F @ B.T + np.diag(d),
              "factor_risk": B @ F @ B.T, "specific_risk": np.diag(d)}[key]
    expected = np.sqrt(m.periods_per_year * a @ matrix @ a)
    assert rows.evaluate(w)[0] == pytest.approx(expected, rel=1e-12)
    np.testing.assert_allclose(expression_values(problem, rows, w), expected, rtol=1e-10)
