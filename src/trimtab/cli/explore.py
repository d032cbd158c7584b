"""``trimtab explore``: the live what-if page on this machine (registered by :mod:`trimtab.cli`).

The web stack is imported only when the command runs, so the other commands start as fast as before.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Annotated

import typer

from trimtab.cli._app import _ui, add_commands, family

def explore(
    ctx: typer.Context,
    scenario: Annotated[Path, typer.Argument(help="A scenario YAML file.", metavar="SCENARIO.yaml", show_default=False)],
    port: Annotated[int, typer.Option("--port", help="Port to listen on.", min=1, max=65535)] = 8765,
    host: Annotated[str, typer.Option("--host", help="Address to listen on; anything but loopback exposes the page to your network.")] = "127.0.0.1",
    no_browser: Annotated[bool, typer.Option("--no-browser", help="Do not open the page in a browser.", metavar="")] = False,
) -> None:
    """Open a scenario in a local page where the limits move and the portfolio answers.

    Loads the scenario and builds its problem once, then serves a page on this machine: a control for
    every limit, the re-solved portfolio after each change, a trail of the variants tried with their
    alpha against tracking error, pinned variants side by side, and "Save as scenario", which writes
    a new YAML file that extends this one with only the changed limits. The same engine answers the
    HTTP API in docs/api.md. Ctrl-C stops it.
    """
    import signal
    import threading
    import webbrowser

    import uvicorn

    from trimtab.app import Explorer
    from trimtab.app._server import create_app
    ui = _ui(ctx)
    _check_port(host, port)
    with ui.progress() as step:
        step("reading the scenario and building the problem")
        explorer = Explorer.open(scenario)
        step("solving the scenario as written")
        app = create_app(explorer, host=host, port=port)
    url = f"http://{_url_host(host)}:{port}/?token={app.state.token}"
    if not _is_loopback(host):
        sys.stderr.write(
            f"trimtab: warning: listening on {host}: anyone who can reach this machine on port {port} can "
            "see the portfolio and save scenario files; use --host 127.0.0.1 to keep it on this machine\n"
        )
    from trimtab.app._guard import DeadlineH11Protocol

    # a request must arrive whole within the guard's deadline; at most 64 connections at once
    config = uvicorn.Config(app, host=host, port=port, log_level="warning", access_log=False, lifespan="off",
                            http=DeadlineH11Protocol, limit_concurrency=64, timeout_keep_alive=5)
    server = uvicorn.Server(config)
    # the address is the command's output, shown even with --quiet: without its token nothing answers
    if ui.json:  # one line, for a program that starts the server and reads its address
        import json

        sys.stdout.write(json.dumps({"scenario": explorer.scenario.name, "url": url, "token": app.state.token}) + "\n")
    else:
        sys.stdout.write(f"Exploring {explorer.scenario.name} at {url}  (Ctrl-C stops)\n")
    sys.stdout.flush()
    if not no_browser:
        threading.Timer(1.0, lambda: webbrowser.open(url)).start()
    # Ctrl-C is how this command ends: uvicorn shuts down on it and raises it again afterwards, which
    # plain KeyboardInterrupt handling absorbs here (the entry point's handler would report it as an
    # interruption, exit 130); the entry point's handler is back in place once the server stops
    previous = signal.signal(signal.SIGINT, signal.default_int_handler)
    try:
        server.run()
    except KeyboardInterrupt:
        pass
    except SystemExit:  # uvicorn exits when it cannot listen
        server.started = False
    finally:
        signal.signal(signal.SIGINT, previous)
    if not server.started:
        raise _port_error(host, port)
    ui.say("Stopped; nothing was written except the scenarios you saved.")


def _check_port(host: str, port: int) -> None:
    """Fail at once, before loading anything, when the address cannot be listened on."""
    import socket

    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)
    except OSError:
        raise _port_error(host, port) from None
    family, kind, proto, _, address = infos[0]
    with socket.socket(family, kind, proto) as probe:
        probe.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            probe.bind(address)
        except OSError:
            raise _port_error(host, port) from None


def _port_error(host: str, port: int) -> Exception:
    from trimtab.errors import InputError

    return InputError(f"--host {host} --port {port}: cannot listen there (the port is in use, or the address is not this machine's); try another --port")


def _is_loopback(host: str) -> bool:
    import ipaddress

    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def _url_host(host: str) -> str:
    if host in ("0.0.0.0", "::"):
        return "127.0.0.1"
    return f"[{host}]" if ":" in host else host


@family
def register(app: typer.Typer) -> None:
    """Add ``explore`` to the command line (guarded like every command: one line per error)."""
    add_commands(app, {"explore": explore})
