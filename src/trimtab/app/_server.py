"""The HTTP side of ``trimtab explore``: the page, its two assets and a small JSON API (docs/api.md).

Safety: a request must name this server in its Host, come from this page when the browser names
its origin, and carry the run's token (:mod:`trimtab.app._guard`); only the package's own assets
are served (a fixed list, no paths from the request); request bodies are capped (413 above
:data:`MAX_BODY`); a POST must be JSON whose numbers are JSON numbers; limit keys and values are
checked against the scenario; solves run one at a time (the explorer's lock); only Save writes a
file, under the umask; every failure answers one JSON document ``{"detail": …}``.
"""

from __future__ import annotations

import errno
import json
import threading
from importlib import resources
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import HTMLResponse, JSONResponse, Response
from pydantic import BaseModel, ConfigDict, Field, StrictFloat, model_validator
from starlette.exceptions import HTTPException as StarletteHTTPException
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from trimtab._version import __version__
from trimtab.app._guard import AccessGuard, allowed_hosts, new_token
from trimtab.app._session import Explorer
from trimtab.errors import TrimtabError

#: Largest request body accepted, in bytes.
MAX_BODY = 64 * 1024
#: The files under /static/, with their media types: nothing else is ever read from disk.
ASSETS = {"explore.js": "text/javascript; charset=utf-8", "explore.css": "text/css; charset=utf-8"}


class SolveRequest(BaseModel):
    """New values for some of the scenario's limits; the others keep the scenario's values."""

    model_config = ConfigDict(extra="forbid", allow_inf_nan=False)

    limits: dict[str, StrictFloat | None] = Field(
        default_factory=dict,
        description="dotted key path → value, as `trimtab sweep` takes them (GET /api/scenario lists them); "
        "null opens one side of a bound",
        examples=[{"tracking_error.max": 0.02, "factor_exposure.bounds.momentum.1": 0.1}],
    )
    risk_aversion: StrictFloat | None = Field(None, description="λ of a utility objective (same as limits.risk_aversion)")

    @model_validator(mode="before")
    @classmethod
    def _plain_text(cls, value: Any) -> Any:
        """Refuse a key or text holding a lone surrogate (JSON's ``\\ud800``): it is no character."""
        if not _encodable(value):
            raise ValueError("text holds a lone surrogate (an escape such as \\ud800 that is no character)")
        return value


class SaveRequest(SolveRequest):
    """A variant to save as a scenario file beside the explored one."""

    name: str = Field(description="the new scenario's name and file name (letters, digits, - and _)", examples=["te_25bp"])


class LimitInfo(BaseModel):
    """One limit the API accepts (see docs/api.md)."""

    key: str = Field(description="dotted key path, as `trimtab sweep` takes it")
    value: float | None = Field(description="the scenario's value; null for an optional bound it does not set")
    section: str
    label: str
    unit: str = Field(description="fraction, exposure, count or number")
    low: float = Field(description="low end of the page's slider")
    high: float = Field(description="high end of the page's slider")
    optional: bool = Field(description="a bound the scenario does not set: a value adds it, null removes it")


class ModelSize(BaseModel):
    n_assets: int
    n_factors: int


class ScenarioInfo(BaseModel):
    """The explored scenario and every limit the API accepts."""

    scenario: str
    file: str
    description: str
    objective: dict[str, Any]
    model: ModelSize
    limits: list[LimitInfo]
    trail_key: str = Field(description="digest of the scenario file's location and text; the page keeps its trail "
                           "of variants in the browser's sessionStorage under it")


class Saved(BaseModel):
    """The scenario file Save wrote."""

    file: str = Field(description="path of the new file")
    name: str
    extends: str = Field(description="the explored scenario's file name")
    changes: dict[str, float | None] = Field(description="the limits written, by key path")


class BodyLimit:
    """ASGI middleware: 413 for a request body over ``limit`` bytes (declared or streamed)."""

    def __init__(self, app: ASGIApp, limit: int = MAX_BODY) -> None:
        self.app = app
        self.limit = limit

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = dict(scope.get("headers") or []).get(b"content-length")
        if declared is not None and (not declared.isdigit() or int(declared) > self.limit):
            await _too_large(self.limit)(scope, receive, send)
            return
        # read the whole body first (at most ``limit`` bytes), then hand it on in one message
        body = b""
        while True:
            message = await receive()
            if message["type"] != "http.request":
                await self.app(scope, _replay(message), send)
                return
            body += message.get("body", b"")
            if len(body) > self.limit:
                await _too_large(self.limit)(scope, receive, send)
                return
            if not message.get("more_body", False):
                break
        await self.app(scope, _replay({"type": "http.request", "body": body, "more_body": False}, receive), send)


