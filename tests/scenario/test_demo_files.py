"""The demo's data files: typed dates in Parquet, plain ISO dates in CSV, and the loaders read them back."""

from __future__ import annotations

from pathlib import Path

import pandas as pd
import pytest

from trimtab.demo import make_demo_fund
from trimtab.scenario import load_returns, write_demo
from trimtab.scenario._schema import ReturnsFile


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory) -> tuple[object, Path]:
    fund = make_demo_fund(n_assets=600, n_holdings=120, n_days=300, seed=5)
    folder = tmp_path_factory.mktemp("demo_files")
    write_demo(fund, folder)
    return fund, folder


def test_parquet_dates_are_datetimes(written: tuple[object, Path]) -> None:
    fund, folder = written
    raw = pd.read_parquet(folder / "data" / "returns.parquet")
    # A user reading the file with pandas gets dates, not text.
    assert pd.api.types.is_datetime64_any_dtype(raw["date"]), raw["date"].dtype
    assert (pd.DatetimeIndex(raw["date"]) == pd.DatetimeIndex(fund.returns.index)).all()  # type: ignore[attr-defined]
    for path in folder.rglob("*.parquet"):
        frame = pd.read_parquet(path)
        for column in frame.columns:
            if "date" in str(column).lower():
                assert pd.api.types.is_datetime64_any_dtype(frame[column]), (path.name, column)


def test_loaders_read_the_demo_files_back(written: tuple[object, Path]) -> None:
    fund, folder = written
    returns = load_returns(ReturnsFile(path=str(folder / "data" / "returns.parquet")))
    expected = fund.returns.copy()  # type: ignore[attr-defined]
    expected.index = pd.DatetimeIndex(expected.index)
    expected.index.freq = None
    pd.testing.assert_frame_equal(returns, expected.rename_axis(None), check_freq=False, check_names=False,
                                  check_index_type=False)
    factors = load_returns(ReturnsFile(path=str(folder / "data" / "factor_returns.csv")), what="factor returns")
    assert isinstance(factors.index, pd.DatetimeIndex)
    assert factors.index.equals(pd.DatetimeIndex(fund.factor_returns.index))  # type: ignore[attr-defined]
    # CSV dates are written as plain YYYY-MM-DD text (no time part)
    first = (folder / "data" / "factor_returns.csv").read_text(encoding="utf-8").splitlines()[1].split(",")[0]
    assert first == fund.factor_returns.index[0].strftime("%Y-%m-%d")  # type: ignore[attr-defined]
