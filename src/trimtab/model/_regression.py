"""Many weighted least-squares regressions on one set of regressors, batched by observation pattern.

Every response column j is regressed on the same regressors X (T×K, plus an intercept) over the rows
where that column is observed (not NaN), with row weights w:

    θ̂ⱼ = (Xᵀ Wⱼ X)⁻¹ Xᵀ Wⱼ yⱼ,    Wⱼ = diag(w ∘ mⱼ),

with mⱼ the 0/1 observation mask of column j. Because yⱼ is set to 0 where it is not observed,
Xᵀ Wⱼ yⱼ = Xᵀ W y⁰ⱼ for every column at once: one (K+1)×T by T×N matrix product. Only the Gram
matrix Xᵀ Wⱼ X depends on the mask, so the columns are grouped by mask and each distinct Gram is
formed once, all of them in one more matrix product (masks × outer products of the rows).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.linalg

#: A Gram matrix whose smallest/largest eigenvalue ratio is below this is treated as singular
#: (condition number of the standardised regressors above about 3·10⁶).
GRAM_RATIO_FLOOR = 1e-13

#: Columns per batched solve for patterns shared by few columns (bounds memory to chunk × p² floats).
_SOLVE_CHUNK = 512


@dataclass(frozen=True, eq=False)
class BatchedFit:
    """The result of :func:`batched_least_squares` for N response columns and p coefficients.

    Attributes
    ----------
    coefficients : ndarray (p, N)
        θ̂ per column, intercept first when there is one; NaN for columns that are not estimable.
    covariance_diagonal : ndarray (p, N)
        diag((Xᵀ Wⱼ X)⁻¹) per column, so se = √(diagonal · ssr/(n − p)).
    n_observations : ndarray (N,)
        Observed rows per column.
    weight_sum : ndarray (N,)
        Σ wₜ over the observed rows of each column.
    estimable : ndarray (N,) of bool
        False where the regressors are (numerically) rank-deficient on the column's rows.
    residuals : ndarray (T, N) or None
        y − Xθ̂, NaN where not observed (and in columns that are not estimable).
    ssr : ndarray (N,) or None
        Weighted sum of squared residuals Σ wₜ eₜ².
    total_sum_of_squares : ndarray (N,) or None
        Σ wₜ (yₜ − ȳ_w)² with the weighted mean ȳ_w (centred) when there is an intercept, else Σ wₜ yₜ².
    """

    coefficients: np.ndarray
    covariance_diagonal: np.ndarray
    n_observations: np.ndarray
    weight_sum: np.ndarray
    estimable: np.ndarray
    residuals: np.ndarray | None = None
    ssr: np.ndarray | None = None
    total_sum_of_squares: np.ndarray | None = None

    @property
    def n_coefficients(self) -> int:
        """p, the number of coefficients (K regressors plus the intercept when there is one)."""
        return int(self.coefficients.shape[0])

    @property
    def residual_variance(self) -> np.ndarray:
        """ssr / (n − p) per column (the weighted residual mean square)."""
        if self.ssr is None:
            raise ValueError("batched fit was run with coefficients_only=True")
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.ssr / (self.n_observations - self.n_coefficients)

    @property
    def r_squared(self) -> np.ndarray:
        """1 − ssr / total_sum_of_squares per column."""
        if self.ssr is None or self.total_sum_of_squares is None:
            raise ValueError("batched fit was run with coefficients_only=True")
        with np.errstate(divide="ignore", invalid="ignore"):
            return 1.0 - self.ssr / self.total_sum_of_squares

    @property
    def t_values(self) -> np.ndarray:
        """θ̂ / se(θ̂) with se = √(diag((XᵀWX)⁻¹) · ssr/(n − p)), shape (p, N)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return self.coefficients / np.sqrt(self.covariance_diagonal * self.residual_variance)


