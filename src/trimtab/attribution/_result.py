"""The immutable result of a risk attribution, its derived statistics and its text summary."""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from statistics import NormalDist
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import check_unique, list_labels
from trimtab.errors import InputError

if TYPE_CHECKING:
    from trimtab.model import FactorModel

#: Trading days in a year, used to turn the annual risk into a risk over ``horizon_days``.
TRADING_DAYS_PER_YEAR = 252
#: Weights no larger than this in absolute value are solver noise, not positions (for ``n_positions``).
POSITION_TOLERANCE = 1e-8
#: Group label for assets without a value for the attribute in :meth:`RiskAttribution.by_group`.
UNASSIGNED = "unassigned"

#: Headline figures: key → (label, unit); units as in :func:`format_figure`.
HEADLINE_FIGURES: dict[str, tuple[str, str]] = {
    "risk": ("Risk (annualised volatility)", "fraction"),
    "factor_risk": ("Factor risk", "fraction"),
    "specific_risk": ("Specific risk", "fraction"),
    "factor_percent": ("Factor share of variance", "percent"),
    "specific_percent": ("Specific share of variance", "percent"),
    "variance": ("Variance (annualised)", "variance"),
    "portfolio_risk": ("Portfolio total risk", "fraction"),
    "benchmark_risk": ("Benchmark total risk", "fraction"),
    "beta": ("Predicted beta to benchmark", "ratio"),
    "diversification_ratio": ("Diversification ratio", "ratio"),
    "value_at_risk_99_1d": ("Value at risk, 99%, 1 day", "fraction"),
    "expected_shortfall_99_1d": ("Expected shortfall, 99%, 1 day", "fraction"),
    "n_positions": ("Positions held (|w| > 1e-8)", "count"),
    "gross_weight": ("Gross weight (Σ|w|)", "ratio"),
    "net_weight": ("Net weight (Σw)", "ratio"),
}


