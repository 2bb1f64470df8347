"""The guards every request passes, and the limits of one request.

Before any route runs (:func:`guard_request`): a Host header allow-list against DNS rebinding
(loopback names, the bound address and names explicitly allowed), a refused foreign ``Origin``
and no CORS headers unless an origin is allowed (its preflight answered here), and an optional
bearer token compared in constant time. Inside the routes: JSON content type required
(:func:`json_body`), the body limit, limits on cells, batch calls and column rows, and a
computing-time budget for every request that computes, enforced inside the computation
(:func:`computing_budget`; see :data:`DEFAULT_LIMITS`). After every request
(:func:`add_response_headers`): ``nosniff``, ``no-store`` and the CORS headers of an allowed origin.
"""

from __future__ import annotations

import contextlib
import hmac
import json
import re
import time
from typing import Any

from flask import Response, current_app, g, request

from trueband.funcs._budget import BudgetExceeded, time_budget

from .errors import ProtocolError, budget_message

__all__ = ["DEFAULT_LIMITS", "LOOPBACK_NAMES", "allowed_hosts", "guard_request", "add_response_headers",
           "json_body", "count_cells", "range_cells", "check_cells", "computing_budget", "budget_error", "check_token"]

#: Limits of one request. Sized with ``python bench/bench_http.py --limits``, which times the
#: slowest registered functions at these limits (see README.md, "HTTP bridge", for the figures):
#: no single request should keep a worker busy for more than a few seconds.
DEFAULT_LIMITS = {
    "MAX_BODY_BYTES": 8 * 1024 * 1024,   # a 100,000-row column of scores is about 1.5 MB
    "MAX_CELLS": 200_000,                # cells in all ranges of one request together
    "MAX_BATCH_CALLS": 1_000,            # calls in one /v1/batch
    "MAX_COLUMN_ROWS": 200_000,          # rows in one /v1/column
    "TIME_BUDGET_SECONDS": 3.0,          # computing time of any one request, checked inside the computation
    # A column is computed in pieces (the time budget is checked between them and inside them): at most
    # this many rows on the array path, this many where each row is its own call, and at most this many
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


_LONG_DIGITS = re.compile(rb"[0-9]{300}")


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not valid JSON")


def count_cells(value) -> int:
    """Cells (leaves) inside the lists of a JSON value; iterative, so deep nesting cannot recurse."""
    count = 0
    stack = [value]
    while stack:
        item = stack.pop()
        if isinstance(item, list) and not {list, dict} & set(map(type, item)):
            count += len(item)  # a flat list (the usual range or column): counted without a step per cell
        elif isinstance(item, list):
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
    if not {list, dict} & set(map(type, values)):
        return 0  # no ranges (a column of single values): no step per cell
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
        # The per-integer hook costs a Python call per number: only a body with a very long digit run needs it.
        hook = {"parse_int": _parse_int} if _LONG_DIGITS.search(raw) else {}
        return json.loads(raw.decode("utf-8"), parse_constant=_refuse_constant, **hook)
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        detail = str(exc).split(":")[0] if isinstance(exc, ValueError) else type(exc).__name__
        raise ProtocolError("malformed_json", f"the body is not valid UTF-8 JSON ({detail})") from None


def computing_budget():
    """The request's computing budget (``TIME_BUDGET_SECONDS``, counted from the request's arrival, so that
    reading its body counts too): the functions check it inside their long loops and refuse work whose
    known cost cannot fit (:mod:`trueband.funcs._budget`)."""
    return time_budget(current_app.config["TIME_BUDGET_SECONDS"], since=g.get("arrived"))


def budget_error(exc: BudgetExceeded, done: int, total: int, what: str) -> ProtocolError:
    return ProtocolError("too_much_work", budget_message(exc, done, total, what))


#: A Host header as RFC 9110 allows it here: a name or an IPv4 address, or an IPv6 address in
#: brackets, then an optional port. Anything else (``127.0.0.1:80@evil.example``, two Host headers
#: joined by a comma, user information, a path) is refused rather than guessed at.
_HOST = re.compile(r"(?P<name>\[[0-9a-f:.]+\]|[a-z0-9](?:[a-z0-9.-]*[a-z0-9])?\.?)(?::[0-9]{1,5})?\Z")


def _host_name(host: str) -> str | None:
    """The name part of a Host header (port removed, lower case), or None when it is not a plain host."""
    m = _HOST.match(host.strip().lower())
    return m.group("name") if m else None


def check_token(token: str | None) -> None:
    """Refuse, at start-up, a token no request could present (blank, spaces at its ends, control characters)."""
    if token is None:
        return
    if not token.strip():
        raise ValueError("the access token is empty")
    if token != token.strip() or any(c.isspace() or ord(c) < 32 or ord(c) == 127 for c in token):
        raise ValueError("the access token may not contain spaces or control characters (a request could "
                         "never present it)")


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
    g.arrived = time.perf_counter()
    cfg = current_app.config
    hosts = request.headers.getlist("Host")
    name = _host_name(hosts[0]) if len(hosts) == 1 else None
    if name is None or name.rstrip(".") not in cfg["ALLOWED_HOSTS"]:
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

