"""The outcome of one verified solve, shared by the problem hub and the solve paths it hands work to
(risk budgeting, the heuristics), which build it without importing the hub."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

import numpy as np
import pandas as pd

from trimtab.construct.constraints._base import Rows

if TYPE_CHECKING:
    from trimtab.construct import _solve


@dataclass(eq=False)
class Outcome:
    """A verified convex solve."""

    weights: np.ndarray
    status: str
    solver: str
    iterations: int
    solve_time: float
    build_time: float
    attempts: list[_solve.Attempt]
    verification: pd.DataFrame
    duals: dict[int, tuple[np.ndarray, np.ndarray]]
    rows: list[Rows]
    solver_objective: float
    notes: list[str] = field(default_factory=list)
    #: Solvers passed over because the problem is outside their class, with the reason.
    skipped: list[str] = field(default_factory=list)
    #: The hedge overlay's notionals h (fractions of NAV), verified with w; None without an overlay.
    overlay: np.ndarray | None = None
