"""The sweep, frontier and backtest commands: parsing, exit codes, one-line errors, output folders."""

from __future__ import annotations

import json
import re


import pandas as pd
import pytest
import typer
from typer.testing import CliRunner

from trimtab.errors import InputError
from trimtab.cli.runs import parse_grid, parse_values, register


@pytest.fixture(scope="module")
def app() -> typer.Typer:
    main = typer.Typer(pretty_exceptions_enable=False)

    @main.callback()
    def _root() -> None:
        """The main app's callback (the real one sets --json/--quiet for every command)."""

    register(main)
    return main


def invoke(app: typer.Typer, *args: str):
    return CliRunner().invoke(app, list(args), catch_exceptions=False)


def test_parse_values() -> None:
    assert parse_values("0.01:0.03:3", "--te") == pytest.approx([0.01, 0.02, 0.03])
    assert parse_values("1, 5,10", "--grid x") == [1, 5, 10]
    assert parse_values("[[-0.1, 0.1], [0, 0]]", "--grid x") == [[-0.1, 0.1], [0, 0]]
    for text, message in [
        ("", r"--te: no values given"),
        ("1:2", r"--te: a range is start:stop:count, got '1:2'"),
        ("1:2:1", r"--te: a range needs a count ≥ 2, got 1"),
        ("a:b:3", r"--te: could not read 'a:b:3' as values"),
        ("[]", r"--te: expected a non-empty YAML list"),
    ]:
        with pytest.raises(InputError, match=message):
            parse_values(text, "--te")


def test_parse_grid(tmp_path) -> None:
    assert parse_grid(["risk_aversion=1,2", "tracking_error.max=0.01:0.02:2"], None) == {
        "risk_aversion": [1, 2], "tracking_error.max": [0.01, 0.02]}
    grid = tmp_path / "grid.yaml"
    grid.write_text("- {risk_aversion: 1}\n- {risk_aversion: 3, turnover.max: 0.1}\n", encoding="utf-8")
    assert parse_grid([], grid) == [{"risk_aversion": 1}, {"risk_aversion": 3, "turnover.max": 0.1}]
    bad = tmp_path / "bad.yaml"
    bad.write_text("7\n", encoding="utf-8")
    for items, path, message in [
        ([], None, r"sweep: give at least one --grid KEY=VALUES"),
        (["risk_aversion"], None, r"--grid risk_aversion: expected KEY=VALUES"),
        (["x=1"], grid, r"--grid and --grid-file: give one, not both"),
        ([], bad, r"bad.yaml: expected a mapping parameter → list of values, or a list of points"),
        ([], tmp_path / "missing.yaml", r"missing.yaml: no such grid file"),
    ]:
        with pytest.raises(InputError, match=message):
            parse_grid(items, path)


def test_commands_are_registered(app: typer.Typer) -> None:
    result = invoke(app, "--help")
    assert result.exit_code == 0
    for name in ("sweep", "frontier", "backtest"):
        assert name in result.output


