"""FactorModel algebra against numpy on the dense Σ = B·F·Bᵀ + D (the reference: plain dense linear algebra)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel, InputError, ModelError
from trimtab.model import DENSE_LIMIT

from ..conftest import random_model


def dense(model: FactorModel) -> np.ndarray:
    B, F, d = (model.exposures.to_numpy(), model.factor_covariance.to_numpy(), model.specific_variance.to_numpy())
    return B @ F @ B.T + np.diag(d)


@pytest.mark.parametrize("seed", [0, 1, 2], ids=lambda s: f"seed{s}")
def test_implicit_operations_match_dense_numpy(seed: int) -> None:
    model = random_model(seed=seed)
    S = dense(model)
    rng = np.random.default_rng(seed + 10)
    w = rng.normal(size=model.n_assets)
    V = rng.normal(size=(model.n_assets, 3))
    # numpy dense reference: wᵀΣw, Σv, Σ⁻¹v, the dense matrix itself
    assert model.variance(w) == pytest.approx(w @ S @ w, rel=1e-12)
    assert model.volatility(w) == pytest.approx(np.sqrt(252 * w @ S @ w), rel=1e-12)
    assert model.volatility(w, annualize=False) == pytest.approx(np.sqrt(w @ S @ w), rel=1e-12)
    np.testing.assert_allclose(model.covariance_dot(w), S @ w, rtol=1e-12, atol=1e-18)
    np.testing.assert_allclose(model.covariance_dot(V), S @ V, rtol=1e-12, atol=1e-18)
    np.testing.assert_allclose(model.solve(w), np.linalg.solve(S, w), rtol=1e-8)
    np.testing.assert_allclose(model.solve(V), np.linalg.solve(S, V), rtol=1e-8)
    np.testing.assert_allclose(model.covariance().to_numpy(), S, rtol=1e-14)
    np.testing.assert_allclose(model.factor_exposure(w).to_numpy(), model.exposures.to_numpy().T @ w)


def test_solve_with_singular_factor_covariance() -> None:
    # Woodbury in the U = B·L form needs no F⁻¹: a rank-deficient F must still solve exactly.
    base = random_model(seed=3)
    F = base.factor_covariance.to_numpy().copy()
    F[:, -1] = F[-1, :] = 0.0
    model = FactorModel(base.exposures, pd.DataFrame(F, index=base.factors, columns=base.factors), base.specific_variance)
    S = dense(model)
    v = np.arange(model.n_assets, dtype=float)
    np.testing.assert_allclose(model.solve(v), np.linalg.solve(S, v), rtol=1e-8)


def test_parameter_count_fact_of_the_trade() -> None:
    # Common practice (no source): 1,000 assets and 10 factors need 11,055 parameters; a sample
    # covariance needs N(N+1)/2 = 500,500.
    n, k = 1000, 10
    B = pd.DataFrame(np.ones((n, k)), index=[f"S{i}" for i in range(n)], columns=[f"f{j}" for j in range(k)])
    model = FactorModel(B, pd.DataFrame(np.eye(k), index=B.columns, columns=B.columns), pd.Series(1.0, index=B.index))
    assert model.n_parameters == 11_055
    assert n * (n + 1) // 2 == 500_500


def test_series_weights_missing_assets_are_zero(small_model: FactorModel) -> None:
    w = pd.Series({"A0003": 0.6, "A0007": 0.4})
    arr = np.zeros(small_model.n_assets)
    arr[3], arr[7] = 0.6, 0.4
    assert small_model.variance(w) == pytest.approx(small_model.variance(arr), rel=1e-14)


def test_unknown_assets_are_named(small_model: FactorModel) -> None:
    w = pd.Series({"A0003": 0.5, "ZZZ1": 0.2, "ZZZ2": 0.3})
    with pytest.raises(InputError, match=r"weights: assets not in the risk model: ZZZ1, ZZZ2"):
        small_model.variance(w)


def test_nan_weights_and_wrong_length(small_model: FactorModel) -> None:
    with pytest.raises(InputError, match=r"missing or infinite values for: A0001"):
        small_model.variance(pd.Series({"A0001": np.nan}))
    with pytest.raises(InputError, match=r"expected shape \(40,\), got \(3,\)"):
        small_model.variance(np.ones(3))


def test_subset_keeps_factor_structure(small_model: FactorModel) -> None:
    keep = ["A0005", "A0001", "A0010"]
    sub = small_model.subset(keep)
    S = dense(small_model)
    pos = [5, 1, 10]
    np.testing.assert_allclose(sub.covariance().to_numpy(), S[np.ix_(pos, pos)], rtol=1e-14)
    with pytest.raises(InputError, match="assets not in the model: NOPE"):
        small_model.subset(["NOPE"])


def test_dense_refused_above_limit() -> None:
    n = DENSE_LIMIT + 1
    B = pd.DataFrame(np.ones((n, 1)), index=[f"S{i}" for i in range(n)], columns=["market"])
    model = FactorModel(B, pd.DataFrame([[1.0]], index=["market"], columns=["market"]), pd.Series(1.0, index=B.index))
    with pytest.raises(ModelError, match="refusing to build a dense"):
        model.covariance()


def test_specific_share(small_model: FactorModel) -> None:
    S = dense(small_model)
    expected = small_model.specific_variance.to_numpy() / np.diag(S)
    np.testing.assert_allclose(small_model.specific_share().to_numpy(), expected, rtol=1e-12)


@pytest.mark.parametrize(
    ("mutate", "message"),
    [
        (lambda B, F, d: (B, F, d.where(d.index != "A0002", -1.0)), "negative specific variance for assets: A0002"),
        (lambda B, F, d: (B, F.rename(index={"f1": "zz"}, columns={"f1": "zz"}), d), "labels must match"),
        (lambda B, F, d: (B, F, d.drop("A0004")), r"missing: A0004"),
        (lambda B, F, d: (B.assign(f2=np.nan), F, d), r"NaN\) values in columns: f2"),
        (lambda B, F, d: (B, F - 10 * np.eye(len(F)), d), "not positive semi-definite"),
        (lambda B, F, d: (B.assign(f0="x"), F, d), "non-numeric columns: f0"),
    ],
    ids=["negative-d", "factor-labels", "missing-d", "nan-exposure", "not-psd", "non-numeric"],
)
def test_bad_models_are_rejected(small_model: FactorModel, mutate, message: str) -> None:
    B, F, d = mutate(small_model.exposures, small_model.factor_covariance, small_model.specific_variance)
    with pytest.raises(ModelError, match=message):
        FactorModel(B, F, d)


@pytest.mark.parametrize("file_format", ["parquet", "csv"])
def test_save_load_round_trip(tmp_path, small_model: FactorModel, file_format: str) -> None:
    target = small_model.save(tmp_path / "model", file_format=file_format)
    loaded = FactorModel.load(target)
    pd.testing.assert_frame_equal(loaded.exposures, small_model.exposures)
    pd.testing.assert_frame_equal(loaded.factor_covariance, small_model.factor_covariance)
    pd.testing.assert_series_equal(loaded.specific_variance, small_model.specific_variance, check_names=False)
    assert loaded.periods_per_year == small_model.periods_per_year
    with pytest.raises(InputError, match="already holds a model"):
        small_model.save(target)
    small_model.save(target, overwrite=True)
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_load_detects_tampering_and_bad_folders(tmp_path, small_model: FactorModel) -> None:
    target = small_model.save(tmp_path / "model", file_format="csv")
    with open(target / "specific_variance.csv", "a") as fh:
        fh.write("A9999,-1\n")
    with pytest.raises(InputError, match="do not match the manifest checksum"):
        FactorModel.load(target)
    with pytest.raises(InputError, match="manifest.json missing"):
        FactorModel.load(tmp_path)
    with pytest.raises(InputError, match="no such model folder"):
        FactorModel.load(tmp_path / "absent")
