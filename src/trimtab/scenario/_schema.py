"""The scenario file schema: pydantic models with unknown keys forbidden.

Only the file-level sections are modelled here (data files, the model, output settings). The
``objective`` and ``constraints`` sections are passed to :func:`trimtab.construct.validate_scenario`
for their deep validation, so the optimizer owns its own vocabulary.
"""

from __future__ import annotations

import datetime
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, field_validator, model_validator

FileFormat = Literal["auto", "csv", "parquet"]
Unit = Literal["fraction", "percent"]


class _Strict(BaseModel):
    """Base of every section: unknown keys are errors and parsed sections are immutable."""

    model_config = ConfigDict(extra="forbid", frozen=True, populate_by_name=True, allow_inf_nan=False)


def _no_control(value: str | None) -> str | None:
    """Refuse text with a control character (a newline, a NUL): it cannot name a file or folder."""
    if value is not None:
        bad = next((c for c in value if ord(c) < 32 or ord(c) == 127), None)
        if bad is not None:
            raise ValueError(f"expected a name without control characters (found code {ord(bad)}), got {value!r}")
    return value


class _FileSpec(_Strict):
    """A table on disk; a bare string is shorthand for ``{path: <string>}``."""

    path: str = Field(min_length=1, description="file path, relative to the scenario file")
    format: FileFormat = Field("auto", description="csv or parquet; auto goes by the file extension")
    asset_column: str = Field("asset", min_length=1, description="the column holding asset ids")

    @model_validator(mode="before")
    @classmethod
    def _shorthand(cls, value: Any) -> Any:
        return {"path": value} if isinstance(value, str) else value

    _path_text = field_validator("path")(_no_control)


class ReturnsFile(_FileSpec):
    """Returns, wide (first column the date, one column per asset) or long (date, asset, return)."""

    layout: Literal["auto", "wide", "long"] = "auto"
    date_column: str = Field("date", min_length=1)
    value_column: str = Field("return", min_length=1, description="the return column of a long file")
    unit: Unit = Field("fraction", description="fraction (0.01 is 1%) or percent (1 is 1%; divided by 100 when read)")


class SeriesFile(_FileSpec):
    """One number per asset (alpha, benchmark weight): columns ``asset`` and ``column``."""

    column: str | None = Field(None, min_length=1, description="the value column (default: alpha or weight)")
    unit: Unit = Field("fraction", description="fraction (0.01 is 1%) or percent (1 is 1%; divided by 100 when read)")


class HoldingsFile(_FileSpec):
    """Today's book, as weights of NAV or as share counts valued at prices."""

    kind: Literal["weights", "shares"] = "weights"
    column: str | None = Field(None, min_length=1, description="the weight or share-count column")
    price_column: str = Field("price", min_length=1, description="price per share (holdings or attributes file)")
    nav: float | None = Field(None, gt=0, strict=True, description="net asset value; default: Σ shares·price + cash")
    cash: float = Field(0.0, ge=0, strict=True, description="cash held besides the positions, in currency")


class AttributesFile(_FileSpec):
    """Per-asset attributes: group labels (industry, country), price, average daily volume, costs."""


class DataSection(_Strict):
    """The input files of a rebalance."""

    holdings: HoldingsFile
    benchmark: SeriesFile | None = None
    alpha: SeriesFile | None = None
    attributes: AttributesFile | None = None
    unknown_assets: Literal["error", "drop", "zero"] = Field(
        "error", description="holdings or benchmark assets the model lacks: stop, drop, or sell to zero"
    )


class FitSettings(_Strict):
    """How to estimate a risk model from return files (the ``trimtab fit`` config file)."""

    method: Literal["time_series", "cross_section", "statistical"]
    returns: ReturnsFile
    factor_returns: ReturnsFile | None = Field(None, description="time_series: dates × factors")
    exposures: _FileSpec | None = Field(None, description="cross_section: asset × characteristic table")
    exposure_columns: list[str] | None = Field(None, description="cross_section: which characteristic columns")
    industry_column: str | None = Field(None, description="cross_section: the industry column of exposures")
    n_factors: int | None = Field(None, ge=1, strict=True, description="statistical: the number of factors")
    half_life: float | None = Field(None, gt=0, strict=True, description="EWMA half-life in periods")
    min_periods: int | None = Field(None, ge=2, strict=True, description="fewest observations an asset needs")
    periods_per_year: float | None = Field(
        None, gt=0, strict=True, description="default: inferred from the median date spacing (daily 252, weekly 52, monthly 12, …)"
    )
    factor_groups: dict[str, str] | None = Field(None, description="factor → group label for reports")
    options: dict[str, Any] = Field(default_factory=dict, description="further estimator keywords")

    @model_validator(mode="after")
    def _method_inputs(self) -> FitSettings:
        if self.method == "time_series" and self.factor_returns is None:
            raise ValueError("method time_series needs factor_returns (a dates × factors file)")
        if self.method == "cross_section" and self.exposures is None:
            raise ValueError("method cross_section needs exposures (an asset × characteristic file)")
        return self


class FitConfig(FitSettings):
    """A standalone fit config file: the fit settings plus an optional description."""

    description: str | None = None


