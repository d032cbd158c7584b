"""Post-solve practicalities that are not convex: minimum trade size, maximum number of names, round lots."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from trimtab.construct._problem import Outcome, RebalanceProblem


def check(problem: RebalanceProblem) -> None:
    """Check the inputs the heuristics need, before any solve."""


def apply(problem: RebalanceProblem, outcome: Outcome) -> Any:
    return outcome
