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
        One row per constraint that had to move in the elastic re-solve: its name, the limit, the
        value it would need and how far it must move.
    """

    exit_code = 1

    def __init__(self, message: str, relaxation: Any = None) -> None:
        super().__init__(message)
        self.relaxation = relaxation


class SolverError(TrimtabError):
    """Every solver in the documented order failed, or returned weights that breach a constraint."""

    exit_code = 3


class ConvergenceWarning(UserWarning):
    """An iterative step stopped before meeting its tolerance; the result is usable but flagged."""


class DataWarning(UserWarning):
    """Input data was handled by a documented rule (assets dropped, values filled) and reported."""
