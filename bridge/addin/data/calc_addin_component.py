
# ---- The UNO component of trueband's LibreOffice Calc add-in (the part above is generated).
#
# LibreOffice's own Python runs this file. It knows nothing of trueband until a cell calls a
# function: in "full" mode it then imports trueband from the site folders recorded above (the
# Python environment the add-in was generated from) and calls the registry; in "thin" mode it
# sends each call to `trueband serve` over HTTP with the standard library only.
#
# A cell gets trueband's value, or the spreadsheet error trueband gives: Calc reads a NaN whose
# low 32 bits hold one of its error numbers as that error, so #NUM!, #DIV/0!, #N/A and #VALUE!
# show as themselves (an exception would show as #VALUE! or Err:504 whatever the cause).

import http.client
import json
import math
import os
import socket
import struct
import sys
import threading
import time
import urllib.parse

import uno
import unohelper
from com.sun.star.lang import XLocalizable, XServiceInfo, XServiceName
from com.sun.star.sheet import XAddIn

XFunctions = uno.getClass(INTERFACE)

# Calc's error numbers (formula/errorcodes.hxx in LibreOffice's sources) for the codes trueband uses.
_CALC_ERRORS = {"#NULL!": 521, "#DIV/0!": 532, "#VALUE!": 519, "#REF!": 524, "#NAME?": 525, "#NUM!": 503,
                "#N/A": 0x7FFF}


def _error_value(code):
    """The double Calc reads as the error ``code``."""
    bits = 0x7FF8000000000000 | _CALC_ERRORS.get(code, 519)
    return struct.unpack("<d", struct.pack("<Q", bits))[0]


_ERRORS = {code: _error_value(code) for code in _CALC_ERRORS}
_VALUE_ERROR = _ERRORS["#VALUE!"]


def _cell_value(value):
    """A result as Calc takes it: a logical result as 1/0 (Calc shows a Python True as 0), a whole number as a
    double, text and doubles as they are."""
    return float(value) if isinstance(value, (bool, int)) else value


def _report(message):
    try:
        print("trueband add-in: " + message, file=sys.stderr)
    except Exception:  # no usable stderr (Windows without a console)
        pass


# ---------------------------------------------------------------- the two ways to a value

class _Full:
    """Calls the registry in this process."""

    def __init__(self):
        import site

        here = "%d.%d" % sys.version_info[:2]
        if GENERATED_WITH.rsplit(".", 1)[0] != here:
            raise RuntimeError(f"the add-in was generated with Python {GENERATED_WITH}, LibreOffice runs Python "
                               f"{here}, which cannot load that environment's numpy; generate it from a Python "
                               f"{here} environment, or with --thin")

        before = list(sys.path)
        for folder in SITE_FOLDERS:
            if folder not in sys.path:
                site.addsitedir(folder)  # also runs the folder's .pth files (an editable install's hook)
        # ahead of the system's folders: a numpy or scipy of the system's own must not shadow the
        # versions trueband was installed (and tested) with
        sys.path[:] = [p for p in sys.path if p not in before] + before
        from trueband.funcs.errors import TruebandError
        from trueband.funcs.registry import REGISTRY

        self.error_type = TruebandError
        self.registry = REGISTRY

    def caller(self, name):
        fast = self.registry[name].cell_call
        error_type = self.error_type
        errors = _ERRORS

        def call(args):
            try:
                value = fast(args)
            except error_type as exc:
                return errors.get(exc.code, _VALUE_ERROR)
            return _cell_value(value)

        return call


