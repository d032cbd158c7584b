"""The low-rank-plus-diagonal covariance Σ = B·F·Bᵀ + diag(d) and its algebra.

Nothing here forms an N×N matrix, except :meth:`FactorModel.covariance`, which refuses above a size
limit unless asked.
"""

from __future__ import annotations

import importlib
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from trimtab._validation import (
    as_float_array,
    check_finite_frame,
    check_finite_series,
    check_unique,
    list_labels,
)
from trimtab.errors import InputError, ModelError
from trimtab.model._arguments import is_positive_number
from trimtab.model._fit_report import FitReport

if TYPE_CHECKING:
    from trimtab.attribution import RiskAttribution

#: Above this many assets :meth:`FactorModel.covariance` refuses to build the dense matrix.
DENSE_LIMIT = 5_000

#: Relative tolerance for symmetry and positive semi-definiteness of F.
_PSD_TOL = 1e-10


@dataclass(frozen=True, eq=False)
class FactorModel:
    """A linear factor risk model: Σ = B·F·Bᵀ + diag(d), kept in that factored form.

    Parameters
    ----------
    exposures : pandas.DataFrame
        B, shape (N, K): assets × factors.
    factor_covariance : pandas.DataFrame
        F, shape (K, K), symmetric positive semi-definite, labelled by factor on both axes.
    specific_variance : pandas.Series
        d, length N, non-negative, indexed by asset.
    periods_per_year : float, default 252
        The number of return periods in a year (252 daily, 52 weekly, 12 monthly). The model holds
        per-period quantities; :meth:`volatility` and the reports annualise with this number.
    factor_groups : Mapping[str, str], optional
        Factor → group label (for instance ``market``, ``style``, ``industry``), used to sum risk
        contributions by group.
    fit_report : FitReport, optional
        Estimation details when the model came from an estimator.
    provenance : Mapping, optional
        Estimator, settings, data window and package version; saved in the manifest.

    Raises
    ------
    ModelError
        If the labels of B, F and d disagree, F is not symmetric positive semi-definite, d has a
        negative entry, or any value is NaN or infinite.

    Notes
    -----
    The model needs N + K(K+1)/2 + N·K parameters instead of N(N+1)/2 for a sample covariance
    (:attr:`n_parameters`). Portfolio variance is computed as xᵀFx + Σᵢ dᵢwᵢ² with x = Bᵀw, in
    O(N·K) time and memory.

    Examples
    --------
    >>> import pandas as pd
    >>> B = pd.DataFrame({"market": [1.0, 1.2]}, index=["AAA", "BBB"])
    >>> F = pd.DataFrame([[0.0001]], index=["market"], columns=["market"])
    >>> d = pd.Series([0.0002, 0.0003], index=["AAA", "BBB"])
    >>> model = FactorModel(B, F, d)
    >>> round(model.variance(pd.Series({"AAA": 1.0})), 8)
    0.0003
    """

    exposures: pd.DataFrame
    factor_covariance: pd.DataFrame
    specific_variance: pd.Series
    periods_per_year: float = 252
    factor_groups: Mapping[str, str] | None = None
    fit_report: FitReport | None = field(default=None, repr=False)
    provenance: Mapping[str, Any] = field(default_factory=dict, repr=False)

    def __post_init__(self) -> None:
        B, F, d = _validated_parts(self.exposures, self.factor_covariance, self.specific_variance)
        object.__setattr__(self, "exposures", B)
        object.__setattr__(self, "factor_covariance", F)
        object.__setattr__(self, "specific_variance", d)
        ppy = self.periods_per_year
        if not is_positive_number(ppy):
            raise ModelError(f"FactorModel: periods_per_year must be a positive number, got {ppy!r}")
        object.__setattr__(self, "periods_per_year", float(ppy))
        if self.factor_groups is not None:
            groups = dict(self.factor_groups)
            unknown = [f for f in groups if f not in set(B.columns)]
            if unknown:
                raise ModelError(f"FactorModel: factor_groups names unknown factors: {list_labels(unknown)}")
            object.__setattr__(self, "factor_groups", groups)
        object.__setattr__(self, "provenance", dict(self.provenance))

    # ------------------------------------------------------------------ labels and sizes
    @property
    def assets(self) -> pd.Index:
        """Asset labels, in model order."""
        return self.exposures.index

    @property
    def factors(self) -> pd.Index:
        """Factor labels, in model order."""
        return self.exposures.columns

    @property
    def n_assets(self) -> int:
        """N, the number of assets."""
        return int(self.exposures.shape[0])

    @property
    def n_factors(self) -> int:
        """K, the number of factors."""
        return int(self.exposures.shape[1])

    @property
    def n_parameters(self) -> int:
        """N + K(K+1)/2 + N·K: specific variances, factor covariances and exposures."""
        n, k = self.n_assets, self.n_factors
        return n + k * (k + 1) // 2 + n * k

    def __repr__(self) -> str:
        return (
            f"FactorModel(n_assets={self.n_assets}, n_factors={self.n_factors}, "
            f"periods_per_year={self.periods_per_year:g})"
        )

    @property
    def factor_history(self) -> pd.DataFrame | None:
        """Dates × factors: the factor returns the model was fitted on (observed for a time-series fit,
        estimated for a cross-section fit, the factor scores of a statistical fit); None for a model
        built by hand or saved without them. Saved and loaded with the model; replayed by
        :func:`trimtab.replay` and used by :func:`trimtab.attribution.attribute_returns`."""
        report = self.fit_report
        return None if report is None else report.factor_returns

    # ------------------------------------------------------------------ cached arrays
    @cached_property
    def _B(self) -> np.ndarray:
        return np.ascontiguousarray(self.exposures.to_numpy(dtype=np.float64))

    @cached_property
    def _F(self) -> np.ndarray:
        return self.factor_covariance.to_numpy(dtype=np.float64)

    @cached_property
    def _d(self) -> np.ndarray:
        return self.specific_variance.to_numpy(dtype=np.float64)

    @cached_property
    def _asset_pos(self) -> dict[Any, int]:
        return {a: i for i, a in enumerate(self.assets)}

    @cached_property
    def factor_sqrt(self) -> np.ndarray:
        """L with F = L·Lᵀ (K×K), from the eigendecomposition, so a PSD F with zero eigenvalues works."""
        vals, vecs = np.linalg.eigh(self._F)
        return vecs * np.sqrt(np.clip(vals, 0.0, None))

    @cached_property
    def _scaled_exposures(self) -> np.ndarray:
        """U = B·L, so that Σ = U·Uᵀ + D."""
        return self._B @ self.factor_sqrt

    # ------------------------------------------------------------------ weights
    def weights_array(self, weights: Any, *, name: str = "weights") -> np.ndarray:
        """Align ``weights`` to the model's assets as a float64 vector.

        A Series is matched by label: assets the model has but the Series lacks get weight 0; labels
        the model does not know raise an error listing them (at most five). An array must have
        length N and is taken in model order. NaN or infinite weights raise.
        """
        if isinstance(weights, pd.DataFrame):
            raise InputError(f"{name}: expected a Series by asset or a 1-D array, got a DataFrame")
        if isinstance(weights, pd.Series):
            check_unique(weights.index, "asset ids", name)
            unknown = weights.index.difference(self.assets)
            if len(unknown):
                raise InputError(f"{name}: assets not in the risk model: {list_labels(unknown)}")
            check_finite_series(weights, name)
            out = np.zeros(self.n_assets)
            pos = self.assets.get_indexer(weights.index)
            out[pos] = weights.to_numpy(dtype=np.float64)
            return out
        arr = as_float_array(weights, name)
        if arr.ndim != 1 or arr.shape[0] != self.n_assets:
            raise InputError(f"{name}: expected shape ({self.n_assets},), got {arr.shape}")
        return arr

    # ------------------------------------------------------------------ algebra
    def factor_exposure(self, weights: Any) -> pd.Series:
        """Portfolio factor exposures x = Bᵀw, by factor."""
        w = self.weights_array(weights)
        return pd.Series(self._B.T @ w, index=self.factors, name="exposure")

    def variance(self, weights: Any) -> float:
        """Per-period portfolio variance wᵀΣw = xᵀFx + Σᵢ dᵢwᵢ², x = Bᵀw."""
        w = self.weights_array(weights)
        return _variance(self._B, self._F, self._d, w)

    def volatility(self, weights: Any, *, annualize: bool = True) -> float:
        """Portfolio volatility √(wᵀΣw), annualised by √periods_per_year unless ``annualize=False``."""
        var = self.variance(weights)
        scale = self.periods_per_year if annualize else 1.0
        return float(np.sqrt(max(var, 0.0) * scale))

    def covariance_dot(self, vector: Any) -> np.ndarray:
        """Σ·v = B·(F·(Bᵀv)) + d∘v for a vector (N,) or a block of vectors (N, m)."""
        v = self._vector_or_block(vector, "vector")
        BtV = self._B.T @ v
        out = self._B @ (self._F @ BtV)
        out += (self._d[:, None] * v) if v.ndim == 2 else self._d * v
        return out

    def solve(self, vector: Any) -> np.ndarray:
        """Σ⁻¹·v by the Woodbury identity, in O(N·K²) time.

        With F = L·Lᵀ and U = B·L, Σ = D + U·Uᵀ and
        Σ⁻¹ = D⁻¹ − D⁻¹U (I + UᵀD⁻¹U)⁻¹ UᵀD⁻¹, which needs only a K×K Cholesky factor and works for
        a singular (PSD) F. Requires every specific variance to be positive.
        """
        if np.any(self._d <= 0):
            zero = self.assets[self._d <= 0]
            raise ModelError(
                f"FactorModel.solve: Σ is singular: zero specific variance for {list_labels(zero)}"
            )
        v = self._vector_or_block(vector, "vector")
        U = self._scaled_exposures
        dinv = 1.0 / self._d
        Dv = (dinv[:, None] * v) if v.ndim == 2 else dinv * v
        cap = np.eye(self.n_factors) + (U.T * dinv) @ U
        chol = np.linalg.cholesky(cap)
        inner = np.linalg.solve(chol.T, np.linalg.solve(chol, U.T @ Dv))
        correction = U @ inner
        correction = (dinv[:, None] * correction) if v.ndim == 2 else dinv * correction
        return Dv - correction

    def covariance(self, *, allow_large: bool = False) -> pd.DataFrame:
        """The dense N×N covariance B·F·Bᵀ + diag(d), for small models or on explicit request.

        Raises
        ------
        ModelError
            If N exceeds :data:`DENSE_LIMIT` and ``allow_large`` is not set; the message gives the
            memory the matrix would take.
        """
        n = self.n_assets
        if n > DENSE_LIMIT and not allow_large:
            gb = n * n * 8 / 1e9
            raise ModelError(
                f"FactorModel.covariance: refusing to build a dense {n}×{n} matrix ({gb:.1f} GB); "
                "pass allow_large=True if you really want it"
            )
        sigma = self._B @ self._F @ self._B.T
        sigma[np.diag_indices(n)] += self._d
        return pd.DataFrame(sigma, index=self.assets, columns=self.assets)

    def correlation_with_factors(self, weights: Any) -> pd.Series:
        """Correlation of the portfolio return with each factor return: (F·x)ₖ / (σₖ·σ_p)."""
        w = self.weights_array(weights)
        x = self._B.T @ w
        sigma_p = np.sqrt(_variance(self._B, self._F, self._d, w))
        fvol = np.sqrt(np.diag(self._F))
        with np.errstate(divide="ignore", invalid="ignore"):
            corr = (self._F @ x) / (fvol * sigma_p)
        corr[~np.isfinite(corr)] = np.nan
        return pd.Series(corr, index=self.factors, name="correlation")

    # ------------------------------------------------------------------ derived models
    def subset(self, assets: Sequence[Any] | pd.Index) -> FactorModel:
        """The model restricted to ``assets`` (same factors and F), in the order given."""
        idx = pd.Index(assets)
        check_unique(idx, "asset ids", "FactorModel.subset")
        unknown = idx.difference(self.assets)
        if len(unknown):
            raise InputError(f"FactorModel.subset: assets not in the model: {list_labels(unknown)}")
        return FactorModel(
            self.exposures.loc[idx],
            self.factor_covariance,
            self.specific_variance.loc[idx],
            periods_per_year=self.periods_per_year,
            factor_groups=self.factor_groups,
            provenance={**self.provenance, "subset_of_n_assets": self.n_assets},
        )

    def with_alpha_factor(self, alpha: Any, volatility: float, weights: Any = None) -> FactorModel:
        """This model with one more factor, ``alpha_factor``, along the part of ``alpha`` its factors do
        not span: Σ' = Σ + (σ²/P)·y·yᵀ with y the orthogonal part scaled to a weighted RMS of 1.

        See :func:`trimtab.model.with_alpha_factor` (Ceria, Saxena and Stubbs 2012).
        """
        from trimtab.model._alpha import with_alpha_factor

        return with_alpha_factor(self, alpha, volatility, weights)

    def specific_share(self) -> pd.Series:
        """Per asset, the share of its variance that is specific: dᵢ / Σᵢᵢ (the risk diversification sheds)."""
        U = self._scaled_exposures
        systematic = np.einsum("ik,ik->i", U, U)
        total = systematic + self._d
        with np.errstate(divide="ignore", invalid="ignore"):
            share = np.where(total > 0, self._d / total, np.nan)
        return pd.Series(share, index=self.assets, name="specific_share")

    # ------------------------------------------------------------------ attribution seam
    def attribute(self, weights: Any, benchmark: Any = None, **kwargs: Any) -> RiskAttribution:
        """Risk attribution of ``weights`` (total risk) or of ``weights − benchmark`` (active risk).

        See :func:`trimtab.attribution.attribute` for the figures and their formulas.

        Notes
        -----
        A thin shim: the attribution package sits above the model (it takes a ``FactorModel``), so
        the model never imports it; the function is looked up when the method runs
        (docs/architecture.md, "The one late-bound call").
        """
        attribution = importlib.import_module("trimtab.attribution")
        return attribution.attribute(self, weights, benchmark, **kwargs)  # type: ignore[no-any-return]

    # ------------------------------------------------------------------ storage
    def save(self, path: str | Path, *, file_format: str = "parquet", overwrite: bool = False) -> Path:
        """Write the model to a folder of tables plus ``manifest.json``; see docs/model.md.

        The folder is written under a temporary name and renamed when complete, so a failed write
        never leaves a half-written model.
        """
        from trimtab.model._store import save_model

        return save_model(self, path, file_format=file_format, overwrite=overwrite)

    @classmethod
    def load(cls, path: str | Path) -> FactorModel:
        """Read a model folder written by :meth:`save`, validating every table."""
        from trimtab.model._store import load_model

        return load_model(path, FactorModel)  # type: ignore[no-any-return]

    # ------------------------------------------------------------------ helpers
    def _vector_or_block(self, vector: Any, name: str) -> np.ndarray:
        if isinstance(vector, pd.Series):
            return self.weights_array(vector, name=name)
        if isinstance(vector, pd.DataFrame):
            vector = vector.reindex(self.assets).to_numpy(dtype=np.float64)
        arr = as_float_array(vector, name)
        if arr.ndim not in (1, 2) or arr.shape[0] != self.n_assets:
            raise InputError(f"{name}: expected shape ({self.n_assets},) or ({self.n_assets}, m), got {arr.shape}")
        return arr


