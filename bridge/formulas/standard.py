"""Corrections to standard spreadsheet functions where the ``formulas`` library gives another value than the apps.

:data:`STANDARD_CORRECTIONS` maps each name (with its ``_xlfn.`` form) to a
function of the engine's kind (``wrap_ufunc``: element by element over arrays,
error inputs passed through); :mod:`.library` puts them into the function
table over the library's own. Each states the behaviour it follows, with its
source; ``tests/test_standard_corrections.py`` checks them.

* FLOOR.MATH, CEILING.MATH, FLOOR.PRECISE, CEILING.PRECISE, ISO.CEILING: the
  library drops the sign of a negative number (``FLOOR.MATH(-23.5)`` gave 23).
* ROUND, ROUNDUP, ROUNDDOWN, MROUND, TRUNC: spreadsheet apps round the number
  as they show it, its decimal form to 15 significant digits
  (``ROUND(0.049999999999999975, 1)`` is 0.1, ``ROUND(1.005, 2)`` 1.01); the
  library rounds the binary value after multiplying (0 and 1.0).
* N: ``N(TRUE)`` is 1 (the library gave TRUE).
* MATCH with match type 1 among equal values gives the last of them, as the
  apps' binary search does (the library gave the first). VLOOKUP, HLOOKUP and
  LOOKUP in that case are not corrected.
* The 1904 date system: the library counts dates from 1900 only. Inside
  ``with date_system(True)`` (a workbook with ``workbookPr date1904``) every
  date function takes and gives serial numbers of the 1904 system (day 0 is
  1904-01-01, 1,462 days after day 0 of the 1900 system: Microsoft, "Date
  systems in Excel"; ECMA-376 Part 1, 18.17.4.1), and TEXT with a date or time
  format reads its number so.
* TEXT: format codes the library does not know (text sections ``@``, digit
  placeholders ``?``, fills ``*``, spacing ``_``, anything in square brackets:
  elapsed time, colours, locales, conditions; a fourth section; or any code
  the library answers with ``#VALUE!``) raise :class:`NotEvaluated`, so the
  engine keeps the value the file holds instead of writing a wrong text.
"""

from __future__ import annotations

import contextlib
import decimal
import functools
import math
import threading

import regex
import numpy as np
from formulas.functions import Error, XlError, wrap_func, wrap_ufunc
from formulas.functions.look import FUNCTIONS as _LOOK
from formulas.functions.text import FUNCTIONS as _TEXT

__all__ = ["STANDARD_CORRECTIONS", "NUMBER_FUNCTIONS", "NotEvaluated", "round_shown", "floor_math", "ceiling_math", "text_supported",
           "date_system", "DAYS_1900_TO_1904"]


class NotEvaluated(Exception):
    """The library cannot evaluate this call faithfully (the engine keeps the cell's stored value)."""


# ---------------------------------------------------------------- rounding to a multiple, signs kept

def floor_math(number: float, significance: float = 1.0, mode: float = 0.0) -> float:
    """FLOOR.MATH: down to a multiple of ``|significance|`` (towards minus infinity; with a non-zero ``mode``
    a negative number goes towards zero). Significance 0 gives 0.

    Microsoft's function reference, FLOOR.MATH: ``FLOOR.MATH(-8.1, 2)`` = -10, ``FLOOR.MATH(-5.5, 2, -1)`` = -4.
    """
    if significance == 0:
        return 0.0
    step = abs(significance)
    q = _shown(number / step)
    if mode and number < 0:
        return _shown(-math.floor(-q) * step)
    return _shown(math.floor(q) * step)


def ceiling_math(number: float, significance: float = 1.0, mode: float = 0.0) -> float:
    """CEILING.MATH: up to a multiple of ``|significance|`` (towards plus infinity; with a non-zero ``mode`` a
    negative number goes away from zero). Significance 0 gives 0.

    Microsoft's function reference, CEILING.MATH: ``CEILING.MATH(-8.1, 2)`` = -8, ``CEILING.MATH(-5.5, 2, -1)`` = -6.
    """
    if significance == 0:
        return 0.0
    step = abs(significance)
    q = _shown(number / step)
    if mode and number < 0:
        return _shown(-math.ceil(-q) * step)
    return _shown(math.ceil(q) * step)


