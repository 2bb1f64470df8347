"""The HTTP bridge's routes and error shapes, through Flask's test client.

Check values: the bridge is an adapter, so every answer is compared with the
direct Python call of the same registered function (the registry's own
tests check the math against published values); the score-interval answers
are also recomputed from score ± z·sd·√(1 − r) with scipy.stats.norm
(reference library).
"""

import dataclasses
import json
import logging
import math

import pytest
from scipy import stats

from trueband.bridge.http import PROTOCOL_ERRORS, create_app
from trueband.funcs import REGISTRY, __version__, call, catalog, lookup
from trueband.funcs.errors import ERROR_CLASSES

SCI = {"sd": 15, "reliability": 0.91, "part": "upper"}


@pytest.fixture
def client():
    return create_app().test_client()


def error_of(resp, status, code, argument=None):
    assert resp.status_code == status, resp.get_data(as_text=True)
    assert resp.mimetype == "application/json"
    body = resp.get_json()
    assert set(body) == {"error"} and set(body["error"]) == {"code", "message", "argument"}
    assert body["error"]["code"] == code
    assert body["error"]["argument"] == argument
    assert body["error"]["message"]
    return body["error"]


# ---------------------------------------------------------------- health, catalog, OpenAPI

def test_health(client):
    resp = client.get("/v1/health")
    assert resp.status_code == 200
    assert resp.get_json() == {"status": "ok", "version": __version__, "functions": len(REGISTRY)}


def test_catalog_is_the_registry_catalog(client):
    body = client.get("/v1/functions").get_json()
    assert body == {"functions": catalog()}
    for entry in body["functions"]:
        assert {"name", "arguments", "returns", "description", "reference"} <= set(entry)


@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_one_function_entry(client, name):
    assert client.get(f"/v1/functions/{name}").get_json() == lookup(name).to_dict()
    # any case and spreadsheet prefixes, as lookup() accepts them
    assert client.get(f"/v1/functions/_xludf.{name.lower()}").get_json()["name"] == name


def test_unknown_function_entry_is_404(client):
    error_of(client.get("/v1/functions/NO_SUCH_THING"), 404, "#NAME?")


def test_openapi_document_lists_every_function(client):
    doc = client.get("/v1/openapi.json").get_json()
    assert doc["openapi"].startswith("3.")
    assert doc["info"]["version"] == __version__
    for route in ("/v1/health", "/v1/functions", "/v1/functions/{name}", "/v1/call", "/v1/batch", "/v1/column",
                  "/v1/openapi.json"):
        assert route in doc["paths"]
    schemas = doc["components"]["schemas"]
    for name, fn in REGISTRY.items():
        params = doc["paths"][f"/v1/text/{name}"]["get"]["parameters"]
        assert [p["name"] for p in params] == [a.name for a in fn.arguments] + ["errors"]  # the text form's own
        assert [p["required"] for p in params] == [a.required for a in fn.arguments] + [False]
        assert params[-1]["schema"]["enum"] == ["status", "text"]
        named = schemas[f"Call_{name}"]["properties"]["args"]["oneOf"][1]
        assert list(named["properties"]) == [a.name for a in fn.arguments]
        for arg in fn.arguments:
            if arg.choices:
                inner = named["properties"][arg.name]
                inner = inner["anyOf"][0] if "anyOf" in inner else inner
                assert inner["enum"] == list(arg.choices)
    assert doc["paths"]["/v1/batch"]["post"]["requestBody"]["content"]["application/json"]["schema"][
        "properties"]["calls"]["maxItems"] == create_app().config["MAX_BATCH_CALLS"]


# ---------------------------------------------------------------- /v1/call

def test_call_positional_and_named_give_the_direct_value(client):
    expected = call("SEM", 15, 0.91)
    assert client.post("/v1/call", json={"function": "SEM", "args": [15, 0.91]}).get_json() == {"value": expected}
    assert client.post("/v1/call", json={"function": "sem", "args": {"reliability": 0.91, "sd": 15}}).get_json() \
        == {"value": expected}


def test_call_score_interval_against_scipy(client):
    value = client.post("/v1/call", json={"function": "SCORE_CI", "args": {"score": 100, **SCI}}).get_json()["value"]
    z = stats.norm.ppf(0.975)  # reference library
    assert value == pytest.approx(100 + z * 15 * math.sqrt(1 - 0.91), rel=1e-14)


