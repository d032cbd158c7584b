"""The hostile-input catalogue, units and books (issue #20): returns, factor returns and alpha in percent,
books that are not weights of NAV, shock moves of 100% or more and dated weights that do not match the
returns. Each case: its exit code, one stderr line naming the file, nothing written, every input unchanged.
Both paths of every unit rule are tested: fractions pass, percent is caught, declared percent is converted.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tests.scenario.test_input_catalogue import (
    BAD_INPUT,
    assert_one_line,
    both,
    demo_source,  # noqa: F401 - the module's demo folder
    edit,
    run_case,
    runner,
    work,  # noqa: F401 - a private copy of it per test
    write,
)
from trimtab.cli import app


def times_100(file: str, column: str | None = None) -> Callable[[Path], None]:
    """Multiply every number of a data file (or one column) by 100, as a percent file would hold them."""

    def change(work: Path) -> None:
        path = work / file
        frame = pd.read_parquet(path) if path.suffix == ".parquet" else pd.read_csv(path)
        columns = [column] if column else [c for c in frame.columns if c not in ("date", "asset")]
        frame[columns] = frame[columns] * 100
        frame.to_parquet(path) if path.suffix == ".parquet" else frame.to_csv(path, index=False)

    return change


def weights_file(name: str, scale: float = 1.0) -> Callable[[Path], None]:
    """The benchmark's weights (summing to 1) times ``scale``, as an ``asset, weight`` holdings file."""

    def change(work: Path) -> None:
        frame = pd.read_csv(work / "data" / "benchmark.csv")
        frame["weight"] = frame["weight"] * scale
        frame.to_csv(work / name, index=False)

    return change


def dated_weights(name: str, dates: str, nan: bool = False) -> Callable[[Path], None]:
    """The benchmark held on two dates: ``inside`` (return dates near the end) or ``after`` (2040)."""

    def change(work: Path) -> None:
        bench = pd.read_csv(work / "data" / "benchmark.csv").set_index("asset")["weight"]
        returns = pd.read_parquet(work / "data" / "returns.parquet")
        index = pd.DatetimeIndex(returns["date"].iloc[[-40, -20]]) if dates == "inside" else pd.DatetimeIndex(["2040-01-31", "2040-02-29"])
        frame = pd.DataFrame([bench, bench], index=index.rename("date"))
        if nan:
            frame.iloc[0, 1] = math.nan
        frame.to_csv(work / name)

    return change


MODEL = ["-m", "model"]
ATTRIBUTE = ["attribute-returns", *MODEL, "--returns", "data/returns.parquet", "--benchmark", "data/benchmark.csv"]

