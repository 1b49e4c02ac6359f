"""The workbench's HTTP server (Starlette on uvicorn), bound to 127.0.0.1 by default.

Security
--------
* Every request, the page itself included, carries the random token of the printed
  address, as the query parameter ``token`` or the header ``X-Polarsky-Token``; anything
  else gets 403.
* Nothing is served from a path in a request: the page's three static files are read from
  the package into memory at start and looked up by name; everything else is made from
  the loaded results (tiles, keys, JSON).
* The page may load only from this server (Content-Security-Policy ``'self'``).
* Writing happens only in :meth:`Session.save`, into the output folder.

Endpoints (all ``GET`` unless said)
-----------------------------------
``/`` the page; ``/static/<name>``; ``/api/session``; ``POST /api/select?entry=ID``;
``POST /api/follow?on=0|1``; ``/api/entry?entry=ID``;
``/api/tile/<entry>/<version>/<layer>/<channel>/<level>/<tx>/<ty>.png``;
``/api/key/<layer>.png``; ``/api/preview/<entry>/<version>.bin``;
``/api/pixel?entry=ID&x=X&y=Y``; ``/api/advice?region=x0,y0,x1,y1[&protect=...][&entry=ID]``
(exactly what ``polarsky advise --json`` prints); ``/api/panel?...`` (the advice panel);
``POST /api/save`` (JSON ``{"entry", "region", "protect"}``).
"""

from __future__ import annotations

import hmac
import html
import json
import secrets
import socket
import threading
from importlib import resources
from urllib.parse import parse_qs

from .._version import __version__
from ..errors import InputError, one_line
from ..palette import CHECKER_GREYS, COLOURS
from .session import NotReady, Session
from .view import LAYERS, key_png

__all__ = ["create_app", "Workbench", "bind_socket", "TOKEN_HEADER", "STATIC_FILES"]

TOKEN_HEADER = "x-polarsky-token"
#: name -> media type of the files the page loads (package data of polarsky.workbench.static).
STATIC_FILES = {
    "workbench.js": "text/javascript; charset=utf-8",
    "workbench.css": "text/css; charset=utf-8",
}
CSP = ("default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self' data: blob:; connect-src 'self'; "
       "base-uri 'none'; form-action 'none'; frame-ancestors 'none'")
SECURITY_HEADERS = [
    (b"content-security-policy", CSP.encode()),
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"no-referrer"),
    (b"x-frame-options", b"DENY"),
    (b"cross-origin-resource-policy", b"same-origin"),
]


class TokenGate:
    """ASGI middleware: 403 without the token; security headers on every response."""

    def __init__(self, app, token: str):
        self.app = app
        self.token = token.encode()

    def _given(self, scope) -> bytes | None:
        for k, v in scope.get("headers", []):
            if k == TOKEN_HEADER.encode():
                return v
        qs = parse_qs(scope.get("query_string", b"").decode("latin-1"))
        vals = qs.get("token")
        return vals[-1].encode("latin-1", "replace") if vals else None

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            if scope["type"] == "websocket":
                await send({"type": "websocket.close", "code": 1008})
                return
            await self.app(scope, receive, send)
            return

        async def send_with_headers(message):
            if message["type"] == "http.response.start":
                message = dict(message)
                message["headers"] = list(message.get("headers", [])) + SECURITY_HEADERS
            await send(message)

        given = self._given(scope)
        if given is None or not hmac.compare_digest(given, self.token):
            body = (b"forbidden: this polarsky workbench needs the token of the address it printed "
                    b"(http://HOST:PORT/?token=...)\n")
            await send_with_headers({"type": "http.response.start", "status": 403,
                                     "headers": [(b"content-type", b"text/plain; charset=utf-8"),
                                                 (b"content-length", str(len(body)).encode()),
                                                 (b"cache-control", b"no-store")]})
            await send_with_headers({"type": "http.response.body", "body": body})
            return
        await self.app(scope, receive, send_with_headers)


def _read_static() -> dict:
    pkg = resources.files("polarsky.workbench") / "static"
    out = {}
    for name in (*STATIC_FILES, "index.html"):
        out[name] = (pkg / name).read_bytes()
    return out


def _palette_css() -> bytes:
    lines = [":root {"]
    for name, colour in COLOURS.items():
        lines.append(f"  --{name.replace('_', '-')}: {colour};")
    lo, hi = (round(g * 255) for g in CHECKER_GREYS)
    lines.append(f"  --checker-dark: rgb({lo},{lo},{lo});")
    lines.append(f"  --checker-light: rgb({hi},{hi},{hi});")
    lines.append("}")
    return ("\n".join(lines) + "\n").encode()


