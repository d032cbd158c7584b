"""Terminal tables, read back from a recording rich Console."""

from __future__ import annotations

import dataclasses

import pandas as pd
import pytest
from rich.console import Console

from trimtab import FactorModel, InputError
from trimtab.attribution import attribute, format_figure
from trimtab.report import CAUTION, print_attribution, print_comparison, print_rebalance

from .conftest import StandInResult, stand_in


def recorded() -> Console:
    return Console(record=True, width=220, color_system=None)


def test_print_rebalance(result: StandInResult) -> None:
    console = recorded()
    print_rebalance(result, console=console, top=4)
    text = console.export_text()
    assert text.index("Risk budget") < text.index("Risk before and after") < text.index("Top 4 risk contributors")
    assert format_figure(result.pre_trade.risk, "fraction") in text and format_figure(result.post_trade.risk, "fraction") in text
    largest = result.post_trade.by_asset["contribution"].abs().idxmax()
    assert largest in text
    assert "Exposures that changed most" in text and "Binding constraints" in text and "fully_invested" in text
    assert "tracking_error" not in text.split("Binding constraints")[1]  # not binding, not listed
    assert CAUTION in text


def test_print_rebalance_without_binding_constraints(result: StandInResult) -> None:
    table = result.constraints.assign(binding=False)
    console = recorded()
    print_rebalance(dataclasses.replace(result, constraints=table), console=console)
    assert "No binding constraints." in console.export_text()


def test_print_attribution_and_comparison(result: StandInResult, report_model: FactorModel) -> None:
    console = recorded()
    print_attribution(result.post_trade, console=console, top=3)
    text = console.export_text()
    assert "Active risk (tracking error)" in text and "Top 3 risk contributors" in text and CAUTION in text
    console = recorded()
    other = stand_in(report_model, seed=2, shrink=0.1)
    print_comparison({"now": result, "cautious": other}, console=console)
    text = console.export_text()
    assert "now" in text and "cautious" in text and format_figure(other.post_trade.risk, "fraction") in text
    assert "Risk budget used" in text and CAUTION in text


def test_zero_risk_and_errors(report_model: FactorModel) -> None:
    w = pd.Series({"A0001": 1.0})
    console = recorded()
    print_attribution(attribute(report_model, w, w), console=console)
    assert "Zero risk: contributions are undefined" in console.export_text()
    with pytest.raises(InputError, match=r"report: expected a RiskAttribution or a rebalance result"):
        print_rebalance("not a result", console=recorded())
    with pytest.raises(InputError, match=r"report: expected a non-empty mapping"):
        print_comparison({}, console=recorded())
