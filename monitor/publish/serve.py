"""Preview server for the built site: plain static files, bound to 127.0.0.1 only."""

from __future__ import annotations

import functools
import http.server
from pathlib import Path

HOST = "127.0.0.1"


class SiteHandler(http.server.SimpleHTTPRequestHandler):
    """Static files with the right types for our feed and data, and no caching (a preview)."""

    extensions_map = {
        **http.server.SimpleHTTPRequestHandler.extensions_map,
        ".js": "text/javascript", ".json": "application/json", ".csv": "text/csv; charset=utf-8",
        ".css": "text/css", ".html": "text/html; charset=utf-8", ".gz": "application/gzip",
    }

    def guess_type(self, path):
        if str(path).endswith("atom.xml"):
            return "application/atom+xml"
        return super().guess_type(path)

    def end_headers(self):
        self.send_header("Cache-Control", "no-cache")
        self.send_header("X-Content-Type-Options", "nosniff")
        super().end_headers()

    def log_message(self, format, *args):  # noqa: A002 (the base class's name)
        if getattr(self.server, "quiet", False):
            return
        super().log_message(format, *args)


def make_server(directory: str | Path, port: int = 0, *, quiet: bool = False) -> http.server.ThreadingHTTPServer:
    """A server for ``directory`` on 127.0.0.1 (``port`` 0: any free port); call ``serve_forever``."""
    handler = functools.partial(SiteHandler, directory=str(Path(directory).resolve()))
    server = http.server.ThreadingHTTPServer((HOST, port), handler)
    server.daemon_threads = True
    server.quiet = quiet
    return server


def serve(directory: str | Path, port: int = 8000) -> None:
    """Serve ``directory`` until interrupted."""
    with make_server(directory, port) as server:
        try:
            server.serve_forever()
        except KeyboardInterrupt:
            pass
