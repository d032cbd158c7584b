"""The numeric inputs of a rebalance, aligned to the model's assets and checked once.

Holdings, benchmark and alpha arrive as Series by asset; attributes as a DataFrame by asset. Ids the
model does not know are handled by the ``unknown_assets`` policy:

- ``"error"`` (default): an :class:`InputError` listing up to five of them;
- ``"drop"``: they are removed (a :class:`DataWarning` names them and the weight removed);
- ``"zero"``: holdings of such assets are sold to zero outside the optimizer: they appear in the
  trade list with target 0 and their one-way sale counts towards the turnover cap; unknown
  benchmark and alpha ids are dropped as with ``"drop"``.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace
from functools import cached_property
from typing import Any

import numpy as np
import pandas as pd

from trimtab._validation import check_unique, list_labels
from trimtab.units import check_alpha, check_book
from trimtab.errors import DataWarning, InputError, ModelError
from trimtab.model._arguments import is_positive_number
from trimtab.model import FactorModel

POLICIES = ("error", "drop", "zero")
#: A benchmark must sum to 1 within this (fractions of NAV).
BENCHMARK_SUM_TOL = 1e-6


@dataclass(frozen=True, eq=False)
class ProblemData:
    """Float64 arrays in model order, plus the labelled inputs they came from.

    Attributes
    ----------
    model : FactorModel
    holdings : numpy.ndarray
        w0, current weights of NAV (0 for model assets not held).
    benchmark : numpy.ndarray or None
        b; None when no benchmark was given (active = total).
    alpha : numpy.ndarray
        Annualised expected active returns (0 where not given).
    attributes : pandas.DataFrame or None
        Reindexed to the model's assets.
    nav : float or None
    sold_outside : pandas.Series
        Holdings of assets the model does not know, sold under the ``zero`` policy.
    overlay : Overlay or None
        Basket instruments sized jointly with the book (:mod:`trimtab.construct._overlay`).
    """

    model: FactorModel
    holdings: np.ndarray
    benchmark: np.ndarray | None
    alpha: np.ndarray
    attributes: pd.DataFrame | None
    nav: float | None
    sold_outside: pd.Series
    #: a hedge overlay of basket instruments (construct/_overlay.py), or None
    overlay: Any = None

    @property
    def assets(self) -> pd.Index:
        return self.model.assets

    @property
    def n_assets(self) -> int:
        return self.model.n_assets

    @property
    def periods_per_year(self) -> float:
        return self.model.periods_per_year

    @cached_property
    def exposures(self) -> np.ndarray:
        return self.model._B

    @cached_property
    def factor_sqrt(self) -> np.ndarray:
        return self.model.factor_sqrt

    @cached_property
    def specific_variance(self) -> np.ndarray:
        return self.model._d

    @cached_property
    def specific_sqrt(self) -> np.ndarray:
        return np.sqrt(self.model._d)

    @cached_property
    def bench(self) -> np.ndarray:
        """b, or zeros without a benchmark."""
        return self.benchmark if self.benchmark is not None else np.zeros(self.n_assets)

    @cached_property
    def bench_exposure(self) -> np.ndarray:
        """Bᵀb."""
        return self.exposures.T @ self.bench

    @property
    def outside_turnover(self) -> float:
        """½·Σ|w0| of the holdings sold outside the optimizer."""
        return 0.5 * float(self.sold_outside.abs().sum())

    def index_of(self, labels: Any, path: Any) -> np.ndarray:
        """Positions of asset ids in the model; unknown ids raise, naming the key path."""
        pos = self.model.assets.get_indexer(pd.Index(list(labels)))
        if (pos < 0).any():
            unknown = [x for x, p in zip(labels, pos) if p < 0]
            raise path.fail(f"assets not in the risk model: {list_labels(unknown)}")
        return pos

    def column(self, name: str, path: Any, *, positive: bool = False, numeric: bool = True) -> pd.Series:
        """An attribute column aligned to the model; missing column or values raise, naming the key path."""
        if self.attributes is None or name not in self.attributes.columns:
            have = "no attributes given" if self.attributes is None else f"columns: {list_labels(self.attributes.columns)}"
            raise path.fail(f"needs the attribute column {name!r} ({have})")
        col = self.attributes[name]
        missing = col.index[col.isna().to_numpy()]
        if len(missing):
            raise path.fail(f"attribute column {name!r} has no value for assets: {list_labels(missing)}")
        if numeric:
            if not pd.api.types.is_numeric_dtype(col):
                raise path.fail(f"attribute column {name!r} must hold numbers, got dtype {col.dtype}")
            values = col.to_numpy(dtype=np.float64)
            bad = ~np.isfinite(values) | ((values <= 0) if positive else (values < 0))
            if bad.any():
                sign = "> 0" if positive else "≥ 0"
                raise path.fail(f"attribute column {name!r} must be finite and {sign} for assets: {list_labels(col.index[bad])}")
        return col

    def with_changes(self, **changes: Any) -> ProblemData:
        """A copy with some arrays replaced (for what-if re-solves)."""
        return replace(self, **changes)


def prepare(
    model: FactorModel,
    *,
    holdings: pd.Series | None,
    benchmark: pd.Series | None,
    alpha: pd.Series | None,
    attributes: pd.DataFrame | None,
    nav: float | None,
    unknown_assets: str,
    long_book: bool,
) -> ProblemData:
    """Align and check every input; raise one clear error before any solve."""
    if not isinstance(model, FactorModel):
        raise InputError(f"rebalance: model must be a trimtab.FactorModel, got {type(model).__name__}")
    if unknown_assets not in POLICIES:
        raise InputError(f"rebalance: unknown_assets must be one of {', '.join(POLICIES)}, got {unknown_assets!r}")
    if (model._d < 0).any() or not np.isfinite(model._d).all():
        bad = model.assets[~(model._d >= 0)]
        raise ModelError(f"rebalance: the model has negative or undefined specific variance for assets: {list_labels(bad)}")
    if nav is not None:
        if not is_positive_number(nav):
            shown = repr(nav) if len(repr(nav)) <= 40 else repr(nav)[:39] + "…"
            raise InputError(f"rebalance: nav must be a positive, finite number (currency), got {shown}")
        nav = float(nav)
    w0, sold = _weights(model, holdings, "holdings", unknown_assets, sell_unknown=True)
    del long_book  # one book rule for every command, long-only or not: trimtab.units.check_book
    check_book(np.concatenate([w0, sold.to_numpy(dtype=np.float64)]), "rebalance", "holdings")
    b = None
    if benchmark is not None:
        b, _ = _weights(model, benchmark, "benchmark", unknown_assets, sell_unknown=False)
        if (b < 0).any():
            raise InputError(
                f"benchmark: weights must be ≥ 0; negative for assets: {list_labels(model.assets[b < 0])}"
            )
        if abs(b.sum() - 1.0) > BENCHMARK_SUM_TOL:
            raise InputError(f"benchmark: weights must sum to 1 (got {b.sum():.8g})")
    a = np.zeros(model.n_assets)
    if alpha is not None:
        a, _ = _weights(model, alpha, "alpha", unknown_assets, sell_unknown=False)
        check_alpha(pd.Series(a), "rebalance: alpha", key=None)
    attrs = None
    if attributes is not None:
        if not isinstance(attributes, pd.DataFrame):
            raise InputError(f"attributes: expected a DataFrame by asset, got {type(attributes).__name__}")
        check_unique(attributes.index, "asset ids", "attributes")
        attrs = attributes.reindex(model.assets)
    return ProblemData(model, w0, b, a, attrs, nav, sold)


def _weights(
    model: FactorModel, values: Any, name: str, policy: str, *, sell_unknown: bool
) -> tuple[np.ndarray, pd.Series]:
    """Align one Series to the model; returns the vector and the unknown ids sold (``zero`` policy)."""
    empty = pd.Series(dtype=np.float64)
    if values is None:
        return np.zeros(model.n_assets), empty
    if not isinstance(values, pd.Series):
        raise InputError(f"{name}: expected a pandas Series by asset, got {type(values).__name__}")
    check_unique(values.index, "asset ids", name)
    if not pd.api.types.is_numeric_dtype(values):
        raise InputError(f"{name}: expected numbers, got dtype {values.dtype}")
    bad = values.index[~np.isfinite(values.to_numpy(dtype=np.float64))]
    if len(bad):
        raise InputError(f"{name}: NaN or infinite values for assets: {list_labels(bad)}")
    unknown = values.index.difference(model.assets, sort=False)
    sold = empty
    if len(unknown):
        if policy == "error":
            raise InputError(
                f"{name}: assets not in the risk model: {list_labels(unknown)} "
                "(pass unknown_assets='drop' or 'zero' to handle them)"
            )
        removed = values.loc[unknown]
        if policy == "zero" and sell_unknown:
            sold = removed.astype(np.float64)
            note = "sold to zero outside the optimizer"
        else:
            note = "dropped"
        warnings.warn(
            f"{name}: {len(unknown)} assets not in the risk model {note}: {list_labels(unknown)} "
            f"(weight {float(removed.sum()):.6g})",
            DataWarning,
            stacklevel=4,
        )
        values = values.drop(unknown)
    out = np.zeros(model.n_assets)
    out[model.assets.get_indexer(values.index)] = values.to_numpy(dtype=np.float64)
    return out, sold