def create_app(session: Session, token: str):
    """The Starlette application of one workbench (wrapped in the token gate)."""
    from starlette.applications import Starlette
    from starlette.requests import Request
    from starlette.responses import JSONResponse, Response
    from starlette.routing import Route

    from ..conventions import ANGLE_HELP, FIELD_CAUTION
    from ..write.jsonio import dumps, jsonable

    static = _read_static()
    static["palette.css"] = _palette_css()
    media = dict(STATIC_FILES, **{"palette.css": "text/css; charset=utf-8"})
    keys = {layer: key_png(layer) for layer in LAYERS}  # also loads the colour maps before the first tile

    def err(status, text):
        return JSONResponse({"error": one_line(text)}, status_code=status, headers={"cache-control": "no-store"})

    def ok(obj):
        return JSONResponse(jsonable(obj), headers={"cache-control": "no-store"})

    def guarded(fn):
        def endpoint(request: Request):
            try:
                return fn(request)
            except InputError as exc:
                return err(400, str(exc))
            except NotReady as exc:
                return err(409, str(exc))
            except (KeyError, ValueError, TypeError):
                return err(404, "no such thing here")
        return endpoint

    def q(request, name, default=None):
        v = request.query_params.get(name)
        return default if v in (None, "") else v

    def entry_id(request):
        v = q(request, "entry")
        if v is None:
            if session.current is None:
                raise NotReady("nothing is loaded yet")
            return session.current
        return int(v)

    def index(request):
        token = html.escape(q(request, "token", "") or request.headers.get(TOKEN_HEADER, ""), quote=True)
        page = static["index.html"].decode().replace("{{token}}", token).replace("{{version}}", __version__)
        return Response(page, media_type="text/html; charset=utf-8", headers={"cache-control": "no-store"})

    def static_file(request):
        name = request.path_params["name"]
        if name not in media:
            return err(404, "no such file here")
        return Response(static[name], media_type=media[name], headers={"cache-control": "no-store"})

    def api_session(request):
        snap = session.snapshot()
        snap["layers"] = [{"id": k, "title": v[0]} for k, v in LAYERS.items()]
        snap["palette"] = COLOURS
        snap["checker_greys"] = list(CHECKER_GREYS)
        snap["angle_help"] = ANGLE_HELP
        snap["safety"] = FIELD_CAUTION
        snap["version"] = __version__
        return ok(snap)

    def api_select(request):
        e = session.select(entry_id(request))
        session.request(e)
        return ok(e.public())

    def api_follow(request):
        with session.lock:
            session.follow = q(request, "on", "1") not in ("0", "false", "no")
            session.changes += 1
        return ok({"follow": session.follow})

    def api_entry(request):
        e = session.entry(entry_id(request))
        status = session.request(e) if e.status == "pending" else e.status
        out = e.public()
        out["status"] = status
        if e.view is not None:
            out["meta"] = e.view.meta()
        return ok(out)

    def api_tile(request):
        p = request.path_params
        _, v = session.view(p["entry"], p["version"])
        ch = p["channel"]
        channel = None if ch == "all" else int(ch)
        png = v.tile_png(p["layer"], channel, p["level"], p["tx"], p["ty"])
        return Response(png, media_type="image/png", headers={"cache-control": "private, max-age=600"})

    def api_key(request):
        layer = request.path_params["layer"]
        if layer not in LAYERS:
            return err(404, "no such layer")
        return Response(keys[layer], media_type="image/png", headers={"cache-control": "private, max-age=600"})

    def api_preview(request):
        p = request.path_params
        _, v = session.view(p["entry"], p["version"])
        data, info = v.preview()
        return Response(data, media_type="application/octet-stream",
                        headers={"cache-control": "private, max-age=600", "x-preview": json.dumps(info)})

    def api_pixel(request):
        _, v = session.view(entry_id(request))
        return ok(v.pixel(int(q(request, "x")), int(q(request, "y"))))

    def api_advice(request):
        region = q(request, "region")
        if region is None:
            raise InputError("give region=x0,y0,x1,y1 (pixels, x1 and y1 exclusive)")
        result = session.advice(entry_id(request), region, q(request, "protect"))[0]
        body = dumps(result) + "\n"  # byte for byte what 'polarsky advise --json' prints
        return Response(body, media_type="application/json", headers={"cache-control": "no-store"})

    def api_panel(request):
        region = q(request, "region")
        if region is None:
            raise InputError("give region=x0,y0,x1,y1")
        return ok(session.panel(entry_id(request), region, q(request, "protect")))

    async def api_save(request):
        from starlette.concurrency import run_in_threadpool

        try:
            body = await request.json()
            if not isinstance(body, dict):
                raise ValueError
        except ValueError:
            return err(400, "send a JSON object {entry, region, protect}")

        def work():
            if not body.get("region"):
                raise InputError("draw a region first")
            return session.save(int(body.get("entry", session.current)), str(body["region"]),
                                body.get("protect") or None)

        return await run_in_threadpool(guarded(lambda _r: ok(work())), request)

    routes = [
        Route("/", guarded(index)),
        Route("/static/{name}", guarded(static_file)),
        Route("/api/session", guarded(api_session)),
        Route("/api/select", guarded(api_select), methods=["POST"]),
        Route("/api/follow", guarded(api_follow), methods=["POST"]),
        Route("/api/entry", guarded(api_entry)),
        Route("/api/tile/{entry:int}/{version:int}/{layer}/{channel}/{level:int}/{tx:int}/{ty:int}.png",
              guarded(api_tile)),
        Route("/api/key/{layer}.png", guarded(api_key)),
        Route("/api/preview/{entry:int}/{version:int}.bin", guarded(api_preview)),
        Route("/api/pixel", guarded(api_pixel)),
        Route("/api/advice", guarded(api_advice)),
        Route("/api/panel", guarded(api_panel)),
        Route("/api/save", api_save, methods=["POST"]),
    ]
    return TokenGate(Starlette(routes=routes), token)


