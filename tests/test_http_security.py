"""The HTTP bridge's safety rules, each with a test.

Loopback-only start, the access token (constant-time compared), the Host
allow-list against DNS rebinding, refused foreign origins and no CORS headers
unless an origin is allowed, the body limit (413), the cell, batch and row
limits, the computing-time budget, and that nothing internal leaves.
"""

import hmac
import json

import pytest

from trueband.bridge import cli

from trueband.bridge.cli import serve as cmd_serve
from trueband.bridge.http import DEFAULT_LIMITS, create_app
from trueband.funcs import call

CALL = {"function": "SEM", "args": [15, 0.91]}
TOKEN = "s3cret-token-for-tests"


def error_code(resp):
    return resp.get_json()["error"]["code"]


# ---------------------------------------------------------------- binding

@pytest.mark.parametrize("host", ["127.0.0.1", "127.0.0.2", "localhost", "::1", "[::1]"])
def test_loopback_addresses(host):
    assert cmd_serve.is_loopback(host)


@pytest.mark.parametrize("host", ["0.0.0.0", "::", "192.168.1.20", "10.0.0.1", "example.internal", "localhost.evil"])
def test_other_addresses_are_not_loopback(host):
    assert not cmd_serve.is_loopback(host)


def test_non_loopback_bind_refuses_to_start_without_a_token(monkeypatch, capsys):
    monkeypatch.delenv(cmd_serve.TOKEN_VARIABLE, raising=False)
    started = []
    monkeypatch.setattr(cmd_serve, "make_server", lambda *a, **k: started.append(a))
    assert cli.main(["serve", "--host", "0.0.0.0", "--port", "0"]) == cli.EXIT_FAILED
    assert "without an access token" in capsys.readouterr().err
    assert started == []  # refused before any socket was opened


class FakeServer:
    effective_port = 5555

    def __init__(self, app):
        self.app = app
        self.closed = False

    def run(self):
        raise KeyboardInterrupt  # as Ctrl-C does

    def close(self):
        self.closed = True


@pytest.mark.parametrize("how", ["option", "environment"])
def test_non_loopback_bind_starts_with_a_token(monkeypatch, capsys, how):
    servers = []

    def fake(app, host, port, **kw):
        servers.append(FakeServer(app))
        return servers[-1]

    monkeypatch.setattr(cmd_serve, "make_server", fake)
    argv = ["serve", "--host", "0.0.0.0", "--port", "0"]
    if how == "option":
        argv += ["--token", TOKEN]
    else:
        monkeypatch.setenv(cmd_serve.TOKEN_VARIABLE, TOKEN)
    assert cli.main(argv) == cli.EXIT_OK
    out = capsys.readouterr().out
    assert "Authorization: Bearer" in out and TOKEN not in out and "stopped" in out
    assert servers[0].closed and servers[0].app.config["TOKEN"] == TOKEN
    client = servers[0].app.test_client()
    assert client.get("/v1/health", headers={"Host": "0.0.0.0"}).status_code == 401


def test_default_bind_is_loopback():
    args = cli.build_parser().parse_args(["serve"])
    assert args.host == "127.0.0.1" and cmd_serve.is_loopback(args.host) and args.port == 8765


# ---------------------------------------------------------------- token

@pytest.fixture
def guarded():
    return create_app({"TOKEN": TOKEN}).test_client()


def test_token_required_on_every_route(guarded):
    for method, route in [("get", "/v1/health"), ("get", "/v1/functions"), ("get", "/v1/functions/SEM"),
                          ("get", "/v1/openapi.json"), ("post", "/v1/call"), ("post", "/v1/batch"),
                          ("post", "/v1/column"), ("get", "/v1/nothing")]:
        resp = getattr(guarded, method)(route, json=CALL if method == "post" else None)
        assert resp.status_code == 401 and error_code(resp) == "unauthorized", route
        assert resp.headers["WWW-Authenticate"].startswith("Bearer")
    text = guarded.get("/v1/text/SEM?sd=15&reliability=0.91")
    assert (text.status_code, text.data) == (401, b"#VALUE!")


@pytest.mark.parametrize("header", [None, f"Bearer {TOKEN}x", f"Bearer {TOKEN[:-1]}", f"Basic {TOKEN}",
                                    TOKEN, "Bearer", "Bearer ", f"Token {TOKEN}"])
def test_wrong_tokens_are_refused(guarded, header):
    headers = {"Authorization": header} if header is not None else {}
    assert guarded.post("/v1/call", json=CALL, headers=headers).status_code == 401


def test_right_token_is_accepted(guarded):
    for header in (f"Bearer {TOKEN}", f"bearer {TOKEN}"):
        resp = guarded.post("/v1/call", json=CALL, headers={"Authorization": header})
        assert resp.get_json() == {"value": call("SEM", 15, 0.91)}


