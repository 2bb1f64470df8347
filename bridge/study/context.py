"""What every study sheet shares, and the one way a study formula is written.

A sheet module never types a cell address: it holds :class:`Ref` handles (a cell or a rectangle of
cells, with the Python value the study computed for it) and hands them to :meth:`StudyContext.formula`,
which writes ``=NAME(arg, ...)`` and checks it by calling the same function on the same values, from the
one list of arguments; or to :meth:`StudyContext.text`, which fills a template's named places with the
handles' addresses. Either refuses a template or a text argument that holds an A1-style address.
"""

from __future__ import annotations

import contextlib
import contextvars
import copy
import dataclasses
import re
from typing import Any, Callable

from openpyxl.utils import get_column_letter

from trueband.funcs import call
from trueband.funcs.errors import InsufficientDataError, TruebandError, UnknownFunctionError

from .grid import Grid, quote
from .setup import StudyData
from .words import NOT_COMPUTABLE

__all__ = ["StudyContext", "Ref", "Expr", "cell", "area", "fill_row", "formula_text", "ROW", "UNCHECKED", "CALL",
           "A1_ADDRESS", "HandTypedAddress", "sheet_title", "sheet_names", "in_sheet_names"]

#: While a further predictor's sheets are written (:meth:`StudyContext.predictor`): a sheet module's own
#: title (``Reliability``) -> that predictor's copy (``Reliability (Questionnaire)``). A handle takes the
#: title in force when it is made, so every sheet module is written once for all predictors.
_SHEET_NAMES: contextvars.ContextVar[dict] = contextvars.ContextVar("study_sheet_names", default={})


def sheet_title(name: str) -> str:
    """The title sheet ``name`` has for the predictor whose sheets are being written."""
    return _SHEET_NAMES.get().get(name, name)


@contextlib.contextmanager
def sheet_names(names: dict):
    """Sheet titles as ``names`` maps them, for the handles and grids made inside the block."""
    token = _SHEET_NAMES.set(dict(names))
    try:
        yield
    finally:
        _SHEET_NAMES.reset(token)


def in_sheet_names(names: dict, make_rows):
    """The rows of ``make_rows()`` (a generator function), each made with the sheet titles of ``names``
    (the long sheets' rows are made while the workbook is saved, after the predictor's block has ended)."""
    run = contextvars.copy_context()
    run.run(_SHEET_NAMES.set, dict(names))
    rows = run.run(make_rows)
    while True:
        try:
            yield run.run(next, rows)
        except StopIteration:
            return

#: The value of a cell whose formula was not checked (a heavy check skipped with large data).
UNCHECKED = object()
#: :meth:`StudyContext.formula`'s default check: call the registered function on the arguments' values.
CALL = object()

#: Where a row template's row number goes ("[" cannot be part of a sheet name, nor of our formulas).
ROW = "[r]"

#: An A1-style cell address (``B5``, ``$F$2``) standing alone in formula text (``LOG10(`` is a function).
A1_ADDRESS = re.compile(r"(?<![A-Za-z0-9_$.])\$?[A-Z]{1,3}\$?[0-9]+(?![A-Za-z0-9_(])")


class HandTypedAddress(ValueError):
    """A study formula was given a cell address as text instead of a :class:`Ref`."""


class _Unavailable(TruebandError):
    """A value that depends on another that could not be computed."""

    code = "#N/A"


