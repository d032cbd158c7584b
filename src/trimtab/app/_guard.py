"""Who may talk to the explore page: the Host allow-list, the Origin check, the per-run token, and a
deadline on requests that never finish arriving (docs/api.md, "Access").

- **Host**: a request must name this server as ``<address>:<port>`` with the bound address,
  ``127.0.0.1``, ``localhost`` or ``[::1]``; anything else (a DNS-rebinding page names its own
  domain) gets 421 and nothing runs. The check needs no secret, so it comes first.
- **Origin**: when a browser names the request's origin, it must be ``http://`` plus that Host.
- **Token**: a secret made per run (or taken from ``TRIMTAB_EXPLORE_TOKEN``), carried in the URL that
  ``trimtab explore`` prints and opens. Opening the page with ``?token=…`` sets an HttpOnly,
  SameSite=Strict cookie; every other request (the page, the API, the schema) must carry the cookie
  or the header ``X-Trimtab-Token``. The page's own script and style need none.
- **Deadline**: a connection whose request has not fully arrived :data:`REQUEST_TIMEOUT` seconds
  after it opened (or after the previous answer) is closed, so half-open connections do not pile up.
"""

from __future__ import annotations

import os
import secrets
from collections.abc import Iterable
from typing import Any
from urllib.parse import parse_qs

import h11
from starlette.responses import JSONResponse
from starlette.types import ASGIApp, Receive, Scope, Send
from uvicorn.protocols.http.h11_impl import H11Protocol

#: Cookie and header that carry the token.
COOKIE = "trimtab_token"
HEADER = "x-trimtab-token"
#: Environment variable a program may set to choose the token itself.
TOKEN_VARIABLE = "TRIMTAB_EXPLORE_TOKEN"
#: Seconds a request has to arrive whole (headers and body).
REQUEST_TIMEOUT = 10.0
#: Paths served without the token: the page's own script and style, which hold nothing of the fund.
OPEN_PREFIXES = ("/static/",)
#: Host names always accepted beside the bound address.
LOOPBACK_NAMES = ("127.0.0.1", "localhost", "[::1]")


def new_token() -> str:
    """The run's token: ``TRIMTAB_EXPLORE_TOKEN`` when set (at least 16 characters), else 32 random bytes."""
    chosen = os.environ.get(TOKEN_VARIABLE, "")
    if chosen:
        if len(chosen) < 16 or not chosen.isascii() or not chosen.isprintable() or any(c in chosen for c in " ;,&=?#%"):
            from trimtab.errors import InputError

            raise InputError(f"{TOKEN_VARIABLE}: expected at least 16 printable characters without spaces, ;,&=?#%")
        return chosen
    return secrets.token_urlsafe(32)


def allowed_hosts(host: str, port: int) -> frozenset[str]:
    """``name:port`` for the bound address and every loopback name (IPv6 in brackets)."""
    bound = f"[{host}]" if ":" in host and not host.startswith("[") else host
    names: Iterable[str] = {bound, *LOOPBACK_NAMES}
    return frozenset(f"{name.lower()}:{port}" for name in names)


def _refuse(status: int, detail: str) -> JSONResponse:
    return JSONResponse({"detail": detail}, status_code=status, headers={"Cache-Control": "no-store"})


class AccessGuard:
    """ASGI middleware: Host allow-list, Origin with its scheme, then the token (see the module)."""

    def __init__(self, app: ASGIApp, *, hosts: frozenset[str], token: str) -> None:
        self.app = app
        self.hosts = hosts
        self.token = token

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        headers = _headers(scope)
        host = headers.get("host", "").lower()
        if host not in self.hosts:
            shown = host if host.isprintable() and len(host) <= 80 else repr(host[:80])
            await _refuse(421, f"Host {shown or '(none)'} is not this server; open the address trimtab explore printed")(scope, receive, send)
            return
        origin = headers.get("origin")
        if origin is not None and origin.lower() != f"http://{host}":
            await _refuse(403, f"requests from {origin[:80]} are not accepted")(scope, receive, send)
            return
        path = scope.get("path", "")
        if path.startswith(OPEN_PREFIXES):
            await self.app(scope, receive, send)
            return
        query = parse_qs(scope.get("query_string", b"").decode("latin-1"))
        offered = [*query.get("token", []), headers.get(HEADER, ""), *_cookie(headers.get("cookie", ""))]
        if not any(value and secrets.compare_digest(value.encode(), self.token.encode()) for value in offered):
            await _refuse(401, "a token is required: open the address trimtab explore printed (it carries ?token=…), "
                               "or send the header X-Trimtab-Token")(scope, receive, send)
            return
        if query.get("token") and scope.get("method") == "GET":
            await self.app(scope, receive, _with_cookie(send, self.token))
            return
        await self.app(scope, receive, send)


def _headers(scope: Scope) -> dict[str, str]:
    out: dict[str, str] = {}
    for key, value in scope.get("headers") or []:
        out.setdefault(key.decode("latin-1").lower(), value.decode("latin-1"))
    return out


def _cookie(text: str) -> list[str]:
    values = []
    for part in text.split(";"):
        name, _, value = part.strip().partition("=")
        if name == COOKIE:
            values.append(value)
    return values


def _with_cookie(send: Send, token: str) -> Send:
    """``send`` that adds the token cookie to the response's headers."""
    cookie = f"{COOKIE}={token}; HttpOnly; SameSite=Strict; Path=/".encode("latin-1")

    async def wrapped(message: Any) -> None:
        if message["type"] == "http.response.start":
            message = {**message, "headers": [*message.get("headers", []), (b"set-cookie", cookie)]}
        await send(message)

    return wrapped


class DeadlineH11Protocol(H11Protocol):
    """uvicorn's HTTP/1.1 protocol with a deadline on a request's arrival (:data:`REQUEST_TIMEOUT`)."""

    request_timeout = REQUEST_TIMEOUT

    def connection_made(self, transport: Any) -> None:  # noqa: D102
        super().connection_made(transport)
        self._arm()

    def on_response_complete(self) -> None:  # noqa: D102
        super().on_response_complete()
        self._arm()

    def _arm(self) -> None:
        self._armed = getattr(self, "_armed", 0) + 1
        self.loop.call_later(self.request_timeout, self._deadline, self._armed)

    def _deadline(self, armed: int) -> None:
        """Close the connection when its request is still arriving (no answer since this deadline was set)."""
        if armed != self._armed or self.transport.is_closing():
            return
        if self.conn.their_state in (h11.IDLE, h11.SEND_BODY) and (self.cycle is None or not self.cycle.response_started):
            self.transport.close()
