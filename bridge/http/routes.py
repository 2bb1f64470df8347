"""The ``/v1`` routes: one blueprint, every registered function over HTTP.

Nothing here knows any single function: the routes look functions up in
:data:`~trueband.funcs.registry.REGISTRY` and answer with their values or their errors
(:mod:`.errors`); the guards and limits are in :mod:`.guards`, the OpenAPI document in
:mod:`.openapi`. GET routes also answer HEAD.
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, Response, current_app, request

from trueband.funcs import __version__
from trueband.funcs._budget import BudgetExceeded, check_time
from trueband.funcs.errors import ArgumentCountError, ArgumentTypeError, TruebandError
from trueband.funcs._validate import choice
from trueband.funcs.registry import REGISTRY, SpreadsheetFunction, call_column, catalog, lookup

from .errors import TEXT_ERRORS, ProtocolError, error_body, error_response, json_response
from .guards import budget_error, check_cells, computing_budget, count_cells, json_body, range_cells
from .openapi import openapi_document

__all__ = ["api", "format_text_value"]


def format_text_value(value) -> str:
    """A result as the text form shows it: TRUE/FALSE, integers as digits, floats in full (repr)."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return repr(value)
    return str(value)


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


api = Blueprint("api", __name__, url_prefix="/v1")


def _route(rule: str, methods: list[str]):
    # No automatic OPTIONS: only the documented methods answer (CORS preflight is handled up front).
    return api.route(rule, methods=methods, provide_automatic_options=False)


@_route("/health", ["GET"])
def health():
    return json_response({"status": "ok", "version": __version__, "functions": len(REGISTRY)})


@_route("/functions", ["GET"])
def functions():
    return json_response({"functions": catalog()})


@_route("/functions/<path:name>", ["GET"])
def function(name: str):
    return json_response(_function(name).to_dict())


@_route("/call", ["POST"])
def call_route():
    body = json_body()
    check_cells(range_cells(body.get("args")) if isinstance(body, dict) else 0)
    with computing_budget():
        value = _call_one(body)
    return json_response({"value": value})


@_route("/batch", ["POST"])
def batch_route():
    body = _fields(json_body(), ("calls",), ("calls",), "a batch")
    calls = body["calls"]
    if not isinstance(calls, list):
        raise ArgumentTypeError("calls must be a list of calls", argument="calls")
    limit = current_app.config["MAX_BATCH_CALLS"]
    if len(calls) > limit:
        raise ProtocolError("too_large", f"a batch may hold at most {limit} calls, got {len(calls)}")
    check_cells(sum(range_cells(c.get("args")) for c in calls if isinstance(c, dict)))
    results = []
    with computing_budget():
        for i, one in enumerate(calls):
            try:
                check_time()
                results.append({"value": _call_one(one)})
            except TruebandError as exc:  # each call on its own: its error in its place
                results.append({"error": error_body(exc)})
            except BudgetExceeded as exc:  # the budget is the whole batch's: it stops here
                raise budget_error(exc, i, len(calls), "batch") from None
    return json_response({"results": results})


@_route("/column", ["POST"])
def column_route():
    body = _fields(json_body(), ("function", "each", "same"), ("function", "each"), "a column call")
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
    same_cells = range_cells(same)
    check_cells(same_cells + sum(range_cells(col) for col in each.values()))
    if any(len(col) != rows for col in each.values()):
        call_column(fn.name, each, same)  # raises the registry's own "columns differ in length" error

    # A column is computed in pieces (each piece a bounded amount of memory); the time budget is checked
    # inside each piece as well, row by row and block by block, and inside the functions' own loops.
    cfg = current_app.config
    one_by_one = not set(each) <= fn.elementwise  # call_column then makes one Python call per row
    piece = min(cfg["COLUMN_PIECE_ROWS_ONE_BY_ONE" if one_by_one else "COLUMN_PIECE_ROWS"],
                max(1, cfg["COLUMN_PIECE_CELLS"] // (1 + same_cells)))
    values: list = []
    with computing_budget():
        for lo in range(0, rows, piece):
            part = {k: col[lo:lo + piece] for k, col in each.items()}
            try:
                check_time()
                computed = call_column(fn.name, part, same)
            except BudgetExceeded as exc:
                raise budget_error(exc, lo, rows, "column") from None
            if any(issubclass(t, TruebandError) for t in set(map(type, computed))):
                values.extend({"error": error_body(x)} if isinstance(x, TruebandError) else x for x in computed)
            else:
                values.extend(computed)
    return json_response({"values": values})


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


def _errors_as_text() -> bool:
    """The text form's ``errors`` choice: ``status`` (default, a 4xx answer) or ``text`` (200)."""
    values = request.args.getlist(TEXT_ERRORS)
    if len(values) > 1:
        raise ArgumentCountError(f"{TEXT_ERRORS} was given {len(values)} times", argument=TEXT_ERRORS)
    return bool(values) and choice(TEXT_ERRORS, values[0], ("status", "text")) == "text"


@_route("/text/<path:name>", ["GET"])
def text_route(name: str):
    as_text = _errors_as_text()
    try:
        with computing_budget():
            value = _text_call(name)
        return Response(format_text_value(value), mimetype="text/plain")
    except TruebandError as exc:
        if not as_text:
            raise
        # A cell's web-fetch function (WEBSERVICE) drops a 4xx body; with 200 the cell gets the code.
        return error_response(exc, 200)


def _text_call(name: str):
    """The value of the function NAME called with the query's arguments (``errors`` aside)."""
    fn = _function(name)
    kinds = {a.name: a.kind for a in fn.arguments}
    named: dict[str, Any] = {}
    cells = 0
    for key in request.args:
        if key == TEXT_ERRORS:
            continue
        values = request.args.getlist(key)
        if len(values) > 1:
            raise ArgumentCountError(f"{fn.name} got {key} {len(values)} times", argument=key)
        kind = kinds.get(key)
        if kind is None:
            fn.bind((), {key: None})  # the registry's own "has no argument named" error
        if kind == "range":
            named[key] = _text_range(values[0])
            cells += count_cells(named[key])
        elif kind == "text":
            named[key] = values[0] if values[0] != "" else None
        else:
            named[key] = _text_cell(values[0])
    check_cells(cells)
    return fn(**named)


@_route("/openapi.json", ["GET"])
def openapi():
    return json_response(openapi_document(current_app.config))

