"""The factor risk model: Σ = B·F·Bᵀ + diag(d), its estimators, refinements and diagnostics."""

from trimtab.model._factor_model import DENSE_LIMIT, FactorModel
from trimtab.model._fit_report import FitReport
from trimtab.model._time_series import fit_time_series
from trimtab.model._cross_section import fit_cross_section
from trimtab.model._statistical import fit_statistical

from trimtab.model._covariance_settings import CovarianceSettings
from trimtab.model._covariance import (
    eigenvalue_floor,
    ewma_covariance,
    ewma_weights,
    factor_covariance,
    ledoit_wolf,
    newey_west,
)
from trimtab.model._specific_variance import specific_variance
from trimtab.model._alpha import AlphaAlignment, alpha_alignment, with_alpha_factor
from trimtab.model._diagnostics import BiasResult, ResidualCheck, bias_statistic, check_residuals

__all__ = [
    "AlphaAlignment",
    "alpha_alignment",
    "with_alpha_factor",
    "BiasResult",
    "CovarianceSettings",
    "ResidualCheck",
    "bias_statistic",
    "fit_cross_section",
    "fit_statistical",
    "check_residuals",
    "eigenvalue_floor",
    "ewma_covariance",
    "ewma_weights",
    "factor_covariance",
    "ledoit_wolf",
    "newey_west",
    "specific_variance",
    "DENSE_LIMIT", "FactorModel", "FitReport", "fit_time_series"]
