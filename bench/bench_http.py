"""Benchmark the HTTP bridge on loopback, against references measured in the same run.

    python bench/bench_http.py                    # throughput/latency and the 100,000-row column
    python bench/bench_http.py --quick            # fewer requests, for a quick look
    python bench/bench_http.py --single-calls 100000   # really send all 100,000 single calls
    python bench/bench_http.py --limits           # time the slowest registered functions at the limits

1. Single calls: the same app, on the same waitress server, gets a bare route added
   (``POST /bench/bare``: same guards, no JSON parsing, no function) and ``POST /v1/call``
   ``SEM(15, 0.91)`` is compared with it: requests per second from several client threads on
   keep-alive connections, latency median and p99, and the ratio call / bare (target >= 70%).
2. The column: one ``POST /v1/column`` of 100,000 rows of ``SCORE_CI`` (encode, send, compute,
   answer, decode: target under 1 s) against 100,000 single ``/v1/call`` requests (by default a
   sample of them, scaled up, and said so) and against 100,000 direct Python calls.
3. ``--limits``: for every registered function, finds a working set of arguments by trying
   plausible values, then sends it through the app with ranges scaled up to ``MAX_CELLS`` cells, a
   batch of ``MAX_BATCH_CALLS`` calls, and a column of ``MAX_COLUMN_ROWS`` rows (all rows valid, and
   every other row invalid, the column path's worst case), then the hostile cases of issue 15
   (Krippendorff's alpha with many distinct values and with many raters, a column sharing a large
   range). Each request's time, status and the process's peak resident memory while it ran are
   recorded; the slowest request and the largest peak are printed last, for sizing the limits in
   ``bridge/http/guards.py``: every request should end within a few seconds (a request over the
   computing budget answers ``422 too_much_work``) and under 500 MB.

Loopback only, bounded, stops by itself. No thresholds: the numbers are for reading.
"""

from __future__ import annotations

import argparse
import contextlib
import gc
import http.client
import json
import logging
import random
import signal
import statistics
import subprocess
import sys
import threading
import time

import numpy as np
from flask import Response

from trueband.bridge.http import DEFAULT_LIMITS, create_app
from trueband.funcs import REGISTRY, call
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import call_column

CALL_BODY = json.dumps({"function": "SEM", "args": [15, 0.91]}).encode()
HEADERS = {"Content-Type": "application/json"}
SERVER_THREADS = 4


def bench_app():
    app = create_app()
    bare_body = json.dumps({"value": call("SEM", 15, 0.91)})

    def bare():
        return Response(bare_body, mimetype="application/json")

    app.add_url_rule("/bench/bare", "bench_bare", bare, methods=["POST"])
    return app


def hammer(port: int, path: str, body: bytes, threads: int, per_thread: int) -> tuple[float, list[float]]:
    """Requests per second and every latency (s), from ``threads`` keep-alive connections."""
    latencies: list[float] = []
    lock = threading.Lock()
    errors = []

    def worker():
        conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
        mine = []
        try:
            for _ in range(per_thread):
                t0 = time.perf_counter()
                conn.request("POST", path, body=body, headers=HEADERS)
                resp = conn.getresponse()
                resp.read()
                mine.append(time.perf_counter() - t0)
                if resp.status != 200:
                    errors.append(resp.status)
        finally:
            conn.close()
            with lock:
                latencies.extend(mine)

    workers = [threading.Thread(target=worker) for _ in range(threads)]
    start = time.perf_counter()
    for w in workers:
        w.start()
    for w in workers:
        w.join()
    elapsed = time.perf_counter() - start
    if errors:
        raise SystemExit(f"{len(errors)} requests to {path} failed: {errors[:5]}")
    return len(latencies) / elapsed, latencies


def p99(values: list[float]) -> float:
    return float(np.percentile(values, 99))


def single_calls(port: int, threads: int, per_thread: int, rounds: int) -> None:
    print(f"single calls: {threads} client threads x {per_thread} requests, best of {rounds} rounds (alternating)")
    hammer(port, "/bench/bare", CALL_BODY, threads, 50)  # warm up both routes
    hammer(port, "/v1/call", CALL_BODY, threads, 50)
    best = {"/bench/bare": (0.0, []), "/v1/call": (0.0, [])}
    for _ in range(rounds):
        for path in best:
            rate, lat = hammer(port, path, CALL_BODY, threads, per_thread)
            if rate > best[path][0]:
                best[path] = (rate, lat)
    for path, (rate, lat) in best.items():
        print(f"  {path:<12} {rate:8.0f} req/s   latency median {statistics.median(lat) * 1e3:6.2f} ms"
              f"   p99 {p99(lat) * 1e3:6.2f} ms")
    ratio = best["/v1/call"][0] / best["/bench/bare"][0]
    print(f"  throughput /v1/call / bare route: {ratio:.0%} (target >= 70%)")