def test_call_keeps_result_types(client):
    # booleans stay booleans, band numbers integers: the JSON types follow the registered result kind
    differ = client.post("/v1/call", json={"function": "SCORES_DIFFER", "args": [100, 91, 10, 0.9]}).get_json()
    assert differ == {"value": True}
    band = client.post("/v1/call", json={"function": "SCORE_BAND",
                                         "args": [91, [[100], [95], [91.3], [91], [85], [70]], 10, 0.9]})
    assert band.get_data(as_text=True) == '{"value": 2}'


def test_call_range_with_blanks(client):
    scores = [[100, 95], [None, 91.3], [91, None]]
    body = {"function": "PERCENTILE_RANK", "args": {"score": 95, "scores": [[100], [95], [None], [91.3]]}}
    assert client.post("/v1/call", json=body).get_json() == {"value": call("PERCENTILE_RANK", 95, [100, 95, None, 91.3])}
    # a 2-D range where a row or column belongs: the function's own #VALUE!
    err = error_of(client.post("/v1/call", json={"function": "PERCENTILE_RANK", "args": [95, scores]}),
                   400, "#VALUE!", "scores")
    assert "single row or column" in err["message"]


def test_call_without_args_is_a_count_error(client):
    err = error_of(client.post("/v1/call", json={"function": "SEM"}), 400, "#VALUE!", "sd")
    assert "SEM(sd, reliability)" in err["message"]


@pytest.mark.parametrize("body, status, code, argument", [
    ({"function": "SEM", "args": [15, 1.3]}, 422, "#NUM!", "reliability"),
    ({"function": "SEM", "args": [15, "high"]}, 400, "#VALUE!", "reliability"),
    ({"function": "SEM", "args": [15, None]}, 400, "#VALUE!", "reliability"),
    ({"function": "SEM", "args": [15, 0.9, 3]}, 400, "#VALUE!", None),
    ({"function": "SEM", "args": {"sd": 15, "reliabilty": 0.9}}, 400, "#VALUE!", "reliabilty"),
    ({"function": "SEM", "args": {"self": 1, "sd": 15, "reliability": 0.9}}, 400, "#VALUE!", "self"),
    ('{"function": "SEM", "args": [1e400, 0.9]}', 422, "#NUM!", "sd"),        # 1e400 reads as inf
    ({"function": "SEM", "args": [int("9" * 400), 0.9]}, 422, "#NUM!", "sd"),  # beyond any float
    ({"function": "SEM", "args": [{"x": 1}, 0.9]}, 400, "#VALUE!", "sd"),
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    ({"function": "SCORE_CI", "args": [100, 15, 0.91, "middle"]}, 400, "#VALUE!", "part"),
    ({"function": "SCORE_BAND", "args": [90, [None, None], 10, 0.9]}, 422, "#N/A", "scores"),
    ({"function": "NO_SUCH", "args": []}, 404, "#NAME?", None),
    ({"function": 7, "args": []}, 404, "#NAME?", None),
    ({"function": "SEM", "args": "15, 0.9"}, 400, "#VALUE!", "args"),
    ({"function": "SEM", "args": [15, 0.9], "extra": 1}, 400, "#VALUE!", "extra"),
    ({"args": [15, 0.9]}, 400, "#VALUE!", "function"),
    ([15, 0.9], 400, "#VALUE!", None),
])
def test_call_errors(client, body, status, code, argument):
    raw = body if isinstance(body, str) else json.dumps(body)
    resp = client.post("/v1/call", data=raw, content_type="application/json")
    error_of(resp, status, code, argument)


def test_call_error_matches_the_python_error(client):
    from trueband.funcs.errors import TruebandError

    with pytest.raises(TruebandError) as info:
        call("SEM", 15, 1.3)
    body = client.post("/v1/call", json={"function": "SEM", "args": [15, 1.3]}).get_json()
    assert body == {"error": {**info.value.to_dict()}}
    assert info.value.http_status == 422


