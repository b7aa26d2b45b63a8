"""The local review page and its API (the edge of the review room; the only module using the web stack).

An ASGI application (Starlette) served by uvicorn on ``127.0.0.1``. Safety:

* **Session token**: a random token (:func:`secrets.token_urlsafe`, 32 bytes) made per
  session. The page address carries it once (``/?token=...``); every API request must send
  it as the ``X-Review-Token`` header (compared in constant time). Nothing is served
  without it.
* **Host check** (DNS rebinding): a request whose ``Host`` is not ``127.0.0.1:PORT`` or
  ``localhost:PORT`` is refused (403) before anything else.
* **Cross-origin writes**: a ``POST`` with an ``Origin`` other than the page's own or a
  ``Sec-Fetch-Site`` other than ``same-origin``/``none`` is refused (403); the body must be
  JSON (at most 64 KiB). A foreign page cannot send the token header without a CORS
  preflight, which this server never grants.
* **Nothing from the network**: the page's CSS and JavaScript are inline, allowed by a
  per-response nonce in a Content-Security-Policy that forbids every other load
  (``default-src 'none'``); responses are ``no-store``, ``no-referrer``, not framable.
* The access log is off (the page address holds the token).
"""

from __future__ import annotations

import json
import secrets
import socket
from importlib import resources
from typing import Any, Callable

from starlette.applications import Starlette
from starlette.requests import Request
from starlette.responses import HTMLResponse, JSONResponse, PlainTextResponse, Response
from starlette.routing import Route

from matcher.errors import MatcherError

TOKEN_HEADER = "X-Review-Token"
MAX_BODY = 64 * 1024


def _asset(name: str) -> str:
    return resources.files("matcher.review").joinpath("assets", name).read_text(encoding="utf-8")


def _environment():
    import jinja2

    return jinja2.Environment(loader=jinja2.PackageLoader("matcher.review", "templates"),
                              autoescape=jinja2.select_autoescape(["html"]), undefined=jinja2.StrictUndefined)


def _headers(nonce: str | None = None) -> dict[str, str]:
    script = f"'nonce-{nonce}'" if nonce else "'none'"
    csp = (f"default-src 'none'; script-src {script}; style-src {script}; img-src data:; connect-src 'self'; "
           "base-uri 'none'; form-action 'none'; frame-ancestors 'none'")
    return {"Content-Security-Policy": csp, "Cache-Control": "no-store", "Referrer-Policy": "no-referrer",
            "X-Content-Type-Options": "nosniff", "X-Frame-Options": "DENY",
            "Cross-Origin-Resource-Policy": "same-origin", "Cross-Origin-Opener-Policy": "same-origin"}


class _Guard:
    """ASGI middleware: the Host check for every request (refused with 403 before routing)."""

    def __init__(self, app, hosts: set[str]) -> None:
        self.app = app
        self.hosts = hosts

    async def __call__(self, scope, receive, send):
        if scope["type"] in ("http", "websocket"):
            host = ""
            for k, v in scope.get("headers") or []:
                if k == b"host":
                    host = v.decode("latin-1").lower()
                    break
            if host not in self.hosts:
                if scope["type"] == "http":
                    resp = PlainTextResponse("refused: this review server answers only to its own loopback "
                                             "address", status_code=403, headers=_headers())
                    await resp(scope, receive, send)
                return
        await self.app(scope, receive, send)


#: How the page names each status.
STATUS_WORDS = {"open": "to do", "accept": "accepted", "reject": "rejected", "unsure": "unsure"}


def first_view(peaks: list[dict]) -> list[dict]:
    """The peak list as the page first shows it (before its script runs): peaks marked for review and not
    decided first, then file order; each with ``status`` and the name shown."""
    out = []
    for k, p in enumerate(peaks):
        status = p["decision"]["decision"] if p["decision"] else "open"
        shown = (p["decision"] or {}).get("name") or (p["candidates"][0]["name"] if p["candidates"] else "no candidate")
        out.append((0 if status == "open" and p["needs_review"] else 1, k,
                    {"run": p["run"], "peak": p["peak"], "ri": p.get("ri"), "status": status, "shown": shown,
                     "mark": p["needs_review"]}))
    return [x[2] for x in sorted(out, key=lambda x: (x[0], x[1]))]