def column_vs_single(port: int, rows: int, singles: int, repeat: int) -> None:
    rng = np.random.default_rng(5)
    scores = np.round(rng.normal(28, 5.2, rows), 1).tolist()
    same = {"sd": 5.2, "reliability": 0.86, "part": "upper"}
    body = {"function": "SCORE_CI", "each": {"score": scores}, "same": same}
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=120)
    times, values = [], None
    for _ in range(repeat):
        t0 = time.perf_counter()
        conn.request("POST", "/v1/column", body=json.dumps(body).encode(), headers=HEADERS)
        resp = conn.getresponse()
        values = json.loads(resp.read())["values"]
        times.append(time.perf_counter() - t0)
        assert resp.status == 200 and len(values) == rows
    column = min(times)

    t0 = time.perf_counter()
    direct = [call("SCORE_CI", s, **same) for s in scores]
    direct_time = time.perf_counter() - t0
    if values != direct:
        raise SystemExit("the column call's values differ from direct Python calls")

    n = min(singles, rows)
    t0 = time.perf_counter()
    for s in scores[:n]:
        conn.request("POST", "/v1/call", body=json.dumps({"function": "SCORE_CI", "args": {"score": s, **same}}).encode(),
                     headers=HEADERS)
        resp = conn.getresponse()
        resp.read()
    single_time = (time.perf_counter() - t0) * rows / n
    conn.close()
    print(f"column of {rows} rows (SCORE_CI), best of {repeat}: {column:.3f} s end to end (target under 1 s)")
    note = "" if n == rows else f" (measured {n}, scaled to {rows})"
    print(f"  {rows} single /v1/call requests, one connection: {single_time:.1f} s{note}; "
          f"the column call is {single_time / column:.0f}x faster")
    print(f"  {rows} direct Python calls, in process: {direct_time:.2f} s; column call / direct loop: "
          f"{column / direct_time:.2f}")


# ---------------------------------------------------------------- limits

NUMBERS = [0.8, 0.5, 0.9, 0.3, 10.0, 5.0, 100.0, 20.0, 0.1, 1.0, 2.0, 3.0, 0.05, 50.0, 0.7, 30.0]
INTEGERS = [2, 3, 5, 10, 40, 100, 1]


def make_range(kind: str, rows: int, cols: int, rng: np.random.Generator):
    if kind == "items":
        data = (rng.random((rows, cols)) < rng.uniform(0.3, 0.8, cols)).astype(float)
    elif kind == "ratings":
        base = rng.integers(1, 6, (rows, 1))
        data = np.clip(base + rng.integers(-1, 2, (rows, cols)), 1, 5).astype(float)
    elif kind == "probabilities":
        data = np.round(rng.uniform(0.3, 0.9, (rows, cols)), 2)
    elif kind == "scores":
        data = np.round(rng.normal(28, 5, (rows, cols)), 1)
    else:  # labels
        return [[str(rng.choice(["a", "b", "c"])) for _ in range(cols)] for _ in range(rows)]
    return data.tolist() if cols > 1 else data.ravel().tolist()


RANGE_KINDS = ["items", "ratings", "scores", "probabilities", "labels"]


def find_arguments(fn, rng: random.Random, tries: int = 600):
    """A working set of arguments (and how each range was made), found by trying plausible values."""
    nrng = np.random.default_rng(rng.randrange(2 ** 32))
    for _ in range(tries):
        args, shapes = [], {}
        for a in fn.arguments:
            if a.kind == "range":
                kind, cols = rng.choice(RANGE_KINDS), rng.choice([1, 1, 2, 3, 5])
                shapes[a.name] = (kind, 30, cols)
                args.append(make_range(kind, 30, cols, nrng))
            elif a.kind == "number":
                args.append(rng.choice(NUMBERS))
            elif a.kind == "integer":
                args.append(rng.choice(INTEGERS))
            elif a.kind == "boolean":
                args.append(rng.choice([True, False]))
            elif a.choices:
                args.append(rng.choice(a.choices))
            else:
                args.append("a")
        try:
            fn(*args)
            return args, shapes
        except TruebandError:
            continue
    return None, None


