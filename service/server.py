"""Serving the app in-process: a Werkzeug server on a thread (``serve``, ``demo``, tests)."""

from __future__ import annotations

import threading
from typing import Any

from flask import Flask
from werkzeug.serving import BaseWSGIServer, make_server


class BackgroundServer:
    """The app served on ``host:port`` (port 0: a free port) in a daemon thread."""

    def __init__(self, app: Flask, host: str = "127.0.0.1", port: int = 0) -> None:
        self.app = app
        self._server: BaseWSGIServer = make_server(host, port, app, threaded=True)
        self._thread = threading.Thread(target=self._server.serve_forever,
                                        name="fluxproof-http", daemon=True)

    @property
    def url(self) -> str:
        host, port = self._server.server_address[:2]
        return f"http://{host}:{port}"

    def start(self) -> BackgroundServer:
        self._thread.start()
        return self

    def stop(self) -> None:
        self._server.shutdown()
        self._thread.join(timeout=10)
        self._server.server_close()

    def __enter__(self) -> BackgroundServer:
        return self.start()

    def __exit__(self, *_exc: Any) -> None:
        self.stop()