@pytest.mark.parametrize("cls", ERROR_CLASSES, ids=lambda c: c.__name__)
def test_every_error_class_maps_to_its_status_and_code(client, monkeypatch, cls):
    def body(sd, reliability):
        raise cls(f"reliability is odd, got {reliability}", argument="reliability")

    monkeypatch.setitem(REGISTRY, "SEM", dataclasses.replace(REGISTRY["SEM"], body=body))
    resp = client.post("/v1/call", json={"function": "SEM", "args": [15, 0.5]})
    err = error_of(resp, cls.http_status, cls.code, "reliability")
    assert err["message"] == "reliability is odd, got 0.5"
    text = client.get("/v1/text/SEM?sd=15&reliability=0.5")
    assert (text.status_code, text.get_data(as_text=True)) == (cls.http_status, cls.code)


def test_a_fault_is_a_generic_500_with_a_log_line(client, monkeypatch, caplog):
    def body(sd, reliability):
        raise KeyError("secret internal detail /srv/path")

    monkeypatch.setitem(REGISTRY, "SEM", dataclasses.replace(REGISTRY["SEM"], body=body))
    with caplog.at_level(logging.ERROR, logger="trueband.http"):
        for resp in (client.post("/v1/call", json={"function": "SEM", "args": [15, 0.5]}),
                     client.post("/v1/batch", json={"calls": [{"function": "SEM", "args": [15, 0.5]}]}),
                     client.post("/v1/column", json={"function": "SEM", "each": {"sd": [15]},
                                                     "same": {"reliability": 0.5}})):
            err = error_of(resp, 500, "internal_error")
            text = resp.get_data(as_text=True)
            assert "secret" not in text and "Traceback" not in text and "KeyError" not in text
            assert err["message"] == "internal error; the server log has the detail"
        text = client.get("/v1/text/SEM?sd=15&reliability=0.5")
        assert (text.status_code, text.get_data(as_text=True)) == (500, "#VALUE!")
        assert "secret" not in str(text.headers)
    faults = [r for r in caplog.records if r.name == "trueband.http"]
    assert len(faults) == 4 and all(r.exc_info and "secret" in str(r.exc_info[1]) for r in faults)


# ---------------------------------------------------------------- /v1/batch

def test_batch_each_call_on_its_own(client):
    calls = [
        {"function": "SEM", "args": [15, 0.91]},
        {"function": "SEM", "args": [15, 1.3]},
        {"function": "NO_SUCH", "args": []},
        "not a call",
        {"function": "SCORE_CI", "args": {"score": 100, **SCI}},
        {"function": "SCORES_DIFFER", "args": [100, 92, 10, 0.9]},
    ]
    results = client.post("/v1/batch", json={"calls": calls}).get_json()["results"]
    assert results[0] == {"value": call("SEM", 15, 0.91)}
    assert results[1]["error"]["code"] == "#NUM!" and results[1]["error"]["argument"] == "reliability"
    assert results[2]["error"]["code"] == "#NAME?"
    assert results[3]["error"]["code"] == "#VALUE!"
    assert results[4] == {"value": call("SCORE_CI", 100, 15, 0.91, "upper")}
    assert results[5] == {"value": False}
    assert len(results) == len(calls)


def test_empty_batch(client):
    assert client.post("/v1/batch", json={"calls": []}).get_json() == {"results": []}


@pytest.mark.parametrize("body, argument", [({}, "calls"), ({"calls": {}}, "calls"), ({"calls": [], "x": 1}, "x"),
                                            ([], None)])
def test_batch_shape_errors(client, body, argument):
    error_of(client.post("/v1/batch", json=body), 400, "#VALUE!", argument)


# ---------------------------------------------------------------- /v1/column

def test_column_matches_single_calls_with_errors_in_place(client):
    scores = [100, 90.5, "x", None, -3, 1e300, True]
    values = client.post("/v1/column", json={"function": "SCORE_CI", "each": {"score": scores},
                                             "same": SCI}).get_json()["values"]
    assert len(values) == len(scores)
    for score, value in zip(scores, values):
        try:
            expected = {"value": call("SCORE_CI", score, **SCI)}
        except Exception as exc:  # noqa: BLE001 - the project's error, compared below
            expected = {"error": {"argument": None, **exc.to_dict()}}
        assert ({"error": value["error"]} if isinstance(value, dict) else {"value": value}) == expected, score


def test_column_with_several_varying_arguments(client):
    each = {"sd": [10, 15, 0], "reliability": [0.9, 1.3, 0.5]}
    values = client.post("/v1/column", json={"function": "SEM", "each": each}).get_json()["values"]
    assert values[0] == call("SEM", 10, 0.9) and values[2] == call("SEM", 0, 0.5)
    assert values[1]["error"]["code"] == "#NUM!" and values[1]["error"]["argument"] == "reliability"


