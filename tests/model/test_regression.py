"""Batched weighted least squares against a naive per-column numpy.linalg.lstsq loop written here."""

from __future__ import annotations

import numpy as np
import pytest

from trimtab.model._regression import batched_least_squares


def naive_fit(X: np.ndarray, Y: np.ndarray, w: np.ndarray, intercept: bool) -> dict[str, np.ndarray]:
    """One numpy.linalg.lstsq per column on √w-scaled rows it observes (textbook WLS)."""
    n_rows, n_cols = Y.shape
    design = np.column_stack([np.ones(n_rows), X]) if intercept else X
    p = design.shape[1]
    out = {k: np.full((p, n_cols), np.nan) for k in ("coef", "cov_diag")}
    out.update({k: np.full(n_cols, np.nan) for k in ("ssr", "tss")})
    out["resid"] = np.full((n_rows, n_cols), np.nan)
    for j in range(n_cols):
        rows = ~np.isnan(Y[:, j])
        sw = np.sqrt(w[rows])
        A, y = design[rows] * sw[:, None], Y[rows, j] * sw
        coef = np.linalg.lstsq(A, y, rcond=None)[0]
        e = Y[rows, j] - design[rows] @ coef
        out["coef"][:, j] = coef
        out["resid"][rows, j] = e
        out["ssr"][j] = np.sum(w[rows] * e**2)
        centre = np.average(Y[rows, j], weights=w[rows]) if intercept else 0.0
        out["tss"][j] = np.sum(w[rows] * (Y[rows, j] - centre) ** 2)
        out["cov_diag"][:, j] = np.diag(np.linalg.inv(A.T @ A))
    return out


def ragged_panel(seed: int, n_rows: int = 120, n_cols: int = 40, n_reg: int = 3) -> tuple[np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    X = rng.normal(0.001, 0.02, size=(n_rows, n_reg))
    Y = 0.002 + X @ rng.normal(1.0, 0.5, size=(n_reg, n_cols)) + rng.normal(0, 0.01, size=(n_rows, n_cols))
    Y[: 30, 5:10] = np.nan  # late listers sharing one start date
    for j in range(10, 15):  # late listers with their own start dates
        Y[: 10 + 7 * j % 50, j] = np.nan
    Y[90:, 15:18] = np.nan  # delisted
    holes = rng.random((n_rows, 6)) < 0.1  # scattered gaps: one pattern per column
    Y[:, 20:26][holes] = np.nan
    return X, Y


@pytest.mark.parametrize("intercept", [True, False], ids=["intercept", "no_intercept"])
@pytest.mark.parametrize("weighted", [False, True], ids=["equal", "weighted"])
def test_batched_equals_naive_lstsq_loop(intercept: bool, weighted: bool) -> None:
    X, Y = ragged_panel(seed=3)
    w = 0.5 ** ((len(X) - 1 - np.arange(len(X))) / 40.0) if weighted else np.ones(len(X))
    fit = batched_least_squares(X, Y, w, intercept=intercept)
    ref = naive_fit(X, Y, w, intercept)
    # reference: numpy.linalg.lstsq per column (naive loop above)
    np.testing.assert_allclose(fit.coefficients, ref["coef"], rtol=1e-9, atol=1e-13)
    np.testing.assert_allclose(fit.residuals, ref["resid"], rtol=1e-8, atol=1e-14)
    np.testing.assert_allclose(fit.ssr, ref["ssr"], rtol=1e-9)
    np.testing.assert_allclose(fit.total_sum_of_squares, ref["tss"], rtol=1e-10)
    np.testing.assert_allclose(fit.covariance_diagonal, ref["cov_diag"], rtol=1e-8)
    n = (~np.isnan(Y)).sum(axis=0)
    np.testing.assert_array_equal(fit.n_observations, n)
    se = np.sqrt(ref["cov_diag"] * ref["ssr"] / (n - ref["coef"].shape[0]))
    np.testing.assert_allclose(fit.t_values, ref["coef"] / se, rtol=1e-8)
    np.testing.assert_allclose(fit.r_squared, 1 - ref["ssr"] / ref["tss"], rtol=1e-10)
    assert fit.estimable.all()


def test_coefficients_only_matches_full_fit() -> None:
    X, Y = ragged_panel(seed=4)
    full = batched_least_squares(X, Y)
    light = batched_least_squares(X, Y, coefficients_only=True)
    np.testing.assert_array_equal(light.coefficients, full.coefficients)
    assert light.residuals is None and light.ssr is None
    with pytest.raises(ValueError, match="coefficients_only=True"):
        _ = light.residual_variance
    with pytest.raises(ValueError, match="coefficients_only=True"):
        _ = light.r_squared


def test_rank_deficient_pattern_is_flagged_not_solved() -> None:
    # A regressor that is constant on one column's rows is collinear with the intercept there.
    X, Y = ragged_panel(seed=5)
    X[:60, 1] = 0.01
    Y[60:, 0] = np.nan
    fit = batched_least_squares(X, Y)
    assert not fit.estimable[0] and fit.estimable[1:].all()
    assert np.isnan(fit.coefficients[:, 0]).all() and np.isnan(fit.residuals[:, 0]).all()
    assert np.isnan(fit.ssr[0])
    ref = naive_fit(X, Y[:, 1:], np.ones(len(X)), True)
    np.testing.assert_allclose(fit.coefficients[:, 1:], ref["coef"], rtol=1e-9, atol=1e-13)
