"""Historical replay against a brute-force search and direct sums; the factor history saved with the model."""

from __future__ import annotations

import json
import shutil

import numpy as np
import pandas as pd
import pytest

import trimtab
from trimtab import FactorModel, fit_cross_section, fit_time_series
from trimtab.errors import InputError
from trimtab.stresstest import worst_windows


def brute_force_worst(series: list[float], length: int, k: int) -> list[int]:
    """The same definition written naively: every window summed in a loop; repeatedly take the lowest
    sum (earliest on ties) among the windows that overlap none already taken."""
    n = len(series)
    sums = {j: sum(series[j : j + length]) for j in range(n - length + 1)}
    chosen: list[int] = []
    while len(chosen) < k:
        free = [j for j in sums if all(j + length <= c or c + length <= j for c in chosen)]
        if not free:
            break
        chosen.append(min(free, key=lambda j: (sums[j], j)))
    return chosen


@pytest.mark.parametrize("seed", range(6), ids=[f"seed{s}" for s in range(6)])
@pytest.mark.parametrize(("length", "k"), [(1, 3), (5, 4), (21, 3), (40, 10)], ids=["L1", "L5", "L21", "L40-many"])
def test_worst_windows_match_brute_force(seed, length, k):
    rng = np.random.default_rng(seed)
    series = rng.normal(0.0, 0.01, 120)
    assert worst_windows(series, length, k) == brute_force_worst(list(series), length, k)


def test_the_worst_window_is_the_global_minimum():
    rng = np.random.default_rng(3)
    series = rng.normal(0.0, 0.01, 300)
    (j,) = worst_windows(series, 17, 1)
    assert series[j : j + 17].sum() == pytest.approx(min(series[i : i + 17].sum() for i in range(284)))


@pytest.fixture
def fitted():
    rng = np.random.default_rng(0)
    dates = pd.date_range("2015-01-31", periods=120, freq="ME")
    f = pd.DataFrame(rng.normal(0.005, [0.045, 0.02, 0.025], (120, 3)), index=dates, columns=["mkt", "smb", "hml"])
    B = rng.normal([1.0, 0.0, 0.0], 0.4, (30, 3))
    r = pd.DataFrame(f.to_numpy() @ B.T + rng.normal(0, 0.03, (120, 30)), index=dates, columns=[f"S{i:02d}" for i in range(30)])
    model = fit_time_series(r, f)
    w = pd.Series(rng.dirichlet(np.ones(30)), index=model.assets)
    b = pd.Series(1.0 / 30, index=model.assets)
    return model, f, w, b


def test_replay_sums_factor_returns_over_the_window(fitted):
    model, f, w, b = fitted
    result = trimtab.replay(model, w, benchmark=b, windows={"2017": ("2017-01-01", "2017-12-31")})
    rows = f.loc["2017"]
    x = model.exposures.T.to_numpy() @ w.to_numpy()
    xa = model.exposures.T.to_numpy() @ (w - b).to_numpy()
    row = result.windows.loc["2017"]
    assert row["n_periods"] == 12
    assert row["book"] == pytest.approx(float(x @ rows.sum().to_numpy()), rel=1e-12)
    assert row["active"] == pytest.approx(float(xa @ rows.sum().to_numpy()), rel=1e-12)
    d = model.specific_variance.to_numpy()
    assert row["specific_band_book"] == pytest.approx(np.sqrt(12 * d @ w.to_numpy() ** 2))
    np.testing.assert_allclose(result.contributions.sum(axis=1), result.windows["book"], rtol=1e-12)


def test_replay_finds_the_worst_windows_for_book_and_active(fitted):
    model, f, w, b = fitted
    result = trimtab.replay(model, w, benchmark=b, length=3, k=4)
    x = model.exposures.T.to_numpy() @ w.to_numpy()
    book_series = list(f.to_numpy() @ x)
    expected = brute_force_worst(book_series, 3, 4)
    found = result.windows[result.windows["found"] == "worst for book"]
    assert [f.index.get_loc(s) for s in found["start"]] == expected
    assert (found["n_periods"] == 3).all()
    assert found["book"].is_monotonic_increasing
    assert (result.windows["found"] == "worst for active").sum() == 4
    assert "worst book #1" in str(result)


