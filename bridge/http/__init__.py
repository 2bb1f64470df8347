"""The local HTTP bridge: every registered function over HTTP, generated from the registry.

:func:`create_app` builds the Flask application (the application-factory shape): the ``/v1``
blueprint is in :mod:`.routes`, the OpenAPI document in :mod:`.openapi`, the guards and limits in
:mod:`.guards`, the error shape and its handlers in :mod:`.errors`; ``trueband serve`` runs the
application under waitress (:mod:`.server`). Nothing here knows any single function: routes,
argument checks and the OpenAPI document all come from :data:`~trueband.funcs.registry.REGISTRY`,
and every error status and code comes from the error classes of :mod:`trueband.funcs.errors`.

=================================  ======  ==============================================
route                              method  answers
=================================  ======  ==============================================
``/v1/health``                     GET     ``{"status": "ok", "version": ...}``
``/v1/functions``                  GET     the catalog ``{"functions": [...]}``
``/v1/functions/NAME``             GET     one catalog entry
``/v1/call``                       POST    one call: ``{"value": ...}``
``/v1/batch``                      POST    many calls: ``{"results": [...]}``
``/v1/column``                     POST    one function down a column: ``{"values": [...]}``
``/v1/text/NAME?arg=...``          GET     the value as plain text (for cell formulas); an
                                         error is its code with a 4xx status, or with
                                         200 given ``&errors=text``
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
a computing-time budget for every request that computes (enforced inside the
computation), JSON content type required,
and only the documented methods.
"""

from __future__ import annotations

from pathlib import Path

from flask import Flask

from .errors import PROTOCOL_ERRORS, register_error_handlers
from .guards import DEFAULT_LIMITS, add_response_headers, allowed_hosts, check_token, guard_request
from .routes import api

__all__ = ["create_app", "DEFAULT_LIMITS", "PROTOCOL_ERRORS"]


def create_app(config: dict | None = None) -> Flask:
    """The bridge application.

    ``config`` keys (all optional): ``HOST`` the address the server is bound to (added to the Host
    allow-list), ``ALLOWED_HOSTS_EXTRA`` more host names to allow, ``TOKEN`` the access token
    (every request must then carry ``Authorization: Bearer TOKEN``), ``ALLOWED_ORIGINS`` web
    origins that may call it (CORS), and any key of :data:`DEFAULT_LIMITS`.
    """
    # No static files: Flask would otherwise serve /static/<path> (a route the OpenAPI document
    # does not list, answering OPTIONS). No instance folder either: naming one spares Flask its
    # search for it, which fails under an editable install (there `trueband` is a namespace
    # package served by a path hook).
    app = Flask(__name__, static_folder=None, instance_path=str(Path(__file__).resolve().parent / "instance"))
    app.config.update(DEFAULT_LIMITS)
    app.config.update({"HOST": "127.0.0.1", "TOKEN": None, "ALLOWED_ORIGINS": (), "ALLOWED_HOSTS_EXTRA": ()})
    app.config.update(config or {})
    check_token(app.config["TOKEN"])  # ValueError: a token no request could present is refused at start-up
    app.config["ALLOWED_ORIGINS"] = frozenset(app.config["ALLOWED_ORIGINS"] or ())
    app.config["ALLOWED_HOSTS"] = allowed_hosts(app.config["HOST"], app.config["ALLOWED_HOSTS_EXTRA"])
    app.config["MAX_CONTENT_LENGTH"] = app.config["MAX_BODY_BYTES"]
    app.config["PROPAGATE_EXCEPTIONS"] = False  # a fault is a generic 500, even under a test client
    app.json.sort_keys = False
    # ``GET /v1//health`` would otherwise be redirected (with an HTML body) by the router itself,
    # outside the error handlers; without merging it is a plain 404 in the JSON shape.
    app.url_map.merge_slashes = False
    app.before_request(guard_request)
    app.after_request(add_response_headers)
    app.register_blueprint(api)
    register_error_handlers(app)
    return app
