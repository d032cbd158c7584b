"""trimtab: portfolio construction to a risk budget on a linear factor risk model.

The public API is re-exported here. Heavy parts (the optimizer, the reports) are imported on first
use, so ``import trimtab`` stays quick.
"""

from __future__ import annotations

import importlib
from typing import Any

from trimtab._version import __version__
from trimtab.errors import (
    ConvergenceWarning,
    DataWarning,
    InfeasibleError,
    InputError,
    ModelError,
    ScenarioError,
    SolverError,
    TrimtabError,
)

# name -> module that defines it; resolved lazily by __getattr__ (``trimtab --help`` imports this
# package: it must not pull in pandas, scipy or cvxpy, and the command line installs its signal
# handlers before they are imported)
_LAZY = {
    "FactorModel": "trimtab.model",
    "FitReport": "trimtab.model",
    "fit_time_series": "trimtab.model",
    "fit_cross_section": "trimtab.model",
    "fit_statistical": "trimtab.model",
    "check_residuals": "trimtab.model",
    "bias_statistic": "trimtab.model",
    "alpha_alignment": "trimtab.model",
    "AlphaAlignment": "trimtab.model",
    "attribute": "trimtab.attribution",
    "RiskAttribution": "trimtab.attribution",
    "compare": "trimtab.attribution",
    "compare_many": "trimtab.attribution",
    "rebalance": "trimtab.construct",
    "RebalanceResult": "trimtab.construct",
    "RebalanceProblem": "trimtab.construct",
    "build_problem": "trimtab.construct",
    "sweep": "trimtab.runs",
    "frontier": "trimtab.runs",
    "backtest": "trimtab.runs",
    "get_executor": "trimtab.runs",
    "rebalance_accounts": "trimtab.runs.accounts",
    "AccountsResult": "trimtab.runs.accounts",
    "stress": "trimtab.stresstest",
    "replay": "trimtab.stresstest",
    "StressResult": "trimtab.stresstest",
    "ReplayResult": "trimtab.stresstest",
    "attribute_returns": "trimtab.attribution",
    "attribute_backtest_returns": "trimtab.attribution",
    "ReturnAttribution": "trimtab.attribution",
    "overlay": "trimtab.hedge",
    "OverlayResult": "trimtab.hedge",
}

__all__ = [
    "__version__",
    "ConvergenceWarning",
    "DataWarning",
    "InfeasibleError",
    "InputError",
    "ModelError",
    "ScenarioError",
    "SolverError",
    "TrimtabError",
    *_LAZY,
]


def __getattr__(name: str) -> Any:
    if name in _LAZY:
        module = importlib.import_module(_LAZY[name])
        value = getattr(module, name)
        globals()[name] = value
        return value
    raise AttributeError(f"module 'trimtab' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(__all__)
