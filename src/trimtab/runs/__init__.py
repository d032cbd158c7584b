"""Many runs at once: executors, parameter sweeps, frontiers and walk-forward backtests.

Runs are dispatched through one seam, :func:`get_executor` (in process, a local process pool, or a
``dask.distributed`` cluster); results stream back as :class:`Outcome` objects.
"""

from trimtab.runs._executors import Executor, Outcome, get_executor
from trimtab.runs._backtest import AsOf, BacktestResult, backtest
from trimtab.runs._sweep import SweepResult, sweep
from trimtab.runs._frontier import FrontierResult, frontier

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
