"""A bounded load test on loopback: the real waitress server, several client threads.

A fixed number of requests (single calls, batches, columns and the text form,
with valid and invalid inputs, drawn from a seeded generator) go out from
several threads at once over keep-alive connections. It stops by itself;
no request may fail at the transport level or answer 5xx, and every answer
must equal the direct Python call of the same function (the check value).
"""

import http.client
import json
import random
import threading
import urllib.parse
import pytest

from trueband.bridge.http.server import serving_in_background
from trueband.bridge.http import create_app
from trueband.funcs import call, lookup
from trueband.funcs.errors import TruebandError

pytestmark = pytest.mark.slow  # every test here takes seconds: the quick loop leaves the file out

THREADS = 6
REQUESTS_PER_THREAD = 40


def expected(name, *args):
    """(HTTP status, JSON body) that a direct Python call implies for /v1/call."""
    try:
        return 200, {"value": call(name, *args)}
    except TruebandError as exc:
        return exc.http_status, {"error": {"argument": None, **exc.to_dict()}}


def random_case(rng):
    """One SEM, SCORE_CI or SCORE_BAND call; about one in five has a reliability out of range."""
    reliability = rng.choice([0.7, 0.86, 0.91, rng.uniform(0, 1), 1.3])
    kind = rng.choice(["SEM", "SCORE_CI", "SCORE_BAND"])
    if kind == "SEM":
        return "SEM", [rng.uniform(0, 20), reliability]
    if kind == "SCORE_CI":
        return "SCORE_CI", [rng.uniform(0, 40), rng.uniform(1, 8), reliability, rng.choice(["lower", "upper"])]
    scores = [round(rng.uniform(10, 40), 1) for _ in range(rng.randint(3, 30))]
    return "SCORE_BAND", [rng.choice(scores), scores, rng.uniform(1, 8), reliability]


def one_request(conn, rng):
    """Send one request; return (status and body that came back, those a direct Python call implies)."""
    route = rng.choice(["call", "call", "batch", "column", "text"])
    if route == "text":
        name, args = random_case(rng)
        if name == "SCORE_BAND":
            name, args = "SEM", args[2:]
        names = [a.name for a in lookup(name).arguments]
        conn.request("GET", f"/v1/text/{name}?" + urllib.parse.urlencode(
            {k: repr(v) if isinstance(v, float) else v for k, v in zip(names, args)}))
        resp = conn.getresponse()
        got = (resp.status, resp.read().decode())
        status, body = expected(name, *args)
        return got, (status, repr(body["value"]) if status == 200 else body["error"]["code"])
    if route == "call":
        name, args = random_case(rng)
        body, want = {"function": name, "args": args}, expected(name, *args)
    elif route == "batch":
        cases = [random_case(rng) for _ in range(rng.randint(1, 20))]
        body = {"calls": [{"function": n, "args": a} for n, a in cases]}
        want = 200, {"results": [expected(n, *a)[1] for n, a in cases]}
    else:
        scores = [rng.uniform(0, 40) for _ in range(rng.randint(1, 500))] + ["absent"]
        same = {"sd": 5.2, "reliability": rng.choice([0.86, 1.3]), "part": "upper"}
        body = {"function": "SCORE_CI", "each": {"score": scores}, "same": same}
        rows = [expected("SCORE_CI", x, 5.2, same["reliability"], "upper")[1] for x in scores]
        want = 200, {"values": [r.get("value", r) if "value" in r else r for r in rows]}
    conn.request("POST", f"/v1/{route}", body=json.dumps(body), headers={"Content-Type": "application/json"})
    resp = conn.getresponse()
    return (resp.status, json.loads(resp.read())), want


def test_bounded_load_gives_the_direct_results():
    app = create_app()
    failures, done = [], []

    def worker(seed, port):
        rng = random.Random(seed)
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
        try:
            for _ in range(REQUESTS_PER_THREAD):
                got, want = one_request(conn, rng)
                if got != want:
                    failures.append((got, want))
                done.append(got[0])
        except Exception as exc:  # noqa: BLE001 - a transport failure is a failed request
            failures.append(("exception", repr(exc), None))
        finally:
            conn.close()

    with serving_in_background(app, "127.0.0.1", 0) as base:
        port = int(base.rsplit(":", 1)[1])
        threads = [threading.Thread(target=worker, args=(seed, port)) for seed in range(THREADS)]
        for t in threads:
            t.start()
        for t in threads:
            t.join(timeout=300)
        assert not any(t.is_alive() for t in threads)
    assert failures == []
    assert len(done) == THREADS * REQUESTS_PER_THREAD
    assert any(s == 200 for s in done) and any(400 <= s < 500 for s in done)  # both paths were exercised
