"""The immutable result of an ex-post return attribution and its text summary."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from trimtab.errors import InputError

#: Group label for assets without a value in :meth:`ReturnAttribution.by_group`.
UNASSIGNED = "unassigned"


@dataclass(frozen=True, eq=False)
class ReturnAttribution:
    """Where an active return came from, period by period and linked over the span.

    Built by :func:`trimtab.attribute_returns` (or :func:`trimtab.attribute_backtest_returns`).
    Returns are fractions of NAV per period (0.01 is 1%).

    Attributes
    ----------
    by_period : pandas.DataFrame
        Dates × components: one column per factor (active exposure × factor return), the remainder
        columns (:attr:`remainder`) and ``total`` = (w − b)ᵀr; each row's components sum to its total.
    returns : pandas.DataFrame
        Dates × (book, benchmark, active): wᵀr, bᵀr and their difference.
    linked : pandas.Series
        One value per component plus ``total`` = ∏(1 + R_t) − ∏(1 + Rb_t); the components sum to
        ``total`` exactly (see :mod:`trimtab.attribution._linking`).
    link_factors : pandas.Series
        Per period, the weight k_t/k its components were linked with (1 for ``sum``).
    exposures : pandas.DataFrame
        Dates × factors: the active exposures Bᵀ(w − b) at the start of each period.
    risk_share : pandas.Series
        Per factor and ``specific``: the ex-ante share of active variance over the span,
        Σ_t xₜₖ(F·xₜ)ₖ / Σ_t σₜ² (and Σ_t Σᵢdᵢaₜᵢ² / Σ_t σₜ²); the shares sum to 1.
    asset_contributions : pandas.DataFrame or None
        Assets × (mean_active_weight, factor, specific, total), linked like the components; None
        when asset-level data were not available (a backtest's stored history).
    linking : str
    remainder : tuple of str
        The non-factor components: ``specific`` (and ``intercept`` when the model has asset intercepts).
    """

    by_period: pd.DataFrame
    returns: pd.DataFrame
    linked: pd.Series
    link_factors: pd.Series
    exposures: pd.DataFrame
    risk_share: pd.Series
    asset_contributions: pd.DataFrame | None
    linking: str
    remainder: tuple[str, ...]

    @property
    def factors(self) -> list[Any]:
        return list(self.exposures.columns)

    def factor_table(self) -> pd.DataFrame:
        """Per factor, then the remainder: mean active exposure, linked contribution, its share of the
        active return, and the ex-ante share of active risk over the same span (risk taken against
        return earned)."""
        components = [*self.factors, *self.remainder, *(["compounding"] if "compounding" in self.linked.index else [])]
        total = float(self.linked["total"])
        contribution = self.linked.reindex(components)
        frame = pd.DataFrame({
            "mean_active_exposure": self.exposures.mean(axis=0).reindex(components),
            "contribution": contribution,
            "share_of_return": contribution / total if total != 0 else np.nan,
            "share_of_risk": self.risk_share.reindex(components),
        })
        frame.index.name = "component"
        if "intercept" in frame.index:
            frame.loc["intercept", "share_of_risk"] = 0.0
        return frame

    def by_group(self, groups: pd.Series) -> pd.DataFrame:
        """Linked asset contributions summed by ``groups`` (asset → label): factor, specific, total."""
        if self.asset_contributions is None:
            raise InputError("attribute_returns: by_group needs asset-level weights and returns (not kept for a backtest's stored history)")
        if not isinstance(groups, pd.Series):
            raise InputError(f"attribute_returns: by_group: expected a Series asset → group label, got {type(groups).__name__}")
        labels = groups.reindex(self.asset_contributions.index).astype(object).where(lambda s: s.notna(), UNASSIGNED)
        parts = self.asset_contributions[["factor", "specific", "total"]]
        out = parts.groupby(labels.to_numpy()).sum()
        out.index.name = "group"
        return out.sort_values("total")

    def top_assets(self, n: int = 10, by: str = "specific") -> pd.DataFrame:
        """The ``n`` assets with the largest absolute linked ``by`` contribution (specific: stock picking)."""
        if self.asset_contributions is None:
            raise InputError("attribute_returns: top_assets needs asset-level weights and returns (not kept for a backtest's stored history)")
        if by not in ("factor", "specific", "total"):
            raise InputError(f"attribute_returns: top_assets: by must be factor, specific or total, got {by!r}")
        frame = self.asset_contributions
        order = frame[by].abs().sort_values(ascending=False).index[:n]
        return frame.loc[order]

    def summary(self, top: int = 5) -> ReturnAttributionSummary:
        return ReturnAttributionSummary(self, top)

    def __str__(self) -> str:
        return self.summary().as_text()


@dataclass(frozen=True, eq=False)
class ReturnAttributionSummary:
    """The linked active return by component, with risk shares beside, and the top stock-picking names."""

    result: ReturnAttribution
    top: int = 5

    def to_frame(self) -> pd.DataFrame:
        return self.result.factor_table()

    def as_text(self) -> str:
        r = self.result
        dates = r.by_period.index
        span = f"{_day(dates[0])} to {_day(dates[-1])}, {len(dates)} periods" if len(dates) else "no periods"
        book = float(np.expm1(np.log1p(r.returns["book"]).sum()))
        bench = float(np.expm1(np.log1p(r.returns["benchmark"]).sum()))
        title = f"Active return attribution ({span}; {r.linking} linking)"
        lines = [title, "=" * len(title),
                 f"Book {book:.2%}, benchmark {bench:.2%} (compounded); active {r.linked['total']:.2%} = ∏(1 + R) − ∏(1 + Rb)", ""]
        lines.append(f"{'component':<24} {'exposure':>9} {'return':>9} {'share':>7} {'risk share':>10}")
        table = self.to_frame()
        factor_rows = table.loc[r.factors].reindex(table.loc[r.factors, "contribution"].abs().sort_values(ascending=False).index)
        for name, row in pd.concat([factor_rows, table.drop(index=r.factors)]).iterrows():
            exposure = "" if pd.isna(row["mean_active_exposure"]) else f"{row['mean_active_exposure']:9.3f}"
            share = "" if pd.isna(row["share_of_return"]) else _share(row["share_of_return"])
            risk = "" if pd.isna(row["share_of_risk"]) else _share(row["share_of_risk"])
            lines.append(f"{str(name)[:24]:<24} {exposure:>9} {row['contribution']:>9.2%} {share:>7} {risk:>10}")
        lines.append(f"{'total':<24} {'':>9} {r.linked['total']:>9.2%}")
        if r.asset_contributions is not None and self.top:
            lines += ["", "Largest stock-picking (specific) contributions"]
            for name, row in r.top_assets(self.top).iterrows():
                lines.append(f"  {str(name):<12} mean active weight {row['mean_active_weight']:>7.2%}  specific {row['specific']:>7.2%}")
        return "\n".join(lines)

    def __str__(self) -> str:
        return self.as_text()


def _share(value: float) -> str:
    """A share as a whole percentage; below half a percent either way it is shown as 0%."""
    return "0%" if abs(value) < 0.005 else f"{value:.0%}"


def _day(value: Any) -> str:
    if isinstance(value, pd.Timestamp) and value == value.normalize():
        return str(value.date())
    return str(value)