def batched_least_squares(
    regressors: np.ndarray,
    responses: np.ndarray,
    weights: np.ndarray | None = None,
    *,
    intercept: bool = True,
    coefficients_only: bool = False,
) -> BatchedFit:
    """Regress every column of ``responses`` on ``regressors`` over its observed rows, in batches.

    Parameters
    ----------
    regressors : ndarray (T, K)
        X, finite on every row.
    responses : ndarray (T, N)
        Y; NaN marks a row a column does not observe. No infinities.
    weights : ndarray (T,), optional
        Positive row weights w (default 1).
    intercept : bool, default True
        Prepend a column of ones; its coefficient comes first.
    coefficients_only : bool, default False
        Skip residuals, ssr and sums of squares (for repeated fits where only θ̂ is wanted).

    Returns
    -------
    BatchedFit

    Notes
    -----
    The regressors are standardised first (centred on their weighted mean when there is an
    intercept, divided by their weighted standard deviation), which leaves the fitted values
    unchanged and keeps the normal equations well conditioned; coefficients and their covariance
    are mapped back with θ = A·θ̃, Cov(θ) = A·Cov(θ̃)·Aᵀ. Each distinct Gram matrix G = Z̃ᵀWⱼZ̃ is
    formed once; a pattern shared by many columns is solved by one Cholesky factorisation with
    all their right-hand sides, the rest by batched LU solves. A Gram matrix whose eigenvalue ratio
    is below :data:`GRAM_RATIO_FLOOR` marks its columns not estimable. Cost: O(T·p·N) for the two
    big products plus O(g·T·p²) for g distinct observation masks.
    """
    X = np.asarray(regressors, dtype=np.float64)
    Y = np.asarray(responses, dtype=np.float64)
    n_rows, n_cols = Y.shape
    w = np.ones(n_rows) if weights is None else np.asarray(weights, dtype=np.float64)
    observed = ~np.isnan(Y)

    Z, transform = _standardised_design(X, w, intercept)
    p = Z.shape[1]

    group_of, masks = _mask_groups(observed)
    masked_weights = masks * w
    outer = (Z[:, :, None] * Z[:, None, :]).reshape(n_rows, p * p)
    grams = (masked_weights @ outer).reshape(-1, p, p)

    eig = np.linalg.eigvalsh(grams)
    group_ok = eig[:, 0] > GRAM_RATIO_FLOOR * np.maximum(eig[:, -1], np.finfo(float).tiny)

    Y0 = np.where(observed, Y, 0.0)
    moments = (Z * w[:, None]).T @ Y0  # Z̃ᵀ W y⁰ for every column, (p, N)

    theta = np.full((p, n_cols), np.nan)
    cov_diag = np.full((p, n_cols), np.nan)
    ok = np.flatnonzero(group_ok)
    # diag(A G⁻¹ Aᵀ) per pattern, all patterns at once
    inverses = np.linalg.inv(grams[ok])
    cov_by_group = np.full((len(grams), p), np.nan)
    cov_by_group[ok] = np.einsum("ij,gjk,ik->gi", transform, inverses, transform)
    cov_diag[:] = cov_by_group[group_of].T
    sizes = np.bincount(group_of, minlength=len(grams))
    for g in ok[sizes[ok] > p]:  # large groups: one Cholesky solve with many right-hand sides
        members = np.flatnonzero(group_of == g)
        theta[:, members] = scipy.linalg.cho_solve(scipy.linalg.cho_factor(grams[g], lower=True), moments[:, members])
    small = np.flatnonzero(group_ok[group_of] & (sizes[group_of] <= p))
    for chunk in np.array_split(small, max(1, len(small) // _SOLVE_CHUNK)):  # batched LU solves
        if len(chunk):
            theta[:, chunk] = np.linalg.solve(grams[group_of[chunk]], moments[:, chunk].T[..., None])[..., 0].T

    estimable = group_ok[group_of]
    n_obs = observed.sum(axis=0)
    weight_sum = w @ observed
    coefficients = transform @ theta
    if coefficients_only:
        return BatchedFit(coefficients, cov_diag, n_obs, weight_sum, estimable)

    residuals = Z @ theta
    np.subtract(Y, residuals, out=residuals)  # NaN wherever Y is NaN or the column is not estimable
    unobserved = ~observed
    squares = np.square(residuals)
    np.copyto(squares, 0.0, where=unobserved)
    ssr = w @ squares
    if intercept:
        with np.errstate(divide="ignore", invalid="ignore"):
            mean = (w @ Y0) / weight_sum
        np.subtract(Y, mean, out=squares)
    else:
        squares[...] = Y
    np.square(squares, out=squares)
    np.copyto(squares, 0.0, where=unobserved)
    tss = w @ squares
    ssr[~estimable] = np.nan
    return BatchedFit(coefficients, cov_diag, n_obs, weight_sum, estimable, residuals, ssr, tss)


def _mask_groups(observed: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Group index per column and the distinct masks (g, T) as floats; complete columns are group 0."""
    n_rows, n_cols = observed.shape
    complete = observed.all(axis=0)
    group_of = np.zeros(n_cols, dtype=np.intp)
    masks = [np.ones((1, n_rows))] if complete.any() else [np.empty((0, n_rows))]
    ragged = np.flatnonzero(~complete)
    if len(ragged):
        packed = np.packbits(observed[:, ragged], axis=0).T
        unique_packed, inverse = np.unique(packed, axis=0, return_inverse=True)
        group_of[ragged] = inverse.ravel() + len(masks[0])
        masks.append(np.unpackbits(unique_packed, axis=1, count=n_rows).astype(np.float64))
    return group_of, np.vstack(masks)


def _standardised_design(X: np.ndarray, w: np.ndarray, intercept: bool) -> tuple[np.ndarray, np.ndarray]:
    """Z̃ = [1, (X − c)/s] (or X/s without intercept) and A with θ = A·θ̃."""
    n_rows, n_reg = X.shape
    total = w.sum()
    center = (w @ X) / total if intercept else np.zeros(n_reg)
    scale = np.sqrt((w @ np.square(X - center)) / total)
    scale[~(scale > 0)] = 1.0
    Zx = (X - center) / scale
    if not intercept:
        return Zx, np.diag(1.0 / scale)
    Z = np.empty((n_rows, n_reg + 1))
    Z[:, 0] = 1.0
    Z[:, 1:] = Zx
    # α = α̃ − Σₖ θ̃ₖ cₖ/sₖ,  βₖ = θ̃ₖ/sₖ
    transform = np.zeros((n_reg + 1, n_reg + 1))
    transform[0, 0] = 1.0
    transform[0, 1:] = -center / scale
    transform[1:, 1:] = np.diag(1.0 / scale)
    return Z, transform
