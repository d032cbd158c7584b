"""Module-level task functions for the executor tests (pool processes and Dask workers import them by name)."""

from __future__ import annotations

import numpy as np
import pandas as pd

from tests.conftest import random_model
from trimtab.errors import InputError


def portfolio_risk(seed: int) -> dict[str, float]:
    """The per-period variance of a seeded random portfolio on a seeded random model, two ways."""
    if seed < 0:
        raise InputError(f"portfolio_risk: seed must be ≥ 0, got {seed}")
    model = random_model(n_assets=30, n_factors=4, seed=seed)
    w = np.random.default_rng(seed + 1000).dirichlet(np.ones(model.n_assets))
    return {"variance": float(model.variance(w)), "dense": float(w @ model.covariance() @ w)}


def portfolio_risk_on(seed: int, model) -> dict[str, float]:
    """:func:`portfolio_risk` on a model every run shares (the executor's ``shared``)."""
    if seed < 0:
        raise InputError(f"portfolio_risk_on: seed must be ≥ 0, got {seed}")
    w = np.random.default_rng(seed + 1000).dirichlet(np.ones(model.n_assets))
    return {"variance": float(model.variance(w)), "dense": float(w @ model.covariance() @ w)}


class ClosedFormResult:
    """What the backtest reads from a rebalance result: the target weights."""

    def __init__(self, weights: pd.Series) -> None:
        self.weights = weights


def closed_form_rebalance(model, scenario, *, holdings, benchmark, alpha, **_: object) -> ClosedFormResult:
    """Mean-variance utility with only the budget constraint, in closed form (Markowitz).

    max αᵀa − λ·P·aᵀΣa subject to 1ᵀa = 0 (a = w − b, P periods a year, α annualised) has the
    Lagrange solution a = Σ⁻¹(α − γ1)/(2λP), γ = 1ᵀΣ⁻¹α / 1ᵀΣ⁻¹1 (textbook first-order conditions of an
    equality-constrained quadratic programme).
    """
    lam = float(scenario["objective"]["risk_aversion"])
    ones = np.ones(model.n_assets)
    inv_alpha = model.solve(alpha.to_numpy())
    inv_ones = model.solve(ones)
    gamma = float(ones @ inv_alpha) / float(ones @ inv_ones)
    active = (inv_alpha - gamma * inv_ones) / (2.0 * lam * model.periods_per_year)
    return ClosedFormResult(pd.Series(benchmark.to_numpy() + active, index=model.assets))


def fit_without_value(returns: pd.DataFrame, factors: pd.DataFrame):
    """A deliberately misspecified fit: the value factor is left out of the regressions."""
    from trimtab.model import fit_time_series

    return fit_time_series(returns, factors.drop(columns="value"))


BUILDS: list[str] = []  # one entry per ClosedFormProblem built in this process


class ClosedFormProblem:
    """A built problem with closed-form solutions and the optimizer's re-solve entry point
    (``solve(**changes)``, as :class:`trimtab.construct.RebalanceProblem`).

    Budget constraint only (1ᵀa = 0, a = w − b), α̃ = α − γ1 with γ = 1ᵀΣ⁻¹α / 1ᵀΣ⁻¹1:
    utility  max αᵀa − λP·aᵀΣa            → a = Σ⁻¹α̃ / (2λP);
    alpha    max αᵀa s.t. P·aᵀΣa ≤ σ̄²    → a = σ̄·Σ⁻¹α̃ / √(P·α̃ᵀΣ⁻¹α̃)
    (Lagrange conditions of an equality- or norm-constrained linear/quadratic programme; textbook).
    """

    def __init__(self, model, scenario, *, holdings, benchmark, alpha, **_: object) -> None:
        BUILDS.append(str(scenario["objective"]))
        extra = set(scenario.get("constraints", {})) - {"tracking_error", "fully_invested"}
        if extra:
            raise InputError(f"ClosedFormProblem: no closed form with constraints {sorted(extra)}")
        self.model, self.benchmark = model, benchmark
        self.objective = dict(scenario["objective"])
        self.cap = scenario.get("constraints", {}).get("tracking_error", {}).get("max")
        ones = np.ones(model.n_assets)
        inv_alpha, inv_ones = model.solve(alpha.to_numpy()), model.solve(ones)
        gamma = float(ones @ inv_alpha) / float(ones @ inv_ones)
        self.direction = inv_alpha - gamma * inv_ones  # Σ⁻¹α̃

    def solve(self, *, risk_aversion=None, limits=None) -> ClosedFormResult:
        from trimtab.errors import InfeasibleError

        limits = dict(limits or {})
        unknown = set(limits) - {"tracking_error.max"}
        if unknown:
            raise InputError(f"solve: limits not re-solvable: {sorted(unknown)}")
        cap = limits.get("tracking_error.max", self.cap)
        periods = self.model.periods_per_year
        if self.objective.get("maximize") == "alpha":
            if cap is None or cap < 0.001:
                raise InfeasibleError(f"tracking_error.max {cap} is below the smallest reachable 0.001")
            scale = float(cap) / np.sqrt(periods * float(self.direction @ self.model.covariance_dot(self.direction)))
        else:
            lam = float(risk_aversion if risk_aversion is not None else self.objective["risk_aversion"])
            scale = 1.0 / (2.0 * lam * periods)
        return ClosedFormResult(pd.Series(self.benchmark.to_numpy() + scale * self.direction, index=self.model.assets))


def allocator_setting(_: object) -> str | None:
    """The glibc trim threshold a worker process started with (None: unset)."""
    import os

    return os.environ.get("MALLOC_TRIM_THRESHOLD_")
