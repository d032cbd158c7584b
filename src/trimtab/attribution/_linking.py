"""Linking per-period active-return components into one figure per component over the span.

Carino (1999) logarithmic linking. With book returns R_t, benchmark returns Rb_t, compounded
R = ∏(1 + R_t) − 1 and Rb = ∏(1 + Rb_t) − 1,

    k_t = [ln(1 + R_t) − ln(1 + Rb_t)] / (R_t − Rb_t)        (1 / (1 + R_t) when R_t = Rb_t)
    k   = [ln(1 + R)   − ln(1 + Rb)]   / (R − Rb)            (1 / (1 + R)   when R = Rb)

and a component c_t of the active return R_t − Rb_t links to Σ_t (k_t / k)·c_t. Since the
components of each period sum to R_t − Rb_t, the linked components sum to
Σ_t [ln(1 + R_t) − ln(1 + Rb_t)] / k = [ln(1 + R) − ln(1 + Rb)] / k = R − Rb exactly.

``sum`` adds the per-period components and reports the difference to R − Rb as its own
component, ``compounding``, so that the total reconciles too.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError

LINKINGS = ("carino", "sum")
#: Below this |R − Rb| (relative to 1 + R) the limit 1/(1 + R) replaces the ratio of logs.
_EQUAL = 1e-12


def log_ratio(book: np.ndarray, bench: np.ndarray) -> np.ndarray:
    """[ln(1 + R) − ln(1 + Rb)] / (R − Rb), elementwise, with the limit 1/(1 + R) where they are equal."""
    book = np.asarray(book, dtype=np.float64)
    bench = np.asarray(bench, dtype=np.float64)
    diff = book - bench
    close = np.abs(diff) <= _EQUAL * np.abs(1.0 + book)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = (np.log1p(book) - np.log1p(bench)) / np.where(close, 1.0, diff)
    return np.where(close, 1.0 / (1.0 + 0.5 * (book + bench)), ratio)


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
    total_book = float(np.expm1(np.log1p(r).sum()))
    total_bench = float(np.expm1(np.log1p(rb).sum()))
    active = total_book - total_bench
    if linking == "carino":
        k_t = log_ratio(r, rb)
        k = float(log_ratio(np.array([total_book]), np.array([total_bench]))[0])
        scale = pd.Series(k_t / k, index=components.index, name="link_factor")
        linked = components.mul(scale, axis=0).sum(axis=0)
    else:
        scale = pd.Series(1.0, index=components.index, name="link_factor")
        linked = components.sum(axis=0)
        linked["compounding"] = active - float(linked.sum())
    linked["total"] = active
    return linked.rename("linked"), scale
