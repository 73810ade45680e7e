"""The loopback web server of ``fillstress design``.

Python's own ``http.server`` (ThreadingHTTPServer): one page and a small JSON API for one
user on one machine need no framework, and the standard library adds no dependency to keep
up. It listens on 127.0.0.1 only, on a free port the system picks, and every request must
carry the one-time token (``?token=`` or the ``X-Fillstress-Token`` header) or gets 403.
It serves its own page and nothing else: no file of the site folder is ever read through
it; the only file it touches is the one "save as" writes.
"""
from __future__ import annotations

import json
import secrets
import threading
from http import HTTPStatus
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from importlib import resources
from urllib.parse import parse_qs, urlsplit

from ..errors import InputError
from .state import DesignSession

TOKEN_HEADER = "X-Fillstress-Token"
MAX_BODY = 1 << 20                       # bytes of a request body


class DesignServer(ThreadingHTTPServer):
    daemon_threads = True

    def __init__(self, session: DesignSession, port: int = 0):
        self.session = session
        self.token = secrets.token_urlsafe(24)
        self.lock = threading.Lock()          # one edit at a time
        self.page = resources.files(__package__).joinpath("page.html").read_bytes()
        super().__init__(("127.0.0.1", port), _Handler)

    @property
    def url(self) -> str:
        host, port = self.server_address[:2]
        return f"http://{host}:{port}/?token={self.token}"


class _Handler(BaseHTTPRequestHandler):
    server: DesignServer

    def log_message(self, format, *args):     # no request log on the console
        pass

    def _allowed(self) -> bool:
        given = self.headers.get(TOKEN_HEADER) or \
            (parse_qs(urlsplit(self.path).query).get("token") or [""])[0]
        if secrets.compare_digest(given.encode(), self.server.token.encode()):
            return True
        self._send(HTTPStatus.FORBIDDEN, b"forbidden: this page needs its token\n",
                   "text/plain; charset=utf-8")
        return False

    def _send(self, status, body: bytes, ctype: str) -> None:
        self.send_response(status)
        self.send_header("Content-Type", ctype)
        self.send_header("Content-Length", str(len(body)))
        self.send_header("Cache-Control", "no-store")
        self.send_header("X-Content-Type-Options", "nosniff")
        self.send_header("Content-Security-Policy", "default-src 'self'; style-src 'unsafe-inline'; "
                         "script-src 'unsafe-inline'; img-src 'self' data:")
        self.end_headers()
        self.wfile.write(body)

    def _json(self, data, status=HTTPStatus.OK) -> None:
        self._send(status, json.dumps(data, allow_nan=False).encode(), "application/json")

    def do_GET(self):
        if not self._allowed():
            return
        route = urlsplit(self.path).path
        if route == "/":
            self._send(HTTPStatus.OK, self.server.page, "text/html; charset=utf-8")
        elif route == "/api/state":
            with self.server.lock:
                self._json(self.server.session.state())
        else:
            self._send(HTTPStatus.NOT_FOUND, b"not found\n", "text/plain; charset=utf-8")

    def do_POST(self):
        if not self._allowed():
            return
        route = urlsplit(self.path).path
        if route not in ("/api/edit", "/api/save"):
            self._send(HTTPStatus.NOT_FOUND, b"not found\n", "text/plain; charset=utf-8")
            return
        try:
            size = int(self.headers.get("Content-Length") or 0)
            if not 0 < size <= MAX_BODY:
                raise ValueError
            request = json.loads(self.rfile.read(size))
            if not isinstance(request, dict):
                raise ValueError
        except ValueError:
            self._json({"error": "the request must be a JSON object"}, HTTPStatus.BAD_REQUEST)
            return
        with self.server.lock:
            try:
                if route == "/api/edit":
                    self._json(self.server.session.edit(request))
                else:
                    self._json({"saved": str(self.server.session.save(request))})
            except InputError as exc:
                self._json({"error": str(exc)}, HTTPStatus.UNPROCESSABLE_ENTITY)
