"""CSV/Parquet tables read back by pandas/pyarrow, and the JSON document validated by jsonschema."""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from trimtab import FactorModel, InputError
from trimtab.attribution import attribute
from trimtab.report import CAUTION, JSON_SCHEMA, SCHEMA_VERSION, write_json, write_tables
from trimtab.report._files import atomic_write

from .conftest import StandInResult


def test_tables_round_trip_through_csv_and_parquet(result: StandInResult, tmp_path: Path) -> None:
    written = write_tables(result, tmp_path / "out")
    names = {p.name for p in written}
    for stem in ("headline", "trades", "constraints", "post_trade_by_asset", "pre_trade_by_factor", "objective",
                 "post_trade_by_sector", "pre_trade_by_country"):
        assert {f"{stem}.csv", f"{stem}.parquet"} <= names
    # Read back with pyarrow (parquet) and pandas' CSV reader.
    by_asset = pd.read_parquet(tmp_path / "out" / "post_trade_by_asset.parquet")
    pd.testing.assert_frame_equal(by_asset, result.post_trade.by_asset)
    book = pd.read_csv(tmp_path / "out" / "target_book.csv", index_col="asset")
    np.testing.assert_allclose(book["trade"], result.trades["trade"], rtol=1e-12)
    # trades.csv: only the names that trade, largest first (issue #13)
    trades = pd.read_csv(tmp_path / "out" / "trades.csv", index_col="asset")
    moved = result.trades[result.trades["trade"].abs() > 1e-8]
    assert set(trades.index) == set(moved.index)
    assert (trades["weight_change"].abs().diff().dropna() <= 0).all()
    assert (trades["side"] == np.where(trades["weight_change"] > 0, "buy", "sell")).all()
    assert not [p for p in (tmp_path / "out").iterdir() if p.name.endswith(".tmp")]
    assert oct((tmp_path / "out" / "trades.csv").stat().st_mode & 0o777) != oct(0o600)


def test_single_format_and_attribution_tables(report_model: FactorModel, tmp_path: Path) -> None:
    attr = attribute(report_model, pd.Series(1 / 60, index=report_model.assets))
    written = write_tables(attr, tmp_path, file_format="csv")
    assert sorted(p.name for p in written) == [
        "attribution_by_asset.csv", "attribution_by_factor.csv", "attribution_by_factor_group.csv", "headline.csv",
    ]
    groups = pd.read_csv(tmp_path / "attribution_by_factor_group.csv", index_col="group")
    assert groups["contribution"].sum() == pytest.approx(attr.risk, rel=1e-12)


def test_table_errors(result: StandInResult, tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"write_tables: formats must be among csv, parquet, got xlsx"):
        write_tables(result, tmp_path, formats=("csv", "xlsx"))
    target = tmp_path / "file"
    target.write_text("x")
    with pytest.raises(InputError, match=r"write_tables: out_dir is a file, expected a folder"):
        write_tables(result, target)


def test_failed_write_keeps_the_old_file(tmp_path: Path) -> None:
    target = tmp_path / "kept.txt"
    target.write_text("old")

    def broken(tmp: Path) -> None:
        tmp.write_text("half")
        raise OSError("disk full")

    with pytest.raises(OSError, match="disk full"):
        atomic_write(target, broken)
    assert target.read_text() == "old"
    assert os.listdir(tmp_path) == ["kept.txt"]
    with pytest.raises(InputError, match=r"report: folder does not exist"):
        atomic_write(tmp_path / "missing" / "x.json", broken)


def test_json_document_matches_its_schema(result: StandInResult, report_model: FactorModel, tmp_path: Path) -> None:
    import jsonschema  # reference validator for JSON Schema draft 2020-12

    path = write_json(result, tmp_path / "result.json")
    document = json.loads(path.read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(JSON_SCHEMA)
    jsonschema.validate(document, JSON_SCHEMA)
    assert document["schema_version"] == SCHEMA_VERSION and document["cautions"] == [CAUTION]
    assert document["kind"] == "rebalance" and document["risk_budget"]["cap"] == 0.03
    post = document["attribution"]["post_trade"]
    assert sum(row["contribution"] for row in post["by_asset"]) == pytest.approx(result.post_trade.risk, abs=1e-12)
    assert post["figures"]["risk"] == result.post_trade.risk
    assert len(document["target_book"]) == len(result.trades)
    assert len(document["trades"]) == int((result.trades["trade"].abs() > 1e-8).sum())
    by_sector = post["by_attribute"]["sector"]
    assert sum(row["contribution"] for row in by_sector) == pytest.approx(result.post_trade.risk, abs=1e-12)

    zero = attribute(report_model, pd.Series({"A0001": 0.5}), pd.Series({"A0001": 0.5}))
    text = write_json(zero, tmp_path / "zero.json").read_text(encoding="utf-8")
    # NaN is not JSON (RFC 8259): undefined figures must be written as null.
    document = json.loads(text, parse_constant=lambda name: pytest.fail(f"non-standard JSON constant {name}"))
    jsonschema.validate(document, JSON_SCHEMA)
    assert document["attribution"]["post_trade"]["is_zero_risk"] is True
    assert document["attribution"]["post_trade"]["by_asset"][0]["contribution"] is None
    assert document["attribution"]["pre_trade"] is None and document["trades"] is None

