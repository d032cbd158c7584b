"""Linking per-period active-return components into one figure per component over the span.

Carino (1999) logarithmic linking. With book returns R_t, benchmark returns Rb_t, compounded
R = ∏(1 + R_t) − 1 and Rb = ∏(1 + Rb_t) − 1,

    k_t = [ln(1 + R_t) − ln(1 + Rb_t)] / (R_t − Rb_t)        (1 / (1 + R_t) when R_t = Rb_t)
    k   = [ln(1 + R)   − ln(1 + Rb)]   / (R − Rb)            (1 / (1 + R)   when R = Rb)

and a component c_t of the active return R_t − Rb_t links to Σ_t (k_t / k)·c_t. Since the
components of each period sum to R_t − Rb_t, the linked components sum to
Σ_t [ln(1 + R_t) − ln(1 + Rb_t)] / k = [ln(1 + R) − ln(1 + Rb)] / k = R − Rb exactly.

Precision: ln(1 + R) is Σ ln(1 + R_t), never ln of the compounded R (which loses the digits of
a total near −100%), and each ratio of logs is evaluated as ln(1 + u)/u with
u = (R − Rb)/(1 + Rb) (see :func:`log_ratio`), so periods with R_t ≈ Rb_t keep full precision.

``sum`` adds the per-period components and reports the difference to R − Rb as its own
component, ``compounding``, so that the total reconciles too.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError

LINKINGS = ("carino", "sum")


def _log1p_ratio(u: np.ndarray) -> np.ndarray:
    """ln(1 + u)/u, elementwise, with its limit 1 at u = 0 (log1p keeps it exact for tiny u)."""
    u = np.asarray(u, dtype=np.float64)
    zero = u == 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(zero, 1.0, np.log1p(u) / np.where(zero, 1.0, u))


def log_ratio(book: np.ndarray, bench: np.ndarray) -> np.ndarray:
    """[ln(1 + R) − ln(1 + Rb)] / (R − Rb), elementwise, stable when R ≈ Rb.

    With u = (R − Rb)/(1 + Rb), ln(1 + R) − ln(1 + Rb) = ln(1 + u), so the ratio is
    [ln(1 + u)/u] / (1 + Rb): R − Rb is one subtraction (exact when R and Rb are within a factor of
    two, Sterbenz), and ln(1 + u)/u is evaluated with log1p, so no logarithms cancel. The limit at
    R = Rb is 1/(1 + R).
    """
    book = np.asarray(book, dtype=np.float64)
    bench = np.asarray(bench, dtype=np.float64)
    base = 1.0 + bench
    return _log1p_ratio((book - bench) / base) / base


def _total_link(log_bench: np.ndarray, log_active: np.ndarray) -> tuple[float, float]:
    """(R − Rb, k) over the span from the per-period logs, without forming ln(1 + R) from R.

    ln(1 + Rb) = Σ ln(1 + Rbₜ) (so a total near −100% keeps its digits), D = ln(1 + R) − ln(1 + Rb)
    = Σ ln(1 + uₜ), R − Rb = (1 + Rb)·expm1(D) and k = D / (R − Rb) = [D/expm1(D)] / (1 + Rb).
    """
    total_log_bench = float(np.sum(log_bench))
    gap = float(np.sum(log_active))
    growth_bench = float(np.exp(total_log_bench))
    active = growth_bench * float(np.expm1(gap))
    ratio = 1.0 if gap == 0.0 else gap / float(np.expm1(gap))
    return active, ratio / growth_bench


def check_linking(linking: Any) -> str:
    if linking not in LINKINGS:
        raise InputError(f"attribute_returns: linking must be one of {', '.join(LINKINGS)}, got {linking!r}")
    return str(linking)


def link(components: pd.DataFrame, book: pd.Series, bench: pd.Series, linking: str) -> tuple[pd.Series, pd.Series]:
    """(linked components plus ``total``, the per-period factors k_t/k) for ``linking``."""
    check_linking(linking)
    r, rb = book.to_numpy(dtype=np.float64), bench.to_numpy(dtype=np.float64)
    if np.any(r <= -1.0) or np.any(rb <= -1.0):
        bad = book.index[(r <= -1.0) | (rb <= -1.0)]
        raise InputError(f"attribute_returns: a period return of -100% or worse ({bad[0]}); returns cannot be linked")
    per_period_gap = np.log1p((r - rb) / (1.0 + rb))  # ln(1 + Rₜ) − ln(1 + Rbₜ), without cancellation
    active, k = _total_link(np.log1p(rb), per_period_gap)
    if linking == "carino":
        k_t = log_ratio(r, rb)
        scale = pd.Series(k_t / k, index=components.index, name="link_factor")
        linked = components.mul(scale, axis=0).sum(axis=0)
    else:
        scale = pd.Series(1.0, index=components.index, name="link_factor")
        linked = components.sum(axis=0)
        linked["compounding"] = active - float(linked.sum())
    linked["total"] = active
    return linked.rename("linked"), scale
