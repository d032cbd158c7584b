"""Asset-id alignment: every rule applied, reported, or refused with the ids named."""

from __future__ import annotations

import pandas as pd
import pytest

from trimtab.errors import InputError
from trimtab.scenario import align_inputs

UNIVERSE = pd.Index(["A", "B", "C", "D"])


def test_rules_and_report() -> None:
    aligned = align_inputs(
        UNIVERSE,
        holdings=pd.Series({"A": 0.5, "X": 0.3, "B": 0.2}),
        benchmark=pd.Series({"A": 0.25, "B": 0.25, "C": 0.25, "D": 0.25}),
        alpha=pd.Series({"A": 0.01, "Y": 0.02}),
        attributes=pd.DataFrame({"industry": ["i", "j", "k"]}, index=["A", "B", "Z"]),
        unknown_assets="drop",
        model_dropped=pd.Series({"X": "fewer than 126 observations"}),
    )
    assert aligned.holdings.to_dict() == {"A": 0.5, "B": 0.2}
    assert aligned.alpha is not None and aligned.alpha.to_dict() == {"A": 0.01, "B": 0.0, "C": 0.0, "D": 0.0}
    assert aligned.attributes is not None and list(aligned.attributes.index) == list(UNIVERSE)
    assert aligned.attributes["industry"].isna().tolist() == [False, False, True, True]
    table = aligned.report.table
    dropped_holding = table[(table["input"] == "holdings")]
    assert dropped_holding["asset"].tolist() == ["X"]
    assert dropped_holding["reason"].tolist() == ["dropped by the model fit: fewer than 126 observations"]
    assert dropped_holding["weight"].tolist() == [0.3]
    assert set(table.loc[table["input"] == "alpha", "asset"]) == {"Y", "B", "C", "D"}
    assert aligned.report.n_dropped == 3  # X, Y, Z
    sizes = aligned.report.sizes
    assert sizes.loc["holdings"].to_dict() == {"read": 3, "kept": 2, "dropped": 1, "filled": 0}
    assert sizes.loc["alpha"].to_dict() == {"read": 2, "kept": 1, "dropped": 1, "filled": 3}
    summary = aligned.report.summary()
    assert "holdings: 2 of 3 assets kept; 1 dropped (dropped by the model fit: fewer than 126 observations: X)" in summary
    assert "benchmark: 4 of 4 assets kept" in summary
    assert "benchmark" not in aligned.report.summary(changes_only=True)


def test_unknown_holdings_are_an_error_by_default() -> None:
    with pytest.raises(InputError, match=r"h\.csv: 2 holdings assets not in the risk model: X, Y; add them to the model or set data\.unknown_assets: drop \(or zero\)"):
        align_inputs(UNIVERSE, holdings=pd.Series({"A": 0.5, "X": 0.3, "Y": 0.2}), files={"holdings": "h.csv"})
    with pytest.raises(InputError, match=r"1 benchmark asset not in the risk model: Q \(the model fit dropped Q: too short\)"):
        align_inputs(
            UNIVERSE,
            holdings=pd.Series({"A": 1.0}),
            benchmark=pd.Series({"A": 0.5, "Q": 0.5}),
            model_dropped=pd.Series({"Q": "too short"}),
        )
    with pytest.raises(InputError, match=r"align_inputs: unknown_assets must be 'error', 'drop' or 'zero', got 'keep'"):
        align_inputs(UNIVERSE, holdings=pd.Series({"A": 1.0}), unknown_assets="keep")


def test_zero_policy_sells_outside_and_a_dropped_benchmark_keeps_its_total() -> None:
    aligned = align_inputs(
        UNIVERSE,
        holdings=pd.Series({"A": 0.5, "X": 0.3, "B": 0.2}),
        benchmark=pd.Series({"A": 0.3, "B": 0.3, "C": 0.2, "W": 0.2}),
        unknown_assets="zero",
    )
    assert aligned.holdings.to_dict() == {"A": 0.5, "B": 0.2}
    assert aligned.sold_outside.to_dict() == {"X": 0.3}
    # the benchmark without W is scaled back to its total of 1: 0.3/0.8 = 0.375, 0.2/0.8 = 0.25
    assert aligned.benchmark is not None
    pd.testing.assert_series_equal(aligned.benchmark, pd.Series({"A": 0.375, "B": 0.375, "C": 0.25}))
    table = aligned.report.table.set_index("asset")
    assert table.loc["X", "action"] == "sold" and table.loc["W", "action"] == "dropped"
    assert "1 sold to zero outside the optimizer (not in the risk model: X)" in aligned.report.summary()
