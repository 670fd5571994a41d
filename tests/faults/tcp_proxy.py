"""A TCP proxy on 127.0.0.1 that a test can cut: the database connection dropped, on demand.

:meth:`TcpProxy.cut` closes every open connection (both sides) and stops listening, so that
new connections are refused; :meth:`TcpProxy.restore` listens again on the same port.
"""

from __future__ import annotations

import socket
import threading

from tests.faults.processes import free_port


class TcpProxy:
    """Forwards 127.0.0.1:<port> to ``target`` (see module notes)."""

    def __init__(self, target_host: str, target_port: int) -> None:
        self.target = (target_host, target_port)
        self.port = free_port()
        self._lock = threading.Lock()
        self._sockets: set[socket.socket] = set()
        self._listener: socket.socket | None = None
        self._accepting = threading.Event()

    def start(self) -> TcpProxy:
        listener = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        listener.bind(("127.0.0.1", self.port))
        listener.listen(64)
        self._listener = listener
        self._accepting.set()
        threading.Thread(target=self._accept, args=(listener,), daemon=True,
                         name="fault-proxy-accept").start()
        return self

    def _accept(self, listener: socket.socket) -> None:
        while self._accepting.is_set():
            try:
                client, _address = listener.accept()
            except OSError:
                return
            try:
                upstream = socket.create_connection(self.target, timeout=5)
                upstream.settimeout(None)
            except OSError:
                client.close()
                continue
            with self._lock:
                if not self._accepting.is_set():
                    client.close()
                    upstream.close()
                    return
                self._sockets.update((client, upstream))
            for source, sink in ((client, upstream), (upstream, client)):
                threading.Thread(target=self._pump, args=(source, sink), daemon=True,
                                 name="fault-proxy-pump").start()

    def _pump(self, source: socket.socket, sink: socket.socket) -> None:
        try:
            while True:
                data = source.recv(65536)
                if not data:
                    break
                sink.sendall(data)
        except OSError:
            pass
        finally:
            for end in (source, sink):
                self._close(end)

    def _close(self, end: socket.socket) -> None:
        with self._lock:
            self._sockets.discard(end)
        try:
            end.shutdown(socket.SHUT_RDWR)
        except OSError:
            pass
        end.close()

    def open_connections(self) -> int:
        with self._lock:
            return len(self._sockets) // 2

    def cut(self) -> None:
        """Drop every connection and refuse new ones."""
        self._accepting.clear()
        if self._listener is not None:
            self._listener.close()
            self._listener = None
        with self._lock:
            sockets = list(self._sockets)
        for end in sockets:
            self._close(end)

    def restore(self) -> None:
        self.start()

    def url_for(self, user: str, schema: str) -> str:
        from urllib.parse import quote

        options = quote(f"-csearch_path={schema}", safe="")
        return (f"postgresql+psycopg://{user}@127.0.0.1:{self.port}/test?options={options}"
                "&connect_timeout=3")

    def stop(self) -> None:
        self.cut()
