"""The Calc add-in without LibreOffice: what is generated from the registry, and the component's logic.

The component normally runs inside LibreOffice's Python; here it is executed with small
stand-ins for the ``uno`` modules (they only supply base classes), so its argument handling,
its error values and both of its ways to a value (in-process and over HTTP) are checked
against ``trueband.funcs.call``. The real thing is tested in ``test_addin_libreoffice.py``.
"""

from __future__ import annotations

import math
import re
import socket
import struct
import subprocess
import sys
import sysconfig
import types
import xml.etree.ElementTree as ET
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from openpyxl import load_workbook
from openpyxl.formula import Tokenizer
from openpyxl.formula.tokenizer import Token

from trueband.bridge.addin import extension as calc_addin
from trueband.bridge.formulas.calc_binding import bind_for_calc, bind_sheet_xml
from trueband.bridge.engine.expression import evaluate_expression
from trueband.funcs import call
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import REGISTRY, normalize_name

# Calc's error numbers, from LibreOffice's formula/errorcodes.hxx (IllegalFPOperation 503 shows #NUM!,
# NoValue 519 #VALUE!, NoName 525 #NAME?, DivisionByZero 532 #DIV/0!, NotAvailable 0x7fff #N/A).
CALC_ERROR_NUMBERS = {"#NUM!": 503, "#VALUE!": 519, "#NAME?": 525, "#DIV/0!": 532, "#N/A": 0x7FFF}


def calc_error_of(value: float) -> str | None:
    """The Calc error a returned double stands for (the low 32 bits of a NaN), as Calc decodes it."""
    if not isinstance(value, float) or not math.isnan(value):
        return None
    low = struct.unpack("<Q", struct.pack("<d", value))[0] & 0xFFFFFFFF
    return {v: k for k, v in CALC_ERROR_NUMBERS.items()}.get(low, f"Err:{low}")


def outcome(fn, *args):
    try:
        return ("value", fn(*args))
    except TruebandError as exc:
        return ("error", type(exc), exc.message, exc.argument)


# ---------------------------------------------------------------- the lean per-call path

cell = st.one_of(st.floats(0, 1), st.integers(0, 5).map(float), st.none(), st.sampled_from(["", "a", "TRUE"]),
                 st.floats(allow_nan=True, allow_infinity=True))
grid = st.integers(1, 6).flatmap(lambda cols: st.lists(st.tuples(*[cell] * cols), min_size=0, max_size=7))


def argument(arg):
    if arg.kind == "range":
        return st.one_of(grid.map(tuple), cell)
    if arg.choices:
        return st.one_of(st.sampled_from(arg.choices), cell)
    return st.one_of(st.floats(-2, 12), st.integers(0, 12).map(float), st.booleans(), cell, grid.map(tuple))


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_cell_call_gives_what_call_gives(name):
    """The add-in's path (``cell_call``) and ``call`` agree on every outcome: value, or error class, message, argument."""
    spec = REGISTRY[name]

    @settings(max_examples=60, deadline=None, suppress_health_check=list(HealthCheck), database=None)
    @given(st.tuples(*[argument(a) for a in spec.arguments], argument(spec.arguments[-1])),
           st.integers(0, spec.max_args + 1))
    def run(args, count):
        args = args[:count]
        ours, theirs = outcome(spec.cell_call, args), outcome(call, name, *args)
        if ours[0] == "value" and theirs[0] == "value" and isinstance(ours[1], float):
            assert ours[1] == theirs[1] or (math.isnan(ours[1]) and math.isnan(theirs[1]))
        else:
            assert ours == theirs

    run()


# ---------------------------------------------------------------- what is generated

def test_every_registered_name_a_cell_can_hold_is_a_method_with_its_arguments():
    idl = calc_addin.type_library()
    methods = dict(re.findall(r"any (\w+)\(([^)]*)\);", idl))
    expected = {}
    for fn in REGISTRY.values():
        for name in (fn.name, *fn.aliases):
            if re.fullmatch(r"[A-Z]{1,3}[0-9]+", name):  # KR20 is the address of a cell in Calc
                continue
            expected[name] = fn
    assert set(methods) == set(expected)
    for name, params in methods.items():
        parts = [p.strip() for p in params.split(",")]
        assert len(parts) == expected[name].max_args + 1, name
        assert all(p.startswith("[in] any a") for p in parts[:-1]) and parts[-1] == "[in] sequence<any> more"
    assert "KR_20" in methods and "KR20" not in methods


