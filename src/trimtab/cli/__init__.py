"""The ``trimtab`` command line: one module per command family, all registered on one typer app.

:mod:`trimtab.cli._app` builds the app (global options ``--json``, ``--quiet``, ``--verbose``,
``--version``) and wraps every command in the one guard (:mod:`trimtab.cli._guard`); each family
module (``demo``, ``model``, ``rebalance``, ``runs``, ``explore``, ``stress``) has a ``register(app)``
that adds its commands, and no family imports another. Adding a family is one new module with a
``register(app)`` plus its name in :func:`_build` below (see docs/architecture.md).

``app`` is built on first use, so :func:`main` (the console script) installs its signal handlers
before typer and the commands are imported.
"""

from __future__ import annotations

from typing import Any

from trimtab.cli._entry import main
from trimtab.cli._guard import EXIT_BAD_INPUT, EXIT_INFEASIBLE, EXIT_INTERNAL, EXIT_SOLVER


def _build() -> Any:
    """Register every command family on the app, in the order of ``trimtab --help``."""
    from trimtab.cli import demo, explore, model, rebalance, runs, stress
    from trimtab.cli._app import app, finish

    for family in (demo, rebalance, model, runs, explore, stress):
        family.register(app)
    finish(app)
    return app


def __getattr__(name: str) -> Any:
    if name == "app":
        globals()["app"] = built = _build()
        return built
    raise AttributeError(f"module 'trimtab.cli' has no attribute {name!r}")


__all__ = ["EXIT_BAD_INPUT", "EXIT_INFEASIBLE", "EXIT_INTERNAL", "EXIT_SOLVER", "app", "main"]