def _precise(number: float, significance: float = 1.0, *, up: bool) -> float:
    """FLOOR.PRECISE / CEILING.PRECISE / ISO.CEILING: the sign of ``significance`` is ignored, the direction is
    always towards minus (FLOOR) or plus (CEILING) infinity (OpenDocument OpenFormula, ISO/IEC 26300-2,
    CEILING with mode 0 and FLOOR; Microsoft's reference: ``CEILING.PRECISE(-4.3)`` = -4, ``FLOOR.PRECISE(-3.2, -1)``
    = -4)."""
    if significance == 0:
        return 0.0
    step = abs(significance)
    q = _shown(number / step)
    return _shown((math.ceil(q) if up else math.floor(q)) * step)


# ---------------------------------------------------------------- rounding to digits, as the number is shown

_CONTEXT = decimal.Context(prec=400)


def _decimal_shown(x: float) -> decimal.Decimal:
    """The decimal a spreadsheet app shows for ``x``: 15 significant digits (common practice: the apps keep
    15 significant decimal digits, Microsoft's "Floating-point arithmetic may give inaccurate results")."""
    return decimal.Decimal(f"{x:.15g}")


def _shown(x: float) -> float:
    return float(_decimal_shown(x)) if math.isfinite(x) else x


def round_shown(x: float, digits: float, rounding: str = decimal.ROUND_HALF_UP) -> float:
    """``x`` rounded to ``digits`` decimals (negative: to tens, hundreds…), from its 15-digit decimal form;
    halves away from zero (ROUND), or always away from zero (ROUNDUP, ``ROUND_UP``) or towards it
    (ROUNDDOWN, TRUNC, ``ROUND_DOWN``). OpenFormula (ISO/IEC 26300-2) ROUND, ROUNDUP, ROUNDDOWN."""
    if not math.isfinite(x):
        return x
    d = int(digits)  # the apps truncate a fractional digit count
    if d > 330:
        return x  # finer than any double holds
    quantum = decimal.Decimal(1).scaleb(-d)
    return float(_decimal_shown(x).quantize(quantum, rounding=rounding, context=_CONTEXT))


def _mround(number, multiple):
    """MROUND: the multiple of ``multiple`` nearest to ``number``, halves away from zero, from the 15-digit
    decimal forms; a number and multiple of opposite signs is #NUM! (OpenFormula, ISO/IEC 26300-2, MROUND)."""
    if isinstance(number, bool) or isinstance(multiple, bool):
        return Error.errors["#VALUE!"]
    number, multiple = float(number), float(multiple)
    if multiple == 0:
        return 0.0
    if (number < 0 < multiple) or (multiple < 0 < number):
        return Error.errors["#NUM!"]
    n, m = _decimal_shown(number), _decimal_shown(multiple)
    q = (n / m).quantize(decimal.Decimal(1), rounding=decimal.ROUND_HALF_UP, context=_CONTEXT)
    return float(q * m)


def _trunc(x, digits=0):
    return round_shown(x, digits, decimal.ROUND_DOWN)


# ---------------------------------------------------------------- N and TEXT

def _n(value):
    """N: a number is itself, a logical 1 or 0, anything else 0; an error passes (OpenFormula, ISO/IEC 26300-2, N)."""
    v = np.asarray(value, object).ravel()[0]
    if isinstance(v, XlError):
        return v
    if isinstance(v, (bool, np.bool_)):
        return float(v)
    if isinstance(v, (int, float, np.integer, np.floating)):
        return float(v)
    return 0.0


#: Format-code features the library's TEXT does not implement (outside quoted text and escapes).
_UNSUPPORTED_FORMAT = regex.compile(r'"[^"]*"|\\.|(?P<bad>[@?*_\[])')


def text_supported(format_code: str) -> bool:
    """Whether the library's TEXT formats ``format_code`` as spreadsheet apps do (see the module docstring);
    a fourth section (for text values) is not read by the library either."""
    found = [m for m in _UNSUPPORTED_FORMAT.finditer(format_code)]
    if any(m.group("bad") for m in found):
        return False
    unquoted = _UNSUPPORTED_FORMAT.sub("", format_code)
    return unquoted.count(";") < 3


