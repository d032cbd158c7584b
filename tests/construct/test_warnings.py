"""Run warnings (issue #13), one test per kind: what the desk must see before trading."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab.construct import _solve, rebalance
from trimtab.construct._orders import rounding_notices
from trimtab.construct._trade_list import TradeList
from trimtab.construct._warnings import KINDS, AlertSettings, concentration_warnings, share_text
from trimtab.scenario import align_inputs
from trimtab.scenario._notices import alignment_warnings

from .conftest import make_fund

BASE = {"fully_invested": True, "long_only": True, "weight": {"max": 0.08}, "tracking_error": {"max": 0.03}}


def _kinds(result) -> list[str]:
    return [w.kind for w in result.warnings]


def test_dropped_assets_name_ids_and_share_of_nav() -> None:
    aligned = align_inputs(
        pd.Index(["A", "B", "C"]),
        holdings=pd.Series({"A": 0.5, "X": 0.03, "Y": 0.02, "B": 0.45}),
        benchmark=pd.Series({"A": 0.5, "B": 0.3, "Z": 0.2}),
        unknown_assets="drop",
    )
    warnings = alignment_warnings(aligned.report, {"holdings": "h.csv"})
    held = next(w for w in warnings if w.details["input"] == "holdings")
    assert held.kind == "dropped_assets"
    assert held.message == "holdings (h.csv): 2 assets not in the risk model dropped, 5.00% of NAV: X, Y"
    assert held.details["weight"] == pytest.approx(0.05) and held.details["assets"] == ["X", "Y"]
    bench = next(w for w in warnings if w.details["input"] == "benchmark")
    assert "1 asset not in the risk model dropped, 20.00% of NAV: Z; the rest is scaled back" in bench.message


def test_holdings_sold_outside_the_optimizer_are_a_dropped_assets_warning() -> None:
    aligned = align_inputs(pd.Index(["A", "B"]), holdings=pd.Series({"A": 0.9, "X": 0.1}), unknown_assets="zero")
    (warning,) = alignment_warnings(aligned.report)
    assert warning.kind == "dropped_assets" and "sold to zero outside the optimizer, 10.00% of NAV: X" in warning.message


def test_zeroed_alpha_counts_and_names() -> None:
    aligned = align_inputs(
        pd.Index([f"A{i}" for i in range(8)]), holdings=pd.Series({"A0": 1.0}), alpha=pd.Series({"A0": 0.01, "A1": 0.02})
    )
    (warning,) = alignment_warnings(aligned.report)
    assert warning.kind == "zeroed_alpha" and warning.details["n_assets"] == 6
    assert warning.message == "alpha set to 0 for 6 model assets without a score: A2, A3, A4, A5, A6 and 1 more"


def test_solver_fallback_with_the_reason(monkeypatch: pytest.MonkeyPatch) -> None:
    fund = make_fund(40, 3, seed=151)
    # a soft limit is outside the own solver's class: the fall-back to Clarabel is stated with its reason
    soft = {"objective": {"maximize": "utility", "risk_aversion": 5},
            "constraints": {"fully_invested": True, "long_only": True,
                            "tracking_error": {"max": 0.01, "soft": {"penalty": 5.0}}}}
    result = rebalance(fund.model, soft, **fund.kwargs())
    fallback = [w for w in result.warnings if w.kind == "solver_fallback"]
    assert result.solver == "CLARABEL" and len(fallback) == 1
    assert "FACTOR_IPM: not for soft constraint tracking_error" in fallback[0].message
    assert fallback[0].message.endswith("solved with CLARABEL")
    # a rejected answer: Clarabel stopped early, its retry accepted
    monkeypatch.setitem(_solve.SOLVER_SETTINGS, "CLARABEL", {"max_iter": 2})
    hard = {"objective": {"minimize": "active_risk"}, "constraints": BASE}
    result = rebalance(fund.model, hard, benchmark=fund.benchmark, holdings=fund.holdings, solvers=("CLARABEL", "SCS"))
    (fallback,) = [w for w in result.warnings if w.kind == "solver_fallback"]
    assert fallback.message == "accepted CLARABEL retry (tol_feas=1e-09) after CLARABEL: user_limit"


def test_heuristic_applied() -> None:
    fund = make_fund(60, 4, seed=152)
    scenario = {"objective": {"maximize": "utility", "risk_aversion": 5},
                "constraints": {**BASE, "max_names": 25, "tracking_error": {"max": 0.15}}}
    result = rebalance(fund.model, scenario, **fund.kwargs())
    heuristics = [w for w in result.warnings if w.kind == "heuristic"]
    assert heuristics and heuristics[0].details["heuristic"] == "max_names"
    assert heuristics[0].message.startswith("max_names: ") and "re-solved" in heuristics[0].message


def test_a_limit_the_rounded_book_breaches_is_named_with_value_and_excess() -> None:
    verification = pd.DataFrame(
        {"name": ["turnover", "cash_after_costs"], "kind": ["turnover", "cash"], "value": [0.2504, 0.001],
         "lower": [np.nan, 0.0], "upper": [0.25, 0.002], "breach": [4e-4, 0.0], "tolerance": [1e-4, 1e-12],
         "excess": [3e-4, 0.0], "soft": [False, False], "ok": [False, True]}
    )
    empty = pd.DataFrame(columns=["optimal", "rounded", "change"])
    trade_list = TradeList(pd.DataFrame(), pd.Series(dtype=float), verification, 1e8, 0.0, 0.0, -30.0, empty)
    assert not trade_list.ok
    (warning,) = rounding_notices(trade_list)
    assert warning.kind == "rounding" and warning.details["limit"] == "turnover"
    assert warning.message.startswith("orders not fit to send: ")
    assert "turnover is 0.2504 against a maximum of 0.25, 0.0003 beyond the tolerance 0.0001" in warning.message
    # a book that holds every limit gives no warning
    fine = verification.assign(ok=True, excess=0.0)
    assert rounding_notices(TradeList(pd.DataFrame(), pd.Series(dtype=float), fine, 1e8, 0.0, 0.0, -30.0, empty)) == []

def test_factor_and_asset_concentration_and_positions_pinned_at_caps() -> None:
    fund = make_fund(40, 4, seed=153)
    scenario = {"objective": {"maximize": "alpha"}, "constraints": {**BASE, "weight": {"max": 0.05}}}
    result = rebalance(fund.model, scenario, **fund.kwargs())
    attr = result.post_trade
    top_factor = attr.by_factor["percent"].idxmax()
    top_asset = attr.by_asset["percent"].idxmax()
    settings = AlertSettings(factor_share=attr.by_factor["percent"].max() / 100 - 0.01,
                             asset_share=attr.by_asset["percent"].max() / 100 - 0.001, pinned_positions=1)
    warnings = concentration_warnings(attr, result.pinned, settings)
    by_kind = {w.kind: w for w in warnings}
    assert by_kind["factor_concentration"].details["factor"] == str(top_factor)
    assert by_kind["asset_concentration"].details["asset"] == str(top_asset)
    pinned = result.weights[result.weights >= 0.05 - 1e-7].index  # the optimizer's book (rounding moves < 1 lot)
    assert len(pinned) >= 1
    assert by_kind["pinned_at_cap"].details["count"] == len(pinned)
    assert set(by_kind["pinned_at_cap"].details["assets"]["weight"]) == set(pinned)
    # the thresholds decide: none above a 100% share, none when pinned positions are not asked about
    quiet = concentration_warnings(attr, result.pinned, AlertSettings(factor_share=1.0, asset_share=1.0, pinned_positions=0))
    assert quiet == []
    # the result applies its own thresholds, set by the scenario layer
    assert "pinned_at_cap" in _kinds(result.with_context(alerts=AlertSettings(pinned_positions=1)))
    assert "pinned_at_cap" not in _kinds(result.with_context(alerts=AlertSettings(pinned_positions=len(pinned) + 1)))


def test_every_kind_is_documented() -> None:
    from pathlib import Path

    text = (Path(__file__).resolve().parents[2] / "docs" / "outputs.md").read_text(encoding="utf-8")
    for kind in KINDS:
        assert f"`{kind}`" in text, kind


@pytest.mark.parametrize(("percent", "threshold", "text"), [(50.02, 0.5, "50.02%"), (50.4, 0.5, "50.4%"), (75.4, 0.5, "75%"), (20.0001, 0.2, "20.0001%")])
def test_a_share_above_its_alert_never_reads_as_equal_to_it(percent: float, threshold: float, text: str) -> None:
    # issue #20: "takes 50% (alert above 50%)"
    assert share_text(percent, threshold) == text
