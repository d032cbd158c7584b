"""Many accounts, one model: rebalance separately managed accounts together.

Every account shares the model, the alpha, the benchmark and the scenario, and brings its own holdings,
NAV, exclusions and limit overrides. Their trades meet in one market: :func:`rebalance_accounts`
prices the impact of the pooled trade fairly (an equilibrium iterated over rounds of solves), shares an
aggregate cap on each name's traded volume, and keeps one account's failure from stopping the others.
Chunks of accounts go through the executor seam (:func:`trimtab.runs.get_executor`); each worker
prepares the shared inputs once and re-solves warm.
"""

from __future__ import annotations

import importlib
from typing import Any

_LAZY = {
    "AccountsResult": "trimtab.runs.accounts._result",
    "rebalance_accounts": "trimtab.runs.accounts._run",
}

__all__ = ["AccountsResult", "rebalance_accounts"]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'trimtab.runs.accounts' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