def _variance(B: np.ndarray, F: np.ndarray, d: np.ndarray, w: np.ndarray) -> float:
    x = B.T @ w
    return float(x @ F @ x + np.dot(d * w, w))


def _validated_parts(
    exposures: Any, factor_covariance: Any, specific_variance: Any
) -> tuple[pd.DataFrame, pd.DataFrame, pd.Series]:
    """Check labels, finiteness, symmetry and signs; return float64 copies aligned to B's order."""
    owner = "FactorModel"
    if not isinstance(exposures, pd.DataFrame):
        raise ModelError(f"{owner}: exposures must be a DataFrame (assets × factors), got {type(exposures).__name__}")
    if not isinstance(specific_variance, pd.Series):
        raise ModelError(
            f"{owner}: specific_variance must be a Series by asset, got {type(specific_variance).__name__}"
        )
    if isinstance(factor_covariance, np.ndarray):
        factor_covariance = pd.DataFrame(factor_covariance, index=exposures.columns, columns=exposures.columns)
    if not isinstance(factor_covariance, pd.DataFrame):
        raise ModelError(
            f"{owner}: factor_covariance must be a DataFrame (factors × factors), got {type(factor_covariance).__name__}"
        )
    try:
        check_unique(exposures.index, "asset ids", f"{owner} exposures")
        check_unique(exposures.columns, "factor names", f"{owner} exposures")
        check_finite_frame(exposures, f"{owner} exposures")
        check_finite_frame(factor_covariance, f"{owner} factor_covariance")
        check_finite_series(specific_variance, f"{owner} specific_variance")
        check_unique(specific_variance.index, "asset ids", f"{owner} specific_variance")
    except InputError as err:
        raise ModelError(str(err)) from None
    if exposures.shape[0] == 0 or exposures.shape[1] == 0:
        raise ModelError(f"{owner}: exposures must have at least one asset and one factor, got shape {exposures.shape}")

    factors = exposures.columns
    if set(factor_covariance.index) != set(factors) or set(factor_covariance.columns) != set(factors):
        missing = factors.difference(factor_covariance.index).union(factors.difference(factor_covariance.columns))
        extra = factor_covariance.index.difference(factors)
        raise ModelError(
            f"{owner}: factor_covariance labels must match the exposure columns; "
            f"missing: {list_labels(missing) or 'none'}; unexpected: {list_labels(extra) or 'none'}"
        )
    F = factor_covariance.loc[factors, factors].astype(np.float64)
    Fv = F.to_numpy()
    scale = max(float(np.max(np.abs(Fv))), np.finfo(float).tiny)
    if not np.allclose(Fv, Fv.T, rtol=0.0, atol=_PSD_TOL * scale * 1e3):
        raise ModelError(f"{owner}: factor_covariance is not symmetric")
    Fv = 0.5 * (Fv + Fv.T)
    min_eig = float(np.linalg.eigvalsh(Fv).min())
    if min_eig < -_PSD_TOL * scale * Fv.shape[0]:
        raise ModelError(
            f"{owner}: factor_covariance is not positive semi-definite (smallest eigenvalue {min_eig:.3g}); "
            "repair it with trimtab.model.eigenvalue_floor"
        )
    F = pd.DataFrame(Fv, index=factors, columns=factors)

    assets = exposures.index
    if set(specific_variance.index) != set(assets):
        missing = assets.difference(specific_variance.index)
        extra = specific_variance.index.difference(assets)
        raise ModelError(
            f"{owner}: specific_variance must cover exactly the exposure assets; "
            f"missing: {list_labels(missing) or 'none'}; unexpected: {list_labels(extra) or 'none'}"
        )
    d = specific_variance.reindex(assets).astype(np.float64)
    negative = d.index[d.to_numpy() < 0]
    if len(negative):
        raise ModelError(f"{owner}: negative specific variance for assets: {list_labels(negative)}")
    d.name = "specific_variance"
    B = exposures.astype(np.float64)
    return B, F, d