def test_wizard_texts_come_from_the_registry():
    functions = calc_addin.addin_functions()
    for name, entry in functions.items():
        fn = REGISTRY[entry["registered"]]
        assert entry["description"].startswith(calc_addin.plain_text(fn.description))
        assert [a for a, _ in entry["arguments"][:-1]] == [a.name for a in fn.arguments]
        for (_, text), arg in zip(entry["arguments"], fn.arguments):
            assert text.startswith(calc_addin.plain_text(arg.description or arg.name))
            assert ("optional" in text.lower()) == (not arg.required), (name, arg.name, text)
    assert "CAUTION" not in functions["IMPACT_RATIO"]["description"] and \
        REGISTRY["IMPACT_RATIO"].caution in functions["IMPACT_RATIO"]["description"]


def test_wizard_texts_in_the_generated_extension_are_plain_and_say_a_default_once(tmp_path):
    import ast
    import re

    out = calc_addin.write_extension(tmp_path / "trueband.oxt", folders=["/nowhere"])
    with zipfile.ZipFile(out) as z:
        source = z.read("trueband_calc.py").decode("utf-8")
    line = next(ln for ln in source.splitlines() if ln.startswith("FUNCTIONS = "))
    functions = ast.literal_eval(line[len("FUNCTIONS = "):])
    texts = [text for entry in functions.values() for _, text in entry["arguments"]]
    texts += [entry["description"] for entry in functions.values()]
    assert not [t for t in texts if "`" in t]  # numpydoc code marks shown as typed before
    twice = [t for t in texts if re.search(r"\bdefault\b", t, re.I) and "if left out" in t]
    assert not twice  # e.g. "default 0.95; optional, 0.95 if left out" before
    flip = dict(functions["IMPACT_FLIP"]["arguments"])
    assert flip["focal_selected"] == "Focal group applicants selected; a whole number from 0 to focal_applicants; required."
    assert flip["alpha"] == "Significance level, strictly between 0 and 1; default 0.05. Significant means p < alpha. Optional."
    assert dict(functions["SEM"]["arguments"])["reliability"] == "Reliability of the scores, between 0 and 1; required."


def test_the_extension_package(tmp_path):
    out = calc_addin.write_extension(tmp_path / "trueband.oxt", folders=["/nowhere"])
    with zipfile.ZipFile(out) as z:
        assert z.testzip() is None
        manifest = ET.fromstring(z.read("META-INF/manifest.xml"))
        ns = "{http://openoffice.org/2001/manifest}"
        entries = {e.get(ns + "full-path"): e.get(ns + "media-type") for e in manifest}
        assert entries == {"trueband_calc.py": "application/vnd.sun.star.uno-component;type=Python",
                           "trueband_calc.idl": "application/vnd.sun.star.uno-typelibrary;type=RDB"}
        description = ET.fromstring(z.read("description.xml"))
        ident = description.find("{http://openoffice.org/extensions/description/2006}identifier")
        assert ident.get("value") == calc_addin.EXTENSION_ID
        source = z.read("trueband_calc.py").decode("utf-8")
        compile(source, "trueband_calc.py", "exec")  # valid Python for LibreOffice's interpreter
        assert "SITE_FOLDERS = ['/nowhere']" in source
        assert z.read("trueband_calc.idl").decode("utf-8").strip() == calc_addin.type_library()
        shown = z.read("description-en.txt").decode("utf-8")
        assert "not legal findings" in shown and "thin mode" not in shown
    assert not list(tmp_path.glob("*.part"))
    thin = calc_addin.write_extension(tmp_path / "thin.oxt", mode="thin")
    with zipfile.ZipFile(thin) as z:
        assert "thin mode: each cell asks a running `trueband serve`" in z.read("description-en.txt").decode("utf-8")


