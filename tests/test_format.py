"""Terminal formatting shared by the commands: percentages, numbers and DataFrame tables."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
from rich.console import Console

from trimtab._format import format_number, format_percent, frame_table


def test_figures_format_by_kind() -> None:
    assert format_percent(0.03125) == "3.12%"
    assert format_percent(0.25, 1) == "25.0%"
    assert format_number(1234.5678) == "1235"
    assert format_percent(np.nan) == "–" and format_number(np.inf) == "–"
    assert format_percent("solved") == "solved"


def test_frame_table_percent_columns_and_index() -> None:
    frame = pd.DataFrame({"status": ["solved"], "tracking_error": [0.02], "risk_aversion": [2.5]}, index=pd.Index(["p1"], name="point"))
    out = io.StringIO()
    Console(file=out, width=120).print(frame_table(frame, "t", percent=["tracking_error"]))
    text = out.getvalue()
    assert "2.00%" in text and "2.5" in text and "p1" in text and "point" in text


def test_compact_limits_folds_default_bands() -> None:
    from trimtab._format import compact_limits

    paths = ["constraints.fully_invested"] + [f"constraints.group.bounds.default ({x})" for x in "ABCD"]
    assert compact_limits(paths) == "constraints.fully_invested, constraints.group.bounds.default (4 bands: A, B, C, …)"
    assert compact_limits(["constraints.group.bounds.default (A)", "constraints.turnover.max"]) == \
        "constraints.group.bounds.default (A), constraints.turnover.max"
