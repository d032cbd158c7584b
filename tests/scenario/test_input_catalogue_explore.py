"""The hostile-input catalogue, the explore page's HTTP API (issue #20): numbers that are not JSON numbers,
text that is not text, a tiny risk cap, requests naming another host (DNS rebinding) or origin, requests
without the run's token, and Save on a disk that refuses. Each answer: its status and ONE JSON document
``{"detail": …}`` naming the key or the cause; nothing written but what Save asks for.
"""

from __future__ import annotations

import errno
import os
import socket
import threading
import time
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from tests.demo_helpers import make_demo_folder
from tests.scenario.test_input_catalogue import snapshot

PORT = 8765
TOKEN = "catalogue-token-0123456789"
SOLVE, SAVE = "/api/solve", "/api/save"


@pytest.fixture(scope="module")
def folder(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return make_demo_folder(tmp_path_factory.mktemp("catalogue-explore"))


@pytest.fixture(scope="module")
def application(folder: Path):  # type: ignore[no-untyped-def]
    from trimtab.app import Explorer
    from trimtab.app._server import create_app

    return create_app(Explorer.open(folder / "base.yaml"), port=PORT, token=TOKEN)


@pytest.fixture
def client(application) -> TestClient:  # type: ignore[no-untyped-def]
    return TestClient(application, base_url=f"http://127.0.0.1:{PORT}", headers={"X-Trimtab-Token": TOKEN},
                      raise_server_exceptions=False)


JSON = {"content-type": "application/json"}
HOSTILE_HOST = {"host": f"attacker.example:{PORT}", "origin": f"http://attacker.example:{PORT}"}

# (id, method, path, JSON body or raw bytes, extra headers, status, the one detail line)
CASES: list[tuple[str, str, str, Any, dict[str, str], int, str]] = [
    # ---------------------------------------------------------------- numbers must be JSON numbers
    ("limit-true", "POST", SOLVE, {"limits": {"tracking_error.max": True}}, {}, 422, "limits.tracking_error.max: expected a JSON number, got true"),
    ("limit-quoted", "POST", SOLVE, {"limits": {"tracking_error.max": "0.02"}}, {}, 422,
     'limits.tracking_error.max: expected a JSON number, got "0.02"; write it without quotes'),
    ("risk-aversion-true", "POST", SOLVE, {"risk_aversion": True}, {}, 422, "risk_aversion: expected a JSON number, got true"),
    ("save-turnover-true", "POST", SAVE, {"name": "t", "limits": {"turnover.max": True}}, {}, 422, "limits.turnover.max: expected a JSON number, got true"),
    # ---------------------------------------------------------------- text that is not text
    ("limit-key-lone-surrogate", "POST", SOLVE, b'{"limits": {"\\ud800": 0.02}}', JSON, 422,
     "body: text holds a lone surrogate (an escape such as \\ud800 that is no character)"),
    ("save-name-lone-surrogate", "POST", SAVE, b'{"name": "a\\udc00", "limits": {}}', JSON, 422,
     "body: text holds a lone surrogate (an escape such as \\ud800 that is no character)"),
    ("body-not-utf8", "POST", SOLVE, b'{"limits": {"\xff": 0.02}}', JSON, 422, "the body is not valid JSON (UTF-8 text)"),
    # ---------------------------------------------------------------- a user's value never reaches a solver assertion
    ("te-cap-1e-300", "POST", SOLVE, {"limits": {"tracking_error.max": 1e-300}}, {}, 422,
     "constraints.tracking_error.max: 1e-300 is below the smallest risk cap trimtab can honour, 1e-06 (0.0001% a year); write 0 for no risk at all"),
    # ---------------------------------------------------------------- another host: DNS rebinding
    ("foreign-host-solve", "POST", SOLVE, {"limits": {}}, HOSTILE_HOST, 421,
     f"Host attacker.example:{PORT} is not this server; open the address trimtab explore printed"),
    ("foreign-host-save", "POST", SAVE, {"name": "evil", "limits": {}}, HOSTILE_HOST, 421,
     f"Host attacker.example:{PORT} is not this server; open the address trimtab explore printed"),
    ("foreign-host-page", "GET", "/", None, {"host": f"attacker.example:{PORT}"}, 421,
     f"Host attacker.example:{PORT} is not this server; open the address trimtab explore printed"),
    ("foreign-host-scenario", "GET", "/api/scenario", None, {"host": f"attacker.example:{PORT}"}, 421,
     f"Host attacker.example:{PORT} is not this server; open the address trimtab explore printed"),
    ("loopback-other-port", "GET", "/api/scenario", None, {"host": "127.0.0.1:9999"}, 421,
     "Host 127.0.0.1:9999 is not this server; open the address trimtab explore printed"),
    ("origin-other-scheme", "POST", SOLVE, {"limits": {}}, {"origin": f"https://127.0.0.1:{PORT}"}, 403,
     f"requests from https://127.0.0.1:{PORT} are not accepted"),
    # ---------------------------------------------------------------- the run's token
    ("no-token-solve", "POST", SOLVE, {"limits": {}}, {"x-trimtab-token": ""}, 401,
     "a token is required: open the address trimtab explore printed (it carries ?token=…), or send the header X-Trimtab-Token"),
    ("wrong-token-save", "POST", SAVE, {"name": "w", "limits": {}}, {"x-trimtab-token": "not-the-token-at-all"}, 401,
     "a token is required: open the address trimtab explore printed (it carries ?token=…), or send the header X-Trimtab-Token"),
    ("no-token-page", "GET", "/", None, {"x-trimtab-token": ""}, 401,
     "a token is required: open the address trimtab explore printed (it carries ?token=…), or send the header X-Trimtab-Token"),
    ("no-token-schema", "GET", "/openapi.json", None, {"x-trimtab-token": ""}, 401,
     "a token is required: open the address trimtab explore printed (it carries ?token=…), or send the header X-Trimtab-Token"),
    # ---------------------------------------------------------------- every failure is one JSON document
    ("unknown-path", "GET", "/api/nothing", None, {}, 404, "Not Found"),
    ("wrong-method", "GET", SOLVE, None, {}, 405, "Method Not Allowed"),
]


@pytest.mark.parametrize(("method", "path", "body", "headers", "status", "detail"), [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_catalogue(client: TestClient, folder: Path, method: str, path: str, body: Any, headers: dict[str, str], status: int, detail: str) -> None:
    before = snapshot(folder)
    if isinstance(body, bytes):
        response = client.request(method, path, content=body, headers=headers)
    else:
        response = client.request(method, path, json=body, headers=headers)
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/json")
    assert response.json() == {"detail": detail}
    assert snapshot(folder) == before  # nothing written


def test_the_token_in_the_printed_url_sets_a_cookie_the_page_uses(application) -> None:  # type: ignore[no-untyped-def]
    browser = TestClient(application, base_url=f"http://localhost:{PORT}")
    assert browser.get("/api/scenario").status_code == 401
    page = browser.get(f"/?token={TOKEN}")
    assert page.status_code == 200 and "HttpOnly" in page.headers["set-cookie"] and "SameSite=Strict" in page.headers["set-cookie"]
    assert browser.get("/api/scenario").status_code == 200  # the cookie now carries it
    assert browser.get("/static/explore.js").status_code == 200


@pytest.mark.parametrize(("code", "status", "cause"), [(errno.EROFS, 500, "the file system is read-only"), (errno.ENOSPC, 507, "no space left on the disk")],
                         ids=["read-only", "disk-full"])
def test_save_on_a_disk_that_refuses_names_the_cause(client: TestClient, folder: Path, monkeypatch: pytest.MonkeyPatch, code: int, status: int, cause: str) -> None:
    import trimtab.app._session as session

    def refused(*args: object, **kwargs: object) -> object:
        raise OSError(code, os.strerror(code), str(folder / ".x.tmp"))

    monkeypatch.setattr(session.tempfile, "mkstemp", refused)
    before = snapshot(folder)
    response = client.post(SAVE, json={"name": "disk", "limits": {}})
    assert response.status_code == status
    assert list(response.json()) == ["detail"] and cause in response.json()["detail"]
    assert snapshot(folder) == before


def test_saved_files_follow_the_umask(client: TestClient, folder: Path) -> None:
    old = os.umask(0o027)
    try:
        response = client.post(SAVE, json={"name": "masked", "limits": {"turnover.max": 0.2}})
    finally:
        os.umask(old)
    assert response.status_code == 201, response.text
    path = Path(response.json()["file"])
    try:
        assert path.stat().st_mode & 0o777 == 0o640
    finally:
        path.unlink()


def test_a_request_that_never_arrives_whole_is_closed() -> None:
    """100 half-open connections (headers never finished) are closed at the deadline, not kept forever."""
    import uvicorn

    from trimtab.app._guard import DeadlineH11Protocol

    class Quick(DeadlineH11Protocol):
        request_timeout = 0.5

    async def app(scope: Any, receive: Any, send: Any) -> None:  # never reached: no request completes
        raise AssertionError("no request should arrive")

    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    server = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=port, http=Quick, lifespan="off", log_level="error"))
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    while not server.started:
        time.sleep(0.05)
    try:
        clients = [socket.create_connection(("127.0.0.1", port)) for _ in range(100)]
        for one in clients:
            one.sendall(f"POST /api/solve HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n".encode())
            one.settimeout(30)  # a generous bound for the test only; the server closes at 0.5 s
        closed = sum(one.recv(64) == b"" for one in clients)
        for one in clients:
            one.close()
    finally:
        server.should_exit = True
        thread.join(timeout=10)
    assert closed == 100