@pytest.mark.parametrize("name", ["sweep", "frontier", "backtest"])
def test_help_summary_is_one_line(app: typer.Typer, name: str) -> None:
    # The overview shows each command's first docstring paragraph; a summary spread over several
    # source lines broke mid-sentence there.
    command = next(c for c in app.registered_commands if c.name == name)
    summary = (command.callback.__doc__ or "").strip().split("\n\n")[0]
    assert "\n" not in summary and summary.endswith(".") and len(summary) <= 90, summary
    overview = CliRunner().invoke(app, ["--help"], env={"COLUMNS": "120"}).output
    assert next(line for line in overview.splitlines() if f" {name} " in line).rstrip(" │").endswith(summary)
    text = CliRunner().invoke(app, [name, "--help"], env={"COLUMNS": "120"}).output
    assert "<bool>  Print one JSON" not in text and "--json " in text  # a flag shows no value to type
    assert "<command>" not in text


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (["sweep", "s.yaml", "--grid", "risk_aversion"], "trimtab: error: --grid risk_aversion: expected KEY=VALUES, for example risk_aversion=1,5,10\n"),
        (["sweep", "s.yaml"], "trimtab: error: sweep: give at least one --grid KEY=VALUES (for example --grid tracking_error.max=0.01:0.05:5)\n"),
        (["frontier", "s.yaml", "--te", "a,b"], "trimtab: error: --te: expected numbers, got ['a', 'b']\n"),
        (["sweep", "missing.yaml", "--grid", "risk_aversion=1"], None),
    ],
)
def test_bad_input_is_one_line_and_exit_2(app: typer.Typer, tmp_path, monkeypatch, args: list[str], message: str | None) -> None:
    monkeypatch.chdir(tmp_path)
    result = CliRunner().invoke(app, args, catch_exceptions=False)
    assert result.exit_code == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("trimtab: error: ")
    if message is not None:
        assert result.stderr == message
    else:
        assert "missing.yaml" in lines[0]
    assert "Traceback" not in result.output


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from tests.demo_helpers import make_demo_folder

    return make_demo_folder(tmp_path_factory.mktemp("demo"))


def test_sweep_on_the_demo(app: typer.Typer, demo) -> None:
    out = demo / "sweep-out"
    result = invoke(app, "sweep", str(demo / "base.yaml"), "--grid", "tracking_error.max=0.01,0.03", "--out", str(out), "--json")
    assert result.exit_code == 0, result.stderr
    document = json.loads(result.stdout)
    rows = {r["label"]: r for r in document["table"]}
    assert rows["tracking_error.max=0.01"]["status"] == "infeasible"
    assert rows["tracking_error.max=0.03"]["status"] == "solved"
    assert rows["tracking_error.max=0.03"]["tracking_error"] <= 0.03 + 1e-7
    # the infeasible point is one warning line naming its parameters; the solved one is kept
    warnings = [line for line in result.stderr.splitlines() if line.startswith("trimtab: warning: tracking_error.max=0.01: infeasible")]
    assert len(warnings) == 1
    assert sorted(p.name for p in out.iterdir()) == [".trimtab-output", "report.html", "result.json", "sweep.csv"]


def test_sweep_table_reads_in_percent(app: typer.Typer, demo) -> None:
    result = invoke(app, "sweep", str(demo / "base.yaml"), "--grid", "tracking_error.max=0.03", "--out", str(demo / "pct"))
    assert result.exit_code == 0, result.stderr
    assert "Sweep points" in result.stdout
    # the 3% cap and a solved tracking error at or below it, as percentages rather than raw fractions
    assert "3.00%" in result.stdout and "0.03 " not in result.stdout


def test_sweep_with_no_feasible_point_exits_1(app: typer.Typer, demo) -> None:
    result = invoke(app, "sweep", str(demo / "base.yaml"), "--grid", "tracking_error.max=0.005,0.01", "--out", str(demo / "none"), "--quiet")
    assert result.exit_code == 1
    assert result.stdout == ""
    assert result.stderr.splitlines()[-1].startswith("trimtab: error: no point solved; first: tracking_error.max=0.005: infeasible")


