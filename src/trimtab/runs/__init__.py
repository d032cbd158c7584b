"""Many runs at once: executors, parameter sweeps, frontiers and walk-forward backtests.

Runs are dispatched through one seam, :func:`get_executor` (in process, a local process pool, or a
``dask.distributed`` cluster); results stream back as :class:`Outcome` objects.
"""

from __future__ import annotations

import importlib
from typing import Any

# name -> module; imported on first use, so registering the commands (``trimtab --help``) does not
# import the optimizer
_LAZY = {
    "Executor": "trimtab.runs._executors",
    "Outcome": "trimtab.runs._executors",
    "get_executor": "trimtab.runs._executors",
    "AsOf": "trimtab.runs._backtest",
    "BacktestResult": "trimtab.runs._backtest",
    "backtest": "trimtab.runs._backtest",
    "SweepResult": "trimtab.runs._sweep",
    "sweep": "trimtab.runs._sweep",
    "FrontierResult": "trimtab.runs._frontier",
    "frontier": "trimtab.runs._frontier",
}

__all__ = [
    "AsOf",
    "BacktestResult",
    "Executor",
    "FrontierResult",
    "Outcome",
    "SweepResult",
    "backtest",
    "frontier",
    "get_executor",
    "sweep",
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        value = getattr(importlib.import_module(_LAZY[name]), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'trimtab.runs' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