def bind_socket(host: str, port: int) -> socket.socket:
    """A listening socket on ``host:port`` (port 0: a free one) or a clear ``InputError``."""
    try:
        infos = socket.getaddrinfo(host, port, type=socket.SOCK_STREAM)
    except socket.gaierror:
        raise InputError(f"--host {host} is not an address of this machine; use 127.0.0.1") from None
    family, _, _, _, addr = infos[0]
    sock = socket.socket(family, socket.SOCK_STREAM)
    try:
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        sock.bind(addr)
    except OSError as exc:
        sock.close()
        import errno

        if exc.errno == errno.EADDRINUSE:
            raise InputError(f"port {port} on {host} is in use; give another --port, or --port 0 for a free one") \
                from None
        if exc.errno in (errno.EACCES, errno.EPERM):
            raise InputError(f"not allowed to listen on port {port}; give a port above 1023") from None
        raise InputError(f"cannot listen on {host}:{port} ({exc.strerror}); give another --host or --port") \
            from None
    sock.listen(128)  # connections made as soon as the address is printed wait for the server
    return sock


class Workbench:
    """A bound, not yet running server for ``session``.

    ``url`` is the address to open (with the token).  :meth:`serve` runs in the calling
    (main) thread and returns when Ctrl-C stops it; :meth:`start` runs it on a thread
    (tests, the screenshot tool) and :meth:`stop` ends it.
    """

    def __init__(self, session: Session, *, host: str = "127.0.0.1", port: int = 0, token: str | None = None):
        import uvicorn

        self.session = session
        self.token = token or secrets.token_urlsafe(24)
        self.sock = bind_socket(host, port)
        self.host = host
        self.port = self.sock.getsockname()[1]
        shown = f"[{host}]" if ":" in host else host
        self.base = f"http://{shown}:{self.port}"
        self.url = f"{self.base}/?token={self.token}"
        config = uvicorn.Config(create_app(session, self.token), log_level="warning", access_log=False,
                                lifespan="off", ws="none", server_header=False, timeout_graceful_shutdown=2)
        self.server = uvicorn.Server(config)
        self._thread: threading.Thread | None = None

    def serve(self) -> None:
        try:
            self.server.run(sockets=[self.sock])
        finally:
            self.sock.close()

    def start(self, timeout_s: float = 20.0) -> "Workbench":
        import time

        self._thread = threading.Thread(target=self.serve, name="polarsky-workbench", daemon=True)
        self._thread.start()
        deadline = time.monotonic() + timeout_s
        while not self.server.started:
            if time.monotonic() > deadline or not self._thread.is_alive():
                raise RuntimeError("the workbench server did not start")
            time.sleep(0.02)
        return self

    def stop(self) -> None:
        self.server.should_exit = True
        if self._thread is not None:
            self._thread.join(timeout=10)
        self.session.close()

    def __enter__(self):
        return self.start()

    def __exit__(self, *exc):
        self.stop()