def test_a_function_added_to_the_registry_is_in_the_next_addin(component):
    from trueband.funcs.registry import spreadsheet

    def halved_difference(a: float, b: float, divisor: float = 2.0) -> float:
        """The difference of two numbers over a divisor (a stand-in registered by this test only).

        Parameters
        ----------
        a : float
            The first number.
        b : float
            The second number.
        divisor : float
            What the difference is divided by.
        """
        return (a - b) / divisor

    spreadsheet("ADDIN_PROBE", returns="number", reference="none: a test stand-in")(halved_difference)
    try:
        assert "any ADDIN_PROBE([in] any a0, [in] any a1, [in] any a2, [in] sequence<any> more);" in \
            calc_addin.type_library()
        entry = calc_addin.addin_functions()["ADDIN_PROBE"]
        assert entry["arguments"][2] == ("divisor", "What the difference is divided by; optional, 2 if left out.")
        addin = component()["TruebandFunctions"](None)
        assert addin.ADDIN_PROBE(7.0, 3.0, None, ()) == call("ADDIN_PROBE", 7.0, 3.0) == 2.0
    finally:
        REGISTRY.pop("ADDIN_PROBE")  # the binder's memo is keyed on the registry's size, so removing the name drops it


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
def test_command_writes_and_refuses(tmp_path):
    run = [sys.executable, "-m", "trueband.bridge", "addin", "--out", str(tmp_path)]
    first = subprocess.run(run, capture_output=True, text=True)
    assert first.returncode == 0, first.stderr
    assert "unopkg add" in first.stdout and (tmp_path / "trueband.oxt").is_file()
    again = subprocess.run(run, capture_output=True, text=True)
    assert again.returncode == 2 and again.stderr.count("\n") == 1 and "--overwrite" in again.stderr
    url = subprocess.run(run + ["--overwrite", "--url", "http://127.0.0.1:9"], capture_output=True, text=True)
    assert url.returncode == 2 and "--thin" in url.stderr
    thin = subprocess.run(run + ["--overwrite", "--thin"], capture_output=True, text=True)
    assert thin.returncode == 0
    with zipfile.ZipFile(tmp_path / "trueband.oxt") as z:
        assert "MODE = 'thin'" in z.read("trueband_calc.py").decode("utf-8")