def _text_checked(library_text):
    def text(value, format_code, *rest):
        codes = np.asarray(format_code, object).ravel()
        for code in codes:
            if isinstance(code, str) and not isinstance(code, XlError) and not text_supported(code):
                raise NotEvaluated(f"TEXT format code {code!r} is not one trueband formats")
        out = library_text(value, format_code, *rest)
        inputs = [*np.asarray(value, object).ravel(), *codes]
        if any(str(x) == "#VALUE!" and isinstance(x, XlError) for x in np.asarray(out, object).ravel()) and \
                not any(isinstance(x, XlError) for x in inputs):
            raise NotEvaluated(f"TEXT format code {codes[0]!r} is not one trueband formats")
        return out
    return text


# ---------------------------------------------------------------- MATCH among equal values

def _same_key(a, b) -> bool:
    if _is_number(a) and _is_number(b):
        return float(a) == float(b)
    if isinstance(a, (bool, np.bool_)) and isinstance(b, (bool, np.bool_)):
        return bool(a) == bool(b)
    if isinstance(a, str) and isinstance(b, str) and not isinstance(a, XlError) and not isinstance(b, XlError):
        return a.casefold() == b.casefold()
    return False


def _match_last_of_equals(library_match):
    """MATCH with match type 1 (the default) in a sorted range: among equal values the apps' binary search
    stops at the last one (``MATCH(2, {1,2,2,2,3}, 1)`` is 4; common practice), the library at the first."""
    def match(lookup_value, lookup_array, match_type=1, *rest):
        out = library_match(lookup_value, lookup_array, match_type, *rest)
        kind = np.asarray(match_type, object).ravel()
        if np.size(lookup_value) != 1 or kind.size != 1 or not _is_number(kind[0]) or kind[0] <= 0:
            return out
        found = np.asarray(out, object)
        if found.size != 1 or not _is_number(found.ravel()[0]):
            return out
        values = np.asarray(lookup_array, object).ravel()
        p = int(found.ravel()[0])
        while p < values.size and _same_key(values[p], values[p - 1]):
            p += 1
        found = found.copy()
        found.ravel()[0] = p
        return found.view(type(out)) if isinstance(out, np.ndarray) else p
    return match


# ---------------------------------------------------------------- the 1904 date system

#: Serial number of 1904-01-01 in the 1900 date system (ECMA-376 Part 1, 18.17.4.1; Microsoft, "Date systems in Excel").
DAYS_1900_TO_1904 = 1462


class _DateSystem(threading.local):
    date1904 = False


_DATES = _DateSystem()


@contextlib.contextmanager
def date_system(date1904: bool):
    """Evaluate date functions in the 1904 date system (``True``) or the 1900 one, for this thread."""
    before = _DATES.date1904
    _DATES.date1904 = bool(date1904)
    try:
        yield
    finally:
        _DATES.date1904 = before


def _is_number(x) -> bool:
    return isinstance(x, (int, float, np.integer, np.floating)) and not isinstance(x, (bool, np.bool_))


def _shift(x, days: int):
    """Numbers (also inside a range) moved by ``days``; text, logicals, blanks and errors as they are."""
    if isinstance(x, np.ndarray):
        out = np.empty(x.shape, dtype=object)
        out.ravel()[:] = [v + days if _is_number(v) else v for v in x.ravel().tolist()]
        return out.view(type(x)) if type(x) is not np.ndarray else out
    return x + days if _is_number(x) else x


#: Date functions: the positions of their date arguments, and whether they give a date.
_DATE_FUNCTIONS = {
    "DATE": ((), True), "DATEVALUE": ((), True), "TODAY": ((), True), "NOW": ((), True),
    "YEAR": ((0,), False), "MONTH": ((0,), False), "DAY": ((0,), False), "WEEKDAY": ((0,), False),
    "WEEKNUM": ((0,), False), "ISOWEEKNUM": ((0,), False), "EDATE": ((0,), True), "EOMONTH": ((0,), True),
    "WORKDAY": ((0, 2), True), "WORKDAY.INTL": ((0, 3), True), "NETWORKDAYS": ((0, 1, 2), False),
    "NETWORKDAYS.INTL": ((0, 1, 3), False), "DATEDIF": ((0, 1), False), "DAYS": ((0, 1), False),
    "DAYS360": ((0, 1), False), "YEARFRAC": ((0, 1), False),
}
_DATE_CODE = regex.compile(r'"[^"]*"|\\.|\[[^\]]*\]|(?P<date>[yYdDhHsSmM])')


