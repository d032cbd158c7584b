"""Hedge instruments in factor-model terms: each is a basket over the model's assets or a return series.

A basket j with weights xⱼ (N) adds xⱼ·hⱼ to the book for a notional hⱼ (a fraction of NAV), so its
factor exposures are Bᵀxⱼ and its specific part overlaps the book's, asset by asset. An instrument
known only by its returns gets exposures βⱼ from a time-series regression on the model's factor
returns (the model's own estimator and settings) and a specific variance sⱼ, its residual variance,
uncorrelated with every asset's.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import list_labels
from trimtab.errors import DataWarning, InputError


@dataclass(frozen=True, eq=False)
class Instruments:
    """M instruments as arrays aligned to a model.

    Attributes
    ----------
    names : pandas.Index
        Instrument names (M).
    baskets : numpy.ndarray
        X, shape (N, M): basket weights over the model's assets; a zero column for a return series.
    exposures : numpy.ndarray
        E, shape (K, M): factor exposures per unit notional (Bᵀxⱼ, or the regression βⱼ).
    own_specific_variance : numpy.ndarray
        s, shape (M,): per-period specific variance of a return-series instrument (0 for a basket,
        whose specific risk is the assets' own, through X).
    kinds : tuple of str
        ``"basket"`` or ``"returns"`` per instrument.
    fit : pandas.DataFrame
        Per return-series instrument: observations, R², residual volatility (per period).
    """

    names: pd.Index
    baskets: np.ndarray
    exposures: np.ndarray
    own_specific_variance: np.ndarray
    kinds: tuple[str, ...]
    fit: pd.DataFrame

    @property
    def n_instruments(self) -> int:
        return len(self.names)

    def exposure_table(self, factors: pd.Index) -> pd.DataFrame:
        """Factors × instruments: the exposure of one unit of notional."""
        return pd.DataFrame(self.exposures, index=factors, columns=self.names)


#: A long-only basket's weights sum to about 1 (an index, or a fund's holdings less its cash); above
#: this they were written in percent. A long/short basket's gross weight above the second bound too.
LONG_BASKET_MAX = 1.5
GROSS_BASKET_MAX = 10.0
#: A per-period return beyond ±100% is taken as a percentage written as a number.
RETURN_MAX = 1.0


def _is_return_series(values: pd.Series) -> bool:
    return isinstance(values.index, pd.DatetimeIndex)


def _basket(model: Any, name: str, weights: pd.Series) -> np.ndarray:
    owner = f"instruments[{name!r}]"
    if not weights.index.is_unique:
        raise InputError(f"{owner}: repeated assets in the basket: {list_labels(weights.index[weights.index.duplicated()].unique())}")
    unknown = weights.index.difference(model.assets)
    if len(unknown):
        raise InputError(f"{owner}: assets not in the risk model: {list_labels(unknown)}")
    values = pd.to_numeric(weights, errors="coerce")
    bad = values.index[~np.isfinite(values.to_numpy(dtype=float))]
    if len(bad):
        raise InputError(f"{owner}: basket weights must be finite numbers; not for {list_labels(bad)}")
    if not np.any(values.to_numpy(dtype=float) != 0.0):
        raise InputError(f"{owner}: the basket has no non-zero weight")
    numbers = values.to_numpy(dtype=float)
    total, gross = float(numbers.sum()), float(np.abs(numbers).sum())
    if (numbers.min() >= 0 and total > LONG_BASKET_MAX) or gross > GROSS_BASKET_MAX:
        raise InputError(
            f"{owner}: basket weights sum to {total:g} (gross {gross:g}); write them as fractions of the basket "
            f"(a long basket sums to 1, e.g. 0.02 for 2%), not percentages"
        )
    out = np.zeros(model.n_assets)
    out[model.assets.get_indexer(values.index)] = numbers
    return out


def fit_settings(model: Any) -> dict[str, Any]:
    """The model's own time-series settings that carry over to a single regression.

    The GLS step is left out (its date variances need a cross-section of assets), and so are the
    cross-sectional refinements of d; the regression weights (half-life) and the window stay.
    """
    report = model.fit_report
    settings = dict(report.settings) if report is not None else {}
    keep = {}
    for key in ("half_life", "min_periods", "rolling_window", "exposure_half_life", "periods_per_year"):
        if settings.get(key) is not None:
            keep[key] = settings[key]
    half_life = keep.get("half_life", keep.get("exposure_half_life"))
    keep["covariance"] = {"volatility_half_life": half_life}
    keep.pop("exposure_half_life", None)
    if half_life is not None:
        keep["half_life"] = half_life
    return keep


def regress_on_factors(model: Any, returns: pd.DataFrame) -> tuple[pd.DataFrame, pd.Series, pd.DataFrame]:
    """Exposures (instruments × factors), specific variances and fit statistics of return series,
    by the model's time-series estimator on the model's factor-return history."""
    from trimtab.model import fit_time_series

    history = model.factor_history
    if history is None:
        raise InputError(
            f"instruments given as returns ({list_labels(returns.columns)}) need the model's factor-return history; "
            "this model has none (fit it with trimtab, or give basket weights)"
        )
    common = returns.index.intersection(history.index)
    if len(common) == 0:
        raise InputError(
            f"instruments {list_labels(returns.columns)}: no date in common with the model's factor history "
            f"({history.index[0]:%Y-%m-%d} to {history.index[-1]:%Y-%m-%d})"
        )
    aligned = returns.loc[common].reindex(columns=returns.columns)
    settings = fit_settings(model)
    settings.setdefault("min_periods", max(24, 3 * (model.n_factors + 1)))
    with warnings.catch_warnings():
        warnings.simplefilter("error", DataWarning)
        try:
            fitted = fit_time_series(aligned, history.loc[common], **settings)
        except DataWarning as err:
            raise InputError(f"instruments given as returns: {err}") from None
        except InputError as err:
            raise InputError(f"instruments given as returns: {err}") from None
    table = fitted.fit_report.assets if fitted.fit_report is not None else None
    stats = pd.DataFrame(index=returns.columns)
    stats["observations"] = aligned.notna().sum()
    if table is not None and "r_squared" in getattr(table, "columns", []):
        stats["r_squared"] = table["r_squared"].reindex(returns.columns)
    stats["residual_volatility"] = np.sqrt(fitted.specific_variance.reindex(returns.columns))
    return fitted.exposures.reindex(columns=model.factors), fitted.specific_variance, stats


def prepare_instruments(model: Any, instruments: Mapping[str, Any]) -> Instruments:
    """Check ``instruments`` (name → basket weights by asset, or → returns by date) against ``model``."""
    if not isinstance(instruments, Mapping) or not instruments:
        raise InputError("instruments: expected a non-empty mapping of name → basket weights (by asset) or returns (by date)")
    names = pd.Index([str(n) for n in instruments])
    if not names.is_unique:
        raise InputError(f"instruments: repeated names {list_labels(names[names.duplicated()].unique())}")
    M, K = len(names), model.n_factors
    X = np.zeros((model.n_assets, M))
    E = np.zeros((K, M))
    s = np.zeros(M)
    kinds: list[str] = []
    series: dict[str, pd.Series] = {}
    for j, (name, values) in enumerate(zip(names, instruments.values(), strict=True)):
        if not isinstance(values, pd.Series):
            raise InputError(f"instruments[{name!r}]: expected a pandas Series (weights by asset, or returns by date), got {type(values).__name__}")
        if _is_return_series(values):
            kinds.append("returns")
            numbers = pd.to_numeric(values, errors="coerce").astype(float)
            if np.any(np.abs(numbers.to_numpy()) > RETURN_MAX):
                worst = numbers.abs().idxmax()
                raise InputError(f"instruments[{name!r}]: a return of {numbers[worst]:g} on {worst:%Y-%m-%d}; "
                                 "write returns as fractions (0.012 for 1.2%), not percentages")
            series[name] = numbers
        else:
            kinds.append("basket")
            X[:, j] = _basket(model, name, values)
    fit = pd.DataFrame(index=pd.Index([], name="instrument"))
    if series:
        frame = pd.DataFrame(series)
        if not frame.index.is_monotonic_increasing:
            frame = frame.sort_index()
        betas, specific, fit = regress_on_factors(model, frame)
        for name in series:
            j = names.get_loc(name)
            E[:, j] = betas.loc[name].to_numpy(dtype=float)
            s[j] = float(specific.loc[name])
        fit.index.name = "instrument"
    E += model._B.T @ X
    return Instruments(names, X, E, s, tuple(kinds), fit)
