"""JSON conversion of pandas and numpy values."""

from __future__ import annotations

from pathlib import Path


def test_jsonable() -> None:
    import numpy as np
    import pandas as pd

    from trimtab.scenario._jsonable import jsonable

    frame = pd.DataFrame({"a": [1.0, np.nan]}, index=pd.Index(["x", "y"], name="asset"))
    assert jsonable(frame) == [{"asset": "x", "a": 1.0}, {"asset": "y", "a": None}]
    assert jsonable(pd.DataFrame({"a": [np.int64(2)]})) == [{"a": 2}]
    assert jsonable({"s": pd.Series({"k": np.float64(np.inf)}), "p": Path("f"), "b": np.bool_(True)}) == {"s": {"k": None}, "p": "f", "b": True}
