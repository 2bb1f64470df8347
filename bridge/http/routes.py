"""The local HTTP bridge: every registered function over HTTP, generated from the registry.

:func:`create_app` builds the Flask application; ``trueband serve``
(:mod:`~trueband.bridge.http.server`) runs it under waitress. Nothing here
knows any single function: routes, argument checks and the OpenAPI document
all come from :data:`~trueband.funcs.registry.REGISTRY`, and every error
status and code comes from the error classes of :mod:`trueband.funcs.errors`.

=================================  ======  ==============================================
route                              method  answers
=================================  ======  ==============================================
``/v1/health``                     GET     ``{"status": "ok", "version": ...}``
``/v1/functions``                  GET     the catalog ``{"functions": [...]}``
``/v1/functions/NAME``             GET     one catalog entry
``/v1/call``                       POST    one call: ``{"value": ...}``
``/v1/batch``                      POST    many calls: ``{"results": [...]}``
``/v1/column``                     POST    one function down a column: ``{"values": [...]}``
``/v1/text/NAME?arg=...``          GET     the value as plain text (for cell formulas)
``/v1/openapi.json``               GET     the OpenAPI 3.1 document
=================================  ======  ==============================================

GET routes also answer HEAD. Every error in the JSON API is
``{"error": {"code", "message", "argument"}}``: a function's error carries
its spreadsheet code (``#NUM!``...) and its class's HTTP status; a protocol
error carries one of the words in :data:`PROTOCOL_ERRORS`.

Safety rules (all on by default; see ``README.md``, "HTTP bridge"): a Host
header allow-list against DNS rebinding, a refused foreign ``Origin`` and no
CORS headers unless an origin is allowed, an optional bearer token compared
in constant time, a body limit, limits on cells, batch calls and column rows,
a computing-time budget for batches and columns, JSON content type required,
and only the documented methods.
"""

from __future__ import annotations

import hmac
import json
import logging
import time
import urllib.parse
from typing import Any

from flask import Blueprint, Flask, Response, current_app, g, request
from werkzeug.exceptions import HTTPException, MethodNotAllowed

from trueband.funcs import __version__
from trueband.funcs.errors import ArgumentCountError, ArgumentTypeError, TruebandError
from trueband.funcs.registry import REGISTRY, SpreadsheetFunction, call_column, catalog, lookup

__all__ = ["create_app", "DEFAULT_LIMITS", "PROTOCOL_ERRORS", "LOOPBACK_NAMES", "format_text_value"]

log = logging.getLogger("trueband.http")

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

#: Protocol errors (not a function's error): code word and HTTP status.
PROTOCOL_ERRORS = {
    "bad_request": 400,
    "malformed_json": 400,
    "unauthorized": 401,
    "forbidden": 403,
    "not_found": 404,
    "method_not_allowed": 405,
    "too_large": 413,
    "unsupported_media_type": 415,
    "too_much_work": 422,
    "internal_error": 500,
}

#: Host names that always reach a loopback-bound server.
LOOPBACK_NAMES = ("localhost", "127.0.0.1", "[::1]")

TEXT_PREFIX = "/v1/text/"
TEXT_ERROR_HEADERS = ("X-Trueband-Error-Code", "X-Trueband-Error-Message", "X-Trueband-Error-Argument")


class ProtocolError(Exception):
    """A request the bridge refuses before any function runs (or a batch/column over budget)."""

    def __init__(self, code: str, message: str, headers: dict | None = None, status: int | None = None):
        super().__init__(message)
        self.code = code
        self.message = message
        self.http_status = status or PROTOCOL_ERRORS[code]
        self.headers = headers or {}


# ---------------------------------------------------------------- helpers

def error_body(exc) -> dict:
    """The ``{"code", "message", "argument"}`` body of a function error or a protocol error."""
    if isinstance(exc, TruebandError):
        body = exc.to_dict()
        body.setdefault("argument", None)
        return body
    return {"code": exc.code, "message": exc.message, "argument": None}