def _replay(first: Message, then: Receive | None = None) -> Receive:
    """A receive channel that yields ``first``, then whatever ``then`` (the client) sends."""
    sent = False

    async def receive() -> Message:
        nonlocal sent
        if not sent:
            sent = True
            return first
        if then is None:
            return {"type": "http.disconnect"}
        return await then()

    return receive


def _too_large(limit: int) -> Response:
    return JSONResponse({"detail": f"request body over {limit // 1024} KiB"}, status_code=413)


def _encodable(value: Any) -> bool:
    """Every key and text in ``value`` encodes as UTF-8 (none holds a lone surrogate)."""
    if isinstance(value, str):
        try:
            value.encode("utf-8")
        except UnicodeEncodeError:
            return False
        return True
    if isinstance(value, dict):
        return all(_encodable(k) and _encodable(v) for k, v in value.items())
    if isinstance(value, list):
        return all(_encodable(v) for v in value)
    return True


def create_app(explorer: Explorer, *, host: str = "127.0.0.1", port: int = 8765, token: str | None = None) -> FastAPI:
    """The web application serving ``explorer``: the page at ``/`` and the API under ``/api``.

    Parameters
    ----------
    explorer : Explorer
    host, port : str, int
        The address served: requests must name it (or a loopback name) in their Host header.
    token : str, optional
        The run's secret; default :func:`trimtab.app._guard.new_token`. Kept as ``app.state.token``.
    """
    app = FastAPI(
        title="trimtab explore",
        version=__version__,
        description="Re-solve one scenario with new limits. Model forecasts, not investment advice; verify "
        "before trading; your firm's compliance and applicable regulation govern.",
        docs_url=None,
        redoc_url=None,
    )
    first = explorer.solve({})
    _warm(first)

    @app.exception_handler(RequestValidationError)
    async def _invalid(request: Request, exc: RequestValidationError) -> JSONResponse:
        return JSONResponse({"detail": _one_line(exc.errors())}, status_code=422)

    @app.exception_handler(StarletteHTTPException)
    async def _http(request: Request, exc: StarletteHTTPException) -> JSONResponse:
        if exc.status_code == 400 and "parsing the body" in str(exc.detail):  # bytes that are not UTF-8 text
            return JSONResponse({"detail": "the body is not valid JSON (UTF-8 text)"}, status_code=422)
        return JSONResponse({"detail": str(exc.detail)}, status_code=exc.status_code, headers=getattr(exc, "headers", None))

    @app.exception_handler(TrimtabError)
    async def _bad(request: Request, exc: TrimtabError) -> JSONResponse:
        return JSONResponse({"detail": _first_line(exc, explorer)}, status_code=_status(exc))

    @app.middleware("http")
    async def _guard(request: Request, call_next: Any) -> Response:
        if request.method == "POST":
            kind = request.headers.get("content-type", "").split(";")[0].strip().lower()
            if kind != "application/json":
                return JSONResponse({"detail": "send the body as JSON (Content-Type: application/json)"}, status_code=415)
        response: Response = await call_next(request)
        response.headers.setdefault("X-Content-Type-Options", "nosniff")
        response.headers.setdefault("Cache-Control", "no-store")
        return response

    @app.get("/", response_class=HTMLResponse, include_in_schema=False)
    def page() -> HTMLResponse:
        from trimtab.app._view import page_view
        from trimtab.report import CAUTION
        from trimtab.report._templates import render

        view = page_view(first)
        html = render("explore.html.j2", settings=explorer.settings(), first=view, caution=CAUTION)
        return HTMLResponse(html, headers={"Content-Security-Policy": CSP})

    @app.get("/static/{name}", include_in_schema=False)
    def asset(name: str) -> Response:
        if name not in ASSETS:
            return JSONResponse({"detail": "not found"}, status_code=404)
        body = resources.files("trimtab.app").joinpath("static", name).read_bytes()
        return Response(body, media_type=ASSETS[name])

    @app.get("/api/scenario", summary="The scenario and every limit with its key path and value")
    def scenario() -> ScenarioInfo:
        return ScenarioInfo.model_validate(explorer.settings())

    @app.post("/api/solve", summary="Solve with new limits: the result.json document, or the infeasibility document",
              response_class=JSONResponse, responses={200: {"description": "the result.json document (docs/outputs.md)"}})
    def solve(body: SolveRequest) -> Response:
        from trimtab.report import report_document

        variant = explorer.solve(explorer.changes_of(body.limits, body.risk_aversion))
        # already plain JSON values (NaN as null): written as result.json is, without a second encoding pass
        text = json.dumps(report_document(variant.subject), allow_nan=False, ensure_ascii=False)
        return Response(text, media_type="application/json")

    @app.post("/page/solve", include_in_schema=False)
    def page_solve(body: SolveRequest) -> dict[str, Any]:
        from trimtab.app._view import page_view

        return page_view(explorer.solve(explorer.changes_of(body.limits, body.risk_aversion)))

    @app.post("/api/save", status_code=201, summary="Save a variant as a scenario file that extends the explored one")
    def save(body: SaveRequest) -> Saved:
        changes = explorer.changes_of(body.limits, body.risk_aversion)
        path = explorer.save(body.name, changes)
        return Saved(file=str(path), name=body.name, extends=explorer.scenario.path.name, changes=changes)

    @app.exception_handler(OSError)
    async def _environment(request: Request, exc: OSError) -> JSONResponse:
        from trimtab._paths import environment_line

        full = exc.errno in (errno.ENOSPC, errno.EDQUOT)
        return JSONResponse({"detail": _first_line(Exception(environment_line(exc)), explorer)}, status_code=507 if full else 500)

    @app.exception_handler(Exception)
    async def _bug(request: Request, exc: Exception) -> JSONResponse:
        text = str(exc).strip().splitlines()[0] if str(exc).strip() else ""
        return JSONResponse({"detail": f"internal error (a bug in trimtab; please report it): {type(exc).__name__}: {text}"[:500]},
                            status_code=500)

    secret = token if token is not None else new_token()
    app.add_middleware(BodyLimit, limit=MAX_BODY)
    app.add_middleware(AccessGuard, hosts=allowed_hosts(host, port), token=secret)
    app.state.token = secret
    app.state.explorer = explorer
    return app


