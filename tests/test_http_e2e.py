"""End to end: the real ``trueband serve`` process on a free loopback port, called with urllib.

The server is started as ``python -m trueband.bridge serve --port 0`` (the
operating system picks a free port; the server prints it), called over real
HTTP, then stopped the way a user stops it (Ctrl-C on POSIX, Ctrl-Break on
Windows, where the process runs in its own process group) and waited for, so
no process is left behind. Check values: the same functions called directly
in Python.
"""

import json
import os
import queue
import re
import signal
import subprocess
import sys
import threading
import urllib.error
import urllib.request

import pytest

from trueband.funcs import call

WINDOWS = sys.platform == "win32"


class ServeProcess:
    def __init__(self, *args, env=None):
        flags = subprocess.CREATE_NEW_PROCESS_GROUP if WINDOWS else 0
        self.proc = subprocess.Popen(
            [sys.executable, "-u", "-m", "trueband.bridge", "serve", "--port", "0", *args],
            stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True, creationflags=flags,
            env={**os.environ, "PYTHONUNBUFFERED": "1", **(env or {})})
        self.lines: queue.Queue = queue.Queue()
        self.output: list[str] = []
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self):
        for line in self.proc.stdout:
            self.output.append(line)
            self.lines.put(line)
        self.lines.put(None)

    def base_url(self, timeout=60) -> str:
        while True:
            line = self.lines.get(timeout=timeout)
            if line is None:
                raise AssertionError("server exited before it was ready:\n" + "".join(self.output))
            m = re.search(r"(http://127\.0\.0\.1:\d+)/v1/", line)
            if m:
                return m.group(1)

    def stop(self) -> int:
        """Stop it as a user does and wait; kill only if it does not stop (and fail then)."""
        if self.proc.poll() is None:
            self.proc.send_signal(signal.CTRL_BREAK_EVENT if WINDOWS else signal.SIGINT)
        try:
            return self.proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait(timeout=20)
            raise AssertionError("the server did not stop on Ctrl-C:\n" + "".join(self.output)) from None


@pytest.fixture
def server():
    procs = []

    def start(*args, env=None):
        procs.append(ServeProcess(*args, env=env))
        return procs[-1]

    yield start
    for p in procs:  # never leave a process behind, even when a test failed
        if p.proc.poll() is None:
            p.proc.kill()
            p.proc.wait(timeout=20)


def get(url, headers=None):
    with urllib.request.urlopen(urllib.request.Request(url, headers=headers or {}), timeout=30) as resp:
        return resp.status, resp.headers, resp.read()


def post(url, body, headers=None):
    req = urllib.request.Request(url, data=json.dumps(body).encode(), method="POST",
                                 headers={"Content-Type": "application/json", **(headers or {})})
    with urllib.request.urlopen(req, timeout=30) as resp:
        return resp.status, json.loads(resp.read())


def test_real_server_answers_and_stops_cleanly(server):
    proc = server()
    base = proc.base_url()
    status, headers, body = get(f"{base}/v1/health")
    assert status == 200 and json.loads(body)["status"] == "ok"
    assert headers["Server"] == "trueband"  # waitress, with its ident; never a development server

    assert post(f"{base}/v1/call", {"function": "SEM", "args": [15, 0.91]}) == (200, {"value": call("SEM", 15, 0.91)})
    status, results = post(f"{base}/v1/batch", {"calls": [{"function": "SEM", "args": [15, 0.91]},
                                                          {"function": "SEM", "args": [15, 2]}]})
    assert results["results"][0] == {"value": call("SEM", 15, 0.91)}
    assert results["results"][1]["error"]["code"] == "#NUM!"
    scores = [31, 24, 37.5]
    status, column = post(f"{base}/v1/column", {"function": "SCORE_CI", "each": {"score": scores},
                                               "same": {"sd": 5.2, "reliability": 0.86, "part": "upper"}})
    assert column == {"values": [call("SCORE_CI", s, 5.2, 0.86, "upper") for s in scores]}

    status, _, text = get(f"{base}/v1/text/SCORE_CI?score=31&sd=5.2&reliability=0.86&part=upper")
    assert text.decode() == repr(call("SCORE_CI", 31, 5.2, 0.86, "upper"))
    with pytest.raises(urllib.error.HTTPError) as info:
        get(f"{base}/v1/text/SEM?sd=15&reliability=1.3")
    assert info.value.code == 422 and info.value.read() == b"#NUM!"
    assert "between 0 and 1" in info.value.headers["X-Trueband-Error-Message"]

    # DNS rebinding: the same socket, a foreign Host name
    with pytest.raises(urllib.error.HTTPError) as info:
        get(f"{base}/v1/health", headers={"Host": "rebound.example"})
    assert info.value.code == 403

    assert proc.stop() == 0
    out = "".join(proc.output)
    assert "Ctrl-C" in out and "/v1/text/" in out and "stopped" in out
    assert "Traceback" not in out


def test_real_server_with_a_token(server):
    proc = server(env={"TRUEBAND_TOKEN": "e2e-token"})
    base = proc.base_url()
    with pytest.raises(urllib.error.HTTPError) as info:
        get(f"{base}/v1/health")
    assert info.value.code == 401
    status, _, body = get(f"{base}/v1/health", headers={"Authorization": "Bearer e2e-token"})
    assert status == 200
    assert proc.stop() == 0


def test_non_loopback_bind_without_token_does_not_start():
    env = {k: v for k, v in os.environ.items() if k != "TRUEBAND_TOKEN"}
    done = subprocess.run([sys.executable, "-m", "trueband.bridge", "serve", "--host", "0.0.0.0", "--port", "0"],
                          capture_output=True, text=True, timeout=60, env=env)
    assert done.returncode == 2
    assert "without an access token" in done.stderr and "http://" not in done.stdout
