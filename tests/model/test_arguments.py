"""The scalar type tests behind every parameter message of the model functions."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.model._arguments import is_number, is_positive_number, is_whole_number


@pytest.mark.parametrize(
    ("value", "number", "whole", "positive"),
    [
        (3, True, True, True),
        (np.int32(3), True, True, True),
        (2.0, True, False, True),
        (np.float64(-1.5), True, False, False),
        (0, True, True, False),
        (float("nan"), True, False, False),
        (float("inf"), True, False, False),
        (True, False, False, False),
        ("3", False, False, False),
        (None, False, False, False),
    ],
)
def test_type_tests(value: object, number: bool, whole: bool, positive: bool) -> None:
    assert (is_number(value), is_whole_number(value), is_positive_number(value)) == (number, whole, positive)
