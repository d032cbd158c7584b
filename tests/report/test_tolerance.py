"""Limits held only within their rounding tolerance are said so, never shown as broken (issue #19).

The rounded book may sit past a limit by less than its rounding tolerance (docs/construction.md,
"Rounding to lots"); the report's limits table and a sentence in the report and the terminal say so.
The tables below are hand-made verification rows: the expected texts follow from the arithmetic.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np
import pandas as pd
import pytest

from trimtab.report._html_desk import limits_section
from trimtab.report._tolerance import status_text, tolerance_lines, within_tolerance

NAN = np.nan
ROWS = [  # name, kind, value, lower, upper, breach, tolerance, soft, ok
    ("turnover", "turnover", 0.2500801, NAN, 0.25, 0.0000801, 1e-4, False, True),          # 25.01% against 25%
    ("tracking_error", "tracking_error", 0.03, NAN, 0.03, 0.0, 1e-4, False, True),           # at its cap: plain ok
    ("group.industry[A]", "active_group", 0.0300002, -0.03, 0.03, 2e-7, 1e-4, False, True),  # past only in the 7th digit
    ("active_weight[X]", "active_weight", 0.0150000039, -0.015, 0.015, 3.9e-9, 1e-4, False, True),  # verification noise
    ("beta", "beta", 0.9794, 0.98, 1.02, 0.0006, 1e-3, False, True),                         # below its minimum
    ("factor_exposure[momentum]", "active_factor_exposure", 0.003, 0.0, 0.0, 0.003, 1e-3, False, False),  # breached
    ("soft_turnover", "turnover", 0.31, NAN, 0.3, 0.01, 1e-4, True, True),                   # a soft limit: a penalty
]


def _subject() -> SimpleNamespace:
    table = pd.DataFrame(ROWS, columns=["name", "kind", "value", "lower", "upper", "breach", "tolerance", "soft", "ok"])
    table["excess"] = 0.0
    return SimpleNamespace(trade_list=SimpleNamespace(verification=table))


def test_only_limits_past_their_bound_beyond_verification_noise_and_still_ok_are_listed() -> None:
    rows = within_tolerance(_subject())
    # verification tolerance max(1e-7, 1e-6·|limit|): 3.9e-9 is noise, 2e-7 is not
    assert list(rows.index) == ["turnover", "group.industry[A]", "beta"]
    assert rows.loc["turnover", "breach"] == pytest.approx(0.0000801)


def test_no_trade_list_no_rows() -> None:
    assert within_tolerance(SimpleNamespace()) is None


def test_the_status_reads_ok_within_the_tolerance_in_the_limits_unit() -> None:
    assert status_text("turnover", 1e-4) == "ok (within rounding tolerance 0.01 pp)"  # 1e-4 of NAV = 0.01 pp
    assert status_text("beta", 1e-3) == "ok (within rounding tolerance 0.001)"
    assert status_text("active_factor_exposure", 1e-3) == "ok (within rounding tolerance 0.001)"


def test_a_sentence_for_each_figure_that_reads_past_its_limit() -> None:
    lines = tolerance_lines(within_tolerance(_subject()))
    # the group at 3.00% against 3.00% reads as at its limit: no sentence (the table marks it)
    assert len(lines) == 2
    assert lines[0].startswith("turnover is 25.01% against a maximum of 25.00%: 0.008 pp past it, within the 0.01 pp "
                               "rounding tolerance")
    assert lines[1].startswith("beta is 0.9794 against a minimum of 0.98: 0.0006 past it, within the 0.001 rounding tolerance")
    assert all("the rounded book holds this limit" in line for line in lines)


def test_the_limits_table_marks_those_rows_and_still_names_a_breach() -> None:
    subject = _subject()
    table = subject.trade_list.verification.set_index("name")
    checks = table[["kind", "value", "lower", "upper", "ok"]].assign(slack=0.0)
    html = limits_section(checks, within=within_tolerance(subject))
    assert html.count("ok (within rounding tolerance 0.01 pp)") == 2  # turnover and the group
    assert html.count("ok (within rounding tolerance 0.001)") == 1  # beta
    assert html.count(">breached<") == 1 and html.count(">holds<") == 3