def test_token_is_compared_in_constant_time(guarded, monkeypatch):
    from trueband.bridge.http import guards

    seen = []
    real = hmac.compare_digest

    def spy(a, b):
        seen.append((a, b))
        return real(a, b)

    monkeypatch.setattr(guards.hmac, "compare_digest", spy)
    guarded.get("/v1/health", headers={"Authorization": "Bearer guess"})
    assert seen == [(b"guess", TOKEN.encode())]


def test_openapi_declares_the_token(guarded):
    doc = guarded.get("/v1/openapi.json", headers={"Authorization": f"Bearer {TOKEN}"}).get_json()
    assert doc["security"] == [{"bearer": []}]
    assert "security" not in create_app().test_client().get("/v1/openapi.json").get_json()


# ---------------------------------------------------------------- Host allow-list (DNS rebinding)

@pytest.mark.parametrize("host", ["localhost", "localhost:8765", "127.0.0.1", "127.0.0.1:8765", "[::1]:8765",
                                  "LOCALHOST:1", "localhost."])
def test_loopback_host_names_are_answered(host):
    client = create_app().test_client()
    assert client.get("/v1/health", headers={"Host": host}).status_code == 200


@pytest.mark.parametrize("host", ["evil.example", "evil.example:8765", "127.0.0.1.evil.example", "localhost.evil",
                                  "192.168.1.20:8765", "[::2]:8765", ""])
def test_other_host_names_are_refused(host):
    client = create_app().test_client()
    resp = client.get("/v1/health", headers={"Host": host})
    assert resp.status_code == 403 and error_code(resp) == "forbidden"
    text = client.get("/v1/text/SEM?sd=15&reliability=0.91", headers={"Host": host})
    assert (text.status_code, text.data) == (403, b"#VALUE!")


def test_bound_address_and_extra_names_are_answered():
    client = create_app({"HOST": "192.168.1.20", "ALLOWED_HOSTS_EXTRA": ["hr-desk.local"]}).test_client()
    for host in ("192.168.1.20:8765", "hr-desk.local:8765", "localhost"):
        assert client.get("/v1/health", headers={"Host": host}).status_code == 200
    assert client.get("/v1/health", headers={"Host": "other.local"}).status_code == 403
    v6 = create_app({"HOST": "fe80::1"}).test_client()
    assert v6.get("/v1/health", headers={"Host": "[fe80::1]:8765"}).status_code == 200


# ---------------------------------------------------------------- origins and CORS

def test_no_cors_headers_by_default_and_foreign_origins_refused():
    client = create_app().test_client()
    plain = client.get("/v1/health")
    assert not [k for k in plain.headers.keys() if k.lower().startswith("access-control")]
    resp = client.post("/v1/call", json=CALL, headers={"Origin": "https://evil.example"})
    assert resp.status_code == 403 and error_code(resp) == "forbidden"
    assert not [k for k in resp.headers.keys() if k.lower().startswith("access-control")]
    pre = client.options("/v1/call", headers={"Origin": "https://evil.example", "Access-Control-Request-Method": "POST"})
    assert pre.status_code == 403 and "Access-Control-Allow-Origin" not in pre.headers


def test_an_allowed_origin_gets_cors_headers():
    origin = "https://intranet.example"
    client = create_app({"ALLOWED_ORIGINS": [origin], "TOKEN": TOKEN}).test_client()
    pre = client.options("/v1/call", headers={"Origin": origin, "Access-Control-Request-Method": "POST",
                                              "Access-Control-Request-Headers": "content-type, authorization"})
    assert pre.status_code == 204
    assert pre.headers["Access-Control-Allow-Origin"] == origin
    assert "POST" in pre.headers["Access-Control-Allow-Methods"]
    assert "Authorization" in pre.headers["Access-Control-Allow-Headers"]
    resp = client.post("/v1/call", json=CALL, headers={"Origin": origin, "Authorization": f"Bearer {TOKEN}"})
    assert resp.status_code == 200 and resp.headers["Access-Control-Allow-Origin"] == origin
    assert resp.headers["Vary"] == "Origin"
    # the token still applies to the real request
    assert client.post("/v1/call", json=CALL, headers={"Origin": origin}).status_code == 401
    other = client.post("/v1/call", json=CALL, headers={"Origin": "https://intranet.example.evil"})
    assert other.status_code == 403


# ---------------------------------------------------------------- limits

def test_body_limit_is_413():
    client = create_app({"MAX_BODY_BYTES": 1000}).test_client()
    body = json.dumps({"function": "SEM", "args": [15, 0.91], "pad": "x" * 2000})
    resp = client.post("/v1/call", data=body, content_type="application/json")
    assert resp.status_code == 413 and error_code(resp) == "too_large"
    assert "1000 bytes" in resp.get_json()["error"]["message"]


