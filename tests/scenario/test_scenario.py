"""A scenario's inputs read end to end: model folder or fit settings, alignment rules applied."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from tests.demo_helpers import make_demo_folder
from trimtab.errors import InputError
from trimtab.scenario import load_inputs, load_scenario


@pytest.fixture(scope="module")
def folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("demo"), n_assets=300, n_holdings=60)


def test_fit_settings_give_the_same_model_as_the_saved_folder(folder: Path) -> None:
    (folder / "fitted.yaml").write_text(
        "extends: base.yaml\nmodel:\n  fit: {method: time_series, returns: data/returns.parquet, "
        "factor_returns: data/factor_returns.csv, min_periods: 126}\noutput: {dir: elsewhere}\n",
        encoding="utf-8",
    )
    # the base's `model: model` string and the child's mapping do not merge: the child's replaces it
    scenario = load_scenario(folder / "fitted.yaml", deep=False)
    assert scenario.spec.model.path is None and scenario.spec.model.fit is not None
    assert scenario.output_dir == folder / "elsewhere"
    fitted = load_inputs(scenario)
    saved = load_inputs(load_scenario(folder / "base.yaml", deep=False))
    np.testing.assert_allclose(fitted.model.exposures.to_numpy(), saved.model.exposures.to_numpy(), rtol=1e-6, atol=1e-9)
    # holdings as shares at attribute prices, cash from the scenario: weights + cash/NAV = 1
    assert fitted.nav is not None
    assert fitted.holdings.sum() + 6e6 / fitted.nav == pytest.approx(1.0)
    assert fitted.rebalance_kwargs()["nav"] == fitted.nav


def test_unknown_holdings_stop_or_are_dropped(folder: Path) -> None:
    text = (folder / "data" / "holdings.csv").read_text(encoding="utf-8") + "NOTINMODEL,100\n"
    (folder / "data" / "holdings_extra.csv").write_text(text, encoding="utf-8")
    (folder / "data" / "attributes_extra.csv").write_text(
        (folder / "data" / "attributes.csv").read_text(encoding="utf-8") + "NOTINMODEL,Murmur Media,10.0,1000,5.0,1000000\n",
        encoding="utf-8",
    )
    child = (
        "extends: base.yaml\ndata:\n  holdings: {path: data/holdings_extra.csv}\n  attributes: data/attributes_extra.csv\n"
    )
    (folder / "extra.yaml").write_text(child, encoding="utf-8")
    with pytest.raises(InputError, match=r"holdings_extra\.csv: 1 holdings asset not in the risk model: NOTINMODEL"):
        load_inputs(load_scenario(folder / "extra.yaml", deep=False))
    (folder / "extra_drop.yaml").write_text(child + "  unknown_assets: drop\n", encoding="utf-8")
    inputs = load_inputs(load_scenario(folder / "extra_drop.yaml", deep=False))
    table = inputs.alignment.table
    row = table[(table["input"] == "holdings")].iloc[0]
    assert row["asset"] == "NOTINMODEL" and row["reason"] == "not in the risk model"
    assert row["weight"] == pytest.approx(100 * 10.0 / inputs.nav)
    assert "NOTINMODEL" not in inputs.holdings.index
    # the child kept the base's kind and cash (mappings merge key by key)
    assert inputs.scenario.spec.data.holdings.kind == "shares"


def test_no_held_asset_in_the_model(folder: Path) -> None:
    (folder / "data" / "holdings_none.csv").write_text("asset,weight\nNOTHERE,1.0\n", encoding="utf-8")
    (folder / "none.yaml").write_text(
        "extends: base.yaml\ndata:\n  holdings: {path: data/holdings_none.csv, kind: weights}\n  unknown_assets: drop\n",
        encoding="utf-8",
    )
    with pytest.raises(InputError, match=r"holdings_none\.csv: no held asset is in the risk model"):
        load_inputs(load_scenario(folder / "none.yaml", deep=False))