@dataclasses.dataclass(frozen=True, eq=False)
class Ref:
    """A cell (or the rectangle to ``last_col``, ``last_row``) on ``sheet``, 1-based, and its value.

    ``row=None`` stands for "the row being written": its address holds :data:`ROW` (see :func:`fill_row`).
    How the address is written: by default without the sheet and relative on its own sheet, quoted
    and absolute from another; :meth:`local`, :meth:`fixed`, :meth:`qualified`,
    :meth:`qualified_relative` and :meth:`bare` choose another form.
    """

    sheet: str
    row: int | None
    col: int
    last_row: int | None = None
    last_col: int | None = None
    name: str | None = None        # how a message names it: "it needs <name>, which is not computable"
    value: Any = UNCHECKED         # the Python value, a TruebandError, or UNCHECKED
    prefix: str = "auto"           # the sheet before the address: "auto", "none", "quoted", "bare"
    absolute: bool | None = None   # None: absolute when the sheet is written
    titled: bool = dataclasses.field(default=False, repr=False)  # the sheet is already the predictor's title

    def __post_init__(self):
        if not self.titled:
            object.__setattr__(self, "sheet", sheet_title(self.sheet))
            object.__setattr__(self, "titled", True)

    def local(self) -> "Ref":
        return dataclasses.replace(self, prefix="none", absolute=False)

    def fixed(self) -> "Ref":
        return dataclasses.replace(self, prefix="none", absolute=True)

    def qualified(self) -> "Ref":
        return dataclasses.replace(self, prefix="quoted", absolute=True)

    def qualified_relative(self) -> "Ref":
        return dataclasses.replace(self, prefix="quoted", absolute=False)

    def bare(self) -> "Ref":
        return dataclasses.replace(self, prefix="bare", absolute=False)

    def with_value(self, value, name: str | None = None) -> "Ref":
        return dataclasses.replace(self, value=value, name=name or self.name)

    @property
    def coordinate(self) -> str:
        return f"{get_column_letter(self.col)}{self.row}"

    def address(self, on_sheet: str) -> str:
        on_sheet = sheet_title(on_sheet)
        prefix = self.prefix
        if prefix == "auto":
            prefix = "none" if on_sheet == self.sheet else "quoted"
        absolute = self.absolute if self.absolute is not None else prefix != "none"
        dollar = "$" if absolute else ""
        row = ROW if self.row is None else str(self.row)
        text = f"{dollar}{get_column_letter(self.col)}{dollar}{row}"
        if self.last_col is not None:
            last_row = ROW if self.last_row is None else str(self.last_row)
            text += f":{dollar}{get_column_letter(self.last_col)}{dollar}{last_row}"
        if prefix == "quoted":
            return f"{quote(self.sheet)}!{text}"
        if prefix == "bare":
            return f"{self.sheet}!{text}"
        return text


def cell(sheet: str, row: int | None, col: int, value: Any = UNCHECKED, name: str | None = None) -> Ref:
    """The cell at ``row``, ``col`` (1-based; ``row=None``: the row being written) of ``sheet``."""
    return Ref(sheet, row, col, name=name, value=value)


def area(sheet: str, col: int, row: int | None, last_col: int, last_row: int | None, value: Any = UNCHECKED) -> Ref:
    """The rectangle from (``row``, ``col``) to (``last_row``, ``last_col``) of ``sheet``, 1-based."""
    return Ref(sheet, row, col, last_row=last_row, last_col=last_col, value=value)


@dataclasses.dataclass(frozen=True)
class Expr:
    """A piece of formula text made by :meth:`StudyContext.text`, and its value, used as an argument."""

    text: str
    value: Any = UNCHECKED
    name: str | None = None

    def address(self, on_sheet: str) -> str:
        return self.text


def _literal(arg) -> str:
    if isinstance(arg, (Ref, Expr)):
        raise TypeError("a handle is not a literal")
    if isinstance(arg, str):
        if A1_ADDRESS.search(arg):
            raise HandTypedAddress(f"{arg!r} holds a cell address typed by hand; pass a Ref")
        return '"' + arg + '"'
    return str(arg)


def fill_row(template: str, row: int) -> str:
    """A row template (made by :meth:`StudyContext.text` from handles with no row) for sheet row ``row``."""
    return template.replace(ROW, str(row))


def _check_template(template: str) -> None:
    if A1_ADDRESS.search(template):
        raise HandTypedAddress(f"the formula template {template!r} holds a cell address typed by hand; "
                               f"name a Ref in its place")


def formula_text(template: str, on: str, **refs) -> str:
    """``template`` with each ``{name}`` replaced by the address of ``refs[name]`` as seen from sheet ``on``
    (or by the literal it is: a number, a quoted text)."""
    _check_template(template)
    return template.format(**{k: (v.address(on) if isinstance(v, (Ref, Expr)) else _literal(v))
                              for k, v in refs.items()})


