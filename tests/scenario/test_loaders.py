"""Data-file readers: wide and long returns, holdings as weights or shares, series, attributes."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from trimtab.errors import DataWarning, InputError
from trimtab.scenario import load_attributes, load_holdings, load_returns, load_series, read_table
from trimtab.scenario._schema import AttributesFile, HoldingsFile, ReturnsFile, SeriesFile


@pytest.fixture
def wide() -> pd.DataFrame:
    rng = np.random.default_rng(11)
    dates = pd.bdate_range("2024-01-01", periods=6)
    frame = pd.DataFrame(rng.normal(0, 0.01, (6, 3)), index=dates, columns=["AAA", "BBB", "CCC"])
    frame.iloc[0, 2] = np.nan  # a stock listed late
    return frame


def test_wide_csv_long_csv_and_parquet_agree(tmp_path: Path, wide: pd.DataFrame) -> None:
    wide.rename_axis("date").to_csv(tmp_path / "wide.csv", float_format="%.17g")
    wide.rename_axis("date").reset_index().to_parquet(tmp_path / "wide.parquet", index=False)
    long = wide.stack().rename("return").rename_axis(["date", "asset"]).reset_index()
    long.sample(frac=1.0, random_state=1).to_csv(tmp_path / "long.csv", index=False, float_format="%.17g")
    a = load_returns(ReturnsFile(path=str(tmp_path / "wide.csv")))
    b = load_returns(ReturnsFile(path=str(tmp_path / "wide.parquet")))
    c = load_returns(ReturnsFile(path=str(tmp_path / "long.csv")))
    expected = wide.copy()
    expected.index.freq = None
    pd.testing.assert_frame_equal(a, expected, check_freq=False)
    pd.testing.assert_frame_equal(b, expected, check_freq=False)
    pd.testing.assert_frame_equal(c, expected, check_freq=False)  # the missing (date, asset) row is NaN again


@pytest.mark.parametrize("kind", ["timestamp", "date32", "text", "long timestamp"])
def test_parquet_dates_as_timestamps_dates_or_text(tmp_path: Path, wide: pd.DataFrame, kind: str) -> None:
    # Parquet stores dates typed (timestamp or date32, Apache Parquet logical types) or as text: all read alike.
    frame = wide.rename_axis("date").reset_index()
    if kind == "date32":
        frame["date"] = frame["date"].dt.date
    elif kind == "text":
        frame["date"] = frame["date"].dt.strftime("%Y-%m-%d")
    layout = {}
    if kind == "long timestamp":
        frame = wide.stack().rename("return").rename_axis(["date", "asset"]).reset_index()
        layout = {"layout": "long"}
    frame.to_parquet(tmp_path / "r.parquet", index=False)
    back = load_returns(ReturnsFile(path=str(tmp_path / "r.parquet"), **layout))
    expected = wide.copy()
    expected.index.freq = None
    pd.testing.assert_frame_equal(back, expected, check_freq=False, check_index_type=False)
    assert isinstance(back.index, pd.DatetimeIndex)


def test_long_file_with_own_column_names(tmp_path: Path) -> None:
    pd.DataFrame({"day": ["2024-01-02", "2024-01-02", "2024-01-03"], "id": ["X", "Y", "X"], "r": [0.01, 0.02, -0.01]}).to_csv(
        tmp_path / "r.csv", index=False
    )
    spec = ReturnsFile(path=str(tmp_path / "r.csv"), layout="long", date_column="day", asset_column="id", value_column="r")
    frame = load_returns(spec)
    assert frame.shape == (2, 2)
    assert frame.loc[pd.Timestamp("2024-01-03"), "X"] == -0.01
    assert np.isnan(frame.loc[pd.Timestamp("2024-01-03"), "Y"])


@pytest.mark.parametrize(
    ("content", "spec", "message"),
    [
        ("when,AAA\n2024-01-02,0.1\n", {}, r"r\.csv: returns file lacks the date column 'date'; found columns: when, AAA \(set date_column"),
        ("date,AAA\n2024-01-02,0.1\nyesterday,0.2\n", {}, r"returns column 'date' has entries that are not dates: yesterday"),
        ("date,AAA\n2024-01-02,0.1\n2024-01-02,0.2\n", {}, r"returns file repeats dates: 2024-01-02"),
        ("date,AAA\n2024-01-02,abc\n", {}, r"returns column 'AAA' has values that are not numbers: abc"),
        ("date,AAA\n2024-01-02,inf\n", {}, r"returns column 'AAA' has infinite values"),
        ("date,asset,return\n2024-01-02,A,0.1\n2024-01-02,A,0.2\n", {}, r"1 repeated \(date, asset\) rows, first 2024-01-02 A"),
        ("date,asset,value\n2024-01-02,A,0.1\n", {"layout": "long"}, r"returns file lacks column 'return'.*a long file needs date, asset, return"),
        ("date\n2024-01-02\n", {}, r"returns file has a date column but no return columns"),
        ("date,AAA\n", {}, r"returns file has a header but no rows"),
        ("", {}, r"r\.csv: the returns file is empty"),
    ],
)
def test_returns_errors(tmp_path: Path, content: str, spec: dict[str, str], message: str) -> None:
    (tmp_path / "r.csv").write_text(content, encoding="utf-8")
    with pytest.raises(InputError, match=message):
        load_returns(ReturnsFile(path=str(tmp_path / "r.csv"), **spec))


def test_read_table_errors(tmp_path: Path) -> None:
    with pytest.raises(InputError, match=r"gone\.csv: alpha file not found"):
        read_table(tmp_path / "gone.csv", what="alpha")
    with pytest.raises(InputError, match=r"is a folder; expected a alpha file"):
        read_table(tmp_path, what="alpha")
    (tmp_path / "a.xlsx").write_bytes(b"PK")
    with pytest.raises(InputError, match=r"a\.xlsx: cannot tell the alpha file's format from extension '\.xlsx'"):
        read_table(tmp_path / "a.xlsx", what="alpha")
    (tmp_path / "bad.parquet").write_bytes(b"not parquet at all")
    with pytest.raises(InputError, match=r"bad\.parquet: could not read the alpha file as PARQUET"):
        read_table(tmp_path / "bad.parquet", what="alpha")
    (tmp_path / "bad.csv").write_bytes(b'a,b\n1,2\n"3,4\n')
    with pytest.raises(InputError, match=r"bad\.csv: could not read the alpha file as CSV"):
        read_table(tmp_path / "bad.csv", what="alpha")
    (tmp_path / "latin.csv").write_bytes("asset,alpha\n\xe9,1\n".encode("latin-1"))
    with pytest.raises(InputError, match=r"latin\.csv: could not read the alpha file as CSV"):
        read_table(tmp_path / "latin.csv", what="alpha")


def test_holdings_as_weights_and_as_shares(tmp_path: Path) -> None:
    (tmp_path / "w.csv").write_text("asset,weight\nAAA,0.6\nBBB,0.4\n", encoding="utf-8")
    book = load_holdings(HoldingsFile(path=str(tmp_path / "w.csv"), nav=1e6))
    assert book.weights.to_dict() == {"AAA": 0.6, "BBB": 0.4} and book.nav == 1e6
    # shares with prices in the file: weight = shares·price / (Σ shares·price + cash)
    (tmp_path / "s.csv").write_text("asset,shares,price\nAAA,100,10\nBBB,50,20\n", encoding="utf-8")
    book = load_holdings(HoldingsFile(path=str(tmp_path / "s.csv"), kind="shares", cash=2000))
    assert book.nav == 4000.0
    assert book.weights.to_dict() == {"AAA": 0.25, "BBB": 0.25}
    # prices from the attributes file, NAV given
    (tmp_path / "s2.csv").write_text("asset,shares\nAAA,100\n", encoding="utf-8")
    attrs = pd.DataFrame({"price": [10.0, 20.0]}, index=["AAA", "BBB"])
    book = load_holdings(HoldingsFile(path=str(tmp_path / "s2.csv"), kind="shares", nav=2000), attrs)
    assert book.weights.to_dict() == {"AAA": 0.5}
    assert book.prices is not None and book.prices.to_dict() == {"AAA": 10.0}


def test_holdings_errors(tmp_path: Path) -> None:
    (tmp_path / "s.csv").write_text("asset,shares\nAAA,100\nZZZ,5\n", encoding="utf-8")
    spec = HoldingsFile(path=str(tmp_path / "s.csv"), kind="shares")
    with pytest.raises(InputError, match=r"s\.csv: holdings given as shares need prices: add a 'price' column to this file or give an attributes file"):
        load_holdings(spec)
    attrs = pd.DataFrame({"price": [10.0]}, index=["AAA"])
    with pytest.raises(InputError, match=r"s\.csv: no price for held assets ZZZ"):
        load_holdings(spec, attrs)
    (tmp_path / "p.csv").write_text("asset,shares,price\nAAA,100,0\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"p\.csv: prices must be positive; not so for AAA"):
        load_holdings(HoldingsFile(path=str(tmp_path / "p.csv"), kind="shares"))
    (tmp_path / "w.csv").write_text("asset,wt\nAAA,1\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"w\.csv: holdings file lacks column 'weight'; found columns: asset, wt \(holdings as weights need"):
        load_holdings(HoldingsFile(path=str(tmp_path / "w.csv")))
    (tmp_path / "d.csv").write_text("asset,weight\nAAA,0.5\nAAA,0.5\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"d\.csv: holdings file lists these assets more than once: AAA"):
        load_holdings(HoldingsFile(path=str(tmp_path / "d.csv")))
    (tmp_path / "n.csv").write_text("asset,weight\nAAA,\nBBB,0.5\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"n\.csv: holdings column 'weight' is empty for assets: AAA"):
        load_holdings(HoldingsFile(path=str(tmp_path / "n.csv")))
    (tmp_path / "e.csv").write_text("asset,weight\n,0.5\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"e\.csv: holdings column 'asset' has empty asset ids on lines 2"):
        load_holdings(HoldingsFile(path=str(tmp_path / "e.csv")))


def test_series_and_attributes(tmp_path: Path) -> None:
    (tmp_path / "a.csv").write_text("ticker,score,alpha\nAAA,1.5,0.02\nBBB,-1,-0.01\n", encoding="utf-8")
    alpha = load_series(SeriesFile(path=str(tmp_path / "a.csv"), asset_column="ticker"), "alpha", "alpha")
    assert alpha.to_dict() == {"AAA": 0.02, "BBB": -0.01}
    # issue #20: a column of scores (spread 125%) is not alpha as a fraction; declared percent is divided by 100
    with pytest.raises(InputError, match=r"a\.csv: alpha looks like percent, not annual fractions: its spread across assets is 1\.25 .*declare unit: percent"):
        load_series(SeriesFile(path=str(tmp_path / "a.csv"), asset_column="ticker", column="score"), "alpha", "alpha")
    with pytest.warns(DataWarning, match=r"a\.csv: alpha read as percent \(unit: percent\) and divided by 100"):
        score = load_series(SeriesFile(path=str(tmp_path / "a.csv"), asset_column="ticker", column="score", unit="percent"), "alpha", "alpha")
    assert score.to_dict() == {"AAA": 0.015, "BBB": -0.01}
    with pytest.raises(InputError, match=r"a\.csv: alpha file lacks column 'asset'; found columns: ticker, score, alpha \(set column"):
        load_series(SeriesFile(path=str(tmp_path / "a.csv")), "alpha", "alpha")
    (tmp_path / "attr.csv").write_text("asset,industry,price\n7,Orchard Foods,10\nBBB,Murmur Media,20\n", encoding="utf-8")
    attrs = load_attributes(AttributesFile(path=str(tmp_path / "attr.csv")))
    assert list(attrs.index) == ["7", "BBB"]  # ids are text even when they look like numbers
    assert attrs.loc["BBB", "industry"] == "Murmur Media"


def test_book_without_value(tmp_path: Path) -> None:
    (tmp_path / "z.csv").write_text("asset,shares,price\nAAA,0,10\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"z\.csv: the book's value Σ shares·price \+ cash is 0; expected a positive, finite NAV"):
        load_holdings(HoldingsFile(path=str(tmp_path / "z.csv"), kind="shares"))
