"""The bridge's one error shape and the handlers that write it.

Every error in the JSON API is ``{"error": {"code", "message", "argument"}}``: a function's
error (:class:`~trueband.funcs.errors.TruebandError`) carries its spreadsheet code
(``#NUM!``...) and its class's HTTP status; a protocol error (:class:`ProtocolError`) carries one
of the words in :data:`PROTOCOL_ERRORS`. Under ``/v1/text/`` the same error is the spreadsheet
code as plain text, with the message in ``X-Trueband-Error-*`` headers (with ``errors=text``, a
function's error comes with status 200, so that a spreadsheet cell's web-fetch function shows it). A fault is a generic 500
whose detail goes to the log only.
"""

from __future__ import annotations

import json
import logging
import urllib.parse
from typing import Any

from flask import Flask, Response, current_app, request
from werkzeug.exceptions import HTTPException, MethodNotAllowed

from trueband.funcs._budget import BudgetExceeded
from trueband.funcs.errors import TruebandError

__all__ = ["PROTOCOL_ERRORS", "ProtocolError", "TEXT_ERRORS", "TEXT_PREFIX", "budget_message", "error_body",
           "error_response", "json_response", "register_error_handlers", "server_error_body"]

log = logging.getLogger("trueband.http")

#: Protocol errors (not a function's error): code word and HTTP status.
PROTOCOL_ERRORS = {
    "bad_request": 400,
    "malformed_json": 400,
    "unauthorized": 401,
    "forbidden": 403,
    "not_found": 404,
    "method_not_allowed": 405,
    "too_large": 413,
    "headers_too_large": 431,
    "unsupported_media_type": 415,
    "too_much_work": 422,
    "internal_error": 500,
}

#: Where the text form of the API starts: its errors are plain text, not JSON.
TEXT_PREFIX = "/v1/text/"

#: The text form's query parameter that chooses how a function's error is answered: ``status`` (the
#: default) with its 4xx status, ``text`` with 200, for a cell's web-fetch function, which drops the
#: body of a 4xx answer. No registered function may have an argument of this name.
TEXT_ERRORS = "errors"


class ProtocolError(Exception):
    """A request the bridge refuses before any function runs (or a batch/column over budget)."""

    def __init__(self, code: str, message: str, headers: dict | None = None, status: int | None = None):
        super().__init__(message)
        self.code = code
        self.message = message
        self.http_status = status or PROTOCOL_ERRORS[code]
        self.headers = headers or {}


def error_body(exc) -> dict:
    """The ``{"code", "message", "argument"}`` body of a function error or a protocol error."""
    if isinstance(exc, TruebandError):
        body = exc.to_dict()
        body.setdefault("argument", None)
        return body
    return {"code": exc.code, "message": exc.message, "argument": None}


def json_response(data: Any, status: int = 200) -> Response:
    """``data`` as the bridge writes every JSON answer: ASCII, no NaN or infinity."""
    return Response(json.dumps(data, ensure_ascii=True, allow_nan=False), status=status,
                    mimetype="application/json")


def _header_text(text: str) -> str:
    # Header values must be plain ASCII with no line breaks; messages echo user input, so encode.
    return urllib.parse.quote(text, safe=" !\"#$&'()*+,-./:;<=>?@[\\]^_`{|}~")


def error_response(exc, status: int, headers: dict | None = None) -> Response:
    """The answer to an error: JSON, or under ``/v1/text/`` the code as text and the detail in headers."""
    body = error_body(exc)
    if request.path.startswith(TEXT_PREFIX):
        code = exc.code if isinstance(exc, TruebandError) else "#VALUE!"
        resp = Response(code, status=status, mimetype="text/plain")
        resp.headers["X-Trueband-Error-Code"] = _header_text(body["code"])
        resp.headers["X-Trueband-Error-Message"] = _header_text(body["message"])
        if body["argument"] is not None:
            resp.headers["X-Trueband-Error-Argument"] = _header_text(body["argument"])
    else:
        resp = json_response({"error": body}, status)
    for key, value in (headers or {}).items():
        resp.headers[key] = value
    return resp


def budget_message(exc: BudgetExceeded, done: int | None = None, total: int | None = None, what: str = "request") -> str:
    """The one wording of a spent computing budget (with the progress of a batch or a column)."""
    progress = f" (stopped after {done} of {total})" if done is not None else ""
    return (f"this {what} needs more than {exc.seconds:g} s of computing{progress}; "
            f"send less data, or smaller pieces")


def _on_budget_exceeded(exc: BudgetExceeded):
    return error_response(ProtocolError("too_much_work", budget_message(exc)), PROTOCOL_ERRORS["too_much_work"])


def _on_trueband_error(exc: TruebandError):
    return error_response(exc, exc.http_status)


def _on_protocol_error(exc: ProtocolError):
    return error_response(exc, exc.http_status, exc.headers)


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
    return error_response(ProtocolError(code, messages[code]), status, headers)


def _on_fault(exc: BaseException):
    # The detail goes to the log only; the client learns nothing about the inside.
    log.error("fault while answering %s %s", request.method, request.path, exc_info=exc)
    return error_response(ProtocolError("internal_error", "internal error; the server log has the detail"), 500)


def register_error_handlers(app: Flask) -> None:
    """Every error, from a function, the protocol, werkzeug or a fault, answered in the one shape."""
    app.register_error_handler(TruebandError, _on_trueband_error)
    app.register_error_handler(ProtocolError, _on_protocol_error)
    app.register_error_handler(BudgetExceeded, _on_budget_exceeded)
    app.register_error_handler(HTTPException, _on_http_error)
    app.register_error_handler(Exception, _on_fault)


def server_error_body(status: int, detail: str, limit: int | None = None) -> bytes:
    """The JSON error body for what the web server refuses before the app runs (waitress: 400, 413, 431...)."""
    code = {413: "too_large", 431: "headers_too_large"}.get(status, "bad_request" if status < 500 else "internal_error")
    message = {413: f"the body may be at most {limit} bytes",
               431: f"the request line and headers may be at most {limit} bytes"}.get(status, detail)
    return json.dumps({"error": {"code": code, "message": message, "argument": None}},
                      ensure_ascii=True).encode("ascii")
