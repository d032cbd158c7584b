"""What one infeasibility diagnosis has already learnt, so it does not solve for it again (#21).

A diagnosis (:func:`trimtab.construct._elastic.diagnose`) asks many related questions of the same
limits: the elastic filter's rounds, the deletion filter's feasibility tests, one elastic problem
per limit of the conflict set. Three kinds of answer carry over from one question to the next, each
exactly (none changes which conflict set or which relaxation is found):

- **a point that holds limits**: weights from any solve of the diagnosis (an elastic optimum, a
  feasibility test's point) that hold every row of a later test within its verification tolerance
  answer that test "feasible", the same rule a solver's own point is judged by;
- **limits that cannot hold together**: a set of rows once found infeasible is infeasible when it
  is asked again (the elastic filter's last test is the deletion filter's first);
- **a one-limit elastic optimum**: when an elastic problem with a set M of movable limits had to
  move exactly one limit g, its weights are also optimal for every elastic problem whose movable
  set M′ lies between, g ∈ M′ ⊆ M: g alone, or g with some others (the relaxation's joint option).
  That problem's feasible points are among M's and include these weights, and its objective is M's
  there. Its moves are the same too: M′'s optimal points are M's optimal points that hold the
  limits outside M′, and on every one of M's only g moves (an interior-point optimum lies inside
  its optimal face, so a face on which another limit could move would have shown that move), by
  the one amount the optimal value fixes. Only for a limit of one number (a risk cap, one row, one
  band): per-asset caps can share a move among their assets in many optimal ways, and another
  optimum would print another relaxation table than a solve of g alone.

The memory lives for one diagnosis (:func:`remembering`); outside one, nothing is remembered.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterator, Sequence
from contextvars import ContextVar

import numpy as np

from trimtab.construct.constraints._base import Rows


def holds(rows: Sequence[Rows], weights: np.ndarray) -> bool:
    """Every row within its verification tolerance at ``weights``."""
    return all(bool(np.all(r.breach(np.asarray(r.evaluate(weights), dtype=np.float64)) <= r.tolerance()))
               for r in rows)


def _key(rows: Sequence[Rows]) -> frozenset[tuple[object, ...]]:
    """The rows as a set of limits (a restricted copy of a block keys as its own bounds)."""
    return frozenset((r.name, r.kind, id(r.evaluate), r.lower.tobytes(), r.upper.tobytes()) for r in rows)


class Memo:
    """Points, infeasible row sets and one-limit elastic optima of one diagnosis (see the module notes)."""

    def __init__(self) -> None:
        self.points: list[np.ndarray] = []
        self.infeasible: set[frozenset[tuple[object, ...]]] = set()
        #: a limit's path → (the movable paths of the elastic problem that moved it alone, its weights)
        self.single: dict[str, tuple[frozenset[str], np.ndarray]] = {}

    def remember_alone(self, path: str, movable: Sequence[str], weights: np.ndarray) -> None:
        """An elastic optimum over ``movable`` moved the one-number limit ``path`` alone."""
        self.single[path] = (frozenset(movable), weights)

    def moved_alone(self, movable: Sequence[str]) -> np.ndarray | None:
        """Weights of a remembered optimum that answers the elastic problem over ``movable``, if any."""
        wanted = frozenset(movable)
        for path in movable:
            entry = self.single.get(path)
            if entry is not None and wanted <= entry[0]:
                return entry[1]
        return None

    def answer(self, rows: Sequence[Rows]) -> bool | None:
        """False for rows known infeasible, True when a remembered point holds them, else None."""
        if _key(rows) in self.infeasible:
            return False
        return True if any(holds(rows, w) for w in reversed(self.points)) else None

    def learn(self, rows: Sequence[Rows], answer: bool | None) -> None:
        if answer is False:
            self.infeasible.add(_key(rows))


_MEMO: ContextVar[Memo | None] = ContextVar("trimtab_diagnosis_memo", default=None)


@contextlib.contextmanager
def remembering() -> Iterator[Memo]:
    """A fresh memory for the diagnosis run inside the block."""
    token = _MEMO.set(Memo())
    try:
        yield _MEMO.get()  # type: ignore[misc]
    finally:
        _MEMO.reset(token)


def current() -> Memo | None:
    """The running diagnosis' memory, or None outside one."""
    return _MEMO.get()


def point(weights: np.ndarray | None) -> None:
    """Remember weights from a solve of the running diagnosis (checked against rows when asked)."""
    memo = current()
    if memo is not None and weights is not None and np.all(np.isfinite(weights)):
        memo.points.append(np.asarray(weights, dtype=np.float64))
