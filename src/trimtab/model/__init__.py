"""The factor risk model: Σ = B·F·Bᵀ + diag(d), its estimators, refinements and diagnostics."""

from trimtab.model._factor_model import DENSE_LIMIT, FactorModel
from trimtab.model._fit_report import FitReport

__all__ = ["DENSE_LIMIT", "FactorModel", "FitReport"]
