"""Array aliases used in annotations across the package."""

from __future__ import annotations

from typing import Union

import numpy as np
import numpy.typing as npt
import pandas as pd

FloatArray1D = npt.NDArray[np.float64]
FloatArray2D = npt.NDArray[np.float64]
WeightsLike = Union[pd.Series, npt.ArrayLike]
