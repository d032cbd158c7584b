"""RiskAttribution: VaR and ES against scipy.stats.norm, grouping by asset attribute, the text summary."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import integrate, stats

from trimtab import FactorModel, InputError
from trimtab.attribution import HEADLINE_FIGURES, RiskAttribution, attribute, format_figure

from ..conftest import random_model


@pytest.fixture
def attr() -> RiskAttribution:
    model = random_model(n_assets=20, n_factors=3, seed=11)
    rng = np.random.default_rng(12)
    w = pd.Series(rng.dirichlet(np.ones(20)), index=model.assets)
    b = pd.Series(np.full(20, 0.05), index=model.assets)
    sectors = pd.DataFrame({"sector": ["energy", "health", "retail", "banks"] * 4 + [None] * 4}, index=model.assets)
    return attribute(model, w, b, attributes=sectors)


@pytest.mark.parametrize("level", [0.9, 0.95, 0.975, 0.99, 0.999])
@pytest.mark.parametrize("horizon", [1, 10, 2.5])
def test_var_and_es_against_scipy_normal(attr: RiskAttribution, level: float, horizon: float) -> None:
    sigma_h = attr.risk * np.sqrt(horizon / 252)
    # scipy.stats.norm quantile: VaR = Φ⁻¹(level)·σ_h for a zero-mean normal.
    assert attr.value_at_risk(level, horizon) == pytest.approx(stats.norm.ppf(level, scale=sigma_h), rel=1e-12)
    # Closed form of normal expected shortfall: ES = σ·φ(z)/(1 − level) (e.g. McNeil, Frey & Embrechts,
    # Quantitative Risk Management, 2005, example 2.18).
    z = stats.norm.ppf(level)
    closed = sigma_h * stats.norm.pdf(z) / (1 - level)
    assert attr.expected_shortfall(level, horizon) == pytest.approx(closed, rel=1e-12)
    # Definition of ES as the conditional mean loss beyond VaR, by scipy's numerical expectation.
    tail_mean = stats.norm(scale=sigma_h).expect(lambda v: v, lb=stats.norm.ppf(level, scale=sigma_h), conditional=True)
    assert attr.expected_shortfall(level, horizon) == pytest.approx(tail_mean, rel=1e-7)
    # And as the average of VaR over levels above `level` (integral of the quantile function, scipy.integrate).
    avg, _ = integrate.quad(lambda u: stats.norm.ppf(u, scale=sigma_h), level, 1.0, limit=200)
    assert attr.expected_shortfall(level, horizon) == pytest.approx(avg / (1 - level), rel=1e-6)


def test_var_level_and_horizon_are_checked(attr: RiskAttribution) -> None:
    with pytest.raises(InputError, match=r"level must be a probability in \[0.5, 1\), got 1.5"):
        attr.value_at_risk(1.5)
    with pytest.raises(InputError, match=r"level must be a probability in \[0.5, 1\), got 'x'"):
        attr.expected_shortfall("x")  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"horizon_days must be a positive number of days, got 0"):
        attr.value_at_risk(0.99, 0)
    with pytest.raises(InputError, match=r"horizon_days must be a positive number of days, got nan"):
        attr.horizon_risk(float("nan"))


def test_by_group_sums_asset_rows(attr: RiskAttribution) -> None:
    table = attr.by_group("sector")
    assert list(table.index) == ["banks", "energy", "health", "retail", "unassigned"]
    assert table["n_assets"].sum() == 20 and table.loc["unassigned", "n_assets"] == 4
    # Euler contributions are additive, so any partition of the assets sums to σ.
    assert table["contribution"].sum() == pytest.approx(attr.risk, abs=1e-12)
    energy = attr.by_asset.iloc[0:16:4]
    assert table.loc["energy", "contribution"] == pytest.approx(energy["contribution"].sum(), rel=1e-12)
    assert table.loc["energy", "active_weight"] == pytest.approx(energy["active_weight"].sum(), rel=1e-12)
    by_series = attr.by_group(pd.Series({"A0000": "first", "NOT_IN_MODEL": "x"}, name="tag"))
    assert list(by_series.index) == ["first", "unassigned"] and by_series.index.name == "tag"


def test_by_group_errors(attr: RiskAttribution, small_model: FactorModel) -> None:
    with pytest.raises(InputError, match=r"unknown attribute 'country'; available: sector"):
        attr.by_group("country")
    with pytest.raises(InputError, match=r"no attributes to find 'sector' in"):
        attribute(small_model, pd.Series({"A0001": 1.0})).by_group("sector")
    with pytest.raises(InputError, match=r"attribute must be a column name or a Series, got int"):
        attr.by_group(3)  # type: ignore[arg-type]
    with pytest.raises(InputError, match=r"by_group: duplicate asset ids: A0001"):
        attr.by_group(pd.Series(["x", "y"], index=["A0001", "A0001"]))


def test_headline_summary_and_text(attr: RiskAttribution) -> None:
    head = attr.headline()
    assert list(head.index) == list(HEADLINE_FIGURES)
    assert head["risk"] == attr.risk and head["beta"] == attr.beta
    assert head["value_at_risk_99_1d"] == pytest.approx(stats.norm.ppf(0.99) * attr.risk / np.sqrt(252), rel=1e-12)
    assert head["n_positions"] == 20 and head["gross_weight"] == pytest.approx(1.0)
    summary = attr.summary(top=3)
    assert len(summary.top_factors) == 3 and len(summary.top_assets) == 3
    frame = summary.to_frame()
    assert list(frame.columns) == ["label", "unit", "value"]
    assert frame.loc["risk", "label"] == "Active risk (tracking error)"
    text = str(attr)
    assert text.startswith("Active risk attribution")
    assert format_figure(attr.risk, "fraction") in text
    assert "Largest factor contributions" in text and "Largest asset contributions" in text
    top = attr.top_assets(4)
    assert list(top.index) == list(attr.by_asset["contribution"].abs().nlargest(4).index)


def test_positions_ignore_solver_noise(small_model: FactorModel) -> None:
    # Common practice (no source): weights of 1e-8 of NAV or less are numerical residue of a solve.
    w = pd.Series({"A0001": 0.6, "A0002": 0.4 - 1e-12, "A0003": 1e-12, "A0004": -5e-9})
    assert attribute(small_model, w).headline()["n_positions"] == 2


def test_format_figure_units() -> None:
    assert format_figure(0.04567, "fraction") == "4.57%"
    assert format_figure(12.345, "percent") == "12.3%"
    assert format_figure(1234.0, "count") == "1,234"
    assert format_figure(float("nan"), "ratio") == "n/a"
    assert format_figure(None, "ratio") == "n/a"
    assert format_figure(1.23456, "ratio") == "1.235"
    assert format_figure(-1e-9, "fraction") == "0.00%" and format_figure(-0.0, "ratio") == "0"
    assert format_figure(-0.0004, "exposure") == "0.000" and format_figure(-0.2, "fraction") == "-20.00%"
    assert format_figure(-1.2e-5, "ratio") == "-1.2e-05"
    assert format_figure(-4e-16, "limit") == "0" and format_figure(8.266e-3, "limit") == "0.008266"
    assert format_figure(2.5e-4, "bp") == "2.50 bp" and format_figure(0.00004, "variance") == "0.000040"
    assert format_figure(1234567.8, "amount") == "1,234,568"


def test_summary_prints_as_text(small_model) -> None:
    # print(attribution.summary()) must read as text, not as a dataclass repr
    weights = pd.Series(1.0 / small_model.n_assets, index=small_model.assets)
    summary = small_model.attribute(weights).summary()
    assert str(summary) == summary.as_text()
    assert str(summary).startswith("Total risk attribution")
