"""A catalogue of hostile and broken inputs and faults (issue #11): each one exits with its documented
code and one stderr line naming the file or key, with no traceback, no output written and every input
unchanged (hashes before and after).

The YAML, value and file cases run the command line in-process on a private copy of one small demo
folder made once per module; the interrupt cases run it in a subprocess and send SIGINT or SIGTERM at
several moments, start-up included; the read-only and full-disk cases mount a tmpfs in a private
mount namespace (root only, skipped with the reason otherwise).
"""

from __future__ import annotations

import hashlib
import os
import re
import shutil
import signal
import stat
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path

import pytest
from typer.testing import CliRunner

from tests.demo_helpers import make_demo_folder
from trimtab.cli import app

runner = CliRunner()
BAD_INPUT, ENVIRONMENT, INTERRUPTED, TERMINATED = 2, 5, 130, 143


@pytest.fixture(scope="module")
def demo_source(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("catalogue-demo"))


@pytest.fixture
def work(demo_source: Path, tmp_path: Path) -> Path:
    target = tmp_path / "demo"
    shutil.copytree(demo_source, target)
    return target


def snapshot(folder: Path) -> dict[str, str]:
    """Every entry under ``folder``: a regular file by its SHA-256, anything else by its kind."""
    out: dict[str, str] = {}
    for root, dirs, files in os.walk(folder):
        for name in dirs + files:
            path = Path(root) / name
            mode = os.lstat(path).st_mode
            if stat.S_ISREG(mode):
                out[str(path.relative_to(folder))] = hashlib.sha256(path.read_bytes()).hexdigest()
            else:
                out[str(path.relative_to(folder))] = "dir" if stat.S_ISDIR(mode) else "special"
    return out


def assert_one_line(stderr: str, output: str, pattern: str) -> None:
    lines = [line for line in stderr.splitlines() if line.strip()]
    assert len(lines) == 1, stderr
    assert lines[0].startswith("trimtab: error: "), lines[0]
    assert re.search(pattern, lines[0]), lines[0]
    assert "Traceback" not in stderr and "Traceback" not in output


def edit(old: str, new: str, file: str = "base.yaml") -> Callable[[Path], None]:
    def change(work: Path) -> None:
        path = work / file
        text = path.read_text(encoding="utf-8")
        assert old in text, old
        path.write_text(text.replace(old, new, 1), encoding="utf-8")

    return change


def append(extra: str, file: str = "base.yaml") -> Callable[[Path], None]:
    def change(work: Path) -> None:
        with open(work / file, "a", encoding="utf-8") as fh:
            fh.write(extra)

    return change


def write(text: str | bytes, file: str = "s.yaml") -> Callable[[Path], None]:
    def change(work: Path) -> None:
        path = work / file
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))

    return change


def fifo(file: str) -> Callable[[Path], None]:
    def change(work: Path) -> None:
        path = work / file
        if path.exists():
            path.unlink()
        os.mkfifo(path)

    return change


def both(*changes: Callable[[Path], None]) -> Callable[[Path], None]:
    def change(work: Path) -> None:
        for one in changes:
            one(work)

    return change


def manifest_file(name: str, file: str) -> Callable[[Path], None]:
    def change(work: Path) -> None:
        import json

        path = work / "model" / "manifest.json"
        manifest = json.loads(path.read_text(encoding="utf-8"))
        manifest["tables"][name]["file"] = file
        path.write_text(json.dumps(manifest), encoding="utf-8")

    return change


def set_attribute(column: str, value: float, held: bool, lot: float | None = None) -> Callable[[Path], None]:
    """Set ``column`` of the first held (or not held) asset in data/attributes.csv to ``value``; with
    ``lot``, add a lot column of that size first."""

    def change(work: Path) -> None:
        import pandas as pd

        attrs = pd.read_csv(work / "data" / "attributes.csv")
        holdings = set(pd.read_csv(work / "data" / "holdings.csv")["asset"])
        if lot is not None:
            attrs["lot"] = lot
        row = next(i for i, asset in enumerate(attrs["asset"]) if (asset in holdings) == held)
        attrs.loc[row, column] = value
        attrs.to_csv(work / "data" / "attributes.csv", index=False)

    return change


