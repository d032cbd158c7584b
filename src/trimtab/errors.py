"""The package's own exception and warning classes.

Every error a user can cause derives from :class:`TrimtabError`, so the command line can turn it into
one line on stderr and a documented exit code without catching programming errors.
"""

from __future__ import annotations

from typing import Any


class TrimtabError(Exception):
    """Base class of every error trimtab raises on purpose."""

    exit_code = 2


class InputError(TrimtabError, ValueError):
    """Bad input data: a file, column, asset, date or value that is not what was expected."""

    exit_code = 2


class ScenarioError(InputError):
    """A scenario file or mapping that does not validate (names the file and the key path)."""

    exit_code = 2


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
    """

    exit_code = 1

    def __init__(self, message: str, relaxation: Any = None, *, conflict: Any = None, relaxed: Any = None) -> None:
        super().__init__(message)
        self.relaxation = relaxation
        self.conflict = conflict
        self.relaxed = relaxed

    def __reduce__(self) -> Any:
        # ``relaxed`` holds the built problem: it stays in the process that raised
        return (_infeasible, (str(self), self.relaxation, self.conflict))


def _infeasible(message: str, relaxation: Any, conflict: Any) -> InfeasibleError:
    return InfeasibleError(message, relaxation, conflict=conflict)


class SolverError(TrimtabError):
    """Every solver in the documented order failed, or returned weights that breach a constraint."""

    exit_code = 3


class ConvergenceWarning(UserWarning):
    """An iterative step stopped before meeting its tolerance; the result is usable but flagged."""


class DataWarning(UserWarning):
    """Input data was handled by a documented rule (assets dropped, values filled) and reported."""