class ModelSection(_Strict):
    """The risk model: a saved model folder, or fit settings to estimate one on the fly."""

    path: str | None = Field(None, min_length=1, description="a folder written by trimtab fit")
    fit: FitSettings | None = None

    @model_validator(mode="before")
    @classmethod
    def _shorthand(cls, value: Any) -> Any:
        return {"path": value} if isinstance(value, str) else value

    _path_text = field_validator("path")(_no_control)

    @model_validator(mode="after")
    def _exactly_one(self) -> ModelSection:
        if (self.path is None) == (self.fit is None):
            raise ValueError("give exactly one of path (a saved model folder) or fit (fit settings)")
        return self


class OutputSection(_Strict):
    """What ``trimtab rebalance`` and ``trimtab compare`` write."""

    dir: str | None = Field(None, min_length=1, description="default: results/<name> next to the scenario")
    tables: Literal["csv", "parquet", "none"] = "csv"
    write_json: bool = Field(True, alias="json")
    html: bool = True

    _dir_text = field_validator("dir")(_no_control)


class AlertsSection(_Strict):
    """Thresholds of the concentration alerts shown with every rebalance (docs/scenarios.md)."""

    factor_share: float = Field(0.5, gt=0, le=1, description="alert when one factor takes more than this share of the variance")
    asset_share: float = Field(0.2, gt=0, le=1, description="alert when one position takes more than this share of the variance")
    pinned_positions: int = Field(1, ge=0, description="alert when at least this many positions sit at an upper weight limit (0: off)")


class BacktestSection(_Strict):
    """How a walk-forward backtest treats a date on which the scenario does not solve as written."""

    when_infeasible: Literal["relax", "hold", "stop"] = Field(
        "relax", description="relax: trade at the minimally relaxed limits; hold: keep the drifted book; stop: end the path"
    )


class OverlaySection(_Strict):
    """A hedge overlay sized with the rebalance: basket instruments exempt from the cash limits,
    inside the risk limits (docs/overlay.md, "With the rebalance")."""

    instruments: str = Field(min_length=1, description="basket file: instrument, asset, weight (long format)")
    contracts: str | None = Field(None, min_length=1, description="contract terms: instrument, price, multiplier[, cost][, held]")
    max_gross: float | None = Field(None, gt=0, strict=False, description="Σ|notional| of the overlay at most this (fraction of NAV)")
    notional: dict[str, tuple[float | None, float | None]] | None = Field(
        None, description="instrument → [lower, upper] notional (fraction of NAV, negative short; null unbounded)")

    _instruments_text = field_validator("instruments", "contracts")(_no_control)

    @field_validator("max_gross", mode="before")
    @classmethod
    def _number(cls, value: Any) -> Any:
        if isinstance(value, bool) or (value is not None and not isinstance(value, (int, float))):
            raise ValueError(f"expected a number (fraction of NAV), got {value!r}")
        return value

    @model_validator(mode="after")
    def _ordered(self) -> OverlaySection:
        for name, (lo, hi) in (self.notional or {}).items():
            if lo is not None and hi is not None and lo > hi:
                raise ValueError(f"notional.{name}: lower {lo:g} is above upper {hi:g}")
        return self


class ScenarioSpec(_Strict):
    """A whole scenario file after ``extends`` has been merged."""

    name: str = Field(min_length=1, description="names the output folder: no / or \\, not . or ..")
    description: str | None = None
    model: ModelSection
    data: DataSection
    objective: dict[str, Any]
    constraints: dict[str, Any] = Field(default_factory=dict)
    stress: str | dict[str, Any] | None = Field(
        None, description="shocks reported before and after the trade: a shock file, or name → {factors: {factor: move}}"
    )
    replay: dict[str, Any] | None = Field(
        None, description="{length: periods, count: k}: the k worst windows of the model's history, before and after the trade"
    )
    alpha_factor: dict[str, Any] | None = Field(
        None, description="{volatility: σ}: price the part of alpha the factors do not span as one more factor (annualised σ)"
    )
    overlay: OverlaySection | None = Field(
        None, description="{instruments: FILE, contracts: FILE, max_gross: G, notional: {name: [lo, hi]}}: hedge instruments sized with the book"
    )
    orders: dict[str, Any] | None = Field(
        None, description="min_cash, min_trade_weight, tolerance {weight, exposure, beta, risk}, repair (docs/scenarios.md)"
    )
    output: OutputSection = Field(default_factory=OutputSection)  # type: ignore[arg-type]
    alerts: AlertsSection = Field(default_factory=AlertsSection)  # type: ignore[arg-type]
    backtest: BacktestSection = Field(default_factory=BacktestSection)  # type: ignore[arg-type]

    @field_validator("name", "description", mode="before")
    @classmethod
    def _date_as_text(cls, value: Any) -> Any:
        """A name or description YAML reads as a date (``2024-06-28``) is kept as the text written."""
        return value.isoformat() if isinstance(value, (datetime.date, datetime.datetime)) else value

    @field_validator("name")
    @classmethod
    def _folder_name(cls, value: str) -> str:
        _no_control(value)
        if "/" in value or "\\" in value or value in (".", ".."):
            raise ValueError(f"expected a name usable as a folder name (no / or \\, not . or ..), got {value!r}")
        return value