def test_column_with_a_shared_range(client):
    scores = [100, 95, 91.3, 91, 85, 70]
    values = client.post("/v1/column", json={"function": "SCORE_BAND", "each": {"score": scores},
                                             "same": {"scores": scores, "sd": 10, "reliability": 0.9}})
    assert values.get_json() == {"values": [call("SCORE_BAND", s, scores, 10, 0.9) for s in scores]}


def test_column_of_a_function_without_an_array_path(client):
    # COHENS_D takes two ranges: each row brings its own pair (one Python call per row)
    a = [[1, 2, 3, 4], [2, 2, 2, 2]]
    b = [[2, 3, 4, 5], [3, 4, 5, 7]]
    values = client.post("/v1/column", json={"function": "COHENS_D", "each": {"group_a": a, "group_b": b}})
    expected = []
    for x, y in zip(a, b):
        try:
            expected.append(call("COHENS_D", x, y))
        except Exception as exc:  # noqa: BLE001
            expected.append({"error": {"argument": None, **exc.to_dict()}})
    assert values.get_json() == {"values": expected}


def test_empty_column(client):
    assert client.post("/v1/column", json={"function": "SEM", "each": {"sd": []},
                                           "same": {"reliability": 0.9}}).get_json() == {"values": []}


@pytest.mark.parametrize("body, status, code, argument", [
    ({"function": "SEM", "each": {}}, 400, "#VALUE!", "each"),
    ({"function": "SEM", "each": {"sd": 15}}, 400, "#VALUE!", "sd"),
    ({"function": "SEM", "each": {"sd": [1, 2]}, "same": [0.9]}, 400, "#VALUE!", "same"),
    ({"function": "SEM", "each": {"sd": [1, 2], "reliability": [0.9]}}, 400, "#VALUE!", None),
    ({"function": "SEM", "each": {"sd": [1, 2]}, "same": {"sd": 3}}, 400, "#VALUE!", "sd"),
    ({"function": "SEM", "each": {"height": [1, 2]}}, 400, "#VALUE!", "height"),
    ({"function": "NO_SUCH", "each": {"x": [1]}}, 404, "#NAME?", None),
    ({"each": {"sd": [1]}}, 400, "#VALUE!", "function"),
])
def test_column_errors(client, body, status, code, argument):
    error_of(client.post("/v1/column", json=body), status, code, argument)


# ---------------------------------------------------------------- /v1/text

def test_text_number_in_full_precision(client):
    resp = client.get("/v1/text/SCORE_CI?score=100&sd=15&reliability=0.91&part=upper")
    assert resp.status_code == 200 and resp.mimetype == "text/plain"
    assert resp.get_data(as_text=True) == repr(call("SCORE_CI", 100, 15, 0.91, "upper"))
    assert float(resp.get_data(as_text=True)) == call("SCORE_CI", 100, 15, 0.91, "upper")


def test_text_boolean_integer_and_range(client):
    assert client.get("/v1/text/SCORES_DIFFER?score_a=100&score_b=92&sd=10&reliability=0.9").data == b"FALSE"
    assert client.get("/v1/text/SCORES_DIFFER?score_a=100&score_b=91&sd=10&reliability=0.9").data == b"TRUE"
    # a column written with ';' between rows; an empty cell is a blank (ignored by SCORE_BAND)
    resp = client.get("/v1/text/SCORE_BAND?score=91&scores=100;95;;91.3;91;85;70&sd=10&reliability=0.9")
    assert resp.data == str(call("SCORE_BAND", 91, [100, 95, None, 91.3, 91, 85, 70], 10, 0.9)).encode()
    # a row written with ','
    resp = client.get("/v1/text/PERCENTILE_RANK?score=3&scores=1,2,3,4")
    assert resp.data == repr(call("PERCENTILE_RANK", 3, [[1, 2, 3, 4]])).encode()


def test_text_optional_argument_left_empty_takes_its_default(client):
    with_default = client.get("/v1/text/SCORE_CI?score=100&sd=15&reliability=0.91&part=lower&confidence=").data
    assert with_default == repr(call("SCORE_CI", 100, 15, 0.91, "lower")).encode()
    # choices match without regard to case, as in a sheet
    assert client.get("/v1/text/SCORE_CI?score=100&sd=15&reliability=0.91&part=LOWER").data == with_default