def _date_format(code) -> bool:
    return isinstance(code, str) and any(m.group("date") for m in _DATE_CODE.finditer(code))


def _in_date_system(fn, dates: tuple[int, ...], gives_date: bool, *, skip: int = 0):
    """``fn`` reading the arguments at ``dates`` and giving its result in the workbook's date system
    (``skip`` leading arguments are the engine's own flags)."""
    def call(*args):
        if not _DATES.date1904:
            return fn(*args)
        args = list(args)
        for i in dates:
            if skip + i < len(args):
                args[skip + i] = _shift(args[skip + i], DAYS_1900_TO_1904)
        out = fn(*args)
        return _shift(out, -DAYS_1900_TO_1904) if gives_date else out
    return call


def _text_in_date_system(fn):
    def call(value, format_code, *rest):
        if _DATES.date1904 and any(_date_format(c) for c in np.asarray(format_code, object).ravel()):
            value = _shift(value, DAYS_1900_TO_1904)
        return fn(value, format_code, *rest)
    return call


def _date_corrections(table: dict) -> dict:
    from formulas.functions.date import FUNCTIONS as dates

    out = {}
    for name, (positions, gives) in _DATE_FUNCTIONS.items():
        entry = dates[name]
        if isinstance(entry, dict):
            skip = len(entry.get("extra_inputs", {}))
            out[name] = {**entry, "function": _in_date_system(entry["function"], positions, gives, skip=skip)}
        else:
            out[name] = _in_date_system(entry, positions, gives)
        for key in ("_XLFN." + name,):
            if key in dates:
                out[key] = out[name]
    out["TEXT"] = _text_in_date_system(table["TEXT"])
    return out


#: The corrected functions of plain numbers, by name, as ``_corrections`` wraps them element by element: a run
#: of filled-down cells calls them directly on its clean, finite numbers (bridge/engine/eval_run.py), as the
#: wrapper would on each element.
NUMBER_FUNCTIONS = {"ROUND": round_shown, "ROUNDUP": functools.partial(round_shown, rounding=decimal.ROUND_UP),
                    "ROUNDDOWN": functools.partial(round_shown, rounding=decimal.ROUND_DOWN), "TRUNC": _trunc}


def _corrections() -> dict:
    ufunc = wrap_ufunc
    table = {
        "FLOOR.MATH": ufunc(floor_math),
        "CEILING.MATH": ufunc(ceiling_math),
        "FLOOR.PRECISE": ufunc(functools.partial(_precise, up=False)),
        "CEILING.PRECISE": ufunc(functools.partial(_precise, up=True)),
        "ISO.CEILING": ufunc(functools.partial(_precise, up=True)),
        "ROUND": ufunc(NUMBER_FUNCTIONS["ROUND"]),
        "ROUNDUP": ufunc(NUMBER_FUNCTIONS["ROUNDUP"]),
        "ROUNDDOWN": ufunc(NUMBER_FUNCTIONS["ROUNDDOWN"]),
        "TRUNC": ufunc(NUMBER_FUNCTIONS["TRUNC"]),
        "MROUND": ufunc(_mround, input_parser=lambda *a: a),
        "N": wrap_func(_n),
        "TEXT": _text_checked(_TEXT["TEXT"]),
        "MATCH": _match_last_of_equals(_LOOK["MATCH"]),
    }
    for name in ("FLOOR.MATH", "CEILING.MATH", "FLOOR.PRECISE", "CEILING.PRECISE", "ISO.CEILING"):
        table["_XLFN." + name] = table[name]
    table.update(_date_corrections(table))
    return table


#: Name → corrected function (the engine's function kind), over the library's own.
STANDARD_CORRECTIONS = _corrections()
