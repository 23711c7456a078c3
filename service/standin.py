"""Run an in-memory Redis stand-in on a loopback port, for `boundwise serve` without REDIS_URL.

It is fakeredis's TCP server (with its Lua support, which RQ's scripts need)
in a thread of the calling process: nothing to install, nothing kept when it
stops. One fix is applied: the server reports client addresses as Python
tuples, which redis-py cannot parse in ``CLIENT INFO`` replies (an RQ worker
asks for its own address when it starts), so they are rewritten as
``host:port`` the way Redis writes them.
"""

from __future__ import annotations

import logging
import threading
from typing import Any

logger = logging.getLogger(__name__)

__all__ = ["StandIn"]


def _handler_class() -> type:
    from fakeredis._clients._tcp_server import TCPFakeRequestHandler

    class Handler(TCPFakeRequestHandler):
        def setup(self) -> None:
            super().setup()
            info = self.current_client.get_socket()._client_info
            for name in ("addr", "laddr"):
                value = info.get(name)
                if isinstance(value, tuple):
                    info[name] = f"{value[0]}:{value[1]}"

    return Handler


class StandIn:
    """An in-memory Redis on ``host:port`` (port 0 picks a free one) until ``stop``."""

    def __init__(self, host: str = "127.0.0.1", port: int = 0) -> None:
        self.host = host
        self.port = port
        self._server: Any = None
        self._thread: threading.Thread | None = None

    @property
    def url(self) -> str:
        return f"redis://{self.host}:{self.port}/0"

    def start(self) -> "StandIn":
        """Start serving; raise RuntimeError if fakeredis or its Lua support is missing."""
        try:
            import fakeredis
            import lupa  # noqa: F401  (RQ runs Lua scripts)
        except ImportError as err:
            raise RuntimeError("the in-memory Redis needs fakeredis with Lua: pip install 'fakeredis[lua]' "
                               f"({err.name} is missing); or set REDIS_URL to a real Redis") from None
        server = fakeredis.TcpFakeServer((self.host, self.port))
        server.RequestHandlerClass = _handler_class()
        server.daemon_threads = True  # a client that never hangs up must not keep the process alive
        self._server = server
        self.port = server.server_address[1]
        self._thread = threading.Thread(target=server.serve_forever, name="redis-stand-in", daemon=True)
        self._thread.start()
        logger.info("in-memory Redis stand-in on %s", self.url)
        return self

    def stop(self) -> None:
        """Stop serving and close the socket; everything it held is gone."""
        if self._server is None:
            return
        self._server.shutdown()
        self._server.server_close()
        if self._thread is not None:
            self._thread.join(timeout=5)
        self._server = None
