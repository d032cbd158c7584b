"""Frontiers: the TE frontier's shape against the closed form, turnover frontier, chart, bad input."""

from __future__ import annotations

import html5lib
import numpy as np
import pandas as pd
import pytest

from tests.conftest import random_model
from tests.runs._tasks import ClosedFormProblem
from trimtab.errors import InputError
from trimtab.runs._frontier import default_tracking_errors, frontier


@pytest.fixture(scope="module")
def book():
    model = random_model(n_assets=30, n_factors=3, seed=8)
    rng = np.random.default_rng(4)
    bench = pd.Series(1 / 30, index=model.assets)
    alpha = pd.Series(rng.normal(scale=0.02, size=30), index=model.assets)
    return model, bench, alpha


def test_te_frontier_is_the_closed_form_line(book) -> None:
    model, bench, alpha = book
    result = frontier(model, {"objective": {"maximize": "utility", "risk_aversion": 5}}, holdings=bench, benchmark=bench,
                      alpha=alpha, tracking_errors=[0.0005, 0.01, 0.02, 0.04], build=ClosedFormProblem)
    table = result.tracking_error
    assert table["status"].tolist() == ["infeasible", "solved", "solved", "solved"]
    solved = table[table["status"] == "solved"]
    # slope = information ratio √(α̃ᵀΣ⁻¹α̃/P), Σ⁻¹ from numpy on the dense Σ (Grinold–Kahn; Markowitz)
    sigma = model.covariance().to_numpy()
    a = alpha.to_numpy()
    inv = np.linalg.inv(sigma)
    ones = np.ones(30)
    tilde = a - (ones @ inv @ a) / (ones @ inv @ ones)
    ratio = np.sqrt(tilde @ inv @ tilde / model.periods_per_year)
    np.testing.assert_allclose(solved["expected_alpha"], ratio * solved["limit"], rtol=1e-9)
    np.testing.assert_allclose(solved["tracking_error"], solved["limit"], rtol=1e-12)
    charts = result.charts()
    svg = charts["Expected active return against forecast tracking error"]
    assert svg.startswith("<svg") and 'id="frontier-te-' in svg
    html5lib.HTMLParser(strict=True).parse(f"<!DOCTYPE html><html><head><title>t</title></head><body>{svg}</body></html>")
    assert "Frontier against tracking error: 3/4 points solved" in result.summary()


def test_turnover_frontier_keeps_the_scenario(book) -> None:
    model, bench, alpha = book
    scenario = {"objective": {"maximize": "alpha"}, "constraints": {"tracking_error": {"max": 0.02}}}
    result = frontier(model, scenario, holdings=bench, benchmark=bench, alpha=alpha, tracking_errors=[0.02],
                      turnovers=[0.1, 0.2], build=ClosedFormProblem)
    # the closed-form problem cannot take a turnover cap: each point is a failed row naming why
    assert result.turnover["status"].tolist() == ["failed", "failed"]
    assert result.turnover["error"].iloc[0] == "ClosedFormProblem: no closed form with constraints ['turnover']"
    assert result.turnover["limit"].tolist() == [0.1, 0.2]


def test_default_grid() -> None:
    assert default_tracking_errors({"constraints": {"tracking_error": {"max": 0.04}}}, 3) == pytest.approx([0.01, 0.045, 0.08])
    assert default_tracking_errors({"objective": {}}, 2) == pytest.approx([0.005, 0.06])


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"alpha": None}, r"frontier: alpha is required"),
        ({"tracking_errors": [0.01, -0.02]}, r"frontier: tracking_errors must be a non-empty list of positive numbers, got \[0.01, -0.02\]"),
        ({"turnovers": []}, r"frontier: turnovers must be a non-empty list of positive numbers, got \[\]"),
        ({"n_points": 1}, r"frontier: n_points must be a whole number ≥ 2, got 1"),
    ],
)
def test_bad_input(book, kwargs: dict, message: str) -> None:
    model, bench, alpha = book
    settings = {"holdings": bench, "benchmark": bench, "alpha": alpha, "build": ClosedFormProblem, **kwargs}
    with pytest.raises(InputError, match=message):
        frontier(model, {"objective": {"maximize": "alpha"}}, **settings)


def test_real_optimizer_te_frontier_matches_the_closed_form(book) -> None:
    """The optimizer's TE frontier with only the budget: αᵀa = IR·σ̄ with IR = √(α̃ᵀΣ⁻¹α̃/P), Σ⁻¹ by numpy
    on the dense Σ (closed form of a linear objective on an ellipsoid intersected with a hyperplane)."""
    model, bench, alpha = book
    scenario = {"objective": {"maximize": "alpha"}, "constraints": {"fully_invested": True}}
    caps = [0.01, 0.02, 0.04]
    result = frontier(model, scenario, holdings=bench, benchmark=bench, alpha=alpha, tracking_errors=caps)
    table = result.tracking_error
    assert (table["status"] == "solved").all(), table
    inv = np.linalg.inv(model.covariance().to_numpy())
    a, ones = alpha.to_numpy(), np.ones(model.n_assets)
    tilde = a - (ones @ inv @ a) / (ones @ inv @ ones)
    ratio = np.sqrt(tilde @ inv @ tilde / model.periods_per_year)
    np.testing.assert_allclose(table["tracking_error"], caps, rtol=1e-6)
    np.testing.assert_allclose(table["expected_alpha"], ratio * np.array(caps), rtol=1e-6)


def test_real_optimizer_long_only_frontier_is_concave_and_below_the_line(book) -> None:
    """With long-only and position limits the frontier bends: the optimal value of a convex programme
    is concave in the right-hand side of its constraints (Boyd and Vandenberghe, Convex Optimization,
    §5.6.1), and it lies below the budget-only line (a smaller feasible set)."""
    model, bench, alpha = book
    scenario = {"objective": {"maximize": "alpha"},
                "constraints": {"fully_invested": True, "long_only": True, "weight": {"max": 0.08}}}
    caps = [0.005, 0.01, 0.015, 0.02, 0.025]
    table = frontier(model, scenario, holdings=bench, benchmark=bench, alpha=alpha, tracking_errors=caps).tracking_error
    assert (table["status"] == "solved").all(), table
    values = table["expected_alpha"].to_numpy()
    assert (np.diff(values) >= -1e-9).all()
    assert (np.diff(values, 2) <= 1e-7).all()
    assert (table["tracking_error"].to_numpy() <= np.array(caps) * (1 + 1e-6)).all()
    inv = np.linalg.inv(model.covariance().to_numpy())
    a, ones = alpha.to_numpy(), np.ones(model.n_assets)
    tilde = a - (ones @ inv @ a) / (ones @ inv @ ones)
    line = np.sqrt(tilde @ inv @ tilde / model.periods_per_year) * np.array(caps)
    assert (values <= line * (1 + 1e-6)).all()


def test_the_te_frontier_keeps_the_scenarios_costs(book) -> None:
    model, bench, alpha = book
    seen: list[dict] = []

    def recording(model, scenario, **inputs):
        seen.append(scenario["objective"])
        return ClosedFormProblem(model, {**scenario, "objective": {"maximize": "alpha"}}, **inputs)

    scenario = {"objective": {"maximize": "utility", "risk_aversion": 4, "cost_aversion": 2.0}}
    frontier(model, scenario, holdings=bench, benchmark=bench, alpha=alpha, tracking_errors=[0.01], build=recording)
    assert seen == [{"maximize": "alpha", "cost_aversion": 2.0}]