NO_LIQUIDITY = edit("  liquidity: {max_adv_fraction: 0.10, days: 1}\n", "")
BOMB = "a: &a [x, x, x, x, x, x, x, x, x]\n" + "".join(
    f"{chr(98 + i)}: &{chr(98 + i)} [{', '.join([f'*{chr(97 + i)}'] * 9)}]\n" for i in range(9)
)
BASE_NAME = "description: Demo fund, rebalanced to a 3% tracking-error budget"
DIGITS_400 = "9" * 400

# (id, change to the demo folder, command after `trimtab`, exit code, pattern of the one stderr line)
CASES: list[tuple[str, Callable[[Path], None], list[str], int, str]] = [
    # ---------------------------------------------------------------- YAML
    ("yaml-repeated-constraints-block", append("constraints:\n  long_only: true\n"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: line \d+: constraints: key written twice \(lines 15 and \d+\); merge them or delete one"),
    ("yaml-repeated-data-block", append("data:\n  holdings: data/holdings.csv\n"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: line \d+: data: key written twice \(lines 7 and \d+\)"),
    ("yaml-repeated-nested-key", edit("  turnover: {max: 0.25}", "  turnover: {max: 0.25, max: 0.9}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.turnover\.max: key written twice \(lines 22 and 22\)"),
    ("yaml-repeated-key-in-base", both(append("output:\n  html: false\n"), write("extends: base.yaml\n", "child.yaml")),
     ["check", "child.yaml"], BAD_INPUT, r"base\.yaml: line \d+: output: key written twice \(lines \d+ and \d+\)"),
    ("yaml-misspelt-and-missing-key", edit("model: model", "modle: model"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: 2 problems: \(1\) modle: unknown key; did you mean model\? \(2\) model: required key missing"),
    ("yaml-five-problems-unknown-first", both(edit("model: model", "modle: model"), edit("turnover: {max", "turnovr: {max"),
                                              edit("days: 1", "dayz: 1"), edit("max: 0.03}\n  active", "max: 3}\n  active")),
     ["check", "base.yaml"], BAD_INPUT,
     r"5 problems: \(1\) modle: unknown key; did you mean model\? \(2\) constraints\.turnovr: unknown key; did you mean turnover\? "
     r"\(3\) constraints\.liquidity\.dayz: unknown key; did you mean days\? \(4\) model: required key missing "
     r"\(5\) constraints\.weight\.max: 3 would mean 300%"),
    ("yaml-unknown-constraint-suggested", edit("  long_only: true", "  long_onyl: true"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.long_onyl: unknown key; did you mean long_only\?"),
    ("yaml-alias-bomb", write(BOMB), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: line \d+: anchors and aliases expand to more than 1,000,000 values"),
    ("yaml-every-problem-of-the-file", both(append("constraints:\n  long_only: true\n"), edit(BASE_NAME, "description: 2024-13-01"),
                                            edit("days: 1", "days: !!int ")), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: 3 problems: \(1\) line 5: description: '2024-13-01' is not a valid date \(month must be in 1\.\.12\); put it in quotes if it is text "
     r"\(2\) line 23: constraints\.liquidity\.days: '' is not a valid whole number \(3\) line \d+: constraints: key written twice"),
    ("yaml-recursive-alias", write("model: &m [*m]\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: line 1: model\.0: an alias refers to the value that contains it"),
    ("yaml-nested-20000-deep", write("x: " + "[" * 20000 + "]" * 20000 + "\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: line 1: nested more than 64 levels deep"),
    ("yaml-extends-dev-zero", write("extends: /dev/zero\n"), ["check", "s.yaml"], BAD_INPUT, r"/dev/zero: is a device; expected a scenario file"),
    ("yaml-extends-fifo", both(fifo("pipe.yaml"), write("extends: pipe.yaml\n")), ["check", "s.yaml"], BAD_INPUT, r"pipe\.yaml: is a named pipe; expected a scenario file"),
    ("yaml-scenario-is-fifo", fifo("pipe.yaml"), ["check", "pipe.yaml"], BAD_INPUT, r"pipe\.yaml: is a named pipe"),
    ("yaml-scenario-is-folder", lambda work: None, ["check", "data"], BAD_INPUT, r"data: is a folder; expected a scenario file"),
    ("yaml-scenario-missing", lambda work: None, ["check", "nope.yaml"], BAD_INPUT, r"nope\.yaml: no such scenario file"),
    ("yaml-extends-missing", write("extends: nope.yaml\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: extends: base scenario 'nope\.yaml' not found"),
    ("yaml-extends-itself", write("extends: s.yaml\n"), ["check", "s.yaml"], BAD_INPUT, r"scenario s\.yaml extends itself"),
    ("yaml-syntax-error", edit("objective:\n  maximize: alpha\n", "objective: [\n"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: line \d+, column \d+: not valid YAML"),
    ("yaml-empty-file", write(""), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: the scenario file is empty"),
    ("yaml-top-level-list", write("- a\n- b\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: expected a mapping of keys at the top level, got a list"),
    ("yaml-not-utf8", write(b"name: caf\xe9\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: the scenario file is not UTF-8 text"),
    ("yaml-python-tag", write("name: !!python/object/apply:os.system [echo]\n"), ["check", "s.yaml"], BAD_INPUT,
     r"s\.yaml: line 1, column 7: not valid YAML: could not determine a constructor"),
    ("yaml-binary-tag", edit(BASE_NAME, "description: !!binary aGVsbG8="), ["check", "base.yaml"], BAD_INPUT,
     r"line 5: description: binary data \(!!binary\) is not a value trimtab reads"),
    ("yaml-larger-than-8-mib", write("description: " + "x" * (9 * 1024 * 1024) + "\n"), ["check", "s.yaml"], BAD_INPUT,
     r"s\.yaml: the scenario file is larger than 8 MiB"),
    ("yaml-list-as-key", write("? [a, b]\n: 1\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: line 1: a key must be plain text or a number"),
    ("yaml-bad-merge", write("a: {<<: 3}\n"), ["check", "s.yaml"], BAD_INPUT, r"s\.yaml: line 1, column \d+: not valid YAML: expected a mapping or list of mappings for merging"),
    # ---------------------------------------------------------------- values
    ("value-impossible-date", edit(BASE_NAME, "description: 2024-13-01"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: line 5: description: '2024-13-01' is not a valid date \(month must be in 1\.\.12\); put it in quotes if it is text$"),
    ("value-date-for-nav", edit("cash: 6000000", "cash: 6000000, nav: 2024-01-31"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: data\.holdings\.nav: expected a number, got 2024-01-31"),
    ("value-empty-float-tag", edit("tracking_error: {max: 0.03}", "tracking_error: {max: !!float }"), ["check", "base.yaml"], BAD_INPUT,
     r"line 21: constraints\.tracking_error\.max: '' is not a valid number"),
    ("value-empty-int-tag", edit("days: 1", "days: !!int "), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.liquidity\.days: '' is not a valid whole number"),
    ("value-empty-timestamp-tag", edit(BASE_NAME, "description: !!timestamp "), ["check", "base.yaml"], BAD_INPUT,
     r"line 5: description: '' is not a valid date"),
    ("value-400-digit-limit", edit("turnover: {max: 0.25}", f"turnover: {{max: {DIGITS_400}}}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.turnover\.max: expected a number of sensible size, got one with 400 digits"),
    ("value-400-digit-cash", edit("cash: 6000000", f"cash: {DIGITS_400}"), ["check", "base.yaml"], BAD_INPUT,
     r"data\.holdings\.cash: expected a number of sensible size, got one with 400 digits"),
    ("value-5000-digit-int", edit("days: 1", "days: " + "9" * 5000), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.liquidity\.days: '9+…' is not a valid whole number \(it has 5,000 digits\)"),
    ("value-set-in-no-buy", edit("  long_only: true", "  long_only: true\n  no_buy: [!!set {A: null}]"), ["check", "base.yaml"], BAD_INPUT,
     r"line 18: constraints\.no_buy\.0: a set \(!!set\) is not a value trimtab reads"),
    ("value-mapping-in-no-buy", edit("  long_only: true", "  long_only: true\n  no_buy: [{A: 1}]"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.no_buy: expected asset ids \(text or numbers\), got \{'A': 1\}"),
    ("value-nul-in-name", append('name: "fund\\0x"\n'), ["check", "base.yaml"], BAD_INPUT, r"line \d+: name: text holds a control character \(code 0\)"),
    ("value-newline-in-name", append('name: "fund\\nx"\n'), ["check", "base.yaml"], BAD_INPUT, r"name: expected a name without control characters \(found code 10\)"),
    ("value-newline-in-data-path", edit("benchmark: data/benchmark.csv", 'benchmark: "data/bench\\nmark.csv"'), ["check", "base.yaml"], BAD_INPUT,
     r"data\.benchmark\.path: expected a name without control characters"),
    # a bad shock in the scenario's stress list is named by `check`, not left for the report to drop its stress table
    ("value-stress-unknown-factor", append("  bogus:\n    factors: {marketx: -0.1}\n", "shocks.yaml"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: stress: shocks: bogus: unknown factor\(s\) marketx; the model has: market"),
    ("value-stress-specific-not-an-asset", append("  bogus:\n    factors: {market: -0.1}\n    specific: {NOSUCH: -0.2}\n", "shocks.yaml"),
     ["check", "base.yaml"], BAD_INPUT, r"base\.yaml: stress: specific: bogus\.NOSUCH: not an asset of the model"),
    ("value-cash-infinite", edit("cash: 6000000", "cash: .inf"), ["check", "base.yaml"], BAD_INPUT, r"base\.yaml: data\.holdings\.cash: expected a finite number, got inf"),
    ("value-nav-nan", edit("cash: 6000000", "cash: 6000000, nav: .nan"), ["check", "base.yaml"], BAD_INPUT, r"data\.holdings\.nav: expected a finite number, got nan"),
    ("value-cash-quoted", edit("cash: 6000000", 'cash: "6000000"'), ["check", "base.yaml"], BAD_INPUT,
     r"data\.holdings\.cash: expected a number, got text '6000000'; write it without quotes"),
    ("value-limit-quoted", edit("turnover: {max: 0.25}", 'turnover: {max: "0.25"}'), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.turnover\.max: expected a number, got text '0\.25'; write it without quotes"),
    ("value-limit-percent-text", edit("turnover: {max: 0.25}", 'turnover: {max: "25%"}'), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.turnover\.max: expected a number, got text '25%'; write percentages as fractions: 0\.25"),
    ("value-te-as-percentage", edit("tracking_error: {max: 0.03}", "tracking_error: {max: 3}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.tracking_error\.max: 3 would mean 300%; limits are fractions \(0\.03 is 3%\): did you mean 0\.03\?"),
    ("value-turnover-as-percentage", edit("turnover: {max: 0.25}", "turnover: {max: 25}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.turnover\.max: 25 would mean 2500%.*did you mean 0\.25\?"),
    ("value-weight-as-percentage", edit("weight: {min: 0.0, max: 0.03}", "weight: {min: 0.0, max: 3}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.weight\.max: 3 would mean 300%.*did you mean 0\.03\?"),
    ("value-group-bound-as-percentage", edit("default: [-0.03, 0.03]", "default: [-3, 3]"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.group\.bounds\.default\.0: -3 would mean -300%.*did you mean -0\.03\?"),
    ("value-adv-fraction-as-percentage", edit("max_adv_fraction: 0.10", "max_adv_fraction: 10"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.liquidity\.max_adv_fraction: 10 would mean 1000%.*did you mean 0\.1\?"),
    ("value-date-for-a-limit", edit("tracking_error: {max: 0.03}", "tracking_error: {max: 2024-01-01}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.tracking_error\.max: expected a number, got 2024-01-01"),
    ("value-text-for-a-limit", edit("weight: {min: 0.0, max: 0.03}", "weight: {min: 0.0, max: big}"), ["check", "base.yaml"], BAD_INPUT,
     r"constraints\.weight\.max: expected a number, got 'big'"),
    ("value-name-escapes-folder", append("name: ../elsewhere\n"), ["check", "base.yaml"], BAD_INPUT, r"name: expected a name usable as a folder name"),
    ("value-negative-cash", edit("cash: 6000000", "cash: -1"), ["check", "base.yaml"], BAD_INPUT, r"data\.holdings\.cash: must be ≥ 0 \(got -1\)"),
    ("value-objective-as-text", edit("objective:\n  maximize: alpha\n  costs: {spread: spread}\n", "objective: maximize\n"),
     ["check", "base.yaml"], BAD_INPUT, r"objective: expected a mapping, got 'maximize'"),
    # ---------------------------------------------------------------- order inputs (issue #19)
    ("orders-price-zero-held", set_attribute("price", 0.0, held=True), ["rebalance", "base.yaml"], BAD_INPUT,
     r"data/holdings\.csv: prices .*must be positive; not so for [A-Z]{4}"),
    ("orders-price-zero-liquidity", set_attribute("price", 0.0, held=False), ["rebalance", "base.yaml"], BAD_INPUT,
     r"constraints\.liquidity\.price_column: data/attributes\.csv: column 'price' must be finite and > 0 for assets: [A-Z]{4}$"),
    ("orders-price-negative-liquidity", set_attribute("price", -5.0, held=False), ["rebalance", "base.yaml"], BAD_INPUT,
     r"data/attributes\.csv: column 'price' must be finite and > 0 for assets: [A-Z]{4}$"),
    ("orders-adv-zero-liquidity", set_attribute("adv", 0.0, held=False), ["rebalance", "base.yaml"], BAD_INPUT,
     r"constraints\.liquidity\.adv_column: data/attributes\.csv: column 'adv' must be finite and > 0 for assets: [A-Z]{4}$"),
    ("orders-lot-zero-held", both(NO_LIQUIDITY, set_attribute("lot", 0.0, held=True, lot=100.0)), ["rebalance", "base.yaml"], BAD_INPUT,
     r"data/attributes\.csv: attributes: column 'lot' must be a number > 0 for assets held or traded: [A-Z]{4} \(0\)$"),
    ("orders-lot-negative-held", both(NO_LIQUIDITY, set_attribute("lot", -100.0, held=True, lot=100.0)), ["rebalance", "base.yaml"], BAD_INPUT,
     r"column 'lot' must be a number > 0 for assets held or traded: [A-Z]{4} \(-100\)$"),
    ("orders-lot-nan-held", both(NO_LIQUIDITY, set_attribute("lot", float("nan"), held=True, lot=100.0)), ["rebalance", "base.yaml"], BAD_INPUT,
     r"column 'lot' must be a number > 0 for assets held or traded: [A-Z]{4} \(nan\)$"),
    ("orders-price-nan-held-no-liquidity", both(NO_LIQUIDITY, set_attribute("price", float("nan"), held=True)), ["rebalance", "base.yaml"], BAD_INPUT,
     r"data/holdings\.csv: .*[A-Z]{4}"),
    ("orders-min-cash-percent", append("orders: {min_cash: 2}\n"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: orders\.min_cash: must be ≤ 0\.5 \(got 2\)"),
    ("orders-unknown-key", append("orders: {min_cash: 0.01, mincash: 0.02}\n"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: orders\.mincash: unknown key"),
    ("orders-tolerance-text", append("orders: {tolerance: {weight: '1bp'}}\n"), ["check", "base.yaml"], BAD_INPUT,
     r"base\.yaml: orders\.tolerance\.weight: "),
    # ---------------------------------------------------------------- files
    ("file-holdings-missing", edit("data/holdings.csv", "data/nope.csv"), ["check", "base.yaml"], BAD_INPUT, r"nope\.csv: holdings file not found"),
    ("file-holdings-is-fifo", fifo("data/holdings.csv"), ["check", "base.yaml"], BAD_INPUT, r"holdings\.csv: is a named pipe; expected a holdings file"),
    ("file-holdings-is-device", edit("data/holdings.csv", "/dev/zero"), ["check", "base.yaml"], BAD_INPUT, r"/dev/zero: is a device; expected a holdings file"),
    ("file-holdings-device-as-csv", edit("path: data/holdings.csv", "path: /dev/zero, format: csv"), ["check", "base.yaml"], BAD_INPUT,
     r"/dev/zero: is a device; expected a holdings file"),
    ("file-holdings-not-numbers", write("asset,shares\nAAA,lots\n", "data/holdings.csv"), ["check", "base.yaml"], BAD_INPUT,
     r"holdings\.csv: holdings column 'shares' has values that are not numbers: lots"),
    ("file-model-manifest-outside", manifest_file("exposures", "/etc/passwd"), ["check", "base.yaml"], BAD_INPUT,
     r"manifest\.json: tables\.exposures\.file must be the name of a file inside the model folder, got '/etc/passwd'"),
    ("file-model-manifest-parent", manifest_file("exposures", "../data/holdings.csv"), ["check", "base.yaml"], BAD_INPUT,
     r"manifest\.json: tables\.exposures\.file must be the name of a file inside the model folder"),
    ("file-model-manifest-fifo", fifo("model/manifest.json"), ["check", "base.yaml"], BAD_INPUT, r"manifest\.json: is a named pipe"),
    ("file-model-table-fifo", fifo("model/exposures.parquet"), ["check", "base.yaml"], BAD_INPUT, r"exposures\.parquet: is a named pipe; expected a model table file"),
    ("file-model-missing", edit("model: model", "model: nomodel"), ["check", "base.yaml"], BAD_INPUT, r"nomodel: no such model folder"),
    ("file-grid-is-fifo", fifo("grid.yaml"), ["sweep", "base.yaml", "--grid-file", "grid.yaml"], BAD_INPUT, r"grid\.yaml: is a named pipe; expected a grid file"),
    # ---------------------------------------------------------------- environment
    ("env-output-below-a-file", write("not a folder\n", "afile"), ["rebalance", "base.yaml", "--out", "afile/sub"], ENVIRONMENT,
     r"afile: is a file, so no folder can be made below it \(fix the disk or the path and rerun"),
    ("env-output-folder-not-ours", write("keep me\n", "mine/notes.txt"), ["rebalance", "base.yaml", "--out", "mine"], BAD_INPUT,
     r"mine: folder exists and was not written by trimtab; refusing to replace it"),
]


@pytest.mark.parametrize(("change", "command", "code", "pattern"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_catalogue(work: Path, monkeypatch: pytest.MonkeyPatch, change: Callable[[Path], None], command: list[str], code: int, pattern: str) -> None:
    run_case(work, monkeypatch, change, command, code, pattern)


def run_case(work: Path, monkeypatch: pytest.MonkeyPatch, change: Callable[[Path], None], command: list[str], code: int, pattern: str) -> None:
    """Apply ``change``, run ``trimtab command``: its exit code, one line matching ``pattern``, nothing written."""
    change(work)
    monkeypatch.chdir(work)
    before = snapshot(work)
    result = runner.invoke(app, command)
    assert result.exit_code == code, (result.exit_code, result.stderr, result.stdout[-500:])
    assert_one_line(result.stderr, result.stdout, pattern)
    assert snapshot(work) == before  # no output written, no input changed


def test_permission_denied_on_a_model_file_is_an_environment_fault(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    # As root no file mode denies a read, so the operating system's answer is given by replacing the
    # one open() the model store reads a table's checksum with.
    import trimtab.model._store as store

    def denied(path: object, *args: object, **kwargs: object) -> object:
        raise PermissionError(13, "Permission denied", str(path))

    monkeypatch.setattr(store, "open", denied, raising=False)
    monkeypatch.chdir(work)
    before = snapshot(work)
    result = runner.invoke(app, ["rebalance", "base.yaml"])
    assert result.exit_code == ENVIRONMENT
    assert_one_line(result.stderr, result.stdout, r"model/exposures\.parquet: permission denied \(fix the disk or the path and rerun")
    assert snapshot(work) == before


def test_exponent_without_a_dot_is_a_number(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    edit("tracking_error: {max: 0.03}", "tracking_error: {max: 3e-2}")(work)
    monkeypatch.chdir(work)
    result = runner.invoke(app, ["--json", "check", "base.yaml"])
    assert result.exit_code == 0, result.stderr


# ---------------------------------------------------------------------- subprocesses
def trimtab_command(*args: str) -> list[str]:
    return [sys.executable, "-c", "from trimtab.cli._entry import main; main()", *args]


def handlers_installed(pid: int) -> bool:
    """Whether the process catches SIGTERM yet (its handlers are installed first thing in main)."""
    try:
        status = Path(f"/proc/{pid}/status").read_text()
    except OSError:
        return False
    caught = int(re.search(r"SigCgt:\s*([0-9a-f]+)", status)[1], 16)  # type: ignore[index]
    return bool(caught & (1 << (signal.SIGTERM - 1)))


@pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="needs /proc to see when the handlers are installed")
@pytest.mark.parametrize("delay", [0.0, 0.4, 1.5], ids=["during-import", "during-start", "during-run"])
@pytest.mark.parametrize(("sig", "code", "word"), [(signal.SIGINT, INTERRUPTED, "interrupted"), (signal.SIGTERM, TERMINATED, "terminated")], ids=["SIGINT", "SIGTERM"])
def test_interrupt(work: Path, sig: int, code: int, word: str, delay: float) -> None:
    before = snapshot(work)
    process = subprocess.Popen(trimtab_command("rebalance", "base.yaml"), cwd=work, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 20
    while not handlers_installed(process.pid) and process.poll() is None and time.monotonic() < deadline:
        time.sleep(0.002)
    time.sleep(delay)
    process.send_signal(sig)
    out, err = process.communicate(timeout=60)
    if process.returncode == 0:  # the run finished before the signal: nothing to check
        pytest.skip("the run ended before the signal arrived")
    assert process.returncode == code, err
    assert_one_line(err, out, rf"^trimtab: error: {word}; nothing was written$")
    assert snapshot(work) == before


def test_partial_folder_of_a_killed_run_is_removed_by_the_next_run(work: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    gone = subprocess.Popen([sys.executable, "-c", "pass"])
    gone.wait()
    stale = work / "results" / f".base.partial-{gone.pid}-abcd1234"
    alive = work / "results" / f".base.partial-{os.getpid()}-abcd1234"
    for folder in (stale, alive):
        folder.mkdir(parents=True)
        (folder / "trades.csv").write_text("asset,trade\n", encoding="utf-8")
    monkeypatch.chdir(work)
    result = runner.invoke(app, ["--quiet", "rebalance", "base.yaml"])
    assert result.exit_code == 0, result.stderr
    assert not stale.exists() and alive.exists()
    assert sorted(p.name for p in (work / "results").iterdir()) == [alive.name, "base"]
    # outputs are created under the umask (0755 folders, 0644 files under 022), not private
    mask = os.umask(0o022)
    os.umask(mask)
    assert stat.S_IMODE((work / "results" / "base").stat().st_mode) == 0o777 & ~mask
    assert stat.S_IMODE((work / "results" / "base" / "trades.csv").stat().st_mode) == 0o666 & ~mask


def _can_mount(folder: Path) -> str | None:
    if os.geteuid() != 0:
        return "needs root for a private mount namespace"
    if shutil.which("unshare") is None:
        return "needs unshare(1)"
    probe = subprocess.run(["unshare", "-m", "sh", "-c", f"mount -t tmpfs tmpfs '{folder}'"], capture_output=True)
    return None if probe.returncode == 0 else f"cannot mount in a private namespace: {probe.stderr.decode().strip()}"


@pytest.mark.parametrize(
    ("options", "pattern"),
    [("ro", r"results/base: the file system is read-only"), ("size=16k", r"results/base: no space left on the disk")],
    ids=["read-only-disk", "full-disk"],
)
def test_environment_fault_under_a_private_mount(work: Path, options: str, pattern: str) -> None:
    (work / "results").mkdir()
    reason = _can_mount(work / "results")
    if reason is not None:
        pytest.skip(reason)
    before = snapshot(work)
    script = 'mount -t tmpfs -o "$0" tmpfs results && exec "$@"'
    result = subprocess.run(["unshare", "-m", "sh", "-c", script, options, *trimtab_command("rebalance", "base.yaml")],
                            cwd=work, capture_output=True, text=True, timeout=120)
    assert result.returncode == ENVIRONMENT, result.stderr
    assert_one_line(result.stderr, result.stdout, pattern)
    assert snapshot(work) == before  # the mount went with the namespace; nothing beneath it changed


# ---------------------------------------------------------------------- the Python API, same values
API_MAPPING = {"objective": {"minimize": "active_risk"}, "constraints": {"fully_invested": True}}


@pytest.mark.parametrize(
    ("arguments", "error", "pattern"),
    [
        ({"nav": float("inf")}, "InputError", r"^rebalance: nav must be a positive, finite number \(currency\), got inf$"),
        ({"nav": 10**400}, "InputError", r"^rebalance: nav must be a positive, finite number \(currency\), got 1000"),
        ({"nav": "1e8"}, "InputError", r"^rebalance: nav must be a positive, finite number"),
        ({"constraints": {"tracking_error": {"max": 10**400}}}, "ScenarioError", r"constraints\.tracking_error\.max: expected a number of sensible size"),
        ({"constraints": {"max_names": 10**400}}, "ScenarioError", r"constraints\.max_names: expected a whole number of sensible size"),
        ({"constraints": {"no_buy": [{"A0001"}]}}, "ScenarioError", r"constraints\.no_buy: expected asset ids \(text or numbers\), got \{'A0001'\}"),
        ({"constraints": {"turnover": {"max": "0.25"}}}, "ScenarioError", r"constraints\.turnover\.max: expected a number, got text '0\.25'; write it without quotes"),
        ({"constraints": {"tracking_error": {"max": 3}}}, "ScenarioError", r"constraints\.tracking_error\.max: 3 would mean 300%.*did you mean 0\.03\?"),
        ({"holdings": [0.5, 0.5]}, "InputError", r"^holdings: expected a pandas Series by asset, got list$"),
    ],
    ids=["nav-inf", "nav-400-digits", "nav-text", "limit-400-digits", "max-names-400-digits", "set-of-ids", "limit-text", "limit-percentage", "holdings-list"],
)
def test_python_api_raises_trimtabs_own_errors_naming_the_argument(arguments: dict, error: str, pattern: str) -> None:  # type: ignore[type-arg]
    import pandas as pd

    import trimtab
    from tests.conftest import random_model

    model = random_model()
    mapping = {**API_MAPPING, "constraints": {**API_MAPPING["constraints"], **arguments.pop("constraints", {})}}
    kwargs = {"holdings": pd.Series(1 / model.n_assets, index=model.assets), **arguments}
    with pytest.raises(getattr(trimtab, error), match=pattern):
        trimtab.rebalance(model, mapping, **kwargs)
