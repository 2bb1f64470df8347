"""The guards every request passes, and the limits of one request.

Before any route runs (:func:`guard_request`): a Host header allow-list against DNS rebinding
(loopback names, the bound address and names explicitly allowed), a refused foreign ``Origin``
and no CORS headers unless an origin is allowed (its preflight answered here), and an optional
bearer token compared in constant time. Inside the routes: JSON content type required
(:func:`json_body`), the body limit, limits on cells, batch calls and column rows, and a
computing-time budget for batches and columns (see :data:`DEFAULT_LIMITS`). After every request
(:func:`add_response_headers`): ``nosniff``, ``no-store`` and the CORS headers of an allowed origin.
"""

from __future__ import annotations

import hmac
import json
import time
from typing import Any

from flask import Response, current_app, g, request

from .errors import ProtocolError

__all__ = ["DEFAULT_LIMITS", "LOOPBACK_NAMES", "allowed_hosts", "guard_request", "add_response_headers",
           "json_body", "count_cells", "range_cells", "check_cells", "over_budget", "budget_error"]

#: Limits of one request. Sized with ``python bench/bench_http.py --limits``, which times the
#: slowest registered functions at these limits (see README.md, "HTTP bridge", for the figures):
#: no single request should keep a worker busy for more than a few seconds.
DEFAULT_LIMITS = {
    "MAX_BODY_BYTES": 8 * 1024 * 1024,   # a 100,000-row column of scores is about 1.5 MB
    "MAX_CELLS": 200_000,                # cells in all ranges of one request together
    "MAX_BATCH_CALLS": 1_000,            # calls in one /v1/batch
    "MAX_COLUMN_ROWS": 200_000,          # rows in one /v1/column
    "TIME_BUDGET_SECONDS": 3.0,          # computing time of one batch or column, checked between pieces
    # A column is computed in pieces, the time budget checked between them: at most this many rows
    # on the array path, this many where each row is its own call, and at most this many
    # cell-evaluations of a shared range (rows x its cells).
    "COLUMN_PIECE_ROWS": 10_000,
    "COLUMN_PIECE_ROWS_ONE_BY_ONE": 500,
    "COLUMN_PIECE_CELLS": 1_000_000,
}

#: Host names that always reach a loopback-bound server.
LOOPBACK_NAMES = ("localhost", "127.0.0.1", "[::1]")


def _parse_int(text: str):
    # An integer too long for a float would overflow later (or hit Python's digit limit): make it
    # +-inf, which the functions refuse with their own "must be a finite number" message.
    return int(text) if len(text) <= 300 else float(text)


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not valid JSON")


def count_cells(value) -> int:
    """Cells (leaves) inside the lists of a JSON value; iterative, so deep nesting cannot recurse."""
    count = 0
    stack = [value]
    while stack:
        item = stack.pop()
        if isinstance(item, list):
            for x in item:
                if isinstance(x, (list, dict)):
                    stack.append(x)
                else:
                    count += 1
        elif isinstance(item, dict):
            stack.extend(item.values())
    return count


def range_cells(args) -> int:
    """Cells in the ranges among a call's arguments (a list in order or an object by name)."""
    values = args if isinstance(args, list) else list(args.values()) if isinstance(args, dict) else []
    return count_cells([x for x in values if isinstance(x, (list, dict))])


def check_cells(cells: int) -> None:
    limit = current_app.config["MAX_CELLS"]
    if cells > limit:
        raise ProtocolError("too_large", f"a request may hold at most {limit} range cells, got {cells}")


def json_body() -> Any:
    """The request's JSON body, with the content type, size and syntax checked."""
    if request.mimetype != "application/json":
        raise ProtocolError("unsupported_media_type",
                            f"send JSON with Content-Type: application/json, got {request.mimetype or 'none'!r}")
    raw = request.get_data(cache=False)  # werkzeug raises 413 above MAX_CONTENT_LENGTH
    try:
        return json.loads(raw.decode("utf-8"), parse_int=_parse_int, parse_constant=_refuse_constant)
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        detail = str(exc).split(":")[0] if isinstance(exc, ValueError) else type(exc).__name__
        raise ProtocolError("malformed_json", f"the body is not valid UTF-8 JSON ({detail})") from None


def over_budget(start: float) -> bool:
    return time.perf_counter() - start > current_app.config["TIME_BUDGET_SECONDS"]


def budget_error(done: int, total: int, what: str) -> ProtocolError:
    budget = current_app.config["TIME_BUDGET_SECONDS"]
    return ProtocolError("too_much_work",
                         f"this {what} needs more than {budget:g} s of computing (stopped after {done} of "
                         f"{total}); send it in smaller pieces")


def _host_name(host: str) -> str:
    """The name part of a Host header (port removed), lower case."""
    host = host.strip().lower()
    if host.startswith("["):
        end = host.find("]")
        return host[:end + 1] if end > 0 else host
    return host.rsplit(":", 1)[0] if host.count(":") == 1 else host


def allowed_hosts(bound_host: str | None, extra=()) -> frozenset[str]:
    """Loopback names, the bound address and any names explicitly allowed."""
    names = set(LOOPBACK_NAMES)
    for host in [bound_host, *extra]:
        if host:
            host = host.strip().lower().rstrip(".")
            names.add(f"[{host}]" if ":" in host and not host.startswith("[") else host)
    return frozenset(names)


def _cors_headers(origin: str, preflight: bool) -> dict:
    headers = {"Access-Control-Allow-Origin": origin, "Vary": "Origin"}
    if preflight:
        headers.update({"Access-Control-Allow-Methods": "GET, POST",
                        "Access-Control-Allow-Headers": "Content-Type, Authorization",
                        "Access-Control-Max-Age": "600"})
    return headers


def guard_request():
    """Runs before every request: host, origin (and CORS preflight), token."""
    cfg = current_app.config
    host = request.headers.get("Host")
    if host is None or _host_name(host).rstrip(".") not in cfg["ALLOWED_HOSTS"]:
        raise ProtocolError("forbidden", "this Host is not allowed (the bridge answers loopback names and its "
                                         "bound address only; see --allow-host)")
    origin = request.headers.get("Origin")
    g.cors_origin = None
    if origin is not None:
        if origin not in cfg["ALLOWED_ORIGINS"]:
            raise ProtocolError("forbidden", "requests from web pages are refused unless their origin is allowed "
                                             "(see --allow-origin)")
        g.cors_origin = origin
        if request.method == "OPTIONS" and "Access-Control-Request-Method" in request.headers:
            return Response(status=204, headers=_cors_headers(origin, preflight=True))
    token = cfg.get("TOKEN")
    if token:
        scheme, _, given = request.headers.get("Authorization", "").partition(" ")
        if not (scheme.lower() == "bearer" and hmac.compare_digest(given.strip().encode(), token.encode())):
            raise ProtocolError("unauthorized", "this bridge needs an access token: Authorization: Bearer TOKEN",
                                {"WWW-Authenticate": 'Bearer realm="trueband"'})
    return None


def add_response_headers(resp: Response) -> Response:
    """Runs after every request: the CORS headers of an allowed origin, ``nosniff`` and ``no-store``."""
    origin = g.get("cors_origin")
    if origin and "Access-Control-Allow-Origin" not in resp.headers:
        resp.headers.update(_cors_headers(origin, preflight=False))
    resp.headers.setdefault("X-Content-Type-Options", "nosniff")
    resp.headers.setdefault("Cache-Control", "no-store")
    return resp

