"""Shocks as factor moves: validation, Gaussian conditioning of the unshocked factors, plausibility.

A shock names a return over the shock for some factors, s = f_S. With ``conditional`` the other
factors move by their conditional expectation under the model (Gaussian conditioning, Kupiec 1998)::

    E[f_U | f_S = s] = F_US · F_SS⁻¹ · s

and the full move is m = (s, F_US·F_SS⁻¹·s). The shock's plausibility over a horizon of h periods is
the squared Mahalanobis distance D² = sᵀ(h·F_SS)⁻¹s, χ²-distributed with |S| degrees of freedom
when f_S over h periods is N(0, h·F_SS); its tail probability P(χ²_|S| ≥ D²) is small for an absurd
shock. Pure numerics: no files, no printing.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import scipy.linalg as la

from trimtab.units import move_problem
from trimtab._validation import list_labels
from trimtab.errors import InputError, ModelError


#: A Cholesky pivot below this fraction of its diagonal entry marks the shocked factors' covariance singular.
SINGULAR = 1e-12


@dataclass(frozen=True, eq=False)
class ShockSet:
    """Validated shocks: shock × factor moves of the named factors (NaN where a factor is not named)."""

    named: pd.DataFrame

    @property
    def names(self) -> list[str]:
        return [str(n) for n in self.named.index]


def shock_set(shocks: Any, factors: Sequence[Any], owner: str = "stress") -> ShockSet:
    """Check ``shocks`` (name → {factor: move}, or a shock × factor DataFrame with NaN for not named).

    Every shock names at least one known factor with a finite move; names are unique text.
    """
    if isinstance(shocks, pd.DataFrame):
        frame = shocks.copy()
        if not frame.index.is_unique:
            raise InputError(f"{owner}: shocks: duplicate shock names: {list_labels(frame.index[frame.index.duplicated()])}")
        rows = {str(k): {c: v for c, v in row.items() if not pd.isna(v)} for k, row in frame.iterrows()}
    elif isinstance(shocks, Mapping):
        rows = {}
        for name, moves in shocks.items():
            if not isinstance(name, str) or not name:
                raise InputError(f"{owner}: shocks: a shock name must be non-empty text, got {name!r}")
            if not isinstance(moves, Mapping):
                raise InputError(f"{owner}: shocks: {name}: expected a mapping factor → move, got {type(moves).__name__}")
            rows[name] = dict(moves)
    else:
        raise InputError(f"{owner}: shocks: expected a mapping name → {{factor: move}} or a DataFrame, got {type(shocks).__name__}")
    if not rows:
        raise InputError(f"{owner}: shocks: no shock given")
    known = list(factors)
    known_set = set(known)
    out = pd.DataFrame(np.nan, index=pd.Index(list(rows), name="shock"), columns=pd.Index(known, name="factor"))
    for name, moves in rows.items():
        if not moves:
            raise InputError(f"{owner}: shocks: {name}: names no factor; give at least one factor move")
        unknown = [f for f in moves if f not in known_set]
        if unknown:
            raise InputError(f"{owner}: shocks: {name}: unknown factor(s) {list_labels(unknown)}; the model has: {list_labels(known)}")
        for factor, move in moves.items():
            if isinstance(move, bool) or not isinstance(move, (int, float, np.integer, np.floating)) or not np.isfinite(move):
                raise InputError(f"{owner}: shocks: {name}.{factor}: expected a finite number (a return over the shock), got {move!r}")
            problem = move_problem(float(move))
            if problem:
                raise InputError(f"{owner}: shocks: {name}.{factor}: {problem}")
            out.loc[name, factor] = float(move)
    return ShockSet(out)


def full_moves(F: np.ndarray, named: np.ndarray, *, conditional: bool, names: Sequence[str] = (),
               factors: Sequence[Any] = ()) -> np.ndarray:
    """Shock × factor full moves m: the named moves, and E[f_U | f_S = s] = F_US·F_SS⁻¹·s elsewhere
    (``conditional``) or zero. ``named`` is shock × factor with NaN where a factor is not named."""
    moves = np.where(np.isnan(named), 0.0, named)
    if not conditional:
        return moves
    for j in range(named.shape[0]):
        S = np.flatnonzero(~np.isnan(named[j]))
        U = np.flatnonzero(np.isnan(named[j]))
        if not len(U):
            continue
        F_SS = F[np.ix_(S, S)]
        coef = _solve_pd(F_SS, moves[j, S], names[j] if len(names) else str(j), _labels(factors, S))
        moves[j, U] = F[np.ix_(U, S)] @ coef
    return moves


def plausibility(F: np.ndarray, named: np.ndarray, horizon: float, names: Sequence[str] = (),
                 factors: Sequence[Any] = ()) -> pd.DataFrame:
    """Per shock: n_shocked, D² = sᵀ(h·F_SS)⁻¹s, its χ² tail probability and the equivalent
    two-sided normal move z with P(|N(0,1)| ≥ z) = that probability."""
    from scipy import stats  # here, not at the top: validating a stress limit needs no distributions

    rows = []
    for j in range(named.shape[0]):
        S = np.flatnonzero(~np.isnan(named[j]))
        s = named[j, S]
        coef = _solve_pd(horizon * F[np.ix_(S, S)], s, names[j] if len(names) else str(j), _labels(factors, S))
        d2 = float(s @ coef)
        p = float(stats.chi2.sf(d2, df=len(S)))
        rows.append({"n_shocked": len(S), "mahalanobis": d2, "tail_probability": p,
                     "sigma_equivalent": float(stats.norm.isf(p / 2.0)) if p > 0 else np.inf})
    return pd.DataFrame(rows, index=pd.Index(list(names) if len(names) else range(len(rows)), name="shock"))


def _labels(factors: Sequence[Any], positions: np.ndarray) -> list[Any]:
    """The factor names at ``positions`` (the positions themselves without names)."""
    return [factors[int(i)] for i in positions] if len(factors) else [int(i) for i in positions]


def _solve_pd(matrix: np.ndarray, rhs: np.ndarray, shock: str, labels: Sequence[Any]) -> np.ndarray:
    """matrix⁻¹·rhs for the covariance of the shocked factors; a singular one is an error naming them."""
    try:
        factor = la.cho_factor(matrix, lower=True, check_finite=False)
        # a pivot that lost (nearly) all of its diagonal: the shocked factors are (nearly) collinear
        pivots = np.diag(factor[0]) ** 2 / np.maximum(np.diag(matrix), np.finfo(float).tiny)
        if np.any(pivots < SINGULAR):
            raise la.LinAlgError("singular")
    except la.LinAlgError:
        raise ModelError(
            f"stress: shock {shock}: the factor covariance of the shocked factors {list_labels(labels)} is singular, "
            "so the other factors' conditional moves and the shock's plausibility are undefined; shock fewer factors "
            "or use conditional=False"
        ) from None
    return la.cho_solve(factor, rhs, check_finite=False)


def default_horizon(periods_per_year: float) -> float:
    """One month of the model's periods: periods_per_year / 12."""
    return float(periods_per_year) / 12.0


def checked_horizon(horizon: Any, periods_per_year: float, owner: str = "stress") -> float:
    if horizon is None:
        return default_horizon(periods_per_year)
    if isinstance(horizon, bool) or not isinstance(horizon, (int, float, np.integer, np.floating)) or not np.isfinite(horizon) or horizon <= 0:
        raise InputError(f"{owner}: horizon must be a positive number of the model's periods, got {horizon!r}")
    return float(horizon)
