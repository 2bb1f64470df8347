"""Serving the HTTP app under waitress (never Flask's development server): the server, a background
thread for tests and benchmarks, and what counts as this computer's loopback.

Connections (see README.md, "Safe by default"). Waitress reads each request completely on its one
network thread before a worker thread computes it, so a slow or idle client holds a connection, never
a worker. The connection settings keep such clients from locking others out: up to
:data:`CONNECTION_LIMIT` connections at once (waitress's default is 100, which 110 trickling clients
filled), a connection silent for :data:`CHANNEL_TIMEOUT` seconds is closed, checked every
:data:`CLEANUP_INTERVAL` seconds, and headers are limited to :data:`MAX_HEADER_BYTES`. What waitress
itself refuses (a body or headers too large, a bad length) is answered in the bridge's JSON error shape
(:class:`_JsonErrorTask`).
"""

from __future__ import annotations

import contextlib
import ipaddress
import select
import threading

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8765
THREADS = 4
#: Connections open at once; beyond, waitress stops accepting until one closes. Where the system has
#: no poll() (Windows), select() watches at most 512 sockets, so the limit stays below that there.
CONNECTION_LIMIT = 1000 if hasattr(select, "poll") else 400
#: Seconds a connection may stay silent (idle, or mid-request) before it is closed.
CHANNEL_TIMEOUT = 10
#: How often (seconds) silent connections are looked for.
CLEANUP_INTERVAL = 2
#: Request line and headers together, in bytes.
MAX_HEADER_BYTES = 64 * 1024


def is_loopback(host: str) -> bool:
    """True for ``localhost`` and loopback addresses (127.0.0.0/8, ::1)."""
    host = host.strip().strip("[]").lower()
    if host == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False  # any other name may resolve anywhere


def make_server(app, host: str = DEFAULT_HOST, port: int = DEFAULT_PORT, *, threads: int = THREADS):
    """A waitress server for ``app`` (port 0 picks a free port: see ``server.effective_port``)."""
    from waitress.server import create_server

    server = create_server(
        app, host=host.strip("[]"), port=port, threads=threads, ident="trueband",
        max_request_body_size=app.config["MAX_BODY_BYTES"],
        max_request_header_size=MAX_HEADER_BYTES,
        clear_untrusted_proxy_headers=True,
        connection_limit=CONNECTION_LIMIT,
        channel_timeout=CHANNEL_TIMEOUT,
        cleanup_interval=CLEANUP_INTERVAL,
        # select() cannot watch more than about 1,000 sockets; poll() can (it is missing on Windows)
        asyncore_use_poll=hasattr(select, "poll"))
    server.channel_class = _json_error_channel()
    return server


def _json_error_channel():
    """Waitress's channel with its own error answers (400, 413, 431...) in the bridge's JSON shape."""
    from waitress.channel import HTTPChannel
    from waitress.task import ErrorTask

    from .errors import server_error_body

    class _JsonErrorTask(ErrorTask):
        def execute(self):
            error = self.request.error
            status = int(error.code)
            detail = " ".join(str(error.body).split())[:200]
            adj = self.channel.server.adj
            limit = {413: adj.max_request_body_size, 431: adj.max_request_header_size}.get(status)
            body = server_error_body(status, f"the request could not be read ({detail})", limit)
            self.status = f"{status} {error.reason}"
            self.response_headers.extend([("Content-Type", "application/json"),
                                          ("X-Content-Type-Options", "nosniff"), ("Cache-Control", "no-store")])
            self.set_close_on_finish()
            self.content_length = len(body)
            self.write(body)

    class _JsonErrorChannel(HTTPChannel):
        error_task_class = _JsonErrorTask

    return _JsonErrorChannel


@contextlib.contextmanager
def serving_in_background(app, host: str = DEFAULT_HOST, port: int = 0, *, threads: int = THREADS):
    """Run ``app`` on a waitress server in a background thread; yields the base URL (for tests and bench)."""
    server = make_server(app, host, port, threads=threads)
    thread = threading.Thread(target=server.run, name="trueband-http", daemon=True)
    thread.start()
    try:
        yield f"http://{url_host(host)}:{server.effective_port}"
    finally:
        # Closing the sockets from this thread would pull them from under the loop's select();
        # waitress's trigger runs the shutdown inside the loop thread instead, and the loop then ends.
        try:
            server.trigger.pull_trigger(lambda: _shut_down_in_loop(server))
        except OSError:  # the loop has already closed its trigger: shut down from here
            _shut_down_in_loop(server)
        thread.join(timeout=30)
        if thread.is_alive():
            raise RuntimeError("the background server did not stop")


def _shut_down_in_loop(server) -> None:
    from waitress import wasyncore

    server.task_dispatcher.shutdown()
    wasyncore.close_all(server._map)


def url_host(host: str) -> str:
    host = host.strip("[]")
    return f"[{host}]" if ":" in host else host
