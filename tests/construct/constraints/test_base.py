from __future__ import annotations

import numpy as np

from trimtab.construct.constraints._base import box_rows, check_rows, describe_rows


def test_binding_slack_and_summary_row():
    rows = box_rows("weight", "weight", np.zeros(3), np.array([0.5, 0.5, 0.2]), ["a", "b", "c"])
    w = np.array([0.3, 0.5, 0.2])
    (row,) = describe_rows(rows, rows.evaluate(w), np.array([0.0, 0.1, 0.3]), np.zeros(3))
    # the summary row is the binding asset with the largest shadow price
    assert row["asset"] == "c" and row["binding"] and row["n_binding"] == 2 and row["shadow_price"] == 0.3
    check = check_rows(rows, w)
    assert check["ok"] and check["breach"] == 0.0