@pytest.mark.parametrize("query, status, code, argument", [
    ("SEM?sd=15&reliability=1.3", 422, "#NUM!", "reliability"),
    ("SEM?sd=15&reliability=abc", 400, "#VALUE!", "reliability"),
    ("SEM?sd=15&reliability=1_0", 400, "#VALUE!", "reliability"),
    ("SEM?sd=15", 400, "#VALUE!", "reliability"),
    ("SEM?sd=15&reliability=0.9&reliability=0.8", 400, "#VALUE!", "reliability"),
    ("SEM?sd=15&reliability=0.9&extra=1", 400, "#VALUE!", "extra"),
    ("SEM?sd=inf&reliability=0.9", 422, "#NUM!", "sd"),
    ("SCORE_BAND?score=1&scores=;;&sd=10&reliability=0.9", 422, "#N/A", "scores"),
    ("NO_SUCH?x=1", 404, "#NAME?", None),
])
def test_text_errors(client, query, status, code, argument):
    resp = client.get(f"/v1/text/{query}")
    assert resp.status_code == status and resp.mimetype == "text/plain"
    assert resp.get_data(as_text=True) == code
    assert resp.headers["X-Trueband-Error-Code"] == code
    assert resp.headers["X-Trueband-Error-Message"]
    assert resp.headers.get("X-Trueband-Error-Argument") == argument


@pytest.mark.parametrize("query, status, code, argument", [
    ("SEM?sd=15&reliability=1.3", 422, "#NUM!", "reliability"),
    ("SEM?sd=15&reliability=abc", 400, "#VALUE!", "reliability"),
    ("SEM?sd=15", 400, "#VALUE!", "reliability"),
    ("SEM?sd=15&reliability=0.9&extra=1", 400, "#VALUE!", "extra"),
    ("SCORE_CI?score=31&sd=5.2&reliability=0.86&part=middle", 400, "#VALUE!", "part"),
    ("SCORE_BAND?score=1&scores=;;&sd=10&reliability=0.9", 422, "#N/A", "scores"),
    ("NO_SUCH?x=1", 404, "#NAME?", None),
])
def test_text_errors_as_text_answer_200_with_the_code(client, query, status, code, argument):
    # A cell's web-fetch function (WEBSERVICE) drops a 4xx body; errors=text lets the code through.
    plain = client.get(f"/v1/text/{query}")
    assert plain.status_code == status and plain.get_data(as_text=True) == code
    for choice in ("text", "TEXT", " Text "):
        resp = client.get(f"/v1/text/{query}&errors={choice.replace(' ', '%20')}")
        assert resp.status_code == 200 and resp.mimetype == "text/plain"
        assert resp.get_data(as_text=True) == code
        assert resp.headers["X-Trueband-Error-Code"] == code
        assert resp.headers["X-Trueband-Error-Message"] == plain.headers["X-Trueband-Error-Message"]
        assert resp.headers.get("X-Trueband-Error-Argument") == argument


def test_text_errors_option_leaves_values_and_the_default_alone(client):
    url = "/v1/text/SCORE_CI?score=31&sd=5.2&reliability=0.86&part=upper"
    value = client.get(url)
    assert value.status_code == 200 and "X-Trueband-Error-Code" not in value.headers
    for option in ("&errors=text", "&errors=status", "&errors=text&"):
        same = client.get(url + option)
        assert (same.status_code, same.data) == (200, value.data) and "X-Trueband-Error-Code" not in same.headers
    assert client.get("/v1/text/SEM?sd=15&reliability=1.3&errors=status").status_code == 422
    head = client.head("/v1/text/SEM?sd=15&reliability=1.3&errors=text")
    assert head.status_code == 200 and head.headers["X-Trueband-Error-Code"] == "#NUM!"


@pytest.mark.parametrize("query, status, code", [
    ("SEM?sd=15&reliability=0.9&errors=json", 400, "#VALUE!"),       # an unknown choice is refused as such
    ("SEM?sd=15&reliability=0.9&errors=", 400, "#VALUE!"),
    ("SEM?sd=15&reliability=0.9&errors=text&errors=text", 400, "#VALUE!"),
    ("NO_SUCH?errors=json", 400, "#VALUE!"),                          # checked before the function is looked up
])
def test_text_errors_option_refuses_other_values(client, query, status, code):
    resp = client.get(f"/v1/text/{query}")
    assert (resp.status_code, resp.get_data(as_text=True)) == (status, code)
    assert resp.headers["X-Trueband-Error-Argument"] == "errors"


