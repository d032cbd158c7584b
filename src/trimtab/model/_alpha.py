"""How much of an alpha the risk model can see, and the alpha factor that prices the rest.

An optimizer that maximises alpha against Σ = B·F·Bᵀ + diag(d) loads on whatever part of the alpha
the exposures B do not span: the model treats that part as diversifiable specific risk, so it looks
cheap, and the portfolio's residuals then share a common direction the model does not forecast
(realised tracking error runs above the forecast). :func:`alpha_alignment` measures the part;
:func:`with_alpha_factor` adds it to the model as one more factor (Ceria, Saxena and Stubbs 2012).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError, ModelError
from trimtab.model._arguments import is_positive_number

if TYPE_CHECKING:
    from trimtab.model._factor_model import FactorModel

__all__ = ["ALPHA_FACTOR", "AlphaAlignment", "AlphaAlignmentSummary", "alpha_alignment", "with_alpha_factor"]

#: The name of the factor :func:`with_alpha_factor` adds.
ALPHA_FACTOR = "alpha_factor"
#: Below this spanned share, most of the alpha is invisible to the model: :attr:`AlphaAlignment.warnings` says so.
MOSTLY_UNSPANNED = 0.5
#: A residual whose weighted RMS is below this fraction of alpha's counts as rounding (α in the span).
SPANNED_TOLERANCE = 1e-10
#: An annualised alpha-factor volatility above this was most likely written in percent (3 for 3%).
PLAUSIBLE_VOLATILITY = 1.0


@dataclass(frozen=True, eq=False)
class AlphaAlignment:
    """Result of :func:`alpha_alignment`: alpha split into the part the factors span and the rest.

    Attributes
    ----------
    alpha : pandas.Series
        α by asset, in model order (0 where no alpha was given), in the units given (annualised).
    factor_part : pandas.Series
        B·g, the projection of α on the exposures.
    orthogonal : pandas.Series
        e = α − B·g, the part of α no combination of factors reproduces (ω-orthogonal to every
        column of B).
    implied_factor_returns : pandas.Series
        g = (BᵀΩB)⁺BᵀΩα by factor: the factor returns the alpha implies, in α's units.
    regression_weights : pandas.Series
        ω by asset (1 for every asset when none were given).
    """

    alpha: pd.Series
    factor_part: pd.Series
    orthogonal: pd.Series
    implied_factor_returns: pd.Series
    regression_weights: pd.Series
    exposures: pd.DataFrame = field(repr=False)

    @cached_property
    def spanned_share(self) -> float:
        """The uncentred R²: 1 − Σωe²/Σωα² (NaN for an alpha of zero)."""
        w = self.regression_weights.to_numpy()
        total = float(w @ self.alpha.to_numpy() ** 2)
        if total == 0.0:
            return float("nan")
        return 1.0 - float(w @ self.orthogonal.to_numpy() ** 2) / total

    @property
    def unspanned_share(self) -> float:
        """1 − :attr:`spanned_share`: Σωe²/Σωα²."""
        return 1.0 - self.spanned_share

    @cached_property
    def factors(self) -> pd.DataFrame:
        """The factors that carry alpha: implied return gₖ and share gₖ·(BᵀΩα)ₖ/Σωα², largest |share| first.

        The shares add up to :attr:`spanned_share` (Σω(Bg)² = Σω(Bg)α for a least-squares fit); a
        negative share is a factor whose part of the fit offsets the others.
        """
        w = self.regression_weights.to_numpy()
        a = self.alpha.to_numpy()
        total = float(w @ a**2)
        g = self.implied_factor_returns.to_numpy()
        cross = self.exposures.to_numpy().T @ (w * a)
        share = g * cross / total if total > 0 else np.full_like(g, np.nan)
        frame = pd.DataFrame({"implied_return": g, "share_of_alpha": share}, index=self.implied_factor_returns.index)
        frame.index.name = "factor"
        return frame.iloc[np.argsort(-np.abs(np.nan_to_num(share)), kind="stable")]

    @property
    def warnings(self) -> tuple[str, ...]:
        """A warning when most of the alpha is outside the factor span."""
        share = self.spanned_share
        if not np.isfinite(share) or share >= MOSTLY_UNSPANNED:
            return ()
        return (
            f"{1 - share:.0%} of the alpha is outside the factor span: the model sees it as specific and "
            "diversifiable, so an optimizer loads on it and realised tracking error can run above the "
            "forecast (consider alpha_factor: {volatility: ...})",
        )

    def as_json(self) -> dict[str, Any]:
        """``{spanned_share, implied_factor_returns, share_of_alpha, warnings}``, JSON-ready."""
        return {
            "spanned_share": float(self.spanned_share),
            "implied_factor_returns": {str(k): float(v) for k, v in self.factors["implied_return"].items()},
            "share_of_alpha": {str(k): float(v) for k, v in self.factors["share_of_alpha"].items()},
            "warnings": list(self.warnings),
        }

    def summary(self, top: int = 5) -> AlphaAlignmentSummary:
        """The split in brief, with the ``top`` factors that carry most of the alpha."""
        return AlphaAlignmentSummary(self, top)

    def __str__(self) -> str:
        return self.summary().as_text()

    def __repr__(self) -> str:
        return f"AlphaAlignment(n_assets={len(self.alpha)}, spanned_share={self.spanned_share:.4g})"


@dataclass(frozen=True, eq=False)
class AlphaAlignmentSummary:
    """Shares of the alpha inside and outside the factor span, and the factors carrying it."""

    result: AlphaAlignment
    top: int = 5

    def to_frame(self) -> pd.DataFrame:
        """The ``top`` factors by |share|, then the orthogonal part (share 1 − R²) and the total."""
        r = self.result
        frame = r.factors.head(self.top).copy()
        frame.loc["outside the factor span"] = [np.nan, r.unspanned_share]
        frame.loc["total"] = [np.nan, 1.0]
        return frame

    def as_text(self) -> str:
        r = self.result
        title = "Alpha against the risk model's factors"
        lines = [title, "=" * len(title)]
        lines.append(f"spanned by the factors (uncentred R²) {r.spanned_share:>8.1%}")
        lines.append(f"outside the factor span               {r.unspanned_share:>8.1%}")
        lines.append("")
        lines.append(f"{'factor':<28} {'implied return':>14} {'share of alpha':>15}")
        for name, row in r.factors.head(self.top).iterrows():
            lines.append(f"{str(name)[:28]:<28} {row['implied_return']:>14.3%} {row['share_of_alpha']:>15.1%}")
        lines.extend(f"warning: {text}" for text in r.warnings)
        return "\n".join(lines)


def _alpha_and_weights(model: FactorModel, alpha: Any, weights: Any) -> tuple[np.ndarray, np.ndarray]:
    a = model.weights_array(alpha, name="alpha")
    if weights is None:
        return a, np.ones(model.n_assets)
    w = model.weights_array(weights, name="alpha weights")
    if np.any(w < 0):
        raise InputError(f"alpha weights: must be ≥ 0; negative for {int((w < 0).sum())} assets")
    if not np.any(w > 0):
        raise InputError("alpha weights: every weight is 0; give some asset a positive weight")
    return a, w


def alpha_alignment(model: FactorModel, alpha: Any, *, weights: Any = None) -> AlphaAlignment:
    """Regress alpha on the model's exposures by (weighted) least squares, with no added intercept.

    Parameters
    ----------
    model : FactorModel
        The risk model; its exposures B (N×K) are the regressors.
    alpha : pandas.Series or array of shape (N,)
        Expected returns by asset (any consistent unit; annualised in trimtab). Assets the model has
        but the Series lacks count as alpha 0, as the optimizer sees them; labels the model does not
        know raise.
    weights : pandas.Series or array of shape (N,), optional
        Regression weights ω ≥ 0 (for example √cap or 1/specific variance); default 1 for every
        asset. Assets missing from a Series get weight 0.

    Returns
    -------
    AlphaAlignment

    Raises
    ------
    InputError
        Unknown assets, NaN values, negative or all-zero weights.

    Notes
    -----
    g = argmin Σᵢωᵢ(αᵢ − (Bg)ᵢ)², solved as ordinary least squares on √ω·α and √ω·B (a minimum-norm
    g where B is rank deficient; the fitted part B·g is unique either way). The residual e = α − B·g
    satisfies BᵀΩe = 0. The spanned share is the uncentred R², 1 − Σωe²/Σωα²: no intercept is added
    (a market factor with exposure near 1 plays that role when the model has one).

    References
    ----------
    Ceria, S., Saxena, A. and Stubbs, R. A. (2012), "Factor alignment problems and quantitative
    portfolio management", Journal of Portfolio Management 38(2), 29–43.

    Examples
    --------
    >>> import pandas as pd
    >>> from trimtab.model import FactorModel
    >>> B = pd.DataFrame({"market": [1.0, 1.0, 1.0]}, index=["A", "B", "C"])
    >>> F = pd.DataFrame([[1e-4]], index=["market"], columns=["market"])
    >>> model = FactorModel(B, F, pd.Series(2e-4, index=B.index))
    >>> result = alpha_alignment(model, pd.Series([0.02, 0.0, 0.01], index=B.index))
    >>> round(result.spanned_share, 4)
    0.6
    """
    a, w = _alpha_and_weights(model, alpha, weights)
    B = model._B
    root = np.sqrt(w)
    g, *_ = np.linalg.lstsq(B * root[:, None], a * root, rcond=None)
    fitted = B @ g
    residual = a - fitted
    assets = model.assets
    return AlphaAlignment(
        alpha=pd.Series(a, index=assets, name="alpha"),
        factor_part=pd.Series(fitted, index=assets, name="factor_part"),
        orthogonal=pd.Series(residual, index=assets, name="orthogonal"),
        implied_factor_returns=pd.Series(g, index=model.factors, name="implied_return"),
        regression_weights=pd.Series(w, index=assets, name="weight"),
        exposures=model.exposures,
    )


def check_volatility(volatility: Any, owner: str) -> float:
    """An alpha-factor volatility: a finite number in (0, 1] (a fraction a year, not a percent)."""
    if not is_positive_number(volatility):
        raise InputError(f"{owner}: volatility must be a positive number (annualised, 0.03 for 3%), got {volatility!r}")
    if float(volatility) > PLAUSIBLE_VOLATILITY:
        raise InputError(
            f"{owner}: volatility {volatility!r} is above {PLAUSIBLE_VOLATILITY:g} (100% a year); "
            f"write a fraction, e.g. {float(volatility) / 100:g} for {volatility:g}%"
        )
    return float(volatility)


def with_alpha_factor(model: FactorModel, alpha: Any, volatility: float, weights: Any = None) -> FactorModel:
    """The model with one more factor along the part of alpha its factors do not span.

    Parameters
    ----------
    model : FactorModel
    alpha : pandas.Series or array of shape (N,)
        As for :func:`alpha_alignment`.
    volatility : float
        The alpha factor's annualised volatility σ (a fraction: 0.03 for 3%).
    weights : pandas.Series or array of shape (N,), optional
        Regression weights ω, as for :func:`alpha_alignment`; also weight the root-mean-square.

    Returns
    -------
    FactorModel
        Exposures [B, y], factor covariance diag-block [[F, 0], [0, σ²/P]], the same specific
        variances; ``provenance["alpha_factor"]`` records σ, the spanned share and the base factors.

    Raises
    ------
    InputError
        Bad alpha or weights, or a volatility that is not in (0, 1].
    ModelError
        If the model already has a factor named ``alpha_factor``.

    Notes
    -----
    y = e / √(Σωe²/Σω), the orthogonal part e of :func:`alpha_alignment` scaled to a weighted
    root-mean-square of 1, and the factor's per-period variance is σ²/P with P the model's periods
    per year, uncorrelated with the other factors. Then Σ' = Σ + (σ²/P)·y·yᵀ: a portfolio's
    variance rises by (σ²/P)·(yᵀw)², so holding the unspanned alpha costs risk, as it does in
    the returns (Ceria, Saxena and Stubbs 2012). If α lies in the span (‖e‖ below 1e-10·‖α‖, weighted), y = 0 and Σ' = Σ.

    References
    ----------
    Ceria, S., Saxena, A. and Stubbs, R. A. (2012), "Factor alignment problems and quantitative
    portfolio management", Journal of Portfolio Management 38(2), 29–43.
    """
    sigma = check_volatility(volatility, "with_alpha_factor")
    if ALPHA_FACTOR in model.factors:
        raise ModelError(f"with_alpha_factor: the model already has a factor named {ALPHA_FACTOR!r}")
    aligned = alpha_alignment(model, alpha, weights=weights)
    w = aligned.regression_weights.to_numpy()
    e = aligned.orthogonal.to_numpy()
    rms = float(np.sqrt((w @ e**2) / w.sum()))
    scale = float(np.sqrt((w @ aligned.alpha.to_numpy() ** 2) / w.sum()))
    # a residual at rounding level (α in the span) has no direction worth pricing: y = 0
    y = e / rms if rms > SPANNED_TOLERANCE * scale else np.zeros_like(e)
    exposures = model.exposures.copy()
    exposures[ALPHA_FACTOR] = y
    k = model.n_factors
    F = np.zeros((k + 1, k + 1))
    F[:k, :k] = model._F
    F[k, k] = sigma**2 / model.periods_per_year
    names = exposures.columns
    groups = None if model.factor_groups is None else {**model.factor_groups, ALPHA_FACTOR: "alpha"}
    return type(model)(
        exposures,
        pd.DataFrame(F, index=names, columns=names),
        model.specific_variance,
        periods_per_year=model.periods_per_year,
        factor_groups=groups,
        fit_report=model.fit_report,
        provenance={
            **model.provenance,
            ALPHA_FACTOR: {
                "volatility": sigma,
                "spanned_share": aligned.spanned_share,
                "weighted": weights is not None,
                "base_factors": [str(f) for f in model.factors],
            },
        },
    )


def without_alpha_factor(model: FactorModel) -> FactorModel:
    """The model :func:`with_alpha_factor` started from (the same model when it has no alpha factor)."""
    if ALPHA_FACTOR not in model.factors or ALPHA_FACTOR not in model.provenance:
        return model
    keep = model.factors.drop(ALPHA_FACTOR)
    groups = None if model.factor_groups is None else {f: g for f, g in model.factor_groups.items() if f != ALPHA_FACTOR}
    return type(model)(
        model.exposures[keep],
        model.factor_covariance.loc[keep, keep],
        model.specific_variance,
        periods_per_year=model.periods_per_year,
        factor_groups=groups,
        fit_report=model.fit_report,
        provenance={k: v for k, v in model.provenance.items() if k != ALPHA_FACTOR},
    )
