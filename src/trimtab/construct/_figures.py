"""The figures a desk decides on, from a book's weights: expected active return, information ratio,
tracking error, total risk, beta, turnover, estimated cost, names bought and sold.

Pure numpy in factor form (Σ = B·F·Bᵀ + diag(d) is never built):

* expected active return  αᵀ(w − b)  (alpha annualised, so the figure is too);
* tracking error          √(P·(w − b)ᵀΣ(w − b)),  P periods a year;
* information ratio       αᵀ(w − b) / tracking error;
* total risk              √(P·wᵀΣw);   beta  wᵀΣb / bᵀΣb;
* turnover (one-way)      ½·Σ|w − w0|, positions sold outside the optimizer included.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from trimtab.attribution._desk_figures import DESK_FIGURES  # noqa: F401 - re-exported: the figures this module computes


#: A weight or trade above this (absolute) counts.
TOL = 1e-8


def _sigma_dot(model: Any, v: np.ndarray) -> np.ndarray:
    """Σ·v in factor form: B(F(Bᵀv)) + d∘v."""
    B = model.exposures.to_numpy(dtype=np.float64)
    F = model.factor_covariance.to_numpy(dtype=np.float64)
    d = model.specific_variance.to_numpy(dtype=np.float64)
    return B @ (F @ (B.T @ v)) + d * v


def desk_figures(
    model: Any,
    weights: np.ndarray,
    holdings: np.ndarray,
    *,
    benchmark: np.ndarray | None = None,
    alpha: np.ndarray | None = None,
    cost: np.ndarray | None = None,
    nav: float | None = None,
    sold_outside: float = 0.0,
    n_sold_outside: int = 0,
) -> dict[str, float]:
    """The figures of :data:`DESK_FIGURES` for target ``weights`` (model order) from ``holdings``.

    ``cost`` is the estimated cost per asset as a fraction of NAV; ``sold_outside`` the weight sold
    outside the optimizer (``unknown_assets: zero``) and ``n_sold_outside`` how many names.
    Figures that do not apply (no alpha, no benchmark, no NAV) are NaN.
    """
    ppy = float(model.periods_per_year)
    w = np.asarray(weights, dtype=np.float64)
    w0 = np.asarray(holdings, dtype=np.float64)
    b = np.zeros_like(w) if benchmark is None else np.asarray(benchmark, dtype=np.float64)
    active = w - b
    te = float(np.sqrt(max(ppy * active @ _sigma_dot(model, active), 0.0)))
    sw = _sigma_dot(model, w)
    total = float(np.sqrt(max(ppy * w @ sw, 0.0)))
    nan = float("nan")
    beta = nan
    if benchmark is not None:
        bench_var = float(b @ _sigma_dot(model, b))
        beta = float(w @ _sigma_dot(model, b)) / bench_var if bench_var > 0 else nan
    expected = nan if alpha is None else float(np.asarray(alpha, dtype=np.float64) @ active)
    ir = expected / te if te > 0 and np.isfinite(expected) else nan
    trade = w - w0
    cost_fraction = nan if cost is None else float(np.sum(cost))
    return {
        "expected_alpha": expected,
        "information_ratio": ir,
        "tracking_error": te if benchmark is not None else nan,
        "total_risk": total,
        "beta": beta,
        "turnover": 0.5 * (float(np.abs(trade).sum()) + abs(sold_outside)),
        "cost": cost_fraction,
        "cost_amount": cost_fraction * nav if nav is not None and np.isfinite(cost_fraction) else nan,
        "names_bought": float((trade > TOL).sum()),
        "names_sold": float((trade < -TOL).sum() + n_sold_outside),
        "names_held": float((np.abs(w) > TOL).sum()),
    }