def test_text_errors_option_keeps_the_bridges_own_refusals(client):
    # Only a function's error becomes 200: a refusal of the request itself keeps its status.
    small = create_app({"MAX_CELLS": 3}).test_client()
    resp = small.get("/v1/text/PERCENTILE_RANK?score=1&scores=1;2;3;4&errors=text")
    assert resp.status_code == 413 and resp.get_data(as_text=True) == "#VALUE!"
    wrong_host = client.get("/v1/text/SEM?sd=15&reliability=1.3&errors=text", headers={"Host": "evil.example"})
    assert wrong_host.status_code == 403
    assert client.post("/v1/text/SEM?sd=15&reliability=1.3&errors=text").status_code == 405


def test_no_function_has_an_argument_named_like_the_text_forms_option():
    assert all(a.name != "errors" for fn in REGISTRY.values() for a in fn.arguments)


def test_text_error_message_header_is_safe_ascii(client):
    resp = client.get("/v1/text/SEM", query_string={"sd": "15", "reliability": "x\r\nSet-Cookie: a=1 é"})
    assert resp.status_code == 400 and "Set-Cookie" not in resp.headers
    message = resp.headers["X-Trueband-Error-Message"]
    assert message.isascii() and "\r" not in message and "\n" not in message
    assert "%0D%0ASet-Cookie" in message and "%C3%A9" in message


# ---------------------------------------------------------------- protocol errors

def test_malformed_json_is_400(client):
    for raw in (b"{", b"{'function': 'SEM'}", b'{"function": "SEM", "args": [NaN, 0.9]}',
                b'{"function": "SEM", "args": [Infinity, 0.9]}', b"\xff\xfe", b"[" * 100_000):
        resp = client.post("/v1/call", data=raw, content_type="application/json")
        error_of(resp, 400, "malformed_json")


@pytest.mark.parametrize("content_type", [None, "text/plain", "application/x-www-form-urlencoded",
                                          "multipart/form-data; boundary=x"])
def test_json_routes_want_json(client, content_type):
    for route in ("/v1/call", "/v1/batch", "/v1/column"):
        resp = client.post(route, data=b'{"function": "SEM", "args": [15, 0.9]}', content_type=content_type)
        error_of(resp, 415, "unsupported_media_type")


def test_json_with_charset_is_json(client):
    resp = client.post("/v1/call", data=b'{"function": "SEM", "args": [15, 0.91]}',
                       content_type="application/json; charset=utf-8")
    assert resp.get_json() == {"value": call("SEM", 15, 0.91)}


def test_unknown_route_is_404(client):
    error_of(client.get("/v1/nothing"), 404, "not_found")
    error_of(client.get("/"), 404, "not_found")


@pytest.mark.parametrize("method, route, allowed", [
    ("post", "/v1/health", "GET, HEAD"), ("put", "/v1/functions", "GET, HEAD"),
    ("delete", "/v1/functions/SEM", "GET, HEAD"), ("get", "/v1/call", "POST"), ("put", "/v1/batch", "POST"),
    ("patch", "/v1/column", "POST"), ("post", "/v1/text/SEM", "GET, HEAD"), ("post", "/v1/openapi.json", "GET, HEAD"),
    ("options", "/v1/call", "POST"), ("options", "/v1/health", "GET, HEAD"),
])
def test_only_documented_methods(client, method, route, allowed):
    resp = getattr(client, method)(route)
    assert resp.status_code == 405 and resp.headers["Allow"] == allowed
    if not route.startswith("/v1/text/"):
        error_of(resp, 405, "method_not_allowed")


def test_head_is_answered_where_get_is(client):
    resp = client.head("/v1/health")
    assert resp.status_code == 200 and resp.data == b""


def test_protocol_error_statuses_are_4xx_or_500():
    assert all(400 <= s < 500 for c, s in PROTOCOL_ERRORS.items() if c != "internal_error")
    assert PROTOCOL_ERRORS["internal_error"] == 500
