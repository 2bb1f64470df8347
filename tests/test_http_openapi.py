"""The OpenAPI document and the served routes agree: every route Flask serves is documented, with its
methods, and every documented path is served.

A rule's converters become OpenAPI path parameters (``<path:name>`` is ``{name}``); the text route
``/v1/text/<path:name>`` is documented once per registered function (``/v1/text/SEM``...).
"""

import re

import pytest

from trueband.bridge.http import create_app
from trueband.funcs.registry import REGISTRY

TEXT_RULE = "/v1/text/<path:name>"
UNDOCUMENTED_METHODS = {"HEAD", "OPTIONS"}  # HEAD answers as GET does; OPTIONS only for an allowed origin


def served_routes(app) -> dict[str, set[str]]:
    """Each served path in OpenAPI form → its methods (the text rule expanded to one path per function)."""
    routes: dict[str, set[str]] = {}
    for rule in app.url_map.iter_rules():
        methods = set(rule.methods) - UNDOCUMENTED_METHODS
        if rule.rule == TEXT_RULE:
            paths = [f"/v1/text/{name}" for name in REGISTRY]
        else:
            paths = [re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", r"{\1}", rule.rule)]
        for path in paths:
            routes.setdefault(path, set()).update(methods)
    return routes


def documented_routes(doc) -> dict[str, set[str]]:
    return {path: {method.upper() for method in operations} for path, operations in doc["paths"].items()}


def differences(served: dict[str, set[str]], documented: dict[str, set[str]]) -> list[str]:
    out = [f"served but not documented: {path}" for path in sorted(set(served) - set(documented))]
    out += [f"documented but not served: {path}" for path in sorted(set(documented) - set(served))]
    out += [f"{path}: served {sorted(served[path])}, documented {sorted(documented[path])}"
            for path in sorted(set(served) & set(documented)) if served[path] != documented[path]]
    return out


@pytest.mark.parametrize("config", [{}, {"TOKEN": "s3cret"}], ids=["open", "token"])
def test_every_served_route_is_documented_and_the_reverse(config):
    app = create_app(config)
    doc = app.test_client().get("/v1/openapi.json",
                                headers={"Authorization": "Bearer s3cret"}).get_json()
    assert differences(served_routes(app), documented_routes(doc)) == []


def test_the_comparison_can_fail():
    app = create_app()
    served = served_routes(app)
    documented = documented_routes(app.test_client().get("/v1/openapi.json").get_json())

    extended = create_app()
    extended.add_url_rule("/v1/undocumented", "undocumented", lambda: "x")  # a route without its OpenAPI entry
    assert differences(served_routes(extended), documented) == ["served but not documented: /v1/undocumented"]
    del documented["/v1/health"]
    documented["/v1/gone"] = {"GET"}
    documented["/v1/call"] = {"GET"}
    assert differences(served, documented) == [
        "served but not documented: /v1/health", "documented but not served: /v1/gone",
        "/v1/call: served ['POST'], documented ['GET']"]
