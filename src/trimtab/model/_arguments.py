"""Type tests for the scalar arguments of the model functions (each caller words its own message)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np


def is_number(value: Any) -> bool:
    """True for a real Python or NumPy number; False for bool, text, None and anything else."""
    return isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)


def is_whole_number(value: Any) -> bool:
    """True for a Python or NumPy integer that is not a bool (2.0 is not whole here)."""
    return isinstance(value, (int, np.integer)) and not isinstance(value, bool)


def is_finite_number(value: Any) -> bool:
    """True for a real number that is finite as a float (a 400-digit integer is not)."""
    if not is_number(value):
        return False
    try:
        return math.isfinite(float(value))
    except OverflowError:
        return False


def is_positive_number(value: Any) -> bool:
    """True for a finite real number > 0."""
    return is_finite_number(value) and value > 0