@dataclass(frozen=True, eq=False)
class RiskAttribution:
    """Where the risk of a portfolio (total) or of its active part (against a benchmark) comes from.

    Built by :func:`trimtab.attribution.attribute`; every figure is annualised (variances × ppy,
    volatilities × √ppy, with ppy the model's ``periods_per_year``) and is a fraction of portfolio
    value (0.04 is 4%).

    Attributes
    ----------
    kind : {"total", "active"}
        ``"active"`` when a benchmark was given: the figures describe a = w − b.
    weights, benchmark : pandas.Series
        Portfolio and benchmark weights over every model asset (benchmark None when not given).
    risk, variance : float
        σ = √(ppy·aᵀΣa) and σ².
    factor_risk, specific_risk : float
        √(ppy·xᵀFx) with x = Bᵀa, and √(ppy·Σᵢdᵢaᵢ²); their squares add up to ``variance``.
    factor_variance, specific_variance : float
        ppy·xᵀFx and ppy·Σᵢdᵢaᵢ²; factor_variance + specific_variance = variance.
    portfolio_risk, benchmark_risk : float
        Total risk of w and of b (``benchmark_risk`` None without a benchmark; ``portfolio_risk``
        equals ``risk`` then).
    beta : float or None
        Predicted beta of the portfolio to the benchmark, wᵀΣb / bᵀΣb (None without a benchmark,
        NaN when the benchmark has zero risk).
    by_factor : pandas.DataFrame
        Index factor; columns group, portfolio_exposure, benchmark_exposure (0 without a benchmark),
        active_exposure, factor_volatility (√(ppy·Fₖₖ)), marginal_contribution (ppy·(Fx)ₖ/σ),
        contribution (ppy·xₖ(Fx)ₖ/σ) and percent (100·contribution/σ). The contributions add up to
        factor_variance/σ; with the specific contribution they add up to σ.
    by_factor_group : pandas.DataFrame
        Index group (plus the row ``"specific"``); columns n_factors, contribution, percent; the
        contributions add up to σ and the percentages to 100.
    by_asset : pandas.DataFrame
        Index asset (every model asset); columns weight, benchmark_weight and active_weight (with a
        benchmark), marginal_contribution (ppy·(Σa)ᵢ/σ), contribution (aᵢ times it), percent,
        factor_contribution (ppy·aᵢ(BFx)ᵢ/σ) and specific_contribution (ppy·dᵢaᵢ²/σ).
    factor_correlation : pandas.Series
        Correlation of the (active) portfolio return with each factor return, (Fx)ₖ/(√Fₖₖ·σ₁) with σ₁
        the per-period risk.
    is_zero_risk : bool
        True when σ = 0 (for instance w = b): contributions, percentages and correlations are NaN
        because they are undefined (0/0); no warning is emitted.
    periods_per_year : float
        The model's periods per year used to annualise.
    attributes : pandas.DataFrame or None
        Asset attributes aligned to the model's assets, for :meth:`by_group`.
    model : FactorModel
        The model the figures come from.

    Notes
    -----
    Euler's theorem: σ(a) is homogeneous of degree one in a, so σ = Σᵢ aᵢ ∂σ/∂aᵢ; hence the asset
    contributions, and the factor plus specific contributions, add up to σ exactly (up to rounding).
    """

    kind: str
    weights: pd.Series
    benchmark: pd.Series | None
    risk: float
    variance: float
    factor_risk: float
    specific_risk: float
    factor_variance: float
    specific_variance: float
    portfolio_risk: float
    benchmark_risk: float | None
    beta: float | None
    by_factor: pd.DataFrame
    by_factor_group: pd.DataFrame
    by_asset: pd.DataFrame
    factor_correlation: pd.Series
    is_zero_risk: bool
    periods_per_year: float
    attributes: pd.DataFrame | None = field(default=None, repr=False)
    model: FactorModel | None = field(default=None, repr=False)

    # ------------------------------------------------------------------ shares
    @property
    def factor_contribution(self) -> float:
        """Euler contribution of all factors together, factor_variance/σ (NaN at zero risk)."""
        return self.factor_variance / self.risk if not self.is_zero_risk else float("nan")

    @property
    def specific_contribution(self) -> float:
        """Euler contribution of specific risk, specific_variance/σ (NaN at zero risk)."""
        return self.specific_variance / self.risk if not self.is_zero_risk else float("nan")

    @property
    def factor_percent(self) -> float:
        """100·factor_variance/variance: the factor share of variance, equal to its share of σ."""
        return 100.0 * self.factor_variance / self.variance if not self.is_zero_risk else float("nan")

    @property
    def specific_percent(self) -> float:
        """100·specific_variance/variance."""
        return 100.0 * self.specific_variance / self.variance if not self.is_zero_risk else float("nan")

    @property
    def active_weights(self) -> pd.Series:
        """a = w − b (or w without a benchmark)."""
        if self.benchmark is None:
            return self.weights.rename("active_weight")
        return (self.weights - self.benchmark).rename("active_weight")

    # ------------------------------------------------------------------ derived statistics
    @cached_property
    def diversification_ratio(self) -> float:
        """Σᵢ|aᵢ|σᵢ / σ: the weighted average of the asset volatilities over the portfolio volatility.

        σᵢ = √(ppy·Σᵢᵢ) with Σᵢᵢ = (BFBᵀ)ᵢᵢ + dᵢ, computed only for the assets held (aᵢ ≠ 0). It is 1
        for a single asset and grows as risks offset each other. Absolute weights make it meaningful
        for active and long-short portfolios. NaN at zero risk or without a model.

        References
        ----------
        Choueifaty, Y. and Coignard, Y. (2008), "Toward Maximum Diversification", Journal of
        Portfolio Management 35(1).
        """
        if self.is_zero_risk or self.model is None:
            return float("nan")
        active = self.active_weights.to_numpy()
        held = np.flatnonzero(active)
        if 2 * held.size > active.size:
            # Most assets held: reuse the model's cached U = B·L (F = L·Lᵀ), so (BFBᵀ)ᵢᵢ = ‖Uᵢ‖²
            # costs O(N·K) on every later attribution with the same model.
            U = self.model._scaled_exposures
            U = U if held.size == active.size else U[held]
            systematic = np.einsum("ik,ik->i", U, U)
        else:
            B = self.model._B[held]
            systematic = np.einsum("ik,ik->i", B @ self.model._F, B)
        diag = systematic + self.model._d[held]
        asset_vol = np.sqrt(np.clip(diag, 0.0, None) * self.periods_per_year)
        return float(np.abs(active[held]) @ asset_vol / self.risk)

    def horizon_risk(self, horizon_days: float = 1) -> float:
        """σ·√(horizon_days/252): the risk over a horizon in trading days, by the square-root-of-time rule."""
        if not isinstance(horizon_days, (int, float, np.integer, np.floating)) or not (
            math.isfinite(horizon_days) and horizon_days > 0
        ):
            raise InputError(f"RiskAttribution: horizon_days must be a positive number of days, got {horizon_days!r}")
        return self.risk * math.sqrt(float(horizon_days) / TRADING_DAYS_PER_YEAR)

    def value_at_risk(self, level: float = 0.99, horizon_days: float = 1) -> float:
        """Parametric value at risk: the loss exceeded with probability 1 − level over the horizon.

        Parameters
        ----------
        level : float, default 0.99
            Confidence level, 0.5 ≤ level < 1.
        horizon_days : float, default 1
            Horizon in trading days (252 a year).

        Returns
        -------
        float
            VaR = z·σ_h as a fraction of portfolio value (positive is a loss), z = Φ⁻¹(level),
            σ_h = σ·√(horizon_days/252).

        Raises
        ------
        InputError
            If ``level`` or ``horizon_days`` is out of range.

        Notes
        -----
        Assumes the (active) return over the horizon is normal with mean zero and the model's
        volatility. Real returns have fatter tails and volatility clusters, so this understates
        losses in stress; the square-root-of-time rule ignores autocorrelation and the drift over
        long horizons; and the figure is only as good as the risk model's forecast. Treat it as a
        scale of the model's risk, not as a bound on losses.
        """
        z = NormalDist().inv_cdf(_checked_level(level))
        return z * self.horizon_risk(horizon_days)

    def expected_shortfall(self, level: float = 0.99, horizon_days: float = 1) -> float:
        """Parametric expected shortfall: the mean loss in the worst 1 − level of outcomes.

        ES = σ_h·φ(z)/(1 − level) with z = Φ⁻¹(level), under the same normal, zero-mean assumption
        and with the same limits as :meth:`value_at_risk` (fat tails make the true figure larger).

        Raises
        ------
        InputError
            If ``level`` or ``horizon_days`` is out of range.
        """
        level = _checked_level(level)
        normal = NormalDist()
        z = normal.inv_cdf(level)
        return self.horizon_risk(horizon_days) * normal.pdf(z) / (1.0 - level)

    # ------------------------------------------------------------------ grouping
    def by_group(self, attribute: str | pd.Series) -> pd.DataFrame:
        """Sum the asset contributions by an asset attribute such as sector or country.

        Parameters
        ----------
        attribute : str or pandas.Series
            A column of the ``attributes`` given to :func:`attribute`, or a Series asset → label.
            Assets without a label fall in the group ``"unassigned"``; labels for assets outside
            the model are ignored.

        Returns
        -------
        pandas.DataFrame
            Index group; columns n_assets, weight (plus benchmark_weight, active_weight with a
            benchmark), contribution, percent, factor_contribution, specific_contribution. The
            contributions add up to σ.

        Raises
        ------
        InputError
            If the column is unknown, no attributes were given, or the Series has duplicate labels.
        """
        if isinstance(attribute, pd.Series):
            check_unique(attribute.index, "asset ids", "RiskAttribution.by_group")
            labels = attribute.reindex(self.by_asset.index)
        elif isinstance(attribute, str):
            if self.attributes is None:
                raise InputError(
                    f"RiskAttribution.by_group: no attributes to find {attribute!r} in; pass attributes= "
                    "to attribute() or give a Series asset → label"
                )
            if attribute not in self.attributes.columns:
                raise InputError(
                    f"RiskAttribution.by_group: unknown attribute {attribute!r}; available: "
                    f"{list_labels(self.attributes.columns)}"
                )
            labels = self.attributes[attribute]
        else:
            raise InputError(
                f"RiskAttribution.by_group: attribute must be a column name or a Series, got {type(attribute).__name__}"
            )
        labels = labels.astype(object).where(labels.notna(), UNASSIGNED).astype(str)
        columns = [c for c in ("weight", "benchmark_weight", "active_weight") if c in self.by_asset.columns]
        columns += ["contribution", "percent", "factor_contribution", "specific_contribution"]
        frame = self.by_asset[columns]
        grouped = frame.groupby(labels.to_numpy(), sort=True).sum(min_count=1)
        grouped.insert(0, "n_assets", frame.groupby(labels.to_numpy(), sort=True).size())
        grouped.index.name = attribute if isinstance(attribute, str) else (attribute.name or "group")
        return grouped

    # ------------------------------------------------------------------ summaries
    def headline(self) -> pd.Series:
        """The headline figures keyed as in :data:`HEADLINE_FIGURES` (risk figures as fractions).

        Figures that do not apply (benchmark risk and beta without a benchmark) are NaN.
        """
        weights = self.weights.to_numpy()
        nan = float("nan")
        values = {
            "risk": self.risk,
            "factor_risk": self.factor_risk,
            "specific_risk": self.specific_risk,
            "factor_percent": self.factor_percent,
            "specific_percent": self.specific_percent,
            "variance": self.variance,
            "portfolio_risk": self.portfolio_risk,
            "benchmark_risk": nan if self.benchmark_risk is None else self.benchmark_risk,
            "beta": nan if self.beta is None else self.beta,
            "diversification_ratio": self.diversification_ratio,
            "value_at_risk_99_1d": self.value_at_risk(0.99, 1),
            "expected_shortfall_99_1d": self.expected_shortfall(0.99, 1),
            "n_positions": float(np.count_nonzero(np.abs(weights) > POSITION_TOLERANCE)),
            "gross_weight": float(np.abs(weights).sum()),
            "net_weight": float(weights.sum()),
        }
        return pd.Series(values, name="value", dtype=float)

    def top_assets(self, n: int = 10) -> pd.DataFrame:
        """The ``n`` assets with the largest absolute contribution, largest first."""
        order = self.by_asset["contribution"].abs().sort_values(ascending=False, kind="stable").index
        return self.by_asset.loc[order[: max(int(n), 0)]]

    def summary(self, top: int = 5) -> AttributionSummary:
        """Headline figures plus the top factor and asset contributions, for text or a table."""
        factors = self.by_factor.reindex(
            self.by_factor["contribution"].abs().sort_values(ascending=False, kind="stable").index
        ).head(top)
        return AttributionSummary(
            kind=self.kind,
            is_zero_risk=self.is_zero_risk,
            headline=self.headline(),
            top_factors=factors,
            top_assets=self.top_assets(top),
        )

    def __str__(self) -> str:
        return self.summary().as_text()


