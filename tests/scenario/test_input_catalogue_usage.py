"""The hostile-input catalogue, the command line's own words (issue #20): usage errors are one line with
exit code 2 (never typer's framed box), global options work before or after the command, help shows
plain placeholders, and a user's value never ends in exit 4 (a tiny risk cap, NAV 0, an unreadable file).
"""

from __future__ import annotations

import errno
import os
import re
from collections.abc import Callable
from pathlib import Path

import pytest

from tests.scenario.test_input_catalogue import (
    BAD_INPUT,
    ENVIRONMENT,
    edit,
    run_case,
    runner,
    work,  # noqa: F401 - a private copy of the module's demo folder per test
)
from tests.scenario.test_input_catalogue import demo_source  # noqa: F401
from trimtab.cli import app

MODEL = ["-m", "model"]
SHARES = ["--holdings", "data/holdings.csv", "--attributes", "data/attributes.csv"]
NOTHING: Callable[[Path], None] = lambda work: None  # noqa: E731

CASES: list[tuple[str, Callable[[Path], None], list[str], int, str]] = [
    # ---------------------------------------------------------------- usage errors: one line, exit 2
    ("usage-unknown-option", NOTHING, ["rebalance", "base.yaml", "--nope"], BAD_INPUT, r"^trimtab: error: rebalance: no such option: --nope; see trimtab rebalance -h$"),
    ("usage-replay-length-0", NOTHING, ["replay", *MODEL, "--holdings", "data/benchmark.csv", "--length", "0"], BAD_INPUT,
     r"replay: invalid value for '--length': Input should be greater than or equal to 1; see trimtab replay -h$"),
    ("usage-explore-port-70000", NOTHING, ["explore", "base.yaml", "--port", "70000", "--no-browser"], BAD_INPUT,
     r"explore: invalid value for '--port': Input should be less than or equal to 65535"),
    ("usage-missing-argument", NOTHING, ["check", "--nope"], BAD_INPUT, r"check: no such option: --nope"),
    ("usage-unknown-command", NOTHING, ["rebalanse", "base.yaml"], BAD_INPUT, r"^trimtab: error: no such command 'rebalanse'"),
    ("usage-text-for-a-number", NOTHING, ["risk", *MODEL, "--holdings", "data/benchmark.csv", "--top", "many"], BAD_INPUT,
     r"risk: invalid value for '--top'"),
    # ---------------------------------------------------------------- no exit 4 from a user's value
    ("value-te-cap-1e-300", edit("tracking_error: {max: 0.03}", "tracking_error: {max: 1e-300}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.tracking_error\.max: 1e-300 is below the smallest risk cap trimtab can honour, 1e-06 \(0\.0001% a year\); write 0 for no risk at all$"),
    ("value-te-cap-1e-300-rebalance", edit("tracking_error: {max: 0.03}", "tracking_error: {max: 1e-300}"), ["rebalance", "base.yaml"], BAD_INPUT,
     r"constraints\.tracking_error\.max: 1e-300 is below the smallest risk cap"),
    ("value-stress-nav-0", NOTHING, ["stress", *MODEL, *SHARES, "--shocks", "shocks.yaml", "--nav", "0"], BAD_INPUT,
     r"^trimtab: error: --nav: expected a positive net asset value, got 0$"),
    ("value-replay-nav-0", NOTHING, ["replay", *MODEL, *SHARES, "--length", "21", "--nav", "0"], BAD_INPUT,
     r"^trimtab: error: --nav: expected a positive net asset value, got 0$"),
    ("value-risk-nav-0", NOTHING, ["risk", *MODEL, *SHARES, "--nav", "0"], BAD_INPUT, r"--nav: expected a positive net asset value, got 0$"),
]


@pytest.mark.parametrize(("change", "command", "code", "pattern"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_catalogue(work: Path, monkeypatch: pytest.MonkeyPatch, change: Callable[[Path], None], command: list[str], code: int, pattern: str) -> None:
    run_case(work, monkeypatch, change, command, code, pattern)


@pytest.mark.parametrize("command", [["check", "base.yaml"], ["explore", "base.yaml", "--no-browser", "--port", "8799"]], ids=["check", "explore"])
def test_an_unreadable_scenario_is_permission_denied_exit_5(work: Path, monkeypatch: pytest.MonkeyPatch, command: list[str]) -> None:
    # As root no file mode denies a read, so the operating system's answer is given by os.open
    real = os.open

    def denied(path: object, *args: object, **kwargs: object) -> int:
        if str(path).endswith("base.yaml"):
            raise PermissionError(errno.EACCES, "Permission denied")
        return real(path, *args, **kwargs)  # type: ignore[arg-type]

    monkeypatch.setattr(os, "open", denied)
    run_case(work, monkeypatch, NOTHING, command, ENVIRONMENT, r"^trimtab: error: base\.yaml: permission denied \(fix the disk or the path and rerun")


@pytest.mark.parametrize("place", ["before", "after"])
def test_global_options_work_before_or_after_the_command(work: Path, monkeypatch: pytest.MonkeyPatch, place: str) -> None:
    monkeypatch.chdir(work)
    args = ["--json", "--quiet", "check", "base.yaml"] if place == "before" else ["check", "base.yaml", "--json", "-q"]
    result = runner.invoke(app, args)
    assert result.exit_code == 0, result.stderr
    assert result.stdout.lstrip().startswith("{") and '"scenario": "base"' in result.stdout


@pytest.mark.parametrize("command", ["rebalance", "compare", "risk", "stress", "replay", "backtest", "attribute-returns", "explore", "demo", "fit"])
def test_help_shows_plain_placeholders(command: str) -> None:
    result = runner.invoke(app, [command, "-h"], env={"COLUMNS": "200"})
    assert result.exit_code == 0
    assert not re.search(r"<(bool|path|str|int|float|list\[\w+\])( range)?>", result.stdout), result.stdout
    assert "Show this message and exit." in result.stdout
