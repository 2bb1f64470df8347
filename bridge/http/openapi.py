"""The OpenAPI 3.1 document of the bridge, generated from the registry and the configured limits.

One schema per registered function for ``/v1/call`` (``Call_NAME``) and ``/v1/column``
(``Column_NAME``), one ``/v1/text/NAME`` path per function with its query parameters, and the
fixed routes. ``tests/test_http_openapi.py`` fails when a served route is missing here or the reverse.
"""

from __future__ import annotations

from typing import Any

from trueband.funcs import __version__
from trueband.funcs.registry import REGISTRY, SpreadsheetFunction

from .errors import TEXT_ERRORS, TEXT_PREFIX
from .guards import DEFAULT_LIMITS

__all__ = ["openapi_document"]

_CELL = {"type": ["number", "string", "boolean", "null"]}
_ERROR = {
    "type": "object",
    "required": ["code", "message", "argument"],
    "properties": {"code": {"type": "string"}, "message": {"type": "string"},
                   "argument": {"type": ["string", "null"]}},
}


def _argument_schema(arg) -> dict:
    """JSON Schema of one argument's value, from its registered kind."""
    if arg.kind == "range":
        schema: dict = {"$ref": "#/components/schemas/Range"}
    elif arg.kind == "number":
        schema = {"type": "number"}
    elif arg.kind == "integer":
        schema = {"type": "integer"}
    elif arg.kind == "boolean":
        schema = {"type": "boolean"}
    elif arg.kind == "label":  # a category as a cell holds it: text or a number
        schema = {"type": ["string", "number"]}
    elif arg.choices:
        schema = {"type": "string", "enum": list(arg.choices)}
    else:
        schema = {"type": "string"}
    if not arg.required:
        schema = {"anyOf": [schema, {"type": "null"}], "default": arg.default}
    if arg.description:
        schema["description"] = arg.description
    return schema


def _call_schema(fn: SpreadsheetFunction) -> dict:
    props = {a.name: _argument_schema(a) for a in fn.arguments}
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
    props = {a.name: _argument_schema(a) for a in fn.arguments}
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


def _json_paths(limits: dict, names: list[str]) -> dict[str, Any]:
    """The JSON routes: health, catalog, call, batch, column, this document."""
    call_ref = {"oneOf": [{"$ref": f"#/components/schemas/Call_{n}"} for n in names]}
    value = {"type": ["number", "integer", "boolean", "string"]}  # string: a category result ("A")
    result = {"oneOf": [
        {"type": "object", "required": ["value"], "properties": {"value": value}, "additionalProperties": False},
        {"type": "object", "required": ["error"], "properties": {"error": _ERROR}, "additionalProperties": False},
    ]}
    json_body = lambda schema: {"required": True, "content": {"application/json": {"schema": schema}}}  # noqa: E731
    return {
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


#: The text form's own query parameter, after the function's arguments.
_TEXT_ERRORS_PARAMETER = {
    "name": TEXT_ERRORS, "in": "query", "required": False,
    "schema": {"type": "string", "enum": ["status", "text"], "default": "status"},
    "description": "how a function's error (#VALUE!, #NUM!, #DIV/0!, #N/A, #NAME?) is answered: 'status' with "
                   "its 4xx status; 'text' with 200, for a spreadsheet cell's web-fetch function (WEBSERVICE), "
                   "which drops the body of a 4xx answer. Either way the body is the code and the "
                   "X-Trueband-Error-* headers carry the detail; the bridge's own refusals keep their status."}


def _text_paths(names: list[str]) -> dict[str, Any]:
    """One ``/v1/text/NAME`` path per registered function, its arguments as query parameters."""
    text_error = {"description": "the spreadsheet error code as the body; the message in X-Trueband-Error-Message",
                  "content": {"text/plain": {"schema": {"type": "string"}}}}
    text_ok = {"description": "the value as text; with errors=text, also a function's error: its spreadsheet "
                              "code as the body, the message in X-Trueband-Error-Message",
               "content": {"text/plain": {"schema": {"type": "string"}}}}
    paths = {}
    for name in names:
        fn = REGISTRY[name]
        paths[f"{TEXT_PREFIX}{name}"] = {"get": {
            "summary": f"{fn.signature} as plain text",
            "description": fn.description,
            "parameters": [*(_text_parameter(a) for a in fn.arguments), _TEXT_ERRORS_PARAMETER],
            "responses": {"200": text_ok,
                          **{str(s): text_error for s in (400, 401, 403, 404, 405, 413, 422)}}}}
    return paths


def _schemas(limits: dict, names: list[str]) -> dict[str, Any]:
    """The shared schemas, then ``Call_NAME`` and ``Column_NAME`` for each function."""
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
        schemas[f"Call_{name}"] = _call_schema(REGISTRY[name])
        schemas[f"Column_{name}"] = _column_schema(REGISTRY[name], limits)
    return schemas


def openapi_document(config) -> dict:
    """The OpenAPI 3.1 document, generated from the registry and the configured limits."""
    limits = {k: config[k] for k in DEFAULT_LIMITS}
    names = sorted(REGISTRY)
    doc: dict[str, Any] = {
        "openapi": "3.1.0",
        "info": {"title": "trueband local HTTP bridge", "version": __version__,
                 "description": "Every registered trueband function over HTTP. Statistical indicators to "
                                "support professional judgment, not legal findings."},
        "paths": {**_json_paths(limits, names), **_text_paths(names)},
        "components": {"schemas": _schemas(limits, names),
                       "responses": {"Error": {"description": "an error",
                                               "content": {"application/json": {
                                                   "schema": {"$ref": "#/components/schemas/Error"}}}}}},
    }
    if config.get("TOKEN"):
        doc["components"]["securitySchemes"] = {"bearer": {"type": "http", "scheme": "bearer"}}
        doc["security"] = [{"bearer": []}]
    return doc
