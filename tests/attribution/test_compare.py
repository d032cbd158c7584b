"""compare, compare_many and the sorted change tables, checked against the attributions' own figures."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest

from trimtab import InputError
from trimtab.attribution import (
    HEADLINE_FIGURES,
    RiskAttribution,
    attribute,
    compare,
    compare_many,
    contribution_changes,
    exposure_changes,
)

from ..conftest import random_model


@dataclass(frozen=True)
class _Carrier:
    post_trade: RiskAttribution | None


@pytest.fixture
def pair() -> tuple[RiskAttribution, RiskAttribution]:
    model = random_model(n_assets=25, n_factors=4, seed=21)
    rng = np.random.default_rng(22)
    b = pd.Series(np.full(25, 0.04), index=model.assets)
    before = pd.Series(rng.dirichlet(np.ones(25)), index=model.assets)
    after = 0.5 * before + 0.5 * b
    return attribute(model, before, b), attribute(model, after, b)


def test_compare_side_by_side(pair: tuple[RiskAttribution, RiskAttribution]) -> None:
    pre, post = pair
    table = compare(pre, post)
    assert list(table.columns) == ["pre", "post", "change"]
    assert list(table.index) == list(HEADLINE_FIGURES)
    assert table.loc["risk", "pre"] == pre.risk and table.loc["risk", "post"] == post.risk
    np.testing.assert_allclose(table["change"], table["post"] - table["pre"])
    # Halving every active weight halves the tracking error (σ is homogeneous of degree one).
    assert post.risk == pytest.approx(0.5 * pre.risk, rel=1e-12)


def test_compare_many_one_column_per_scenario(pair: tuple[RiskAttribution, RiskAttribution]) -> None:
    pre, post = pair
    table = compare_many({"now": pre, "target": _Carrier(post)})
    assert list(table.columns) == ["now", "target"]
    assert table.loc["risk", "target"] == post.risk
    with pytest.raises(InputError, match=r"compare_many: expected a non-empty mapping"):
        compare_many({})
    with pytest.raises(InputError, match=r"compare_many: scenario 'bad': expected a RiskAttribution or a result"):
        compare_many({"bad": _Carrier(None)})
    with pytest.raises(InputError, match=r"compare: post: expected a RiskAttribution, got int"):
        compare(pre, 3)  # type: ignore[arg-type]


def test_change_tables_sorted_by_size(pair: tuple[RiskAttribution, RiskAttribution]) -> None:
    pre, post = pair
    exposures = exposure_changes(pre, post)
    assert list(exposures.columns) == ["group", "pre", "post", "change"]
    sizes = exposures["change"].abs().to_numpy()
    assert np.all(np.diff(sizes) <= 0)
    np.testing.assert_allclose(exposures.loc[pre.by_factor.index, "pre"], pre.by_factor["active_exposure"])
    portfolio = exposure_changes(pre, post, column="portfolio_exposure")
    np.testing.assert_allclose(portfolio.loc[post.by_factor.index, "post"], post.by_factor["portfolio_exposure"])
    contributions = contribution_changes(pre, post)
    assert np.all(np.diff(contributions["change"].abs().to_numpy()) <= 0)
    with pytest.raises(InputError, match=r"exposure_changes: column must be one of active_exposure"):
        exposure_changes(pre, post, column="weight")
    with pytest.raises(InputError, match=r"contribution_changes: pre: expected a RiskAttribution, got str"):
        contribution_changes("x", post)  # type: ignore[arg-type]
