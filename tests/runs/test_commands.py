"""The sweep, frontier and backtest commands: parsing, exit codes, one-line errors, output folders."""

from __future__ import annotations

import json

import pytest
import typer
from typer.testing import CliRunner

from trimtab.errors import InputError
from trimtab.runs._commands import parse_grid, parse_values, register


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
        ([], tmp_path / "missing.yaml", r"missing.yaml: cannot read the grid file"),
    ]:
        with pytest.raises(InputError, match=message):
            parse_grid(items, path)


def test_commands_are_registered(app: typer.Typer) -> None:
    result = invoke(app, "--help")
    assert result.exit_code == 0
    for name in ("sweep", "frontier", "backtest"):
        assert name in result.output


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
