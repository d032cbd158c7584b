"""``trimtab explore`` on the command line: one-line errors, the warning off loopback, Ctrl-C (#15)."""

from __future__ import annotations

import socket
from pathlib import Path

import pytest
from typer.testing import CliRunner

from tests.app._browser import explore_server, free_port
from trimtab.cli.explore import _is_loopback, _url_host
from trimtab.cli import EXIT_BAD_INPUT, app

runner = CliRunner()


def test_a_port_in_use_is_one_line_before_anything_is_loaded(tmp_path: Path) -> None:
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        result = runner.invoke(app, ["explore", str(tmp_path / "missing.yaml"), "--no-browser", "--port", str(port)])
    assert result.exit_code == EXIT_BAD_INPUT
    assert result.stderr == f"trimtab: error: --host 127.0.0.1 --port {port}: cannot listen there (the port is in use, or the address is not this machine's); try another --port\n"


def test_a_missing_scenario_is_one_line(tmp_path: Path) -> None:
    result = runner.invoke(app, ["explore", str(tmp_path / "missing.yaml"), "--no-browser", "--port", str(free_port())])
    assert result.exit_code == EXIT_BAD_INPUT
    assert result.stderr.startswith("trimtab: error: ") and "missing.yaml: no such scenario file" in result.stderr
    assert result.stderr.count("\n") == 1


@pytest.mark.parametrize(("host", "loopback"), [("127.0.0.1", True), ("::1", True), ("localhost", True), ("127.0.0.2", True),
                                                ("0.0.0.0", False), ("192.168.1.5", False), ("myhost", False)])
def test_which_hosts_count_as_this_machine_only(host: str, loopback: bool) -> None:
    assert _is_loopback(host) is loopback


def test_the_url_printed_for_a_wildcard_address_is_loopback() -> None:
    assert _url_host("0.0.0.0") == "127.0.0.1" and _url_host("::1") == "[::1]" and _url_host("localhost") == "localhost"


@pytest.mark.slow
def test_off_loopback_it_warns_and_ctrl_c_stops_it_cleanly(demo_folder: Path) -> None:
    with explore_server(demo_folder / "base.yaml", free_port(), host="0.0.0.0") as server:
        pass
    out, err = server.output
    assert server.returncode == 0, err
    assert err.startswith("trimtab: warning: listening on 0.0.0.0: anyone who can reach this machine")
    assert "Stopped; nothing was written except the scenarios you saved." in out


@pytest.mark.slow
def test_with_json_the_address_and_token_are_one_line_a_program_reads(demo_folder: Path) -> None:
    import json
    import subprocess
    import sys
    import time
    import urllib.request

    port = free_port()
    process = subprocess.Popen([sys.executable, "-m", "trimtab.cli", "explore", str(demo_folder / "base.yaml"), "--no-browser",
                                "--port", str(port), "--json"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        assert process.stdout is not None
        document = json.loads(process.stdout.readline())  # issue #20: how another program gets the token
        assert document["url"] == f"http://127.0.0.1:{port}/?token={document['token']}"
        request = urllib.request.Request(f"http://127.0.0.1:{port}/api/scenario", headers={"X-Trimtab-Token": document["token"]})
        deadline = time.monotonic() + 120
        while True:
            try:
                answer = json.loads(urllib.request.urlopen(request, timeout=5).read())
                break
            except OSError:
                assert time.monotonic() < deadline and process.poll() is None
                time.sleep(0.3)
        assert answer["scenario"] == "base"
    finally:
        process.send_signal(__import__("signal").SIGINT)
        process.communicate(timeout=30)
