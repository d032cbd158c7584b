"""Desk figures (issue #13) recomputed from the weights with numpy and a dense Σ on a small fund.

Textbook identities (active management): expected active return αᵀ(w − b); tracking error
√(P·(w − b)ᵀΣ(w − b)); information ratio = the first over the second; beta wᵀΣb / bᵀΣb;
one-way turnover ½·Σ|w − w0|.
"""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.construct import rebalance
from trimtab.report import comparison_table

from .conftest import make_fund

BASE = {"fully_invested": True, "long_only": True, "weight": {"max": 0.08}, "tracking_error": {"max": 0.03},
        "turnover": {"max": 0.3}}


def _dense(fund, weights):
    sigma = fund.model.covariance().to_numpy()  # dense Σ = B F Bᵀ + diag(d): small N only
    w, b, w0 = weights, fund.benchmark.to_numpy(), fund.holdings.to_numpy()
    a = fund.alpha.to_numpy()
    ppy = fund.model.periods_per_year
    te = np.sqrt(ppy * (w - b) @ sigma @ (w - b))
    return {
        "expected_alpha": a @ (w - b),
        "tracking_error": te,
        "information_ratio": a @ (w - b) / te,
        "total_risk": np.sqrt(ppy * w @ sigma @ w),
        "beta": (w @ sigma @ b) / (b @ sigma @ b),
        "turnover": 0.5 * np.abs(w - w0).sum(),
        "names_bought": float((w - w0 > 1e-8).sum()),
        "names_sold": float((w - w0 < -1e-8).sum()),
    }


def test_figures_match_the_dense_identities() -> None:
    fund = make_fund(40, 4, seed=141)
    scenario = {"objective": {"maximize": "alpha", "costs": {"spread": "spread"}}, "constraints": BASE}
    result = rebalance(fund.model, scenario, **fund.kwargs())
    expected = _dense(fund, result.final_weights.to_numpy())
    for key, value in expected.items():
        assert result.figures[key] == pytest.approx(value, rel=1e-10, abs=1e-14), key
    # cost: Σ ½·spread·|trade| of the rounded trades, in currency too
    trade = (result.final_weights - fund.holdings).abs()
    cost = float((0.5 * fund.attributes["spread"] * trade).sum())
    assert result.figures["cost"] == pytest.approx(cost, rel=1e-10)
    assert result.figures["cost_amount"] == pytest.approx(cost * fund.nav, rel=1e-10)
    before = _dense(fund, fund.holdings.to_numpy())
    assert result.figures_before["expected_alpha"] == pytest.approx(before["expected_alpha"], rel=1e-10)
    assert result.figures_before["turnover"] == 0.0


def test_compare_table_alpha_and_information_ratio_recomputed_with_numpy() -> None:
    fund = make_fund(40, 4, seed=142)
    results = {}
    for name, cap in (("wide", 0.04), ("tight", 0.015)):
        scenario = {"objective": {"maximize": "alpha"}, "constraints": {**BASE, "tracking_error": {"max": cap}}}
        results[name] = rebalance(fund.model, scenario, **fund.kwargs())
    table = comparison_table(results)
    for name, result in results.items():
        expected = _dense(fund, result.final_weights.to_numpy())
        assert table.loc["expected_alpha", name] == pytest.approx(expected["expected_alpha"], rel=1e-10)
        assert table.loc["information_ratio", name] == pytest.approx(expected["information_ratio"], rel=1e-10)
        assert table.loc["tracking_error", name] == pytest.approx(expected["tracking_error"], rel=1e-10)
        assert table.loc["turnover", name] == pytest.approx(expected["turnover"], rel=1e-9)
    # the change column is the later scenario minus the first
    assert table.loc["expected_alpha", "change: tight"] == pytest.approx(
        table.loc["expected_alpha", "tight"] - table.loc["expected_alpha", "wide"])
    assert table.loc["tracking_error", "label"] == "Tracking error"  # not "risk"
    assert table.loc["tracking_error", "tight"] <= 0.015 + 1e-6
    assert "tracking_error" in table.loc["binding_limits", "tight"]
