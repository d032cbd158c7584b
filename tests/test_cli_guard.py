"""The one error wrapper of every command: lines and exit codes for faults, interrupts and hints (issue #11)."""

from __future__ import annotations

import errno
from pathlib import Path

import pytest

from trimtab import _paths
from trimtab.cli._guard import (
    EXIT_INTERRUPTED,
    EXIT_TERMINATED,
    Terminated,
    environment_line,
    in_file_words,
    interrupt_line,
)


@pytest.mark.parametrize(
    ("code", "cause"),
    [
        (errno.EROFS, "the file system is read-only"),
        (errno.ENOSPC, "no space left on the disk"),
        (errno.EACCES, "permission denied"),
        (errno.ENOTDIR, "is a file, so no folder can be made below it"),
        (errno.EDQUOT, "the disk quota is exceeded"),
    ],
    ids=["read-only", "full", "permission", "below-a-file", "quota"],
)
def test_environment_line_names_the_path_and_the_cause(code: int, cause: str) -> None:
    line = environment_line(OSError(code, "raw", "results/base"))
    assert line.startswith(f"results/base: {cause}") and "Errno" not in line


def test_interrupt_line_says_what_was_already_written(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(_paths, "COMPLETED", [])
    assert interrupt_line(KeyboardInterrupt()) == ("interrupted; nothing was written", EXIT_INTERRUPTED)
    assert interrupt_line(Terminated()) == ("terminated; nothing was written", EXIT_TERMINATED)
    _paths.COMPLETED.append(Path("results/base"))
    line, code = interrupt_line(KeyboardInterrupt())
    assert code == EXIT_INTERRUPTED and line == "interrupted; results/base had been written completely before, nothing else was written"


@pytest.mark.parametrize(
    ("python", "scenario"),
    [
        ("constraints.liquidity: needs the fund's NAV (pass nav=...)", "(set data.holdings.nav, or give the holdings as shares with prices)"),
        ("constraints.group.active: need a benchmark (pass benchmark=...)", "(set data.benchmark)"),
        ("holdings: assets not in the risk model: X (pass unknown_assets='drop' or 'zero' to handle them)", "(set data.unknown_assets: drop or zero)"),
        ("infeasible: these limits conflict: turnover (see .relaxation for how far each must move)", "(the relaxation table shows how far each must move)"),
    ],
    ids=["nav", "benchmark", "unknown-assets", "relaxation"],
)
def test_python_hints_become_scenario_words(python: str, scenario: str) -> None:
    line = in_file_words(python)
    assert line.endswith(scenario) and "pass " not in line and ".relaxation" not in line


def test_a_swallowed_interrupt_is_reported_as_the_signal_it_was(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    # issue #11: the raise of a signal handler can land in a callback Python runs for itself, which
    # prints "Exception ignored in …" with a traceback; the entry point's hook keeps that quiet, and
    # the output folder's own check (InterruptedBeforeCommit) ends the run as that signal
    import signal
    import types

    import trimtab.cli._entry as entry
    import trimtab._paths as paths
    from trimtab.cli._guard import interrupt_line

    monkeypatch.setattr(paths, "COMPLETED", [])
    assert interrupt_line(paths.InterruptedBeforeCommit(signal.SIGTERM)) == ("terminated; nothing was written", 143)
    assert interrupt_line(paths.InterruptedBeforeCommit(signal.SIGINT)) == ("interrupted; nothing was written", 130)
    monkeypatch.setattr(entry, "_RECEIVED", [signal.SIGINT])
    entry._quiet_unraisable(types.SimpleNamespace(exc_value=KeyboardInterrupt()))  # type: ignore[arg-type]
    assert capsys.readouterr().err == ""
