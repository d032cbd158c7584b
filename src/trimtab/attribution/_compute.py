"""The Euler risk decomposition from the factored covariance Σ = B·F·Bᵀ + diag(d), in O(N·K).

Pure numerics: labelled inputs are aligned at the boundary by :func:`attribute`, the arithmetic runs on
float64 arrays, and the result is packed into a :class:`~trimtab.attribution.RiskAttribution`.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import check_unique, list_labels
from trimtab.attribution._result import RiskAttribution
from trimtab.units import check_book
from trimtab.errors import InputError

if TYPE_CHECKING:
    from trimtab.model import FactorModel

#: Group label for factors the grouping does not mention.
OTHER_GROUP = "other"
#: Group label used when neither the caller nor the model gives a grouping.
DEFAULT_GROUP = "factors"
#: Row of ``by_factor_group`` that holds the specific (asset-level) contribution.
SPECIFIC_ROW = "specific"


def attribute(
    model: FactorModel,
    weights: Any,
    benchmark: Any = None,
    *,
    factor_groups: Mapping[Any, str] | None = None,
    attributes: pd.DataFrame | None = None,
) -> RiskAttribution:
    """Decompose the annualised total risk of ``weights``, or the active risk of ``weights − benchmark``.

    Parameters
    ----------
    model : FactorModel
        The risk model Σ = B·F·Bᵀ + diag(d), per period, with ``periods_per_year`` periods a year.
    weights : pandas.Series or array-like
        Portfolio weights. A Series is matched to the model's assets by label: assets it lacks get
        weight 0, labels the model does not know raise. An array must have length N, model order.
    benchmark : pandas.Series or array-like, optional
        Benchmark weights, handled like ``weights`` (assets outside the model raise, missing assets
        get 0). When given, the figures are those of the active portfolio a = w − b (tracking
        error); when omitted, a = w (total risk, i.e. against cash).
    factor_groups : Mapping[factor, str], optional
        Factor → group label used for ``by_factor_group``; defaults to ``model.factor_groups``.
        Factors not listed fall in the group ``"other"``; with no grouping at all every factor is in
        the group ``"factors"``.
    attributes : pandas.DataFrame, optional
        Asset attributes (index asset, columns such as sector or country) for
        :meth:`RiskAttribution.by_group`. Rows for assets outside the model are ignored; model
        assets without a row are put in the group ``"unassigned"``.

    Returns
    -------
    RiskAttribution
        The decomposition; see its documentation for every figure.

    Raises
    ------
    InputError
        If ``model`` is not a FactorModel; ``weights`` or ``benchmark`` name assets outside the
        model, hold NaN or infinite values, or have the wrong length; ``factor_groups`` names
        factors the model lacks; ``attributes`` is not a DataFrame with unique asset labels.

    Notes
    -----
    With x = Bᵀa (active factor exposures) and σ² = ppy·(xᵀFx + Σᵢ dᵢaᵢ²) the annualised variance,
    the marginal contribution of asset i is ∂σ/∂aᵢ = ppy·(Σa)ᵢ/σ with Σa = B(Fx) + d∘a, and its
    contribution is aᵢ·∂σ/∂aᵢ. Because σ(a) is homogeneous of degree one, Euler's theorem gives
    Σᵢ aᵢ·∂σ/∂aᵢ = σ: the contributions add up to the risk exactly. The factor contribution
    ppy·xₖ(Fx)ₖ/σ and the specific contributions ppy·dᵢaᵢ²/σ add up to σ the same way.
    Nothing of size N×N is formed; time and memory are O(N·K). See docs/attribution.md.

    A portfolio with zero risk (σ = 0, e.g. w = b) has no defined contributions: every marginal
    contribution, contribution, percentage and correlation is NaN, ``is_zero_risk`` is True, and no
    warning is emitted.

    References
    ----------
    Euler's theorem for homogeneous functions, applied to risk budgets: Litterman, R. (1996),
    "Hot Spots and Hedges", Journal of Portfolio Management, special issue.

    Examples
    --------
    >>> import pandas as pd
    >>> from trimtab import FactorModel
    >>> B = pd.DataFrame({"market": [1.0, 1.0]}, index=["AAA", "BBB"])
    >>> F = pd.DataFrame([[1e-4]], index=["market"], columns=["market"])
    >>> model = FactorModel(B, F, pd.Series([1e-4, 1e-4], index=["AAA", "BBB"]))
    >>> attr = attribute(model, pd.Series({"AAA": 0.5, "BBB": 0.5}))
    >>> round(float(attr.by_asset["contribution"].sum()), 12) == round(attr.risk, 12)
    True
    """
    from trimtab.model import FactorModel

    if not isinstance(model, FactorModel):
        raise InputError(f"attribute: model must be a trimtab.FactorModel, got {type(model).__name__}")
    w = model.weights_array(weights, name="weights")
    check_book(w, "attribute", "weights")
    b = None if benchmark is None else model.weights_array(benchmark, name="benchmark")
    if b is not None:
        check_book(b, "attribute", "benchmark")
    groups = _factor_group_labels(model, factor_groups)
    attrs = _checked_attributes(model, attributes)

    B, F, d = model._B, model._F, model._d
    ppy = model.periods_per_year
    active = w if b is None else w - b

    # One pass over B per weight vector: Bᵀw and Bᵀb, then x = Bᵀw − Bᵀb (B is the large array).
    exposure_w = B.T @ w
    exposure_b = B.T @ b if b is not None else None
    x = exposure_w if exposure_b is None else exposure_w - exposure_b
    Fx = F @ x
    # xᵀFx can come out a hair below zero for a singular PSD F; the variance is clipped, not the terms.
    factor_var = max(float(x @ Fx), 0.0) * ppy
    specific_terms = d * active * active * ppy
    specific_var = float(specific_terms.sum())
    variance = factor_var + specific_var
    risk = float(np.sqrt(variance))
    zero = not variance > 0.0

    B_Fx = B @ Fx
    factor_volatility = np.sqrt(np.diag(F) * ppy)
    if zero:
        nan_n = np.full(model.n_assets, np.nan)
        nan_k = np.full(model.n_factors, np.nan)
        asset_marginal = asset_factor = asset_specific = nan_n
        factor_marginal = factor_contrib = correlation = nan_k
        specific_contribution = np.nan
    else:
        asset_marginal = ppy * (B_Fx + d * active) / risk
        asset_factor = ppy * active * B_Fx / risk
        asset_specific = specific_terms / risk
        factor_marginal = ppy * Fx / risk
        factor_contrib = ppy * x * Fx / risk
        specific_contribution = specific_var / risk
        per_period_risk = risk / np.sqrt(ppy)
        fvol_period = np.sqrt(np.diag(F))
        correlation = np.full(model.n_factors, np.nan)
        ok = fvol_period > 0
        correlation[ok] = Fx[ok] / (fvol_period[ok] * per_period_risk)
    asset_contrib = asset_factor + asset_specific

    assets, factors = model.assets, model.factors
    pct = 100.0 / risk if not zero else np.nan
    by_asset = pd.DataFrame({"weight": w}, index=assets)
    if b is not None:
        by_asset["benchmark_weight"] = b
        by_asset["active_weight"] = active
    by_asset["marginal_contribution"] = asset_marginal
    by_asset["contribution"] = asset_contrib
    by_asset["percent"] = asset_contrib * pct
    by_asset["factor_contribution"] = asset_factor
    by_asset["specific_contribution"] = asset_specific
    by_asset.index.name = "asset"

    portfolio_exposure = exposure_w
    benchmark_exposure = exposure_b if exposure_b is not None else np.zeros(model.n_factors)
    by_factor = pd.DataFrame(
        {
            "group": [groups[f] for f in factors],
            "portfolio_exposure": portfolio_exposure,
            "benchmark_exposure": benchmark_exposure,
            "active_exposure": x,
            "factor_volatility": factor_volatility,
            "marginal_contribution": factor_marginal,
            "contribution": factor_contrib,
            "percent": factor_contrib * pct,
        },
        index=factors,
    )
    by_factor.index.name = "factor"
    by_factor_group = _group_table(by_factor, specific_contribution, pct)

    portfolio_risk = risk
    benchmark_risk = None
    beta = None
    if b is not None and exposure_b is not None:
        portfolio_risk = float(np.sqrt(max(_quadratic(F, d, exposure_w, exposure_w, w, w), 0.0) * ppy))
        bench_var = _quadratic(F, d, exposure_b, exposure_b, b, b)
        benchmark_risk = float(np.sqrt(max(bench_var, 0.0) * ppy))
        beta = _quadratic(F, d, exposure_w, exposure_b, w, b) / bench_var if bench_var > 0 else float("nan")

    return RiskAttribution(
        kind="total" if b is None else "active",
        weights=pd.Series(w, index=assets, name="weight"),
        benchmark=None if b is None else pd.Series(b, index=assets, name="benchmark_weight"),
        risk=risk,
        variance=variance,
        factor_risk=float(np.sqrt(factor_var)),
        specific_risk=float(np.sqrt(specific_var)),
        factor_variance=factor_var,
        specific_variance=specific_var,
        portfolio_risk=portfolio_risk,
        benchmark_risk=benchmark_risk,
        beta=beta,
        by_factor=by_factor,
        by_factor_group=by_factor_group,
        by_asset=by_asset,
        factor_correlation=pd.Series(correlation, index=factors, name="correlation"),
        is_zero_risk=zero,
        periods_per_year=ppy,
        attributes=attrs,
        model=model,
    )


def _quadratic(
    F: np.ndarray, d: np.ndarray, exposure_u: np.ndarray, exposure_v: np.ndarray, u: np.ndarray, v: np.ndarray
) -> float:
    """Per-period uᵀΣv = (Bᵀu)ᵀF(Bᵀv) + Σᵢ dᵢuᵢvᵢ, from the exposures Bᵀu and Bᵀv."""
    return float(exposure_u @ F @ exposure_v + np.dot(d * u, v))


def _factor_group_labels(model: FactorModel, factor_groups: Mapping[Any, str] | None) -> dict[Any, str]:
    source = factor_groups if factor_groups is not None else model.factor_groups
    if source is None:
        return {f: DEFAULT_GROUP for f in model.factors}
    if not isinstance(source, Mapping):
        raise InputError(
            f"attribute: factor_groups must be a mapping factor → group label, got {type(source).__name__}"
        )
    unknown = [f for f in source if f not in set(model.factors)]
    if unknown:
        raise InputError(f"attribute: factor_groups names factors the model lacks: {list_labels(unknown)}")
    labels = {f: str(source.get(f, OTHER_GROUP)) for f in model.factors}
    if SPECIFIC_ROW in labels.values():
        raise InputError(
            f"attribute: factor_groups may not use the label {SPECIFIC_ROW!r}, which is reserved for specific risk"
        )
    return labels


def _checked_attributes(model: FactorModel, attributes: Any) -> pd.DataFrame | None:
    if attributes is None:
        return None
    if not isinstance(attributes, pd.DataFrame):
        raise InputError(
            f"attribute: attributes must be a DataFrame indexed by asset, got {type(attributes).__name__}"
        )
    check_unique(attributes.index, "asset ids", "attribute: attributes")
    return attributes.reindex(model.assets)


def _group_table(by_factor: pd.DataFrame, specific_contribution: float, pct: float) -> pd.DataFrame:
    """Sum factor contributions by group and append the specific row, so the column adds up to σ."""
    grouped = by_factor.groupby("group", sort=False)[["contribution"]].sum(min_count=1)
    grouped["n_factors"] = by_factor.groupby("group", sort=False).size()
    specific = pd.DataFrame({"contribution": [specific_contribution], "n_factors": [0]}, index=[SPECIFIC_ROW])
    table = pd.concat([grouped, specific])
    table["percent"] = table["contribution"] * pct
    table.index.name = "group"
    return table[["n_factors", "contribution", "percent"]]
