"""The ``trimtab`` command line: one module per command family, all registered on one typer app.

:mod:`trimtab.cli._app` builds the app (global options ``--json``, ``--quiet``, ``--verbose``,
``--version``) and wraps every command in the one guard (:mod:`trimtab.cli._guard`); each family
module (``accounts``, ``demo``, ``model``, ``rebalance``, ``runs``, ``explore``, ``stress``) has a ``register(app)``
marked ``@family`` that adds its commands, and no family imports another. Adding a family is one new
module plus one import line in :func:`_build` below (see docs/architecture.md).

``app`` is built on first use, so :func:`main` (the console script) installs its signal handlers
before typer and the commands are imported.
"""

from __future__ import annotations

from typing import Any

from trimtab.cli._entry import main
from trimtab.cli._guard import EXIT_BAD_INPUT, EXIT_INFEASIBLE, EXIT_INTERNAL, EXIT_SOLVER


def _build() -> Any:
    """Import every command family (each module's ``@family register(app)``) and register them all."""
    from trimtab.cli._app import FAMILIES, app, finish

    # the command families, one line each; the order of `trimtab --help` is HELP_ORDER in cli/_app.py
    from trimtab.cli import accounts  # noqa: F401
    from trimtab.cli import demo  # noqa: F401
    from trimtab.cli import explore  # noqa: F401
    from trimtab.cli import model  # noqa: F401
    from trimtab.cli import overlay  # noqa: F401
    from trimtab.cli import rebalance  # noqa: F401
    from trimtab.cli import runs  # noqa: F401
    from trimtab.cli import stress  # noqa: F401

    for register in FAMILIES:
        register(app)
    finish(app)
    return app


def __getattr__(name: str) -> Any:
    if name == "app":
        globals()["app"] = built = _build()
        return built
    raise AttributeError(f"module 'trimtab.cli' has no attribute {name!r}")


__all__ = ["EXIT_BAD_INPUT", "EXIT_INFEASIBLE", "EXIT_INTERNAL", "EXIT_SOLVER", "app", "main"]