def test_frontier_on_the_demo(app: typer.Typer, demo) -> None:
    out = demo / "frontier-out"
    result = invoke(app, "frontier", str(demo / "base.yaml"), "--te", "0.02,0.03", "--turnover", "0.25", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.stderr
    assert result.stdout == ""
    assert {p.name for p in out.iterdir()} >= {"frontier_te.csv", "frontier_turnover.csv", "report.html"}


def test_backtest_on_the_demo(app: typer.Typer, demo) -> None:
    out = demo / "backtest-out"
    result = invoke(app, "backtest", str(demo / "base.yaml"), str(demo / "low_turnover.yaml"), "--fit", str(demo / "fit.yaml"),
                    "--every", "60", "--max-dates", "3", "--out", str(out), "--json")
    assert result.exit_code == 0, result.stderr
    document = json.loads(result.stdout)
    assert document["scenarios"] == ["base", "low_turnover"]
    from trimtab.scenario import load_scenario

    caps = {name: load_scenario(demo / f"{name}.yaml").spec.constraints for name in ("base", "low_turnover")}
    history = pd.read_csv(out / "history.csv", index_col=[0, 1])
    totals = {r["index"]: r for r in document["totals"]}
    assert totals["base"]["solved"] == 3 and totals["low_turnover"]["solved"] == 3
    for name, limits in caps.items():
        # each scenario's one-way turnover cap and TE budget, recomputed from the weights on each date's re-fitted model
        assert (history.loc[name, "turnover"] <= limits["turnover"]["max"] + 1e-7).all()
        assert (history.loc[name, "forecast_te"] <= limits["tracking_error"]["max"] * (1 + 1e-6)).all()
    assert caps["low_turnover"]["turnover"]["max"] < caps["base"]["turnover"]["max"]
    assert totals["low_turnover"]["mean_turnover"] < totals["base"]["mean_turnover"]


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        ([], r"base.yaml: model is a saved folder; give --fit CONFIG.yaml"),
        (["--fit", "FIT", "--start", "2999-01-01"], r"--start 2999-01-01: no rebalance date left"),
        (["--fit", "FIT", "--start", "soon"], r"--start: expected a date YYYY-MM-DD, got 'soon'"),
    ],
)
def test_backtest_bad_input(app: typer.Typer, demo, extra: list[str], message: str) -> None:
    args = [str(demo / "fit.yaml") if a == "FIT" else a for a in extra]
    result = invoke(app, "backtest", str(demo / "base.yaml"), *args)
    assert result.exit_code == 2
    assert len(result.stderr.strip().splitlines()) == 1
    assert re.search(message, result.stderr)


def test_backtest_names_must_differ(app: typer.Typer, demo) -> None:
    result = invoke(app, "backtest", str(demo / "base.yaml"), str(demo / "base.yaml"), "--fit", str(demo / "fit.yaml"))
    assert result.exit_code == 2
    assert result.stderr == "trimtab: error: backtest: scenario names must differ; base appears twice (set name: in the files)\n"


def test_backtest_policy_key_from_the_scenario_file(app: typer.Typer, demo) -> None:
    # issue #12: backtest.when_infeasible in the YAML; a scenario that cannot trade holds and says why
    (demo / "frozen.yaml").write_text(
        "extends: base.yaml\nconstraints:\n  turnover: {max: 0.0}\n  tracking_error: {max: 0.0001}\n"
        "backtest: {when_infeasible: hold}\n", encoding="utf-8")
    out = demo / "frozen-out"
    result = invoke(app, "backtest", str(demo / "frozen.yaml"), "--fit", str(demo / "fit.yaml"),
                    "--every", "60", "--max-dates", "2", "--out", str(out))
    assert result.exit_code == 0, result.stderr
    assert "frozen: 0 of 2 dates solved as written, 0 relaxed, 2 held, 0 failed" in result.stdout
    assert "this backtest is not evidence about scenario frozen" in result.stdout
    history = pd.read_csv(out / "history.csv", index_col=[0, 1])
    assert (history["status"] == "held").all()
    # the 0.01% TE cap conflicts with the turnover cap of 0 and with the 1-day liquidity limit alike
    assert history["reason"].str.startswith("these limits cannot all hold: constraints.tracking_error.max, ").all()
    page = (out / "report.html").read_text(encoding="utf-8")
    assert "Dates that did not solve as written" in page
    (demo / "bad_policy.yaml").write_text("extends: base.yaml\nbacktest: {when_infeasible: skip}\n", encoding="utf-8")
    bad = invoke(app, "backtest", str(demo / "bad_policy.yaml"), "--fit", str(demo / "fit.yaml"))
    assert bad.exit_code == 2 and "backtest.when_infeasible" in bad.stderr
