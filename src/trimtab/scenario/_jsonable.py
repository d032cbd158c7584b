"""Plain JSON values from pandas and numpy objects (NaN and infinities become null)."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd


def jsonable(value: Any) -> Any:
    """``value`` with DataFrames as lists of row records, Series as mappings, numpy scalars as Python
    numbers and non-finite floats as None, recursively."""
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, pd.DataFrame):
        frame = value if isinstance(value.index, pd.RangeIndex) else value.reset_index()
        return jsonable(frame.to_dict(orient="records"))
    if isinstance(value, pd.Series):
        return jsonable(value.to_dict())
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return None if not math.isfinite(float(value)) else float(value)
    if isinstance(value, Path):
        return str(value)
    if isinstance(value, (str, int)) or value is None:
        return value
    return str(value)