@pytest.mark.parametrize("url, words", [
    ("http://203.0.113.9:80", "must be on this computer"),     # a documentation address (RFC 5737), not loopback
    ("http://example.org:8765", "must be on this computer"),
    ("ftp://127.0.0.1:8765", "write http://127.0.0.1:PORT"),
    ("https://127.0.0.1:8765", "write http://127.0.0.1:PORT"),
    ("http://127.0.0.1:notaport", "with a port number"),
    ("http://127.0.0.1", "with a port number"),
    ("http://user:pw@127.0.0.1:8765", "with a port number"),
])
def test_thin_mode_sends_cells_only_to_this_computer(tmp_path, capsys, url, words):
    # Thin mode posts every cell's inputs (applicant data) to the address: it must be loopback (RFC 1122 3.2.1.3).
    from trueband.bridge.cli import main

    assert main(["addin", "--out", str(tmp_path), "--thin", "--url", url]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and words in err
    assert not list(tmp_path.iterdir())


@pytest.mark.parametrize("url", ["http://127.0.0.1:8765", "http://localhost:9000", "http://[::1]:8765",
                                 "http://127.1.2.3:8765/"])
def test_loopback_addresses_are_accepted(url):
    assert calc_addin.checked_server_url(url) == url


def test_command_warns_when_libreoffice_runs_another_python(tmp_path, monkeypatch, capsys):
    from trueband.bridge.cli import main

    monkeypatch.setattr(calc_addin, "libreoffice_python", lambda: ("/opt/lo/python", "2.7"))
    assert main(["addin", "--out", str(tmp_path)]) == 0
    err = capsys.readouterr().err
    assert "LibreOffice's Python (/opt/lo/python) is 2.7" in err and "--thin" in err
    monkeypatch.setattr(calc_addin, "libreoffice_python", lambda: ("/usr/bin/python3", "%d.%d" % sys.version_info[:2]))
    assert main(["addin", "--out", str(tmp_path), "--overwrite"]) == 0
    assert "warning" not in capsys.readouterr().err


# ---------------------------------------------------------------- the component, with uno stand-ins

@pytest.fixture
def component(monkeypatch):
    """Execute the generated component with minimal stand-ins for LibreOffice's uno modules."""

    def load(**options):
        uno = types.ModuleType("uno")
        uno.getClass = lambda name: type(name.rsplit(".", 1)[-1], (), {})
        uno.createUnoStruct = lambda name, *a: types.SimpleNamespace()
        unohelper = types.ModuleType("unohelper")
        unohelper.Base = type("Base", (), {})

        class ImplementationHelper:
            def addImplementation(self, *args):
                self.added = args

        unohelper.ImplementationHelper = ImplementationHelper
        monkeypatch.setitem(sys.modules, "uno", uno)
        monkeypatch.setitem(sys.modules, "unohelper", unohelper)
        for package in ("com", "com.sun", "com.sun.star"):
            monkeypatch.setitem(sys.modules, package, types.ModuleType(package))
        lang, sheet = types.ModuleType("com.sun.star.lang"), types.ModuleType("com.sun.star.sheet")
        for name in ("XLocalizable", "XServiceInfo", "XServiceName"):
            setattr(lang, name, type(name, (), {}))
        sheet.XAddIn = type("XAddIn", (), {})
        monkeypatch.setitem(sys.modules, "com.sun.star.lang", lang)
        monkeypatch.setitem(sys.modules, "com.sun.star.sheet", sheet)
        namespace = {"__name__": "trueband_calc"}
        options.setdefault("folders", [])
        exec(compile(calc_addin.component_source(**options), "trueband_calc.py", "exec"), namespace)
        return namespace

    return load


CASES = [
    ("SEM", (10.0, 0.9, ())),
    ("SEM", (10.0, 1.3, ())),                       # #NUM!
    ("SEM", (10.0, None, ())),                      # too few: Calc leaves the missing argument void
    ("SEM", (10.0, 0.9, (3.0,))),                   # too many: in the trailing sequence
    ("SEM", ("ten", 0.9, ())),                      # #VALUE!
    ("SCORE_CI", (31.0, 5.2, 0.86, "upper", None, ())),     # blank optional: its default
    ("SCORE_CI", (31.0, 5.2, 0.86, None, 0.9, ())),         # blank required in the middle
    ("FOUR_FIFTHS", (10.0, 100.0, 20.0, 100.0, ())),        # logical: 1/0
    ("KR_20", (((1.0, 0.0, 1.0), (1.0, 1.0, 1.0), (0.0, None, 1.0), (0.0, 0.0, 0.0)), ())),
    ("CRONBACH_ALPHA", (((1.0, 1.0), (2.0, 2.0)), ())),
    ("CRONBACH_ALPHA", (((1.0, 2.0), (1.0, 3.0), (1.0, 4.0)), ())),  # a zero-variance item
]


def expected_cell(name, args):
    given = args[:-1] + tuple(args[-1])
    while given and given[-1] is None and not args[-1]:
        given = given[:-1]
    try:
        return float(call(name, *given)), None
    except TruebandError as exc:
        return None, exc.code


@pytest.mark.parametrize("name, args", CASES)
def test_component_cells_agree_with_call(component, name, args):
    ns = component()
    value = getattr(ns["TruebandFunctions"](None), name)(*args)
    want, code = expected_cell(name, args)
    assert isinstance(value, float)
    if code is None:
        assert value == want
    else:
        assert calc_error_of(value) == code


def test_component_describes_functions_for_the_wizard(component):
    ns = component()
    addin = ns["TruebandFunctions"](None)
    assert addin.getServiceName() == "_xludf"
    assert addin.getProgrammaticFuntionName("score_ci") == "SCORE_CI"
    assert addin.getDisplayFunctionName("KR_20") == "KR_20"
    assert addin.getFunctionDescription("SEM") == REGISTRY["SEM"].description
    assert addin.getDisplayArgumentName("SEM", 1) == "reliability"
    assert addin.getArgumentDescription("SEM", 1).startswith(REGISTRY["SEM"].arguments[1].description)
    assert addin.getDisplayArgumentName("SEM", 9) == ""
    assert addin.supportsService("com.sun.star.sheet.AddIn")


def test_component_says_name_error_when_trueband_cannot_load(component, capsys):
    ns = component()
    ns["GENERATED_WITH"] = "2.7.18"  # another Python than LibreOffice's: its numpy cannot load
    addin = ns["TruebandFunctions"](None)
    assert calc_error_of(addin.SEM(10.0, 0.9, ())) == "#NAME?"
    assert calc_error_of(addin.SED(10.0, 0.9, ())) == "#NAME?"
    err = capsys.readouterr().err
    assert "generated with Python 2.7.18" in err and err.count("cannot load trueband") == 1


def test_component_puts_the_environment_first_with_its_pth_files(component, tmp_path, monkeypatch):
    site_packages, hooked = tmp_path / "site-packages", tmp_path / "editable-source"
    site_packages.mkdir()
    hooked.mkdir()
    (site_packages / "hook.pth").write_text(f"{hooked}\n")
    monkeypatch.setattr(sys, "path", list(sys.path))
    ns = component(folders=[str(site_packages)])
    assert str(site_packages) not in sys.path  # nothing happens before a cell calls
    value = ns["TruebandFunctions"](None).SEM(10.0, 0.9, ())
    assert value == call("SEM", 10.0, 0.9)
    assert sys.path[:2] == [str(site_packages), str(hooked)]


def test_thin_component_agrees_with_call_through_the_server(component):
    from trueband.bridge.http.server import serving_in_background
    from trueband.bridge.http import create_app

    with serving_in_background(create_app()) as url:
        ns = component(mode="thin", server_url=url)
        addin = ns["TruebandFunctions"](None)
        for name, args in CASES:
            value = getattr(addin, name)(*args)
            want, code = expected_cell(name, args)
            if code is None:
                assert value == want, name
            else:
                assert calc_error_of(value) == code, (name, args)


def test_thin_component_without_a_server_gives_value_errors(component, capsys):
    ns = component(mode="thin", server_url="http://127.0.0.1:9")
    assert calc_error_of(ns["TruebandFunctions"](None).SEM(10.0, 0.9, ())) == "#VALUE!"
    assert "trueband serve" in capsys.readouterr().err


def test_thin_component_does_not_hold_calc_up_when_the_server_does_not_answer(component, capsys):
    # A program that accepts connections and never answers (a suspended server): the first cell waits for the
    # timeout, the cells after it fail at once (no new connection) until the pause is over.
    import socket
    import threading

    listener = socket.create_server(("127.0.0.1", 0))
    accepted = []

    def accept():
        while True:
            try:
                conn, _ = listener.accept()
            except OSError:
                return
            accepted.append(conn)

    threading.Thread(target=accept, daemon=True).start()
    try:
        ns = component(mode="thin", server_url=f"http://127.0.0.1:{listener.getsockname()[1]}")
        ns["_Thin"].TIMEOUT = 0.2
        addin = ns["TruebandFunctions"](None)
        values = [addin.SEM(10.0, 0.9, ()) for _ in range(5)]
        assert [calc_error_of(v) for v in values] == ["#VALUE!"] * 5
        assert len(accepted) == 1
        assert capsys.readouterr().err.count("no answer from") == 1
    finally:
        listener.close()
        for conn in accepted:
            conn.close()


def _raw_server(handle):
    """A loopback listener whose every connection is served by ``handle(conn)`` in a thread (a hostile server)."""
    import socket
    import threading

    listener = socket.create_server(("127.0.0.1", 0))
    stop = threading.Event()

    def accept():
        while not stop.is_set():
            try:
                conn, _ = listener.accept()
            except OSError:
                return
            threading.Thread(target=handle, args=(conn, stop), daemon=True).start()

    threading.Thread(target=accept, daemon=True).start()
    return listener, stop


def test_thin_component_timeout_is_for_the_whole_answer_not_each_read(component, capsys):
    # A server that answers one byte at a time, never finishing its headers: each read succeeds well
    # within the timeout, so a per-read timeout would hold Calc for as long as the server likes (issue 15).
    import time

    def trickle(conn, stop):
        conn.recv(65536)
        for byte in b"HTTP/1.1 200 OK\r\nX-Slow: " + b"a" * 100_000:
            if stop.wait(0.02):
                break
            try:
                conn.sendall(bytes([byte]))
            except OSError:
                break
        conn.close()

    listener, stop = _raw_server(trickle)
    try:
        ns = component(mode="thin", server_url=f"http://127.0.0.1:{listener.getsockname()[1]}")
        ns["_Thin"].TIMEOUT = 0.5
        started = time.monotonic()
        value = ns["TruebandFunctions"](None).SEM(10.0, 0.9, ())
        waited = time.monotonic() - started
        assert calc_error_of(value) == "#VALUE!"
        # a correctness bound, not a speed target: the trickle would last 2,000 s
        assert waited < 0.5 + 10
        assert "no complete answer within" in capsys.readouterr().err
    finally:
        stop.set()
        listener.close()


@pytest.mark.parametrize("declared", [True, False])
def test_thin_component_refuses_a_reply_over_its_size_cap(component, capsys, declared):
    size = (1 << 20) + 10

    def huge(conn, stop):
        conn.recv(65536)
        head = b"HTTP/1.1 200 OK\r\nContent-Type: application/json\r\n"
        head += (b"Content-Length: %d\r\n" % size) if declared else b"Connection: close\r\n"
        try:
            conn.sendall(head + b"\r\n" + b'{"value": 1' + b" " * (size - 12) + b"}")
            # end the reply without a reset: closing with unread bytes of the request in the buffer would send
            # RST, and the client could see "connection reset" before it has read up to its cap
            conn.shutdown(socket.SHUT_WR)
            conn.settimeout(10)
            while conn.recv(65536):
                pass
        except OSError:
            pass
        conn.close()

    listener, stop = _raw_server(huge)
    try:
        ns = component(mode="thin", server_url=f"http://127.0.0.1:{listener.getsockname()[1]}")
        assert calc_error_of(ns["TruebandFunctions"](None).SEM(10.0, 0.9, ())) == "#VALUE!"
        assert "larger than 1048576 bytes" in capsys.readouterr().err
    finally:
        stop.set()
        listener.close()


def test_thin_component_sends_the_access_token_from_the_environment(component, monkeypatch, capsys):
    from trueband.bridge.http.server import serving_in_background
    from trueband.bridge.http import create_app

    with serving_in_background(create_app({"TOKEN": "s3cret-for-tests"})) as url:
        monkeypatch.delenv("TRUEBAND_TOKEN", raising=False)
        refused = component(mode="thin", server_url=url)["TruebandFunctions"](None)
        assert calc_error_of(refused.SEM(10.0, 0.9, ())) == "#VALUE!"
        assert "needs an access token: set TRUEBAND_TOKEN" in capsys.readouterr().err
        monkeypatch.setenv("TRUEBAND_TOKEN", "s3cret-for-tests")
        allowed = component(mode="thin", server_url=url)["TruebandFunctions"](None)
        assert allowed.SEM(10.0, 0.9, ()) == call("SEM", 10.0, 0.9)


# ---------------------------------------------------------------- formulas written so that Calc binds them

@pytest.mark.parametrize("formula", [
    '=IF(E8="","",SCORE_CI(E8,$C$4,$C$3,"lower",$C$5))',
    "=ROUND(SEM(12, 0.91), 2)+sed(12,0.9)",
    '=IF(FOUR_FIFTHS(1,10,5,10),"yes","no")',
    '=KR_20(B2:D5)&"SEM(1,2)"',
])
def test_prefixed_formulas_evaluate_as_the_plain_ones(formula):
    bound = bind_for_calc(formula)
    functions = [t.value for t in Tokenizer(bound).items if t.type == Token.FUNC and t.subtype == Token.OPEN]
    registered = [f for f in functions if normalize_name(f[:-1]) in REGISTRY]
    assert registered and all(f.lower().startswith("_xludf.") for f in registered)
    assert bind_for_calc(bound) == bound  # once only
    if "B2:D5" not in formula and "E8" not in formula:
        assert evaluate_expression(bound) == evaluate_expression(formula)


def test_sheet_xml_and_templates_carry_the_prefix(tmp_path):
    from trueband.bridge.study.templates import impact_template, scoring_template

    assert bind_sheet_xml('<f t="array" ref="A1">SEM(1,0.5)</f>') == '<f t="array" ref="A1">_xludf.SEM(1,0.5)</f>'
    for book in (scoring_template(tmp_path / "s.xlsx", n_items=3, capacity=3), impact_template(tmp_path / "i.xlsx")):
        seen = 0
        for ws in load_workbook(book).worksheets:
            for row in ws.iter_rows():
                for c in row:
                    if c.data_type != "f":
                        continue
                    for t in Tokenizer(c.value).items:
                        if t.type == Token.FUNC and t.subtype == Token.OPEN:
                            name = t.value[:-1]
                            if not name.lower().startswith("_xludf.") and normalize_name(name) in REGISTRY:
                                pytest.fail(f"{book.name}!{c.coordinate}: {c.value}")
                            seen += name.lower().startswith("_xludf.")
        assert seen > 0


def test_site_folders_record_where_each_dependency_is_imported_from(tmp_path, monkeypatch):
    # A virtual environment made with --system-site-packages (or a user install) imports numpy from a folder
    # outside its own site-packages; LibreOffice's Python must be told that folder too (else #NAME? in every cell).
    elsewhere = tmp_path / "system-site"
    (elsewhere / "depwhere").mkdir(parents=True)
    (elsewhere / "depwhere" / "__init__.py").write_text("")
    monkeypatch.syspath_prepend(str(elsewhere))
    folders = calc_addin.site_folders(("depwhere", "numpy"))
    assert str(elsewhere.resolve()) in folders
    import numpy
    assert str(Path(numpy.__file__).resolve().parent.parent) in [str(Path(f).resolve()) for f in folders]
    assert folders[0] == sysconfig.get_paths()["purelib"]  # the environment's own folder first
    assert len({Path(f).resolve() for f in folders}) == len(folders)
