"""cvxpy, imported when first used.

Validating a scenario (``trimtab check``) and a solve by trimtab's own interior-point method build no
cvxpy problem, so they need not pay cvxpy's import (about a second on a cold start). The modules that
build cvxpy problems write ``from trimtab.construct._cvxpy import cp`` and use ``cp`` as they would
the module itself.
"""

from __future__ import annotations

import importlib
from types import ModuleType
from typing import Any


class _OnFirstUse(ModuleType):
    def __getattr__(self, name: str) -> Any:
        value = getattr(importlib.import_module("cvxpy"), name)
        setattr(self, name, value)  # later look-ups find it here without this call
        return value


cp: Any = _OnFirstUse("cvxpy", "cvxpy, imported when first used")
