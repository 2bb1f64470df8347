"""Serving the HTTP app under waitress (never Flask's development server): the server, a background
thread for tests and benchmarks, and what counts as this computer's loopback."""

from __future__ import annotations

import contextlib
import ipaddress
import threading

DEFAULT_HOST = "127.0.0.1"
DEFAULT_PORT = 8765
THREADS = 4


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

    return create_server(
        app, host=host.strip("[]"), port=port, threads=threads, ident="trueband",
        max_request_body_size=app.config["MAX_BODY_BYTES"],
        clear_untrusted_proxy_headers=True,
        channel_timeout=30)


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
