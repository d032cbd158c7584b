"""The package's own exception and warning classes.

Every error a user can cause derives from :class:`TrimtabError`, so the command line can turn it into
one line on stderr and a documented exit code without catching programming errors.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any, NamedTuple


class TrimtabError(Exception):
    """Base class of every error trimtab raises on purpose."""

    exit_code = 2


class InputError(TrimtabError, ValueError):
    """Bad input data: a file, column, asset, date or value that is not what was expected."""

    exit_code = 2


class ScenarioError(InputError):
    """A scenario file or mapping that does not validate (names the file and the key path).

    Attributes
    ----------
    problems : tuple of Problem
        Every problem found in one pass, when the raiser collected several (see
        :func:`problems_message`); empty when the message is the only record.
    """

    exit_code = 2

    def __init__(self, message: str, problems: Iterable[Problem] = ()) -> None:
        super().__init__(message)
        self.problems = tuple(problems)

    @classmethod
    def of(cls, problems: Sequence[Problem]) -> ScenarioError:
        """One error carrying ``problems``, its message from :func:`problems_message`."""
        return cls(problems_message(problems), problems)


class Problem(NamedTuple):
    """One problem in a scenario: the file (or source), the key path, what is wrong."""

    source: str
    key_path: str
    text: str
    unknown_key: bool = False


#: Most problems one message lists.
MAX_PROBLEMS = 5


def problems_message(problems: Sequence[Problem]) -> str:
    """One line for every problem: unknown keys first, at most :data:`MAX_PROBLEMS`, then a count."""
    ordered = sorted(dict.fromkeys(problems), key=lambda p: not p.unknown_key)
    first = ordered[0].source

    def one(p: Problem) -> str:
        where = "" if p.source == first else f"{p.source}: "
        return f"{where}{p.key_path}: {p.text}" if p.key_path else f"{where}{p.text}"

    if len(ordered) == 1:
        return f"{first}: {one(ordered[0])}"
    shown = " ".join(f"({i}) {one(p)}" for i, p in enumerate(ordered[:MAX_PROBLEMS], 1))
    more = f" (and {len(ordered) - MAX_PROBLEMS} more)" if len(ordered) > MAX_PROBLEMS else ""
    return f"{first}: {len(ordered)} problems: {shown}{more}"


class ModelError(InputError):
    """A factor model whose parts are inconsistent (shapes, labels, negative variances)."""

    exit_code = 2


class InfeasibleError(TrimtabError):
    """The rebalance problem has no solution.

    Attributes
    ----------
    relaxation : pandas.DataFrame or None
        One row per limit to move: its option (each numbered option restores feasibility alone),
        key path, the limit, the value it would need and how far it must move, in the user's units.
    conflict : list of str or None
        The conflict set: the key paths of the limits that cannot all hold together, each needed
        for the conflict (drop any one and the others can hold).
    relaxed : callable or None
        Solves the same problem at the first option's relaxed limits and returns its result.
    reasons : list of str or None
        One plain sentence per limit of the conflict set: how far it alone must move, or why moving
        it alone is not enough.
    """

    exit_code = 1

    def __init__(self, message: str, relaxation: Any = None, *, conflict: Any = None, relaxed: Any = None,
                 reasons: Any = None) -> None:
        super().__init__(message)
        self.relaxation = relaxation
        self.conflict = conflict
        self.relaxed = relaxed
        self.reasons = reasons

    def __reduce__(self) -> Any:
        # ``relaxed`` holds the built problem: it stays in the process that raised
        return (_infeasible, (str(self), self.relaxation, self.conflict, self.reasons))


def _infeasible(message: str, relaxation: Any, conflict: Any, reasons: Any = None) -> InfeasibleError:
    return InfeasibleError(message, relaxation, conflict=conflict, reasons=reasons)


class SolverError(TrimtabError):
    """Every solver in the documented order failed, or returned weights that breach a constraint."""

    exit_code = 3


class ConvergenceWarning(UserWarning):
    """An iterative step stopped before meeting its tolerance; the result is usable but flagged."""


class DataWarning(UserWarning):
    """Input data was handled by a documented rule (assets dropped, values filled) and reported."""