#: The page runs only its own script and style; nothing is fetched from anywhere else.
CSP = "default-src 'self'; img-src 'self' data:; style-src 'self'; script-src 'self'; connect-src 'self'; frame-ancestors 'none'"


def _warm(first: Any) -> None:
    """Pay the first request's one-time costs at start-up (#21: the first change took 1.7 s, later ones
    0.2–0.4 s): the page's and the API's documents of the scenario as written are built once (their
    modules imported, templates compiled, first-touch memory), and cvxpy, which only an infeasible
    setting's diagnosis may reach, is imported on a background thread while the page opens."""
    from trimtab.app._view import page_view
    from trimtab.construct import _solve
    from trimtab.report import report_document

    page_view(first)
    report_document(first.subject)
    threading.Thread(target=_solve.installed, name="trimtab-warm-cvxpy", daemon=True).start()


def _one_line(errors: Any) -> str:
    """The first validation error as ``where: what`` in the request's own key names."""
    if not errors:
        return "invalid request"
    error = errors[0]
    where = ".".join(str(p) for p in error.get("loc", ()) if p != "body")
    what = str(error.get("msg", "invalid value")).removeprefix("Value error, ")
    if error.get("type") == "json_invalid":
        return "the body is not valid JSON"
    if error.get("type") == "extra_forbidden":
        return f"{where}: unknown key (expected limits, risk_aversion{', name' if 'name' in str(errors) else ''})"
    got = error.get("input")
    if error.get("type") == "float_type" and isinstance(got, (bool, str)):
        return f"{where}: expected a JSON number, got {json.dumps(got)[:60]}" + ("; write it without quotes" if _numeric(got) else "")
    shown = "" if isinstance(got, (dict, list)) or got is None else f" (got {got!r})"
    return f"{where or 'body'}: {what}{shown}"


def _numeric(value: Any) -> bool:
    if not isinstance(value, str):
        return False
    try:
        float(value)
    except ValueError:
        return False
    return True


def _first_line(err: BaseException, explorer: Explorer) -> str:
    text = str(err).strip().splitlines()[0] if str(err).strip() else type(err).__name__
    return text.replace(f"{explorer.scenario.path}: ", "")


def _status(err: BaseException) -> int:
    return 409 if "already exists" in str(err) else 422

