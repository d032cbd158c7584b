"""Fitting from a config file: the same model as calling the estimator, and clear config errors."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm

from trimtab.errors import InputError, ScenarioError
from trimtab.model import fit_time_series
from trimtab.scenario import fit_model, load_fit_config


@pytest.fixture
def files(tmp_path: Path) -> Path:
    rng = np.random.default_rng(21)
    dates = pd.bdate_range("2023-01-02", periods=300)
    factors = pd.DataFrame(rng.normal(0, 0.01, (300, 2)), index=dates, columns=["market", "size"])
    betas = rng.normal(1.0, 0.3, (2, 8))
    returns = pd.DataFrame(factors.to_numpy() @ betas + rng.normal(0, 0.02, (300, 8)), index=dates, columns=[f"S{i}" for i in range(8)])
    (tmp_path / "data").mkdir()
    returns.rename_axis("date").to_csv(tmp_path / "data" / "returns.csv", float_format="%.17g")
    long = returns.stack().rename("return").rename_axis(["date", "asset"]).reset_index()
    long.to_parquet(tmp_path / "data" / "returns_long.parquet", index=False)
    factors.rename_axis("date").to_csv(tmp_path / "data" / "factors.csv", float_format="%.17g")
    return tmp_path


def config(folder: Path, text: str) -> Path:
    path = folder / "fit.yaml"
    path.write_text(text, encoding="utf-8")
    return path


def test_time_series_fit_from_files_matches_the_estimator_and_statsmodels(files: Path) -> None:
    path = config(
        files,
        "method: time_series\nreturns: data/returns_long.parquet\nfactor_returns: data/factors.csv\n"
        "factor_groups: {market: market, size: style}\n",
    )
    model = fit_model(load_fit_config(path), path)
    returns = pd.read_csv(files / "data" / "returns.csv", index_col="date", parse_dates=True)
    factors = pd.read_csv(files / "data" / "factors.csv", index_col="date", parse_dates=True)
    direct = fit_time_series(returns, factors)
    pd.testing.assert_frame_equal(model.exposures, direct.exposures, check_names=False)
    assert model.factor_groups == {"market": "market", "size": "style"}
    # statsmodels OLS with a constant gives the same slopes (reference library)
    ols = sm.OLS(returns["S3"].to_numpy(), sm.add_constant(factors.to_numpy())).fit()
    np.testing.assert_allclose(model.exposures.loc["S3"].to_numpy(), ols.params[1:], rtol=1e-8)


def test_fit_config_errors(files: Path) -> None:
    bad = config(files, "method: time_series\nreturns: data/returns.csv\nfactor_returns: data/factors.csv\noptions: {colour: red}\n")
    with pytest.raises(ScenarioError, match=r"fit\.yaml: options\.colour: not a setting of the time_series estimator"):
        fit_model(load_fit_config(bad), bad)
    groups = config(files, "method: time_series\nreturns: data/returns.csv\nfactor_returns: data/factors.csv\nfactor_groups: {value: style}\n")
    with pytest.raises(ScenarioError, match=r"fit\.yaml: factor_groups: unknown factors value; the model has market, size"):
        fit_model(load_fit_config(groups), groups)
    unknown = config(files, "method: time_series\nreturns: data/returns.csv\nfactor_returns: data/factors.csv\nwindow: 20\n")
    with pytest.raises(ScenarioError, match=r"fit\.yaml: window: unknown key; allowed here: description, exposure_columns"):
        load_fit_config(unknown)


def test_cross_section_and_statistical_fits_from_files(files: Path) -> None:
    from trimtab.model import fit_cross_section, fit_statistical

    rng = np.random.default_rng(5)
    characteristics = pd.DataFrame(
        {"size": rng.normal(size=8), "value": rng.normal(size=8), "industry": ["a", "b"] * 4, "note": list("xxxxxxxx")},
        index=pd.Index([f"S{i}" for i in range(8)], name="asset"),
    )
    characteristics.to_csv(files / "data" / "characteristics.csv")
    path = config(
        files,
        "method: cross_section\nreturns: data/returns.csv\nexposures: data/characteristics.csv\n"
        "exposure_columns: [size, value]\nindustry_column: industry\n",
    )
    model = fit_model(load_fit_config(path), path)
    returns = pd.read_csv(files / "data" / "returns.csv", index_col="date", parse_dates=True)
    direct = fit_cross_section(returns, characteristics[["size", "value"]], industry=characteristics["industry"])
    pd.testing.assert_frame_equal(model.factor_covariance, direct.factor_covariance)
    # a time-series-only setting is refused with its key
    bad = config(files, "method: cross_section\nreturns: data/returns.csv\nexposures: data/characteristics.csv\nhalf_life: 60\n")
    with pytest.raises(ScenarioError, match=r"fit\.yaml: half_life: not a setting of the cross_section estimator"):
        fit_model(load_fit_config(bad), bad)
    missing = config(files, "method: cross_section\nreturns: data/returns.csv\nexposures: data/characteristics.csv\nexposure_columns: [momentum]\n")
    with pytest.raises(InputError, match=r"characteristics\.csv: exposures file lacks columns momentum"):
        fit_model(load_fit_config(missing), missing)

    stat = config(files, "method: statistical\nreturns: data/returns.csv\nn_factors: 2\n")
    model = fit_model(load_fit_config(stat), stat)
    assert model.n_factors == 2
    pd.testing.assert_frame_equal(model.exposures, fit_statistical(returns, n_factors=2).exposures)


def test_require_names_what_is_missing() -> None:
    from trimtab.errors import TrimtabError
    from trimtab.scenario._fit import require

    assert require("trimtab.model", "fit_time_series") is fit_time_series
    with pytest.raises(TrimtabError, match=r"trimtab\.model\.fit_nothing is not available in this version of trimtab"):
        require("trimtab.model", "fit_nothing")