# (id, change to the demo folder, command after `trimtab`, exit code, pattern of the one stderr line)
CASES: list[tuple[str, Callable[[Path], None], list[str], int, str]] = [
    # ---------------------------------------------------------------- returns and alpha in percent
    ("units-returns-in-percent", times_100("data/returns.parquet"), ["fit", "fit.yaml", "--out", "m2"], BAD_INPUT,
     r"data/returns\.parquet: returns look like percent, not fractions: their typical size is [\d.]+ a year .*declare unit: percent$"),
    ("units-factor-returns-in-percent", times_100("data/factor_returns.csv"), ["fit", "fit.yaml", "--out", "m2"], BAD_INPUT,
     r"data/factor_returns\.csv: factor returns look like percent, not fractions"),
    ("units-returns-in-percent-fitted-on-the-fly", both(times_100("data/returns.parquet"), edit("model: model", "model: {fit: {method: statistical, returns: data/returns.parquet}}")),
     ["check", "base.yaml"], BAD_INPUT, r"data/returns\.parquet: returns look like percent"),
    ("units-alpha-in-percent", times_100("data/alpha.csv", "alpha"), ["check", "base.yaml"], BAD_INPUT,
     r"data/alpha\.csv: alpha looks like percent, not annual fractions: its spread across assets is [\d.]+ .*declare unit: percent$"),
    ("units-alpha-in-percent-rebalance", times_100("data/alpha.csv", "alpha"), ["rebalance", "base.yaml"], BAD_INPUT,
     r"data/alpha\.csv: alpha looks like percent"),
    ("units-unknown-unit", edit("alpha: data/alpha.csv", "alpha: {path: data/alpha.csv, unit: basis_points}"), ["check", "base.yaml"], BAD_INPUT,
     r"data\.alpha\.unit: expected 'fraction' or 'percent', got 'basis_points'"),
    ("units-returns-for-attribution-in-percent", both(times_100("data/returns.parquet"), weights_file("w.csv")),
     [*ATTRIBUTE[:5], "--holdings", "w.csv"], BAD_INPUT, r"data/returns\.parquet: returns look like percent"),
    # ---------------------------------------------------------------- books: one rule for every command
    ("book-in-percent-risk", weights_file("w.csv", 97.0), ["risk", *MODEL, "--holdings", "w.csv"], BAD_INPUT,
     r"w\.csv: holdings weights sum to 97, more than the whole NAV \(1\); weights are fractions of NAV \(0\.05 is 5%\); these look like percent$"),
    ("book-in-percent-stress", weights_file("w.csv", 97.0), ["stress", *MODEL, "--holdings", "w.csv", "--shocks", "shocks.yaml"], BAD_INPUT,
     r"w\.csv: holdings weights sum to 97"),
    ("book-summing-to-2-stress", weights_file("w.csv", 2.0), ["stress", *MODEL, "--holdings", "w.csv", "--shocks", "shocks.yaml"], BAD_INPUT,
     r"w\.csv: holdings weights sum to 2, more than the whole NAV \(1\)"),
    ("book-summing-to-2-replay", weights_file("w.csv", 2.0), ["replay", *MODEL, "--holdings", "w.csv", "--length", "21"], BAD_INPUT,
     r"w\.csv: holdings weights sum to 2"),
    ("book-summing-to-2-rebalance", both(weights_file("w.csv", 2.0), edit("{path: data/holdings.csv, kind: shares, cash: 6000000}", "w.csv")),
     ["check", "base.yaml"], BAD_INPUT, r"w\.csv: holdings weights sum to 2"),
    ("book-gross-above-3", write("asset,weight\n" + "".join(f"{a},{w}\n" for a, w in [("A", 2.0), ("B", -1.5)]), "w.csv"),
     ["risk", *MODEL, "--holdings", "w.csv"], BAD_INPUT, r"w\.csv: holdings weights have gross Σ\|w\| 3\.5, above the 3 a book may hold"),
    ("book-benchmark-in-percent", weights_file("b.csv", 100.0), ["risk", *MODEL, "--holdings", "data/benchmark.csv", "--benchmark", "b.csv"], BAD_INPUT,
     r"b\.csv: benchmark weights sum to 100"),
    # ---------------------------------------------------------------- shocks
    ("shock-move-in-percent", write("shocks:\n  crash: {market: -10}\n", "s.yaml"), ["stress", *MODEL, "--holdings", "data/benchmark.csv", "--shocks", "s.yaml"],
     BAD_INPUT, r"s\.yaml: shocks\.crash\.factors\.market: a move of -10 is -1000%"),
    ("shock-forms-mixed", write("shocks:\n  crash: {factors: {market: -0.1}, size: -0.1}\n", "s.yaml"),
     ["stress", *MODEL, "--holdings", "data/benchmark.csv", "--shocks", "s.yaml"], BAD_INPUT, r"s\.yaml: shocks\.crash\.size: unknown key"),
    # ---------------------------------------------------------------- attribute-returns: weights and periods
    ("weights-dated-after-every-return", dated_weights("w.csv", "after"), [*ATTRIBUTE, "--weights", "w.csv"], BAD_INPUT,
     r"w\.csv: weights dated 2040-01-31, 2040-02-29 are not dates of the returns \(\d{4}-\d\d-\d\d to \d{4}-\d\d-\d\d\)"),
    ("weights-missing-for-early-periods", dated_weights("w.csv", "inside"), [*ATTRIBUTE, "--weights", "w.csv"], BAD_INPUT,
     r"w\.csv: no weights for the \d+ periods dated \d{4}-\d\d-\d\d to \d{4}-\d\d-\d\d: the first weights row is dated"),
    ("weights-nan", dated_weights("w.csv", "inside", nan=True), [*ATTRIBUTE, "--weights", "w.csv"], BAD_INPUT,
     r"w\.csv: weights file has empty or NaN weights \(write 0 for no position\): \w+ on \d{4}-\d\d-\d\d$"),
]