def test_history_is_saved_and_loaded_with_the_model(fitted, tmp_path):
    model, f, w, b = fitted
    model.save(tmp_path / "m")
    loaded = FactorModel.load(tmp_path / "m")
    pd.testing.assert_frame_equal(loaded.factor_history, model.factor_history, check_freq=False)
    a = trimtab.replay(model, w, length=6, k=2).windows
    c = trimtab.replay(loaded, w, length=6, k=2).windows
    pd.testing.assert_frame_equal(a, c)


def test_an_older_model_without_history_still_loads_and_replay_says_so(fitted, tmp_path):
    model, f, w, b = fitted
    model.save(tmp_path / "m", file_format="csv")
    old = tmp_path / "old"
    shutil.copytree(tmp_path / "m", old)
    manifest = json.loads((old / "manifest.json").read_text())
    del manifest["tables"]["factor_returns"]
    del manifest["tables"]["fit_assets"]
    (old / "manifest.json").write_text(json.dumps(manifest))
    (old / "factor_returns.csv").unlink()
    loaded = FactorModel.load(old)
    assert loaded.factor_history is None
    with pytest.raises(InputError, match="the model carries no factor-return history"):
        trimtab.replay(loaded, w, length=6)
    # the history can be passed instead
    assert len(trimtab.replay(loaded, w, length=6, k=1, factor_returns=f).windows) == 1


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({}, "give windows"),
        ({"length": 0}, "length must be a whole number"),
        ({"length": 500}, "longer than the history"),
        ({"length": 3, "k": 0}, "k must be a whole number"),
        ({"windows": {"x": ("2030-01-01", "2030-02-01")}}, "no dates of the history"),
        ({"windows": {"x": "2017"}}, r"expected \(start, end\)"),
        ({"length": 3, "factor_returns": pd.DataFrame({"mkt": [0.1]})}, r"no column for factor\(s\) smb, hml"),
    ],
    ids=["nothing", "zero-length", "too-long", "zero-k", "empty-range", "not-a-pair", "missing-factor"],
)
def test_bad_replay_input(fitted, kwargs, match):
    model, f, w, b = fitted
    with pytest.raises(InputError, match=match):
        trimtab.replay(model, w, **kwargs)


def test_every_estimator_keeps_its_history_for_replay(tmp_path):
    # statistical: the factor scores; cross section: the estimated factor returns (time series above)
    rng = np.random.default_rng(4)
    dates = pd.date_range("2016-01-31", periods=96, freq="ME")
    assets = [f"S{i:02d}" for i in range(40)]
    chars = pd.DataFrame({"size": rng.normal(size=40), "value": rng.normal(size=40)}, index=assets)
    f = rng.normal(0.0, [0.04, 0.01, 0.01], (96, 3))
    r = pd.DataFrame(f[:, :1] + f[:, 1:] @ chars.to_numpy().T + rng.normal(0, 0.02, (96, 40)), index=dates, columns=assets)
    w = pd.Series(1.0 / 40, index=assets)
    for model in (trimtab.fit_statistical(r, n_factors=2), fit_cross_section(r, chars)):
        history = model.factor_history
        assert history is not None and list(history.columns) == list(model.factors) and len(history) == 96
        model.save(tmp_path / model.fit_report.method)
        loaded = FactorModel.load(tmp_path / model.fit_report.method)
        pd.testing.assert_frame_equal(loaded.factor_history, history, check_freq=False)
        found = trimtab.replay(loaded, w, length=3, k=1).windows
        start = history.index.get_loc(found["start"].iloc[0])
        x = model.exposures.T.to_numpy() @ w.to_numpy()
        assert found["book"].iloc[0] == pytest.approx(float(x @ history.iloc[start : start + 3].sum().to_numpy()), rel=1e-12)