def _family_arguments(name: str, people: int, rng: np.random.Generator):
    """Arguments for the functions whose ranges must fit together (plausible values alone never do), with
    ``people`` rows (people, strata or predictors), or None for any other function."""
    groups = rng.choice(["F", "R"], people).tolist()
    if name.startswith("DIF_"):
        ability = rng.normal(0, 1, (people, 1))
        items = (rng.random((people, 10)) < 1 / (1 + np.exp(-(ability + rng.normal(0, 1, 10))))).astype(float)
        return [items.tolist(), groups, 3, "F", "R"]
    if name.startswith("POOLED_"):
        applicants = rng.integers(5, 40, (people, 2))
        selected = rng.binomial(applicants, 0.4)
        return [np.column_stack([selected[:, 0], applicants[:, 0], selected[:, 1], applicants[:, 1]]).tolist()]
    if name.startswith("PREDICTION_"):
        scores = rng.normal(50, 10, people)
        criterion = 0.05 * scores + rng.normal(0, 1, people)
        args = [scores.round(2).tolist(), criterion.round(3).tolist(), groups, "F", "R"]
        return args + [50.0] if name == "PREDICTION_GAP" else args
    if name.startswith("COMPOSITE_"):
        k = people
        correlations = np.full((k, k), 0.3) + 0.7 * np.eye(k)
        second = rng.uniform(0.6, 0.9, k) if name == "COMPOSITE_RELIABILITY" else rng.uniform(0.1, 0.4, k)
        return [rng.uniform(1, 10, k).tolist(), second.tolist(), correlations.tolist()]
    return None


#: Rows per cell of each family, to scale its ranges to the cell limit.
_FAMILY_CELLS_PER_ROW = {"DIF_": 12, "POOLED_": 4, "PREDICTION_": 3}


def measure_families(client, names: list[str], cells: int, calls: int) -> list[str]:
    """The functions ``find_arguments`` cannot serve, at the limits; returns those still not measured."""
    rng = np.random.default_rng(5)
    left = []
    for name in names:
        small = _family_arguments(name, 40 if not name.startswith("COMPOSITE_") else 4, rng)
        if small is None:
            left.append(name)
            continue
        prefix = next((p for p in _FAMILY_CELLS_PER_ROW if name.startswith(p)), None)
        people = cells // _FAMILY_CELLS_PER_ROW[prefix] if prefix else int((cells + 1) ** 0.5) - 2
        big = _family_arguments(name, people, rng)
        t_big, s_big = timed_post(client, "/v1/call", {"function": name, "args": big})
        t_batch, s_batch = timed_post(client, "/v1/batch", {"calls": [{"function": name, "args": small}] * calls},
                                      name)
        print(f"  {name:<24} range {t_big:6.3f} s ({s_big})  batch {t_batch:6.3f} s ({s_batch})", flush=True)
    return left


def best_of(fn, repeat=3) -> float:
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


class PeakMemory:
    """The process's peak resident memory (MB) while a block runs, sampled every few milliseconds.

    Read from ``/proc/self/statm`` (Linux); elsewhere it is not measured (None).
    """

    def __init__(self):
        self.peak = None

    @staticmethod
    def resident_mb() -> float | None:
        try:
            with open("/proc/self/statm") as fh:
                return int(fh.read().split()[1]) * PAGE_BYTES / 2 ** 20
        except OSError:
            return None

    def __enter__(self):
        self.peak = self.resident_mb()
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._sample, daemon=True)
        if self.peak is not None:
            self._thread.start()
        return self

    def _sample(self):
        while not self._stop.wait(0.003):
            self.peak = max(self.peak, self.resident_mb() or 0.0)

    def __exit__(self, *exc):
        self._stop.set()
        if self._thread.is_alive():
            self._thread.join()
        if self.peak is not None:
            self.peak = max(self.peak, self.resident_mb() or 0.0)
        return False


try:
    import os as _os
    PAGE_BYTES = _os.sysconf("SC_PAGE_SIZE")
except (AttributeError, ValueError, OSError):
    PAGE_BYTES = 4096

#: Every request of ``--limits``: (function, route, seconds, status, peak MB).
REQUESTS: list[tuple[str, str, float, int, float | None]] = []


def timed_post(client, route, body, label: str = "") -> tuple[float, int]:
    data = json.dumps(body).encode()
    gc.collect()
    with PeakMemory() as memory:
        t0 = time.perf_counter()
        resp = client.post(route, data=data, content_type="application/json")
        resp.get_data()
        elapsed = time.perf_counter() - t0
    REQUESTS.append((label or body.get("function", "?"), route, elapsed, resp.status_code, memory.peak))
    return elapsed, resp.status_code