@pytest.mark.parametrize(("change", "command", "code", "pattern"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_catalogue(work: Path, monkeypatch: pytest.MonkeyPatch, change: Callable[[Path], None], command: list[str], code: int, pattern: str) -> None:
    run_case(work, monkeypatch, change, command, code, pattern)

# ---------------------------------------------------------------------- the other two paths
def test_fractions_pass_and_declared_percent_is_converted(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(work)
    assert runner.invoke(app, ["fit", "fit.yaml", "--out", "m_fraction"]).exit_code == 0
    times_100("data/returns.parquet")(work)
    times_100("data/factor_returns.csv")(work)
    edit("returns: data/returns.parquet", "returns: {path: data/returns.parquet, unit: percent}", "fit.yaml")(work)
    edit("factor_returns: data/factor_returns.csv", "factor_returns: {path: data/factor_returns.csv, unit: percent}", "fit.yaml")(work)
    result = runner.invoke(app, ["fit", "fit.yaml", "--out", "m_percent"])
    assert result.exit_code == 0, result.stderr
    assert "returns.parquet: returns read as percent (unit: percent) and divided by 100" in result.stderr
    assert "factor_returns.csv: factor returns read as percent (unit: percent) and divided by 100" in result.stderr
    fraction = pd.read_parquet(work / "m_fraction" / "factor_covariance.parquet")
    percent = pd.read_parquet(work / "m_percent" / "factor_covariance.parquet")
    np.testing.assert_allclose(percent.select_dtypes("number").to_numpy(), fraction.select_dtypes("number").to_numpy(), rtol=1e-9)  # ×100 then ÷100: the same model


def test_declared_percent_alpha_gives_the_fraction_run(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(work)
    plain = runner.invoke(app, ["--json", "check", "base.yaml"])
    assert plain.exit_code == 0, plain.stderr
    times_100("data/alpha.csv", "alpha")(work)
    edit("alpha: data/alpha.csv", "alpha: {path: data/alpha.csv, unit: percent}")(work)
    declared = runner.invoke(app, ["--json", "check", "base.yaml"])
    assert declared.exit_code == 0, declared.stderr
    assert "alpha.csv: alpha read as percent (unit: percent) and divided by 100" in declared.stderr


def test_stress_limit_takes_the_short_shock_spelling(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(work)
    edit("  turnover: {max: 0.25}", "  turnover: {max: 0.25}\n  stress_loss: {shocks: {crash: {market: -0.1}}, max: 0.2}")(work)
    result = runner.invoke(app, ["check", "base.yaml"])
    assert result.exit_code == 0, result.stderr


# ---------------------------------------------------------------------- the Python API, same rules
def _model():  # type: ignore[no-untyped-def]
    from tests.conftest import random_model

    return random_model()


def test_python_stress_refuses_a_move_of_100_percent() -> None:
    import trimtab

    model = _model()
    book = pd.Series(1 / model.n_assets, index=model.assets)
    factor = str(model.factors[0])
    with pytest.raises(trimtab.InputError, match=rf"^stress: shocks: crash\.{factor}: a move of -10 is -1000%"):
        trimtab.stress(model, book, {"crash": {factor: -10}})
    with pytest.raises(trimtab.InputError, match=r"^stress: holdings weights sum to 2"):
        trimtab.stress(model, book * 2, {"crash": {factor: -0.1}})


def test_python_stress_takes_both_shock_spellings() -> None:
    import trimtab

    model = _model()
    book = pd.Series(1 / model.n_assets, index=model.assets)
    factor, asset = str(model.factors[0]), model.assets[0]
    short = trimtab.stress(model, book, {"crash": {factor: -0.1}}, specific={"crash": {asset: -0.2}})
    long = trimtab.stress(model, book, {"crash": {"factors": {factor: -0.1}, "specific": {asset: -0.2}}})
    pd.testing.assert_frame_equal(short.returns, long.returns)


def test_python_fit_refuses_percent_returns() -> None:
    import trimtab

    rng = np.random.default_rng(20)
    dates = pd.bdate_range("2023-01-02", periods=300)
    factors = pd.DataFrame(rng.normal(0, 0.01, (300, 2)), index=dates, columns=["f0", "f1"])
    returns = pd.DataFrame(factors.to_numpy() @ rng.normal(1, 0.3, (2, 30)) + rng.normal(0, 0.015, (300, 30)), index=dates,
                           columns=[f"A{i}" for i in range(30)])
    trimtab.fit_time_series(returns, factors)  # fractions pass
    with pytest.raises(trimtab.InputError, match=r"^fit_time_series: asset_returns: returns look like percent.*divide by 100 \(0\.01 is 1%\)$"):
        trimtab.fit_time_series(returns * 100, factors)
    with pytest.raises(trimtab.InputError, match=r"^fit_time_series: factor_returns: factor returns look like percent"):
        trimtab.fit_time_series(returns, factors * 100)
    with pytest.raises(trimtab.InputError, match=r"^fit_statistical: asset_returns: returns look like percent"):
        trimtab.fit_statistical(returns * 100)


def test_python_rebalance_refuses_percent_alpha_and_books() -> None:
    import trimtab

    model = _model()
    book = pd.Series(1 / model.n_assets, index=model.assets)
    alpha = pd.Series(np.linspace(-0.03, 0.03, model.n_assets), index=model.assets)
    mapping = {"objective": {"maximize": "alpha"}, "constraints": {"fully_invested": True, "long_only": True}}
    with pytest.raises(trimtab.InputError, match=r"^rebalance: alpha: alpha looks like percent.*divide by 100"):
        trimtab.rebalance(model, mapping, holdings=book, alpha=alpha * 100)
    with pytest.raises(trimtab.InputError, match=r"^rebalance: holdings weights sum to 100"):
        trimtab.rebalance(model, mapping, holdings=book * 100, alpha=alpha)
    with pytest.raises(trimtab.InputError, match=r"^attribute: weights sum to 100"):
        model.attribute(book * 100)


def test_attribute_returns_declares_percent_with_unit(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(work)
    weights_file("w.csv")(work)
    plain = runner.invoke(app, ["--json", *ATTRIBUTE[:5], "--holdings", "w.csv"])
    assert plain.exit_code == 0, plain.stderr
    times_100("data/returns.parquet")(work)
    declared = runner.invoke(app, ["--json", *ATTRIBUTE[:5], "--holdings", "w.csv", "--unit", "percent"])
    assert declared.exit_code == 0, declared.stderr
    assert "returns read as percent (unit: percent) and divided by 100" in declared.stderr
    import json

    assert json.loads(declared.stdout)["total"] == pytest.approx(json.loads(plain.stdout)["total"], rel=1e-9)