def create_app(review, *, token: str, port: int, db: str | None = None,
               confirm: Callable[..., Any] | None = None) -> Starlette:
    """The review application for one :class:`~matcher.review.session.Review` on ``127.0.0.1:port``."""
    env = _environment()
    origins = {f"http://127.0.0.1:{port}", f"http://localhost:{port}"}
    hosts = {f"127.0.0.1:{port}", f"localhost:{port}"}

    def token_ok(given: str | None) -> bool:
        return bool(given) and secrets.compare_digest(str(given).encode("utf-8", "replace"), token.encode())

    def refuse(message: str, status: int) -> JSONResponse:
        return JSONResponse({"error": message}, status_code=status, headers=_headers())

    def needs_token(request: Request) -> JSONResponse | None:
        if not token_ok(request.headers.get(TOKEN_HEADER)):
            return refuse(f"the session token is missing or wrong (send it as the {TOKEN_HEADER} header)", 403)
        return None

    def write_guard(request: Request) -> JSONResponse | None:
        bad = needs_token(request)
        if bad:
            return bad
        origin = request.headers.get("origin")
        if origin is not None and origin not in origins:
            return refuse("cross-origin writes are refused", 403)
        site = request.headers.get("sec-fetch-site")
        if site is not None and site not in ("same-origin", "none"):
            return refuse("cross-site writes are refused", 403)
        return None

    async def body_of(request: Request) -> Any:
        raw = b""
        async for chunk in request.stream():
            raw += chunk
            if len(raw) > MAX_BODY:
                raise MatcherError(f"the request body is larger than {MAX_BODY} bytes")
        try:
            return json.loads(raw.decode("utf-8"))
        except (UnicodeDecodeError, json.JSONDecodeError, RecursionError):
            raise MatcherError("the request body is not JSON") from None

    async def page(request: Request) -> Response:
        if not token_ok(request.query_params.get("token")):
            return PlainTextResponse("This review page opens from the address matcher review printed "
                                     "(it carries the session token).", status_code=403, headers=_headers())
        nonce = secrets.token_urlsafe(16)
        s = review.summary()
        html = env.get_template("page.html").render(
            nonce=nonce, token=token, summary=s, can_add=db is not None or confirm is not None,
            peaks=first_view(review.peaks()), words=STATUS_WORDS,
            css=_asset("review.css"), js=_asset("review.js"))
        return HTMLResponse(html, headers=_headers(nonce))

    async def peaks(request: Request) -> Response:
        bad = needs_token(request)
        if bad:
            return bad
        return JSONResponse({"summary": review.summary(), "peaks": review.peaks()}, headers=_headers())

    async def decisions(request: Request) -> Response:
        bad = write_guard(request)
        if bad:
            return bad
        try:
            body = await body_of(request)
            stored = review.decide(body)
        except MatcherError as exc:
            status = 409 if "changed since" in str(exc) or "is gone" in str(exc) else 400
            return refuse(str(exc), status)
        return JSONResponse({"decision": stored, "counts": review.summary()["counts"]}, headers=_headers())

    async def add_to_library(request: Request) -> Response:
        bad = write_guard(request)
        if bad:
            return bad
        if db is None and confirm is None:
            return refuse("this review was started without --db; add confirmed peaks with "
                          "matcher confirm --review RECORD --db LIBRARY", 409)
        try:
            body = await body_of(request)
            if not isinstance(body, dict) or set(body) - {"run", "peak", "source"}:
                raise MatcherError("send {\"run\", \"peak\", \"source\"?}")
            from matcher.limits import check_text
            from matcher.review.confirming import confirm_peak

            fn = confirm or confirm_peak
            outcome = fn(review, db, str(body.get("run", "")), str(body.get("peak", "")),
                         source=check_text(body.get("source") or None, "source"))
        except MatcherError as exc:
            return refuse(str(exc), 409)
        return JSONResponse(outcome.as_dict(), status_code=200 if outcome.added else 409, headers=_headers())

    async def record_doc(request: Request) -> Response:
        bad = needs_token(request)
        if bad:
            return bad
        return JSONResponse(review.record, headers=_headers())

    routes = [Route("/", page, methods=["GET"]), Route("/api/peaks", peaks, methods=["GET"]),
              Route("/api/decisions", decisions, methods=["POST"]),
              Route("/api/library", add_to_library, methods=["POST"]),
              Route("/api/record", record_doc, methods=["GET"])]
    app = Starlette(routes=routes)
    app.add_middleware(_Guard, hosts=hosts)
    return app


def bind(port: int | None) -> socket.socket:
    """A listening socket on 127.0.0.1 (``port`` or one the system chooses)."""
    from matcher.rules import check_port

    port = check_port(port)
    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    try:
        sock.bind(("127.0.0.1", int(port or 0)))
    except OSError as exc:
        sock.close()
        raise MatcherError(f"cannot listen on 127.0.0.1:{port}: {exc.strerror or exc}; choose another --port "
                           f"or leave it out") from None
    sock.listen(64)
    return sock


def serve(review, *, port: int | None = None, db: str | None = None, open_browser: bool = False,
          announce: Callable[[str], None] = print) -> None:
    """Serve the review until interrupted; ``announce`` gets the page address (with the token) once."""
    import uvicorn

    sock = bind(port)
    real_port = sock.getsockname()[1]
    token = secrets.token_urlsafe(32)
    app = create_app(review, token=token, port=real_port, db=db)
    url = f"http://127.0.0.1:{real_port}/?token={token}"
    announce(url)
    if open_browser:
        import webbrowser

        webbrowser.open(url)
    config = uvicorn.Config(app, log_level="warning", access_log=False, server_header=False,
                            limit_concurrency=64, timeout_keep_alive=5)
    server = uvicorn.Server(config)
    try:
        server.run(sockets=[sock])
    finally:
        sock.close()