class _Thin:
    """Sends each call to a running `trueband serve` (standard library only), over one kept-open connection.

    The server must be on this computer (a loopback address; checked when the add-in is generated and
    again here), so no applicant data leave it. A server that has not answered completely within TIMEOUT
    seconds in total (suspended, busy, answering a byte at a time, or another program on the port) fails
    that cell, and the cells after it fail at once for PAUSE seconds, so Calc is never held up cell after
    cell; a reply larger than MAX_REPLY bytes is refused the same way. An access token, where the server
    needs one, comes from the TRUEBAND_TOKEN environment variable of LibreOffice's process.
    """

    TIMEOUT = 15.0  # in total, not per read; the server stops any one call after a few seconds of work
    PAUSE = 30.0
    MAX_REPLY = 1 << 20  # one call's answer is a number or a short error: far below this

    def __init__(self):
        parts = urllib.parse.urlsplit(SERVER_URL)
        if parts.scheme != "http" or parts.hostname not in LOOPBACK_HOSTS and not parts.hostname.startswith("127."):
            raise RuntimeError(f"the server address must be http://127.0.0.1:PORT (this computer), got {SERVER_URL!r}")
        self.parts = parts
        self.path = parts.path.rstrip("/") + "/v1/call"
        self.headers = {"Content-Type": "application/json"}
        token = os.environ.get("TRUEBAND_TOKEN")
        if token:
            self.headers["Authorization"] = "Bearer " + token
        self.connection = None
        self.down_until = 0.0
        self.reported = False

    def _connect(self):
        return http.client.HTTPConnection(self.parts.hostname, self.parts.port, timeout=self.TIMEOUT)

    def _post(self, body):
        fresh = self.connection is None
        for attempt in (1, 2):
            if self.connection is None:
                self.connection = self._connect()
            connection = self.connection
            expired = threading.Event()
            # The socket's timeout applies to each read; this watchdog bounds the whole exchange by
            # shutting the socket down, which ends a read blocked in another thread at once.
            watchdog = threading.Timer(self.TIMEOUT, self._abort, (connection, expired))
            watchdog.daemon = True
            watchdog.start()
            try:
                connection.request("POST", self.path, body=body, headers=self.headers)
                answer = connection.getresponse()
                return answer.status, json.loads(self._read_capped(answer).decode("utf-8"))
            except (OSError, http.client.HTTPException, ValueError) as exc:
                connection.close()
                self.connection = None
                timed_out = expired.is_set() or isinstance(exc, (TimeoutError, ValueError))
                # a kept-open connection the server has since closed: open a new one, once (never after a timeout)
                if attempt == 2 or fresh or timed_out:
                    if expired.is_set():
                        raise TimeoutError(f"no complete answer within {self.TIMEOUT:.0f} s") from None
                    raise
            finally:
                watchdog.cancel()

    @staticmethod
    def _abort(connection, expired):
        expired.set()
        sock = connection.sock
        if sock is not None:
            try:
                sock.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass

    def _read_capped(self, answer):
        length = answer.getheader("Content-Length")
        if length is not None and length.strip().isdigit() and int(length) > self.MAX_REPLY:
            raise ValueError(f"the reply is larger than {self.MAX_REPLY} bytes")
        data = answer.read(self.MAX_REPLY + 1)
        if len(data) > self.MAX_REPLY:
            raise ValueError(f"the reply is larger than {self.MAX_REPLY} bytes")
        return data

    def _report_once(self, text):
        if not self.reported:  # once, not once a cell
            _report(text)
            self.reported = True

    def caller(self, name):
        def call(args):
            if time.monotonic() < self.down_until:
                return _VALUE_ERROR
            body = json.dumps({"function": name, "args": [_json_cell(a) for a in args]}).encode("utf-8")
            try:
                status, reply = self._post(body)
            except (OSError, http.client.HTTPException, ValueError) as exc:
                self.down_until = time.monotonic() + self.PAUSE
                self._report_once(f"no answer from {SERVER_URL} ({exc}); is `trueband serve` running? Cells show "
                                  f"#VALUE! and are tried again after {self.PAUSE:.0f} s")
                return _VALUE_ERROR
            if status == 401:
                self._report_once(f"{SERVER_URL} needs an access token: set TRUEBAND_TOKEN for LibreOffice to the "
                                  f"server's token")
                return _VALUE_ERROR
            self.reported = False
            if "value" in reply:
                return _cell_value(reply["value"])
            code = (reply.get("error") or {}).get("code")
            return _ERRORS.get(code, _VALUE_ERROR)

        return call


def _json_cell(value):
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, tuple):
        return [_json_cell(v) for v in value]
    return value


# ---------------------------------------------------------------- the component

class TruebandFunctions(unohelper.Base, XFunctions, XAddIn, XServiceName, XServiceInfo, XLocalizable):
    def __init__(self, ctx, *args):
        self.ctx = ctx
        self.locale = uno.createUnoStruct("com.sun.star.lang.Locale")

    # XServiceName: Calc prefixes this to the function names it stores (so xlsx gets _XLUDF.NAME).
    def getServiceName(self):
        return SERVICE_NAME

    # XServiceInfo
    def getImplementationName(self):
        return IMPLEMENTATION_NAME

    def supportsService(self, name):
        return name in SERVICES

    def getSupportedServiceNames(self):
        return SERVICES

    # XLocalizable
    def setLocale(self, locale):
        self.locale = locale

    def getLocale(self):
        return self.locale

    # XAddIn: what the function wizard shows (names and descriptions from trueband's registry).
    def getProgrammaticFuntionName(self, display_name):  # sic: the interface spells it so
        key = display_name.strip().upper()
        return key if key in FUNCTIONS else ""

    def getDisplayFunctionName(self, name):
        return name if name in FUNCTIONS else ""

    def getFunctionDescription(self, name):
        return FUNCTIONS[name]["description"] if name in FUNCTIONS else ""

    def getDisplayArgumentName(self, name, index):
        arguments = FUNCTIONS.get(name, {}).get("arguments", [])
        return arguments[index][0] if 0 <= index < len(arguments) else ""

    def getArgumentDescription(self, name, index):
        arguments = FUNCTIONS.get(name, {}).get("arguments", [])
        return arguments[index][1] if 0 <= index < len(arguments) else ""

    def getProgrammaticCategoryName(self, name):
        return CATEGORY

    def getDisplayCategoryName(self, name):
        return CATEGORY


_WAY = []


def _way():
    """The way to values, made on the first call; a failure is kept (and reported) once for all functions."""
    if not _WAY:
        try:
            _WAY.append(_Thin() if MODE == "thin" else _Full())
        except Exception as exc:  # trueband cannot be loaded: every cell says #NAME?
            _report(f"cannot load trueband ({type(exc).__name__}: {exc}); rerun `trueband addin`")
            _WAY.append(exc)
    return _WAY[0]


def _name_error(args):
    return _ERRORS["#NAME?"]


def _cell_function(name, registered):
    """The method Calc calls for ``name``: the declared arguments, then the rest (a tuple)."""
    slot = []

    def method(self, *args):
        if not slot:
            way = _way()
            slot.append(_name_error if isinstance(way, Exception) else way.caller(registered))
        extra = args[-1]
        args = args[:-1]
        if extra:
            args = args + tuple(extra)
        else:  # blanks at the end are missing arguments, as trueband's call sees them
            while args and args[-1] is None:
                args = args[:-1]
        try:
            return slot[0](args)
        except Exception as exc:  # a bug, not bad input: show #VALUE! and say why
            _report(f"{name}: {type(exc).__name__}: {exc}")
            return _VALUE_ERROR

    method.__name__ = name
    return method


for _name, _spec in FUNCTIONS.items():
    setattr(TruebandFunctions, _name, _cell_function(_name, _spec["registered"]))

g_ImplementationHelper = unohelper.ImplementationHelper()
g_ImplementationHelper.addImplementation(TruebandFunctions, IMPLEMENTATION_NAME, SERVICES)