@dataclass(frozen=True, eq=False)
class AttributionSummary:
    """The headline of a :class:`RiskAttribution` and its largest contributors.

    Attributes
    ----------
    kind : str
        ``"total"`` or ``"active"``.
    is_zero_risk : bool
        True when the contributions are undefined (σ = 0).
    headline : pandas.Series
        Figures keyed as in :data:`HEADLINE_FIGURES`.
    top_factors, top_assets : pandas.DataFrame
        Rows of ``by_factor`` and ``by_asset`` with the largest absolute contributions.
    """

    kind: str
    is_zero_risk: bool
    headline: pd.Series
    top_factors: pd.DataFrame
    top_assets: pd.DataFrame

    def to_frame(self) -> pd.DataFrame:
        """The headline as a table: index figure; columns label, unit, value."""
        keys = list(self.headline.index)
        return pd.DataFrame(
            {
                "label": [figure_label(k, self.kind) for k in keys],
                "unit": [HEADLINE_FIGURES[k][1] for k in keys],
                "value": self.headline.to_numpy(),
            },
            index=pd.Index(keys, name="figure"),
        )

    def as_text(self) -> str:
        """A plain-text block: headline figures, then top factor and asset contributions."""
        title = "Active risk attribution" if self.kind == "active" else "Total risk attribution"
        lines = [title, "=" * len(title)]
        for key, value in self.headline.items():
            if np.isnan(value):
                continue
            label, unit = figure_label(key, self.kind), HEADLINE_FIGURES[key][1]
            lines.append(f"{label:<34} {format_figure(value, unit):>12}")
        if self.is_zero_risk:
            lines.append("Zero risk: contributions are undefined and shown as NaN.")
            return "\n".join(lines)
        lines += ["", "Largest factor contributions", "-" * 28]
        for name, row in self.top_factors.iterrows():
            lines.append(
                f"{str(name):<22} exposure {row['active_exposure']:>8.3f}  "
                f"contribution {format_figure(row['contribution'], 'fraction'):>8}  ({row['percent']:5.1f}%)"
            )
        lines += ["", "Largest asset contributions", "-" * 27]
        weight_col = "active_weight" if "active_weight" in self.top_assets.columns else "weight"
        for name, row in self.top_assets.iterrows():
            lines.append(
                f"{str(name):<22} weight {format_figure(row[weight_col], 'fraction'):>8}  "
                f"contribution {format_figure(row['contribution'], 'fraction'):>8}  ({row['percent']:5.1f}%)"
            )
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.as_text()