def format_text_value(value) -> str:
    """A result as the text form shows it: TRUE/FALSE, integers as digits, floats in full (repr)."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return repr(value)
    return str(value)


def _parse_int(text: str):
    # An integer too long for a float would overflow later (or hit Python's digit limit): make it
    # +-inf, which the functions refuse with their own "must be a finite number" message.
    return int(text) if len(text) <= 300 else float(text)


def _refuse_constant(name: str):
    raise ValueError(f"{name} is not valid JSON")


def _json(data: Any, status: int = 200) -> Response:
    return Response(json.dumps(data, ensure_ascii=True, allow_nan=False), status=status,
                    mimetype="application/json")


def _count_cells(value) -> int:
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


def _range_cells(args) -> int:
    """Cells in the ranges among a call's arguments (a list in order or an object by name)."""
    values = args if isinstance(args, list) else list(args.values()) if isinstance(args, dict) else []
    return _count_cells([x for x in values if isinstance(x, (list, dict))])


def _check_cells(cells: int) -> None:
    limit = current_app.config["MAX_CELLS"]
    if cells > limit:
        raise ProtocolError("too_large", f"a request may hold at most {limit} range cells, got {cells}")


def _json_body() -> Any:
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


def _fields(body: Any, allowed: tuple[str, ...], required: tuple[str, ...], what: str) -> dict:
    if not isinstance(body, dict):
        raise ArgumentTypeError(f"{what} must be a JSON object with {', '.join(required)}")
    unknown = sorted(set(body) - set(allowed))
    if unknown:
        raise ArgumentTypeError(f"{what} has unknown field {unknown[0]!r}; allowed: {', '.join(allowed)}",
                                argument=unknown[0])
    for key in required:
        if key not in body:
            raise ArgumentTypeError(f"{what} needs the field {key!r}", argument=key)
    return body


def _function(name: Any) -> SpreadsheetFunction:
    return lookup(name)  # raises UnknownFunctionError (404) for text that names nothing, or a non-text name


def _call_one(body: Any):
    """One ``{"function", "args"}`` call: its value, or the function's error raised."""
    _fields(body, ("function", "args"), ("function",), "a call")
    fn = _function(body["function"])
    args = body.get("args", [])
    if isinstance(args, list):
        return fn(*args)
    if isinstance(args, dict):
        fn.bind((), args)  # refuses unknown names before they meet Python's own keyword rules
        return fn(**args)
    raise ArgumentTypeError("args must be a list (in order) or an object (by argument name)", argument="args")


def _over_budget(start: float) -> bool:
    return time.perf_counter() - start > current_app.config["TIME_BUDGET_SECONDS"]


def _budget_error(done: int, total: int, what: str) -> ProtocolError:
    budget = current_app.config["TIME_BUDGET_SECONDS"]
    return ProtocolError("too_much_work",
                         f"this {what} needs more than {budget:g} s of computing (stopped after {done} of "
                         f"{total}); send it in smaller pieces")


# ---------------------------------------------------------------- the API

api = Blueprint("api", __name__, url_prefix="/v1")


def _route(rule: str, methods: list[str]):
    # No automatic OPTIONS: only the documented methods answer (CORS preflight is handled up front).
    return api.route(rule, methods=methods, provide_automatic_options=False)


@_route("/health", ["GET"])
def health():
    return _json({"status": "ok", "version": __version__, "functions": len(REGISTRY)})


@_route("/functions", ["GET"])
def functions():
    return _json({"functions": catalog()})


@_route("/functions/<path:name>", ["GET"])
def function(name: str):
    return _json(_function(name).to_dict())


@_route("/call", ["POST"])
def call_route():
    body = _json_body()
    _check_cells(_range_cells(body.get("args")) if isinstance(body, dict) else 0)
    return _json({"value": _call_one(body)})


@_route("/batch", ["POST"])
def batch_route():
    body = _fields(_json_body(), ("calls",), ("calls",), "a batch")
    calls = body["calls"]
    if not isinstance(calls, list):
        raise ArgumentTypeError("calls must be a list of calls", argument="calls")
    limit = current_app.config["MAX_BATCH_CALLS"]
    if len(calls) > limit:
        raise ProtocolError("too_large", f"a batch may hold at most {limit} calls, got {len(calls)}")
    _check_cells(sum(_range_cells(c.get("args")) for c in calls if isinstance(c, dict)))
    start = time.perf_counter()
    results = []
    for i, one in enumerate(calls):
        if i and _over_budget(start):
            raise _budget_error(i, len(calls), "batch")
        try:
            results.append({"value": _call_one(one)})
        except TruebandError as exc:  # each call on its own: its error in its place
            results.append({"error": error_body(exc)})
    return _json({"results": results})


