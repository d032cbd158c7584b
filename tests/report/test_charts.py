"""Each chart is well-formed SVG (xml.etree), keeps its text as text, and has ids of its own."""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import pandas as pd

from trimtab.report._charts import paired_bars, risk_budget_chart, split_chart, tradeoff_chart
from trimtab.report._content import RiskBudget

SVG_NS = "{http://www.w3.org/2000/svg}"


def texts(svg: str) -> list[str]:
    root = ET.fromstring(svg)
    assert root.tag == f"{SVG_NS}svg" and "viewBox" in root.attrib and "width" not in root.attrib
    return ["".join(t.itertext()) for t in root.iter(f"{SVG_NS}text")]


def test_risk_budget_chart_labels() -> None:
    labels = texts(risk_budget_chart(RiskBudget("tracking_error", cap=0.03, pre=0.045, post=0.0275, used=0.0275 / 0.03)))
    joined = " ".join(labels)
    assert "cap 3.00%" in joined and "4.50%" in joined and "2.75%" in joined and "Before" in joined


def test_split_and_paired_bars() -> None:
    split = pd.DataFrame({"factor": [0.02, 0.0], "specific": [0.01, 0.0], "risk": [0.0224, 0.0]}, index=["Before", "After"])
    joined = " ".join(texts(split_chart(split)))
    assert "67% factor" in joined and "zero risk" in joined
    table = pd.DataFrame({"pre": [0.1, -0.2, float("nan")], "post": [0.05, 0.0, 0.3]}, index=["value", "size", "momentum"])
    joined = " ".join(texts(paired_bars(table, xlabel="exposure", salt="x")))
    assert "momentum" in joined and "before" in joined and "after" in joined



def test_scenarios_on_the_same_point_share_one_label() -> None:
    # base and a stress limit that barely binds land on one point of the alpha/TE chart: one label, not two overprinted
    points = pd.DataFrame({"tracking_error": [0.03, 0.03, 0.0278], "expected_alpha": [0.0085, 0.00849, 0.0041]},
                          index=["base", "stress_limit", "low_turnover"])
    labels = texts(tradeoff_chart(points))
    assert "base, stress_limit" in labels and "low_turnover" in labels
    assert not any(t in ("base", "stress_limit") for t in labels)

def test_ids_differ_between_charts() -> None:
    table = pd.DataFrame({"post": [0.1, 0.2]}, index=["a", "b"])
    one = set(re.findall(r'id="([^"]+)"', paired_bars(table, xlabel="x", salt="one")))
    two = set(re.findall(r'id="([^"]+)"', paired_bars(table, xlabel="x", salt="two")))
    assert one and not (one & two)
    assert paired_bars(table, xlabel="x", salt="one") == paired_bars(table, xlabel="x", salt="one")
