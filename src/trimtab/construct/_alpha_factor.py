"""The scenario key ``alpha_factor: {volatility: σ}``: rebalance on the model augmented with the alpha
factor (:func:`trimtab.model.with_alpha_factor`), so the tracking-error cap, the risk terms of the
objective and every reported risk price the part of alpha the factors do not span."""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from trimtab.construct._data import ProblemData
from trimtab.construct._warnings import RunWarning
from trimtab.model import FactorModel
from trimtab.model._alpha import ALPHA_FACTOR, alpha_alignment, with_alpha_factor, without_alpha_factor


def base_model(model: FactorModel) -> FactorModel:
    """The model as given, before any alpha factor this module added."""
    return without_alpha_factor(model)


def augment(data: ProblemData, mapping: dict[str, Any]) -> ProblemData:
    """``data`` on the model with the alpha factor of ``data.alpha`` when the scenario asks for it
    (replacing an alpha factor the model carries already: a what-if with a new alpha re-derives it)."""
    options = mapping.get(ALPHA_FACTOR)
    if options is None:
        return data
    from trimtab.construct._fast import _blas_limit

    model = base_model(data.model)
    alpha = pd.Series(data.alpha, index=model.assets)
    with _blas_limit():  # its least squares, as in alignment_of
        augmented = with_alpha_factor(model, alpha, float(options["volatility"]))
    return data.with_changes(model=augmented)


def alignment_of(data: ProblemData) -> Any:
    """The alpha's alignment with the model's own factors (before any alpha factor).

    Its least squares run with FACTOR_IPM's BLAS thread limit: on 2 shared cores under load, LAPACK's
    lstsq of a 1,500 × 15 exposure matrix took 104 ms with two threads against 0.5 ms with one (#21),
    half of a feasible rebalance's time."""
    from trimtab.construct._fast import _blas_limit

    model = base_model(data.model)
    with _blas_limit():
        return alpha_alignment(model, pd.Series(data.alpha, index=model.assets))


def alpha_provenance(problem: Any) -> dict[str, Any]:
    """``{"alpha_factor": {volatility, spanned_share, ...}}`` when the problem's model carries it."""
    details = problem.model.provenance.get(ALPHA_FACTOR) if ALPHA_FACTOR in problem.model.factors else None
    return {} if details is None else {ALPHA_FACTOR: dict(details)}


def alpha_warnings(problem: Any) -> list[RunWarning]:
    """An ``unspanned_alpha`` warning when most of an alpha objective's alpha is outside the factor
    span and the scenario does not price it with ``alpha_factor``."""
    if problem.objective.kind not in ("utility", "alpha") or ALPHA_FACTOR in problem.spec.mapping:
        return []
    data = problem.data
    if not np.any(data.alpha):
        return []
    aligned = alignment_of(data)
    if not aligned.warnings:
        return []
    share = float(aligned.spanned_share)
    return [RunWarning(
        "unspanned_alpha",
        f"{1 - share:.0%} of the alpha is outside the risk model's factor span: the optimizer can load on it as if it "
        "were diversifiable, and realised tracking error may run above the forecast (alpha_factor: {volatility: ...} prices it)",
        {"spanned_share": share},
    )]


def alpha_lines(result: Any) -> list[str]:
    """Summary lines: the alpha's spanned share and, when used, the alpha factor the risk includes."""
    lines = []
    aligned = result.alpha_alignment
    if aligned is not None and np.isfinite(aligned.spanned_share):
        lines.append(f"Alpha spanned by the model's factors: {aligned.spanned_share:.1%} (outside the span: {aligned.unspanned_share:.1%})")
    details = result.alpha_factor
    if details:
        lines.append(
            f"Risk includes the alpha factor (volatility {details['volatility']:.2%} a year along the unspanned alpha): "
            "the tracking-error cap and every risk figure use the augmented model"
        )
    return lines