def measure_limits(limits: dict, worst_of: int = 6) -> None:
    rng = random.Random(11)
    cells, calls, rows = limits["MAX_CELLS"], limits["MAX_BATCH_CALLS"], limits["MAX_COLUMN_ROWS"]
    print("limits: " + ", ".join(f"{k} {v}" for k, v in limits.items()), flush=True)
    client = create_app().test_client()
    table, missing = [], []
    for name in sorted(REGISTRY):
        fn = REGISTRY[name]
        args, shapes = find_arguments(fn, rng)
        if args is None:
            missing.append(name)
            continue
        print(f"  {name:<24}", end="", flush=True)
        row = {"name": name, "call": best_of(lambda: fn(*args), 5), "range": None, "worst": None}
        if shapes:  # one call, its ranges scaled up to the cell limit along rows, then along columns
            nrng = np.random.default_rng(3)
            worst = 0.0
            for axis in ("rows", "columns"):
                big = list(args)
                for i, a in enumerate(fn.arguments):
                    if a.name in shapes:
                        kind, r, c = shapes[a.name]
                        share = cells // len(shapes)
                        r, c = (max(1, share // c), c) if axis == "rows" else (r, max(1, share // r))
                        big[i] = make_range(kind, r, c, nrng)
                worst = max(worst, timed_post(client, "/v1/call", {"function": name, "args": big})[0])
            row["range"] = worst
        row["batch"] = timed_post(client, "/v1/batch", {"calls": [{"function": name, "args": args}] * calls}, name)
        named = {a.name: v for a, v in zip(fn.arguments, args)}
        varying = [a.name for a in fn.arguments if a.name in fn.elementwise][:2] or \
            [next((a.name for a in fn.arguments if a.kind != "range"), fn.arguments[0].name)]
        same = {k: v for k, v in named.items() if k not in varying}
        row["varying"] = varying
        row["column"] = timed_post(client, "/v1/column", {"function": name, "each": {k: [named[k]] * rows
                                                                                     for k in varying}, "same": same})
        table.append(row)
        print(f"call {row['call'] * 1e3:7.3f} ms  range {row['range'] or 0:6.3f} s  batch {row['batch'][0]:6.3f} s"
              f"  column {row['column'][0]:6.3f} s ({row['column'][1]})", flush=True)

    # The column's worst case: every other row invalid (half of them text), so the array path splits
    # blocks down to single rows; timed for the functions whose single call is slowest.
    print(f"worst-case columns of {rows} rows (every other row invalid), the {worst_of} slowest functions:")
    for row in sorted(table, key=lambda r: -r["call"])[:worst_of]:
        named = dict(zip([a.name for a in REGISTRY[row["name"]].arguments], find_arguments(
            REGISTRY[row["name"]], random.Random(11))[0] or []))
        if not named:
            continue
        same = {k: v for k, v in named.items() if k not in row["varying"]}
        bad = {k: [named[k] if i % 2 else (-1e9 if i % 4 else "x") for i in range(rows)] for k in row["varying"]}
        row["worst"] = timed_post(client, "/v1/column", {"function": row["name"], "each": bad, "same": same})
        print(f"  {row['name']:<24} {row['worst'][0]:6.3f} s (status {row['worst'][1]})", flush=True)

    def top(key, label, n=5):
        ranked = sorted((r for r in table if r[key] is not None),
                        key=lambda r: -(r[key][0] if isinstance(r[key], tuple) else r[key]))[:n]
        print(f"  {label}:")
        for r in ranked:
            t, status = r[key] if isinstance(r[key], tuple) else (r[key], None)
            shown = f"{t * 1e3:8.3f} ms" if key == "call" else f"{t:8.3f} s"
            print(f"    {r['name']:<24} {shown}" + (f" (status {status})" if status else ""))

    print(f"functions whose ranges must fit together, at {cells} cells and a batch of {calls}:")
    missing = measure_families(client, missing, cells, calls)
    print(f"slowest of {len(table)} functions" + (f"; no working arguments found for: {', '.join(missing)}"
                                                 if missing else ""))
    top("call", "one small call")
    top("range", f"one call with its ranges scaled to {cells} cells")
    top("batch", f"a batch of {calls} small calls, through the app")
    top("column", f"a column of {rows} valid rows, through the app")
    hostile_cases(client, limits)
    slowest = max(REQUESTS, key=lambda r: r[2])
    print(f"slowest request of {len(REQUESTS)}: {slowest[2]:.2f} s ({slowest[0]} {slowest[1]}, status {slowest[3]})")
    measured = [r for r in REQUESTS if r[4] is not None]
    if measured:
        largest = max(measured, key=lambda r: r[4])
        print(f"largest peak resident memory: {largest[4]:.0f} MB ({largest[0]} {largest[1]}, status {largest[3]})"
              f"; the process held {PeakMemory.resident_mb():.0f} MB at the end")
    else:
        print("peak memory: not measured on this system (no /proc)")


def hostile_cases(client, limits: dict) -> None:
    """The worst cases of issue 15, each inside every documented limit."""
    rng = np.random.default_rng(15)
    cells = limits["MAX_CELLS"]
    many_values = rng.gamma(3.0, 1.0, (cells // 2, 2)).round(6).tolist()
    many_raters = rng.gamma(3.0, 1.0, (2, cells // 2)).round(6).tolist()
    wide_spread = (np.exp(rng.uniform(-300, 0, (cells // 4, 4)))).tolist()
    shared = rng.gamma(3.0, 1.0, (5_000, 2)).round(6).tolist()
    cases = [
        ("KRIPPENDORFF_ALPHA ratio, many distinct values", "/v1/call",
         {"function": "KRIPPENDORFF_ALPHA", "args": [many_values, "ratio"]}),
        ("KRIPPENDORFF_ALPHA ratio, many raters", "/v1/call",
         {"function": "KRIPPENDORFF_ALPHA", "args": [many_raters, "ratio"]}),
        ("KRIPPENDORFF_ALPHA ratio, values over 1e-300..1", "/v1/call",
         {"function": "KRIPPENDORFF_ALPHA", "args": [wide_spread, "ratio"]}),
        ("KRIPPENDORFF_ALPHA interval, many raters", "/v1/call",
         {"function": "KRIPPENDORFF_ALPHA", "args": [many_raters, "interval"]}),
        ("KRIPPENDORFF_ALPHA in a column of 99 rows sharing 10,000 cells", "/v1/column",
         {"function": "KRIPPENDORFF_ALPHA", "each": {"level": ["ratio"] * 99}, "same": {"ratings": shared}}),
    ]
    print("hostile cases (issue 15):")
    for label, route, body in cases:
        t, status = timed_post(client, route, body, label)
        peak = REQUESTS[-1][4]
        print(f"  {label:<66} {t:6.2f} s (status {status})" + (f", peak {peak:.0f} MB" if peak else ""), flush=True)


def serve_forever() -> int:
    """The server side, run in its own process so that client and server do not share one interpreter lock."""
    from trueband.bridge.http.server import make_server

    logging.getLogger("waitress.queue").setLevel(logging.ERROR)  # queueing is expected under load
    server = make_server(bench_app(), "127.0.0.1", 0, threads=SERVER_THREADS)
    print(server.effective_port, flush=True)
    try:
        server.run()
    except KeyboardInterrupt:
        pass
    return 0


@contextlib.contextmanager
def server_process():
    flags = subprocess.CREATE_NEW_PROCESS_GROUP if sys.platform == "win32" else 0
    proc = subprocess.Popen([sys.executable, __file__, "--serve"], stdout=subprocess.PIPE, text=True,
                            creationflags=flags)
    try:
        yield int(proc.stdout.readline())
    finally:
        proc.send_signal(signal.CTRL_BREAK_EVENT if sys.platform == "win32" else signal.SIGINT)
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=20)


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer requests and rows")
    parser.add_argument("--threads", type=int, default=4, help="client threads for the single-call test")
    parser.add_argument("--requests", type=int, default=1500, help="requests per client thread per round")
    parser.add_argument("--rounds", type=int, default=3, help="alternating rounds; the best of each route is kept")
    parser.add_argument("--rows", type=int, default=100_000, help="rows of the column call")
    parser.add_argument("--single-calls", type=int, default=5_000,
                        help="single calls actually sent for the comparison (scaled up to --rows)")
    parser.add_argument("--limits", action="store_true", help="time the slowest registered functions at the limits")
    parser.add_argument("--serve", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.serve:
        return serve_forever()
    if args.limits:
        measure_limits(DEFAULT_LIMITS)
        return 0
    if args.quick:
        args.requests, args.rounds, args.single_calls = 300, 2, 1_000
    with server_process() as port:
        print(f"waitress on 127.0.0.1:{port} in its own process, {SERVER_THREADS} server threads; "
              f"python {sys.version.split()[0]}")
        single_calls(port, args.threads, args.requests, args.rounds)
        column_vs_single(port, args.rows, args.single_calls, repeat=3)
    return 0


if __name__ == "__main__":
    sys.exit(main())