def test_default_body_limit_holds_a_100000_row_column():
    scores = [round(20 + i * 0.000173, 6) for i in range(100_000)]
    body = json.dumps({"function": "SCORE_CI", "each": {"score": scores}, "same": {"sd": 5, "reliability": 0.8,
                                                                                   "part": "upper"}})
    assert len(body) < DEFAULT_LIMITS["MAX_BODY_BYTES"]


def test_cell_limit_is_413_on_every_route():
    client = create_app({"MAX_CELLS": 10}).test_client()
    small, big = list(range(10)), list(range(11))
    assert client.post("/v1/call", json={"function": "PERCENTILE_RANK", "args": [3, small]}).status_code == 200
    for route, body in [
        ("/v1/call", {"function": "PERCENTILE_RANK", "args": [3, big]}),
        ("/v1/call", {"function": "PERCENTILE_RANK", "args": {"score": 3, "scores": [[x] for x in big]}}),
        ("/v1/batch", {"calls": [{"function": "PERCENTILE_RANK", "args": [3, small[:6]]}] * 2}),
        ("/v1/column", {"function": "PERCENTILE_RANK", "each": {"score": [1, 2]}, "same": {"scores": big}}),
        ("/v1/column", {"function": "PERCENTILE_RANK", "each": {"score": [1, 2], "scores": [small[:6]] * 2}}),
    ]:
        resp = client.post(route, json=body)
        assert resp.status_code == 413 and error_code(resp) == "too_large", (route, body)
        assert "at most 10 range cells" in resp.get_json()["error"]["message"]
    text = client.get("/v1/text/PERCENTILE_RANK?score=3&scores=" + ";".join(map(str, big)))
    assert (text.status_code, text.data) == (413, b"#VALUE!")
    # plain number arguments are not range cells: a long column of scores is limited by rows instead
    ok = client.post("/v1/column", json={"function": "SEM", "each": {"sd": small * 5}, "same": {"reliability": 0.9}})
    assert ok.status_code == 200


def test_batch_call_limit_is_413():
    client = create_app({"MAX_BATCH_CALLS": 3}).test_client()
    assert client.post("/v1/batch", json={"calls": [CALL] * 3}).status_code == 200
    resp = client.post("/v1/batch", json={"calls": [CALL] * 4})
    assert resp.status_code == 413 and "at most 3 calls, got 4" in resp.get_json()["error"]["message"]


def test_column_row_limit_is_413():
    client = create_app({"MAX_COLUMN_ROWS": 5}).test_client()
    body = {"function": "SEM", "each": {"sd": [1] * 5}, "same": {"reliability": 0.9}}
    assert client.post("/v1/column", json=body).status_code == 200
    body["each"]["sd"].append(1)
    resp = client.post("/v1/column", json=body)
    assert resp.status_code == 413 and "at most 5 rows, got 6" in resp.get_json()["error"]["message"]


def test_time_budget_stops_a_long_batch_or_column():
    client = create_app({"TIME_BUDGET_SECONDS": 0.0, "COLUMN_PIECE_CELLS": 4}).test_client()
    resp = client.post("/v1/batch", json={"calls": [CALL] * 3})
    assert resp.status_code == 422 and error_code(resp) == "too_much_work"
    # the budget is checked inside the computation, so a spent one stops even the first call
    assert "stopped after 0 of 3" in resp.get_json()["error"]["message"]
    resp = client.post("/v1/column", json={"function": "PERCENTILE_RANK", "each": {"score": [1, 2, 3]},
                                           "same": {"scores": [1, 2, 3]}})
    assert resp.status_code == 422 and "stopped after 0 of 3" in resp.get_json()["error"]["message"]
    # a single call has the same budget (checked in the function's own loops)
    resp = client.post("/v1/call", json={"function": "KRIPPENDORFF_ALPHA", "args": [[[1, 2], [2, 3]], "ratio"]})
    assert resp.status_code == 422 and error_code(resp) == "too_much_work"
    # within the budget the same column is computed in pieces with the same values
    roomy = create_app({"COLUMN_PIECE_CELLS": 4}).test_client()
    values = roomy.post("/v1/column", json={"function": "PERCENTILE_RANK", "each": {"score": [1, 2, 3]},
                                            "same": {"scores": [1, 2, 3]}}).get_json()["values"]
    assert values == [call("PERCENTILE_RANK", s, [1, 2, 3]) for s in (1, 2, 3)]


def test_responses_are_not_cached_or_sniffed():
    resp = create_app().test_client().get("/v1/health")
    assert resp.headers["Cache-Control"] == "no-store" and resp.headers["X-Content-Type-Options"] == "nosniff"


def test_server_header_does_not_name_the_framework():
    # the test client adds none; waitress is given ident="trueband" (checked in the end-to-end test)
    resp = create_app().test_client().get("/v1/nothing")
    assert "Werkzeug" not in resp.get_data(as_text=True) and "Flask" not in resp.get_data(as_text=True)
