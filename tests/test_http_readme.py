"""The README's HTTP bridge examples, run against the app, with the answers they show.

Each ``$ curl ...`` line in the "HTTP bridge" section of README.md is parsed
(URL, ``-H`` headers, ``-d`` body) and sent through Flask's test client; the
lines under it are the answer it shows, compared exactly (JSON compared as
data). The spreadsheet formula's URL is fetched the same way and its value,
shown as a spreadsheet shows numbers (15 significant digits), compared with
the README. The worked example's answer is also recomputed from
score + z·sd·√(1 − reliability) with scipy.stats.norm (reference library).
"""

import json
import math
import re
import shlex
import urllib.parse
from pathlib import Path

import pytest
from scipy import stats

from trueband.bridge.http import create_app

README = Path(__file__).resolve().parents[1] / "README.md"


def section() -> str:
    text = README.read_text(encoding="utf-8")
    start = text.index("## HTTP bridge")
    end = text.index("\n## ", start + 3)
    return text[start:end]


def curl_examples():
    """(curl command, the answer shown under it) for every ``$ curl`` line of the section."""
    examples = []
    for block in re.findall(r"```console\n(.*?)```", section(), re.S):
        lines = block.splitlines()
        for i, line in enumerate(lines):
            if line.startswith("$ curl "):
                shown = []
                for after in lines[i + 1:]:
                    if after.startswith("$ "):
                        break
                    shown.append(after)
                examples.append((line[2:], "\n".join(shown).strip()))
    return examples


def request_of(command: str) -> dict:
    words = shlex.split(command)
    assert words[0] == "curl"
    req = {"method": "GET", "headers": {}, "data": None}
    i = 1
    while i < len(words):
        w = words[i]
        if w in ("-s", "--silent"):
            pass
        elif w in ("-H", "--header"):
            key, _, value = words[i + 1].partition(":")
            req["headers"][key.strip()] = value.strip()
            i += 1
        elif w in ("-d", "--data"):
            req["data"], req["method"] = words[i + 1], "POST"
            i += 1
        elif w.startswith("http://"):
            req["url"] = w
        else:
            raise AssertionError(f"the README test does not know curl option {w!r}")
        i += 1
    return req


def send(client, url: str, method="GET", headers=None, data=None):
    parts = urllib.parse.urlsplit(url)
    assert parts.hostname == "127.0.0.1" and parts.port == 8765  # the documented default address
    return client.open(parts.path, method=method, query_string=parts.query, headers=headers or {}, data=data)


EXAMPLES = curl_examples()


def test_the_section_has_every_kind_of_example():
    routes = [urllib.parse.urlsplit(request_of(c)["url"]).path for c, _ in EXAMPLES]
    for route in ("/v1/call", "/v1/batch", "/v1/column"):
        assert route in routes
    assert any(r.startswith("/v1/text/") for r in routes)
    assert "WEBSERVICE(" in section()


@pytest.mark.parametrize("command, shown", EXAMPLES, ids=[c.split()[-1][:60] for c, _ in EXAMPLES])
def test_curl_example_gives_the_answer_shown(command, shown):
    req = request_of(command)
    resp = send(create_app().test_client(), req["url"], req["method"], req["headers"], req["data"])
    if resp.mimetype == "application/json":
        assert resp.get_json() == json.loads(shown)
    else:
        assert resp.get_data(as_text=True) == shown
    assert resp.status_code == 200 or "error" in shown or shown.startswith("#")


def test_spreadsheet_formula_example():
    text = section()
    formula = re.search(r'=VALUE\(WEBSERVICE\("(http://[^"]+)"\)\)', text)
    assert formula, "the section shows a cell formula that fetches the text URL"
    shown = re.search(r"the cell shows `([^`]+)`", text).group(1)
    resp = send(create_app().test_client(), formula.group(1))
    assert resp.status_code == 200
    value = float(resp.get_data(as_text=True))
    assert format(value, ".15g") == shown  # spreadsheets show 15 significant digits

    # the worked example, recomputed independently: score + z * sd * sqrt(1 - reliability)
    query = dict(urllib.parse.parse_qsl(urllib.parse.urlsplit(formula.group(1)).query))
    assert query["part"] == "upper"
    score, sd, rel = float(query["score"]), float(query["sd"]), float(query["reliability"])
    z = stats.norm.ppf(0.975)  # reference library; 95% two-sided
    assert value == pytest.approx(score + z * sd * math.sqrt(1 - rel), rel=1e-14)


def test_text_examples_answer_with_the_status_the_section_says():
    # errors=text: a function's error with 200 (a cell's WEBSERVICE drops a 4xx body); without it, a 4xx.
    assert "&errors=text" in section() and "drops the body of a 4xx answer" in section()
    text_examples = [(c, s) for c, s in EXAMPLES if "/v1/text/" in request_of(c)["url"]]
    kinds = set()
    for command, shown in text_examples:
        url = request_of(command)["url"]
        resp = send(create_app().test_client(), url)
        as_text = "errors=text" in urllib.parse.urlsplit(url).query
        if not shown.startswith("#"):
            kinds.add("value")
            assert resp.status_code == 200
        elif as_text:
            kinds.add("error as text")
            assert resp.status_code == 200 and resp.headers["X-Trueband-Error-Code"] == shown
        else:
            kinds.add("error with its status")
            assert 400 <= resp.status_code < 500
    assert kinds == {"value", "error as text", "error with its status"}