def figure_label(key: str, kind: str = "total") -> str:
    """The reader's label of a headline figure; the risk of an active portfolio is its tracking error."""
    if kind == "active" and key in _ACTIVE_LABELS:
        return _ACTIVE_LABELS[key]
    return HEADLINE_FIGURES[key][0]


_ACTIVE_LABELS = {
    "risk": "Active risk (tracking error)",
    "factor_risk": "Active factor risk",
    "specific_risk": "Active specific risk",
    "variance": "Active variance (annualised)",
    "value_at_risk_99_1d": "Active value at risk, 99%, 1 day",
    "expected_shortfall_99_1d": "Active expected shortfall, 99%, 1 day",
}


def format_figure(value: Any, unit: str) -> str:
    """Format a figure by its unit.

    Units: "fraction" (0.0123 → 1.23%), "percent" (12.3 → 12.3%), "count" and "amount" (with thousands
    separators), "exposure" (signed, three decimals), "variance" (six decimals), "bp" (a fraction in basis
    points), "limit" (four significant digits, below 1e-9 in size shown as 0), otherwise four
    significant digits. NaN and None give "n/a".
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "n/a"
    text = _formatted(float(value), unit)
    # A negative number that rounds to zero reads as "-0.00%": drop the sign.
    if text.startswith("-") and not any(ch in "123456789" for ch in text.split("e")[0]):
        text = text[1:]
    return text


def _formatted(value: float, unit: str) -> str:
    if math.isnan(value):
        return "n/a"
    if unit == "fraction":
        return f"{100.0 * value:.2f}%"
    if unit == "percent":
        return f"{value:.1f}%"
    if unit in ("count", "amount"):
        return f"{value:,.0f}"
    if unit == "exposure":
        return f"{value:+.3f}"
    if unit == "limit":
        return "0" if abs(value) < 1e-9 else f"{value:.4g}"
    if unit == "variance":
        return f"{value:.6f}"
    if unit == "bp":
        return f"{1e4 * value:.2f} bp"
    return f"{value:.4g}"


def _checked_level(level: Any) -> float:
    if not isinstance(level, (int, float, np.integer, np.floating)) or not (0.5 <= float(level) < 1.0):
        raise InputError(f"RiskAttribution: level must be a probability in [0.5, 1), got {level!r}")
    return float(level)