class StudyContext:
    """What every sheet shares: the data, the sheets being composed, the named cells the result lists,
    the cells that are not computable (for Notes) and the notes; and the one way to write a formula."""

    def __init__(self, data: StudyData, *, full_checks: bool):
        self.data = data
        self.setup = data.setup
        #: with large data the expensive range functions are not called twice (here and in the
        #: recalculation); cheap numpy checks find the cases they would refuse
        self.full_checks = full_checks
        self.grids: dict[str, Grid] = {}
        self.cells: dict[str, tuple[str, str]] = {}           # name -> (sheet, coordinate), for StudyResult
        self.not_computable: list[tuple[str, str, str]] = []  # (sheet, coordinate, reason)
        self.notes: list[str] = list(data.notes)
        self.key_prefix = ""   # before the named cells' keys of a further predictor ("p2_alpha")
        self.predictors: list = []   # every predictor (sheets.predictors.Predictor), set by build.plan
        #: long sheets beyond the Bands, Scored items and data copy: (title, header, widths, rows, width)
        self.long_sheets: list = []

    @contextlib.contextmanager
    def predictor(self, data: StudyData, names: dict, key_prefix: str, *, full_checks: bool):
        """A context for a further predictor's sheets: its data and setup, its sheet titles (``names``), its
        cells' keys prefixed; the sheets, named cells, notes and not-computable list stay shared."""
        other = copy.copy(self)
        other.data, other.setup, other.key_prefix, other.full_checks = data, data.setup, key_prefix, full_checks
        with sheet_names(names):
            yield other

    def _key(self, key: str | None) -> str | None:
        return self.key_prefix + key if key else key

    def sheet(self, title: str) -> Grid:
        title = sheet_title(title)
        grid = Grid(title)
        self.grids[title] = grid
        return grid

    # -- formula text

    text = staticmethod(formula_text)

    def call_text(self, function: str, args, on: str) -> str:
        return f"{function}({','.join(a.address(on) if isinstance(a, (Ref, Expr)) else _literal(a) for a in args)})"

    @staticmethod
    def value(arg):
        """The Python value of a formula argument; a handle that is not computable stops the check."""
        if isinstance(arg, (Ref, Expr)):
            if arg.value is UNCHECKED or isinstance(arg.value, Exception):
                raise _Unavailable(f"it needs {(arg.name or 'a value').replace('_', ' ')}, which is not computable")
            return arg.value
        return arg

    # -- writing checked cells

    def formula(self, grid: Grid, row: int, col: int, function: str, *args, check: Any = CALL,
                checked: bool = True, before: Callable | None = None, wrap: str = "{}",
                style: str | None = None, key: str | None = None) -> Ref:
        """Write ``=function(args)`` at (row, col) after checking, with the same function on the same values,
        that it is computable; else the reason, as text. ``check`` replaces the call for a standard spreadsheet
        function; ``checked=False`` skips the check (heavy checks with large data); ``before`` runs first
        (a condition of the whole figure); ``wrap`` places the call inside more text."""
        _check_template(wrap)
        text = "=" + wrap.format(self.call_text(function, args, grid.title))
        if not checked:
            check = None
        elif check is CALL:
            def check():
                if before is not None:
                    before()
                return call(function, *(self.value(a) for a in args))
        return self.put(grid, row, col, text, check, style=style, key=key)

    def expression(self, grid: Grid, row: int, col: int, template: str, check: Callable | None, *,
                   style: str | None = None, key: str | None = None, **refs) -> Ref:
        """Write ``="template"`` (its places filled by :meth:`text`) after running ``check``."""
        return self.put(grid, row, col, "=" + self.text(template, grid.title, **refs), check, style=style, key=key)

    def link(self, grid: Grid, row: int, col: int, source: Ref, *, style: str | None = None,
             key: str | None = None) -> Ref:
        """Write ``=<source>``, computable when the source is."""
        return self.put(grid, row, col, "=" + source.address(grid.title), lambda: self.value(source), style=style,
                        key=key)

    def put(self, grid: Grid, row: int, col: int, text: str, check: Callable | None, *, style: str | None = None,
            key: str | None = None) -> Ref:
        here = cell(grid.title, row, col, name=key)
        if check is not None:
            try:
                result = check()
            except UnknownFunctionError:
                result = None  # a function this installation lacks: the formula says which
            except TruebandError as exc:
                return self.not_computable_at(grid, row, col, exc.message, key=key, error=exc)
            here = here.with_value(result)
            grid.values[(row, col)] = result  # the print layout measures a text formula by its value
        grid.set(row, col, text, style)
        if key:
            self.cells[self._key(key)] = (grid.title, here.coordinate)
        return here

    def not_computable_at(self, grid: Grid, row: int, col: int, reason: str, key: str | None = None,
                          error: Exception | None = None) -> Ref:
        """Write ``not computable: <reason>`` and list it for the Notes sheet."""
        grid.set(row, col, NOT_COMPUTABLE + reason, "na")
        here = cell(grid.title, row, col, value=error or InsufficientDataError(reason), name=key)
        self.not_computable.append((grid.title, here.coordinate, reason))
        if key:
            self.cells[self._key(key)] = (grid.title, here.coordinate)
        return here

    def name(self, key: str, ref: Ref) -> None:
        """List ``ref`` under ``key`` among the result's named cells."""
        self.cells[self._key(key)] = (ref.sheet, ref.coordinate)
