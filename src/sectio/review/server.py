"""The review page's local web server (bottle on the standard library's WSGI server).

Security: it listens on 127.0.0.1 only, on a free port; every request must carry the
random access token (``?token=`` in the URL, or the ``X-Token`` header the page's script
sends) or gets 403; requests name fields by number and static files by a fixed list, so no
path outside OUT_DIR can be read or written (edit files go beside the result documents);
request bodies above 256 kB are refused (413) and the ``Host`` header must be the loopback
address (a page elsewhere cannot reach the server through another name).
"""

from __future__ import annotations

import hmac
import json
import secrets
import threading
from importlib import resources
from socketserver import ThreadingMixIn
from wsgiref.simple_server import WSGIRequestHandler, WSGIServer, make_server

import bottle

from ..errors import InputError
from .session import ReviewSession

MAX_BODY_BYTES = 256 * 1024
STATIC = {"review.js": "application/javascript", "review.css": "text/css",
          "index.html": "text/html"}


class _ThreadingServer(ThreadingMixIn, WSGIServer):
    daemon_threads = True


class _QuietHandler(WSGIRequestHandler):
    def log_message(self, format, *args):  # noqa: A002 - the stdlib's signature
        pass


def _static(name: str) -> bytes:
    return resources.files("sectio.review").joinpath("static", name).read_bytes()


def make_app(session: ReviewSession, token: str, *, allowed_hosts: set[str] | None = None
             ) -> bottle.Bottle:
    """The WSGI application of the review page for ``session``."""
    app = bottle.Bottle()
    bottle.BaseRequest.MEMFILE_MAX = MAX_BODY_BYTES

    @app.hook("before_request")
    def _guard():
        req = bottle.request
        given = req.query.get("token") or req.get_header("X-Token") or ""
        if not hmac.compare_digest(given.encode(), token.encode()):
            bottle.abort(403, "a valid access token is required")
        if allowed_hosts is not None and req.get_header("Host") not in allowed_hosts:
            bottle.abort(403, "the review server answers on its loopback address only")
        length = req.content_length
        if length is not None and length > MAX_BODY_BYTES:
            bottle.abort(413, "request too large")

    def _json(obj, status: int = 200):
        bottle.response.status = status
        bottle.response.content_type = "application/json"
        bottle.response.set_header("Cache-Control", "no-store")
        return json.dumps(obj, allow_nan=False, default=_jsonable)

    def _field(fid: int):
        if not 0 <= fid < len(session.fields):
            bottle.abort(404, "no such field")
        return fid

    def _body() -> dict:
        raw = bottle.request.body.read(MAX_BODY_BYTES + 1)
        if len(raw) > MAX_BODY_BYTES:
            bottle.abort(413, "request too large")
        try:
            obj = json.loads(raw or b"{}")
        except ValueError:
            bottle.abort(400, "the request body is not JSON")
        if not isinstance(obj, dict):
            bottle.abort(400, "the request body must be a JSON object")
        return obj

    def _answer(fn):
        try:
            return _json(fn())
        except InputError as exc:
            return _json({"error": str(exc)}, 422)

    @app.get("/")
    def index():
        bottle.response.content_type = "text/html; charset=utf-8"
        bottle.response.set_header("Cache-Control", "no-store")
        page = _static("index.html").decode("utf-8")
        for name in ("review.css", "review.js"):  # the token on every request, files too
            page = page.replace(f'"static/{name}"', f'"static/{name}?token={token}"')
        return page

    @app.get("/static/<name>")
    def static(name):
        if name not in STATIC:
            bottle.abort(404, "no such file")
        bottle.response.content_type = STATIC[name] + "; charset=utf-8"
        return _static(name)

    @app.get("/api/fields")
    def fields():
        return _answer(session.listing)

    @app.get("/api/field/<fid:int>")
    def field(fid):
        return _answer(lambda: session.field_detail(_field(fid)))

    @app.get("/api/field/<fid:int>/image.png")
    def image(fid):
        data = session.grey_png(_field(fid))
        bottle.response.content_type = "image/png"
        bottle.response.set_header("Cache-Control", "private, max-age=3600")
        return data

    @app.get("/api/field/<fid:int>/layer.png")
    def layer(fid):
        data = session.layer_png(_field(fid))
        bottle.response.content_type = "image/png"
        bottle.response.set_header("Cache-Control", "no-store")
        return data

    @app.post("/api/field/<fid:int>/edit")
    def edit(fid):
        body = _body()
        return _answer(lambda: (session.add_edit(_field(fid), body.get("edit")),
                                session.field_detail(fid))[1])

    @app.post("/api/field/<fid:int>/undo")
    def undo(fid):
        return _answer(lambda: (session.undo(_field(fid)), session.field_detail(fid))[1])

    @app.post("/api/field/<fid:int>/redo")
    def redo(fid):
        return _answer(lambda: (session.undo(_field(fid), redo=True),
                                session.field_detail(fid))[1])

    @app.post("/api/field/<fid:int>/status")
    def status(fid):
        body = _body()
        st = body.get("status")
        return _answer(lambda: (session.set_status(_field(fid), st, str(body.get("reason", ""))),
                                session.field_detail(fid))[1])

    return app


def _jsonable(obj):
    import numpy as np

    if isinstance(obj, np.generic):
        return obj.item()
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    raise TypeError(f"{type(obj).__name__} is not JSON serialisable")


class ReviewServer:
    """A running review server: ``url``, ``port``, ``stop()``."""

    def __init__(self, session: ReviewSession, *, port: int = 0, token: str | None = None):
        self.session = session
        self.token = token or secrets.token_urlsafe(24)
        # Bind first to learn the port, then allow exactly that Host header.
        self._hosts: set[str] = set()
        self.httpd = make_server("127.0.0.1", port, bottle.Bottle(),
                                 server_class=_ThreadingServer, handler_class=_QuietHandler)
        self.port = self.httpd.server_port
        self._hosts.update({f"127.0.0.1:{self.port}", f"localhost:{self.port}"})
        self.httpd.set_app(make_app(session, self.token, allowed_hosts=self._hosts))
        self.url = f"http://127.0.0.1:{self.port}/?token={self.token}"
        self._thread: threading.Thread | None = None

    def serve_forever(self) -> None:
        self.httpd.serve_forever(poll_interval=0.2)

    def start(self) -> ReviewServer:
        self._thread = threading.Thread(target=self.serve_forever, daemon=True)
        self._thread.start()
        return self

    def stop(self) -> None:
        self.httpd.shutdown()
        self.httpd.server_close()


def prepare_in_background(session: ReviewSession) -> threading.Thread:
    """Segment the fields one after the other so that opening them is quick."""

    def run():
        for fs in session.fields:
            try:
                session.prepare(fs.id)
            except Exception:  # noqa: BLE001 - shown when the field is opened
                continue

    t = threading.Thread(target=run, daemon=True)
    t.start()
    return t