@_route("/column", ["POST"])
def column_route():
    body = _fields(_json_body(), ("function", "each", "same"), ("function", "each"), "a column call")
    fn = _function(body["function"])
    each, same = body["each"], body.get("same", {})
    if not isinstance(each, dict) or not each:
        raise ArgumentTypeError("each must be an object mapping argument names to columns (lists)", argument="each")
    if not isinstance(same, dict):
        raise ArgumentTypeError("same must be an object mapping argument names to values", argument="same")
    names = {a.name for a in fn.arguments}
    for key in list(each) + list(same):
        if key not in names:
            raise ArgumentCountError(f"{fn.name} has no argument named {key!r}: {fn.signature}", argument=key)
    for key, col in each.items():
        if not isinstance(col, list):
            raise ArgumentTypeError(f"each.{key} must be a list (one value per row)", argument=key)
    rows = len(next(iter(each.values())))
    limit = current_app.config["MAX_COLUMN_ROWS"]
    if rows > limit:
        raise ProtocolError("too_large", f"a column may hold at most {limit} rows, got {rows}")
    same_cells = _range_cells(same)
    _check_cells(same_cells + sum(_range_cells(col) for col in each.values()))
    if any(len(col) != rows for col in each.values()):
        call_column(fn.name, each, same)  # raises the registry's own "columns differ in length" error

    # A column is computed in pieces, so one request cannot hold a worker past the time budget even
    # where every row must be called on its own with a large shared range.
    cfg = current_app.config
    one_by_one = not set(each) <= fn.elementwise  # call_column then makes one Python call per row
    piece = min(cfg["COLUMN_PIECE_ROWS_ONE_BY_ONE" if one_by_one else "COLUMN_PIECE_ROWS"],
                max(1, cfg["COLUMN_PIECE_CELLS"] // (1 + same_cells)))
    start = time.perf_counter()
    values: list = []
    for lo in range(0, rows, piece):
        if lo and _over_budget(start):
            raise _budget_error(lo, rows, "column")
        part = {k: col[lo:lo + piece] for k, col in each.items()}
        for x in call_column(fn.name, part, same):
            values.append({"error": error_body(x)} if isinstance(x, TruebandError) else x)
    return _json({"values": values})


def _text_cell(text: str):
    """A query value as a cell: blank, a number (decimal point) or text."""
    text = text.strip()
    if text == "":
        return None
    if "_" in text:  # Python's float() reads 1_000; a spreadsheet would not
        return text
    try:
        return float(text)
    except ValueError:
        return text


def _text_range(text: str) -> list[list]:
    """A range written as rows separated by ``;`` and cells by ``,``."""
    return [[_text_cell(c) for c in row.split(",")] for row in text.split(";")]


@_route("/text/<path:name>", ["GET"])
def text_route(name: str):
    fn = _function(name)
    kinds = {a.name: a.kind for a in fn.arguments}
    named: dict[str, Any] = {}
    cells = 0
    for key in request.args:
        values = request.args.getlist(key)
        if len(values) > 1:
            raise ArgumentCountError(f"{fn.name} got {key} {len(values)} times", argument=key)
        kind = kinds.get(key)
        if kind is None:
            fn.bind((), {key: None})  # the registry's own "has no argument named" error
        if kind == "range":
            named[key] = _text_range(values[0])
            cells += _count_cells(named[key])
        elif kind == "text":
            named[key] = values[0] if values[0] != "" else None
        else:
            named[key] = _text_cell(values[0])
    _check_cells(cells)
    return Response(format_text_value(fn(**named)), mimetype="text/plain")


@_route("/openapi.json", ["GET"])
def openapi():
    return _json(openapi_document(current_app.config))


# ---------------------------------------------------------------- OpenAPI

_CELL = {"type": ["number", "string", "boolean", "null"]}
_ERROR = {
    "type": "object",
    "required": ["code", "message", "argument"],
    "properties": {"code": {"type": "string"}, "message": {"type": "string"},
                   "argument": {"type": ["string", "null"]}},
}


def _argument_schema(arg, limits) -> dict:
    """JSON Schema of one argument's value, from its registered kind."""
    if arg.kind == "range":
        schema: dict = {"$ref": "#/components/schemas/Range"}
    elif arg.kind == "number":
        schema = {"type": "number"}
    elif arg.kind == "integer":
        schema = {"type": "integer"}
    elif arg.kind == "boolean":
        schema = {"type": "boolean"}
    elif arg.choices:
        schema = {"type": "string", "enum": list(arg.choices)}
    else:
        schema = {"type": "string"}
    if not arg.required:
        schema = {"anyOf": [schema, {"type": "null"}], "default": arg.default}
    if arg.description:
        schema["description"] = arg.description
    return schema


def _call_schema(fn: SpreadsheetFunction, limits) -> dict:
    props = {a.name: _argument_schema(a, limits) for a in fn.arguments}
    positional = {"type": "array", "prefixItems": [props[a.name] for a in fn.arguments],
                  "minItems": fn.min_args, "maxItems": fn.max_args, "items": False}
    named = {"type": "object", "properties": props, "required": [a.name for a in fn.arguments if a.required],
             "additionalProperties": False}
    return {
        "type": "object",
        "description": fn.description,
        "required": ["function", "args"],
        "properties": {"function": {"const": fn.name}, "args": {"oneOf": [positional, named]}},
        "additionalProperties": False,
    }


def _column_schema(fn: SpreadsheetFunction, limits) -> dict:
    props = {a.name: _argument_schema(a, limits) for a in fn.arguments}
    each = {a.name: {"type": "array", "items": props[a.name], "maxItems": limits["MAX_COLUMN_ROWS"]}
            for a in fn.arguments}
    return {
        "type": "object",
        "description": fn.description,
        "required": ["function", "each"],
        "properties": {
            "function": {"const": fn.name},
            "each": {"type": "object", "properties": each, "minProperties": 1, "additionalProperties": False},
            "same": {"type": "object", "properties": props, "additionalProperties": False},
        },
        "additionalProperties": False,
    }


def _text_parameter(arg) -> dict:
    if arg.kind == "range":
        schema = {"type": "string", "description": "rows separated by ';', cells by ','; an empty cell is a blank"}
    elif arg.kind in ("number", "integer"):
        schema = {"type": arg.kind}
    elif arg.kind == "boolean":
        schema = {"type": "string", "enum": ["TRUE", "FALSE"]}
    elif arg.choices:
        schema = {"type": "string", "enum": list(arg.choices)}
    else:
        schema = {"type": "string"}
    return {"name": arg.name, "in": "query", "required": arg.required, "schema": schema,
            "description": arg.description or arg.name}


def _responses(ok: dict, *statuses: int) -> dict:
    out = {"200": {"description": "done", "content": {"application/json": {"schema": ok}}}}
    for status in statuses:
        out[str(status)] = {"$ref": "#/components/responses/Error"}
    return out


_COMMON = (401, 403, 405)
_BODY = (400, 413, 415, 422)


def openapi_document(config) -> dict:
    """The OpenAPI 3.1 document, generated from the registry and the configured limits."""
    limits = {k: config[k] for k in DEFAULT_LIMITS}
    names = sorted(REGISTRY)
    call_ref = {"oneOf": [{"$ref": f"#/components/schemas/Call_{n}"} for n in names]}
    value = {"type": ["number", "integer", "boolean"]}
    result = {"oneOf": [
        {"type": "object", "required": ["value"], "properties": {"value": value}, "additionalProperties": False},
        {"type": "object", "required": ["error"], "properties": {"error": _ERROR}, "additionalProperties": False},
    ]}
    json_body = lambda schema: {"required": True, "content": {"application/json": {"schema": schema}}}  # noqa: E731
    paths: dict[str, Any] = {
        "/v1/health": {"get": {"summary": "Status and version", "responses": _responses(
            {"type": "object", "required": ["status", "version"],
             "properties": {"status": {"const": "ok"}, "version": {"type": "string"},
                            "functions": {"type": "integer"}}}, *_COMMON)}},
        "/v1/functions": {"get": {"summary": "The catalog of every registered function", "responses": _responses(
            {"type": "object", "required": ["functions"],
             "properties": {"functions": {"type": "array", "items": {"$ref": "#/components/schemas/Function"}}}},
            *_COMMON)}},
        "/v1/functions/{name}": {"get": {
            "summary": "One function's catalog entry",
            "parameters": [{"name": "name", "in": "path", "required": True, "schema": {"type": "string"}}],
            "responses": _responses({"$ref": "#/components/schemas/Function"}, 404, *_COMMON)}},
        "/v1/call": {"post": {
            "summary": "Call one function; args in order (a list) or by name (an object)",
            "requestBody": json_body(call_ref),
            "responses": _responses({"type": "object", "required": ["value"], "properties": {"value": value}},
                                    404, *_BODY, *_COMMON)}},
        "/v1/batch": {"post": {
            "summary": f"Many calls, each on its own (at most {limits['MAX_BATCH_CALLS']})",
            "requestBody": json_body({"type": "object", "required": ["calls"], "additionalProperties": False,
                                      "properties": {"calls": {"type": "array", "items": call_ref,
                                                               "maxItems": limits["MAX_BATCH_CALLS"]}}}),
            "responses": _responses({"type": "object", "required": ["results"],
                                     "properties": {"results": {"type": "array", "items": result}}},
                                    *_BODY, *_COMMON)}},
        "/v1/column": {"post": {
            "summary": f"One function down a column (at most {limits['MAX_COLUMN_ROWS']} rows)",
            "requestBody": json_body({"oneOf": [{"$ref": f"#/components/schemas/Column_{n}"} for n in names]}),
            "responses": _responses({"type": "object", "required": ["values"], "properties": {"values": {
                "type": "array", "items": {"oneOf": [value, {"type": "object", "required": ["error"],
                                                             "properties": {"error": _ERROR}}]}}}},
                404, *_BODY, *_COMMON)}},
        "/v1/openapi.json": {"get": {"summary": "This document",
                                     "responses": _responses({"type": "object"}, *_COMMON)}},
    }
    text_error = {"description": "the spreadsheet error code as the body; the message in X-Trueband-Error-Message",
                  "content": {"text/plain": {"schema": {"type": "string"}}}}
    for name in names:
        fn = REGISTRY[name]
        paths[f"{TEXT_PREFIX}{name}"] = {"get": {
            "summary": f"{fn.signature} as plain text",
            "description": fn.description,
            "parameters": [_text_parameter(a) for a in fn.arguments],
            "responses": {"200": {"description": "the value as text",
                                  "content": {"text/plain": {"schema": {"type": "string"}}}},
                          **{str(s): text_error for s in (400, 401, 403, 404, 405, 413, 422)}}}}
    schemas: dict[str, Any] = {
        "Range": {"type": "array", "description": "rows of cells (null for a blank); a flat list is one column",
                  "items": {"anyOf": [{"type": "array", "items": _CELL}, _CELL]}},
        "Error": {"type": "object", "required": ["error"], "properties": {"error": _ERROR}},
        "Function": {"type": "object", "required": ["name", "arguments", "returns", "description", "reference"],
                     "properties": {"name": {"type": "string"}, "arguments": {"type": "array"},
                                    "returns": {"type": "string"}, "description": {"type": "string"},
                                    "reference": {"type": "string"}}},
    }
    for name in names:
        schemas[f"Call_{name}"] = _call_schema(REGISTRY[name], limits)
        schemas[f"Column_{name}"] = _column_schema(REGISTRY[name], limits)
    doc: dict[str, Any] = {
        "openapi": "3.1.0",
        "info": {"title": "trueband local HTTP bridge", "version": __version__,
                 "description": "Every registered trueband function over HTTP. Statistical indicators to "
                                "support professional judgment, not legal findings."},
        "paths": paths,
        "components": {"schemas": schemas,
                       "responses": {"Error": {"description": "an error",
                                               "content": {"application/json": {
                                                   "schema": {"$ref": "#/components/schemas/Error"}}}}}},
    }
    if config.get("TOKEN"):
        doc["components"]["securitySchemes"] = {"bearer": {"type": "http", "scheme": "bearer"}}
        doc["security"] = [{"bearer": []}]
    return doc


# ---------------------------------------------------------------- guards and error handling

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


def _guard():
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


def _header_text(text: str) -> str:
    # Header values must be plain ASCII with no line breaks; messages echo user input, so encode.
    return urllib.parse.quote(text, safe=" !\"#$&'()*+,-./:;<=>?@[\\]^_`{|}~")


def _error_response(exc, status: int, headers: dict | None = None) -> Response:
    body = error_body(exc)
    if request.path.startswith(TEXT_PREFIX):
        code = exc.code if isinstance(exc, TruebandError) else "#VALUE!"
        resp = Response(code, status=status, mimetype="text/plain")
        resp.headers["X-Trueband-Error-Code"] = _header_text(body["code"])
        resp.headers["X-Trueband-Error-Message"] = _header_text(body["message"])
        if body["argument"] is not None:
            resp.headers["X-Trueband-Error-Argument"] = _header_text(body["argument"])
    else:
        resp = _json({"error": body}, status)
    for key, value in (headers or {}).items():
        resp.headers[key] = value
    return resp


def _on_trueband_error(exc: TruebandError):
    return _error_response(exc, exc.http_status)


def _on_protocol_error(exc: ProtocolError):
    return _error_response(exc, exc.http_status, exc.headers)


_HTTP_CODES = {400: "bad_request", 404: "not_found", 405: "method_not_allowed", 413: "too_large",
               415: "unsupported_media_type"}


def _on_http_error(exc: HTTPException):
    status = exc.code or 500
    if status >= 500:
        return _on_fault(exc)
    code = _HTTP_CODES.get(status, "bad_request")
    messages = {
        "not_found": "no such route; GET /v1/openapi.json lists them",
        "too_large": f"the body may be at most {current_app.config['MAX_BODY_BYTES']} bytes",
        "bad_request": "the request could not be read",
        "unsupported_media_type": "send JSON with Content-Type: application/json",
    }
    headers = {}
    if isinstance(exc, MethodNotAllowed) and exc.valid_methods:
        methods = sorted(m for m in exc.valid_methods if m != "OPTIONS")
        headers["Allow"] = ", ".join(methods)
        messages["method_not_allowed"] = f"{request.method} is not allowed here; use {' or '.join(methods)}"
    else:
        messages.setdefault("method_not_allowed", f"{request.method} is not allowed here")
    return _error_response(ProtocolError(code, messages[code]), status, headers)


def _on_fault(exc: BaseException):
    # The detail goes to the log only; the client learns nothing about the inside.
    log.error("fault while answering %s %s", request.method, request.path, exc_info=exc)
    return _error_response(ProtocolError("internal_error", "internal error; the server log has the detail"), 500)


def _after(resp: Response) -> Response:
    origin = g.get("cors_origin")
    if origin and "Access-Control-Allow-Origin" not in resp.headers:
        resp.headers.update(_cors_headers(origin, preflight=False))
    resp.headers.setdefault("X-Content-Type-Options", "nosniff")
    resp.headers.setdefault("Cache-Control", "no-store")
    return resp


def create_app(config: dict | None = None) -> Flask:
    """The bridge application.

    ``config`` keys (all optional): ``HOST`` the address the server is bound to (added to the Host
    allow-list), ``ALLOWED_HOSTS_EXTRA`` more host names to allow, ``TOKEN`` the access token
    (every request must then carry ``Authorization: Bearer TOKEN``), ``ALLOWED_ORIGINS`` web
    origins that may call it (CORS), and any key of :data:`DEFAULT_LIMITS`.
    """
    app = Flask(__name__)
    app.config.update(DEFAULT_LIMITS)
    app.config.update({"HOST": "127.0.0.1", "TOKEN": None, "ALLOWED_ORIGINS": (), "ALLOWED_HOSTS_EXTRA": ()})
    app.config.update(config or {})
    app.config["ALLOWED_ORIGINS"] = frozenset(app.config["ALLOWED_ORIGINS"] or ())
    app.config["ALLOWED_HOSTS"] = allowed_hosts(app.config["HOST"], app.config["ALLOWED_HOSTS_EXTRA"])
    app.config["MAX_CONTENT_LENGTH"] = app.config["MAX_BODY_BYTES"]
    app.config["PROPAGATE_EXCEPTIONS"] = False  # a fault is a generic 500, even under a test client
    app.json.sort_keys = False
    app.before_request(_guard)
    app.after_request(_after)
    app.register_blueprint(api)
    app.register_error_handler(TruebandError, _on_trueband_error)
    app.register_error_handler(ProtocolError, _on_protocol_error)
    app.register_error_handler(HTTPException, _on_http_error)
    app.register_error_handler(Exception, _on_fault)
    return app
