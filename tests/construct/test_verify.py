"""The numpy verification: breaches beyond the documented tolerance fail, soft rows are reported."""

from __future__ import annotations

import numpy as np

from trimtab.construct._verify import describe_failures, failures, verify
from trimtab.construct.constraints._base import ABS_TOL, box_rows, linear_rows


def test_breach_within_and_beyond_tolerance():
    rows = [box_rows("weight", "weight", np.zeros(3), np.full(3, 0.5), ["a", "b", "c"]),
            linear_rows("budget", "budget", np.ones((1, 3)), np.array([1.0]), np.array([1.0]), ["budget"])]
    ok = verify(rows, np.array([0.5 + 0.5 * ABS_TOL, 0.25, 0.25]))
    assert ok["ok"].all()
    bad = verify(rows, np.array([0.6, 0.2, 0.2]))
    assert list(failures(bad)["name"]) == ["weight[a]"]
    # tolerance max(1e-7, 1e-6·|limit|) with limit 0.5
    assert describe_failures(bad) == "weight[a] breached by 0.1 (tolerance 5e-07)"


def test_non_finite_weights_fail_and_objective_gap_is_checked():
    rows = [box_rows("weight", "weight", np.zeros(2), np.ones(2), ["a", "b"])]
    table = verify(rows, np.array([np.nan, 0.5]))
    assert not table.set_index("name").loc["weights_finite", "ok"]
    table = verify(rows, np.array([0.5, 0.5]), solver_objective=1.0, numpy_objective=1.1)
    assert not table.set_index("name").loc["objective", "ok"]


def test_soft_rows_report_but_pass():
    rows = [box_rows("weight", "weight", np.zeros(2), np.full(2, 0.5), ["a", "b"], soft=2.0)]
    table = verify(rows, np.array([0.7, 0.3]))
    row = table.set_index("name").loc["weight[a]"]
    assert row["ok"] and row["soft"] and abs(row["breach"] - 0.2) < 1e-12
