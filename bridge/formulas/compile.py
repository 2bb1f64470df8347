"""Formulas of a workbook as position-independent expressions.

:func:`formula_key` rewrites a formula's cell references relative to the cell
that holds it (``=B2*2`` in C2 and ``=B3*2`` in C3 both become
``=R[0]C[-1]*2``), so the cells of a filled-down column share one key and
the formula is parsed and compiled once per key (:func:`compile_formula`),
with the ``formulas`` package's parser. The compiled form is a small tree
(:class:`Node`) whose leaves are literals or :class:`Ref` s: references whose
row and column are either absolute or an offset from the formula's cell.
The dependency graph of the compiled formulas is :mod:`trueband.bridge.engine.graph`'s.

>>> key, refs = formula_key("=SUM(B2:K2)+$A$1", 2, 12)
>>> key
'=SUM(R[0]C[-10]:R[0]C[-1])+R1C1'
>>> compile_formula("=SUM(B2:K2)*2", 2, 12).tree.describe()
'*(SUM(ref), 2.0)'
"""

from __future__ import annotations

import dataclasses
import functools
import re
from typing import Iterator

import formulas
from formulas.builder import AstBuilder
from formulas.tokens.function import Function
from formulas.tokens.operand import Empty, Error, Number, Range, String
from formulas.tokens.operator import Operator

from .text import is_double_negation, parser, syntax_reason
from ..workbook.cells import MAX_COLUMN, column_index

__all__ = ["Ref", "Node", "Compiled", "formula_key", "compile_formula", "FormulaSyntaxError", "KeyTemplate"]


class FormulaSyntaxError(ValueError):
    """A formula the parser cannot read; ``reason`` is the message without the formula (why, and where)."""

    def __init__(self, message: str, reason: str | None = None):
        super().__init__(message)
        self.reason = reason or message


# ---------------------------------------------------------------- position-independent keys

# Strings, then references (optionally sheet-qualified): column ranges, row ranges, cells.
_KEY_TOKEN = re.compile(
    r'''(?P<string>"(?:[^"]|"")*")'''
    r"|(?P<quoted>'(?:[^']|'')*'!)"
    r"|(?<![\w.$])(?P<cols>\$?[A-Za-z]{1,3}:\$?[A-Za-z]{1,3})(?![\w.(!])"
    r"|(?<![\w.$])(?P<rows>\$?\d+:\$?\d+)(?![\w.(!])"
    r"|(?<![\w.$])(?P<cell>\$?[A-Za-z]{1,3}\$?\d+)(?![\w.(!])")
_PART = re.compile(r"(\$?)([A-Za-z]{1,3})?(\$?)(\d+)?")


def _rc(text: str, row: int, col: int) -> str:
    cabs, letters, rabs, digits = _PART.fullmatch(text).groups()
    out = ""
    if digits is not None:
        out += f"R{digits}" if rabs else f"R[{int(digits) - row}]"
    if letters is not None:
        out += f"C{column_index(letters)}" if cabs else f"C[{column_index(letters) - col}]"
    return out


def formula_key(formula: str, row: int, col: int) -> tuple[str, int]:
    """The formula with its references written relative to (row, col), and how many it has."""
    count = 0

    def sub(m: re.Match) -> str:
        nonlocal count
        kind = m.lastgroup
        text = m.group(0)
        if kind in ("string", "quoted"):
            return text
        count += 1
        if kind == "cell":
            return _rc(text, row, col)
        a, b = text.split(":")
        return _rc(a, row, col) + ":" + _rc(b, row, col)

    return _KEY_TOKEN.sub(sub, formula), count


class KeyTemplate:
    """Predicts the text a formula has when filled down one row, to recognise a filled-down run cheaply.

    Built from one cell's formula: the relative row numbers become slots
    (offset from the cell's row), everything else is kept as written. A cell
    at ``row`` belongs to the same run when its text is
    ``template.text_at(row)``; checking that is one string format and one
    comparison, instead of rewriting every reference.
    """

    __slots__ = ("fmt", "offsets", "key")

    def __init__(self, formula: str, row: int, col: int):
        pieces: list[str] = []
        offsets: list[int] = []
        pos = 0
        for m in _KEY_TOKEN.finditer(formula):
            if m.lastgroup in ("string", "quoted"):
                continue
            for part in re.finditer(r"\$?[A-Za-z]*(\$?)(\d+)", m.group(0)):
                if part.group(1) or not part.group(2):
                    continue
                start = m.start() + part.start(2)
                pieces.append(formula[pos:start].replace("{", "{{").replace("}", "}}"))
                pieces.append("{%d}" % len(offsets))
                offsets.append(int(part.group(2)) - row)
                pos = m.start() + part.end(2)
        pieces.append(formula[pos:].replace("{", "{{").replace("}", "}}"))
        self.fmt = "".join(pieces)
        self.offsets = tuple(offsets)
        self.key = formula_key(formula, row, col)[0]

    def text_at(self, row: int) -> str:
        return self.fmt.format(*[row + o for o in self.offsets])


# ---------------------------------------------------------------- references

@dataclasses.dataclass(frozen=True)
class Ref:
    """A reference in position-independent form.

    Each of ``r1, c1, r2, c2`` is an absolute 1-based index when the matching
    ``*_abs`` flag is set and an offset from the formula's cell otherwise.
    ``sheet`` is ``None`` for the formula's own sheet. ``name`` is set for a
    defined name (then the coordinates are unused).
    """

    sheet: str | None = None
    r1: int = 0
    c1: int = 0
    r2: int = 0
    c2: int = 0
    r1_abs: bool = False
    c1_abs: bool = False
    r2_abs: bool = False
    c2_abs: bool = False
    name: str | None = None

    def area(self, row: int, col: int) -> tuple[int, int, int, int]:
        """(r1, c1, r2, c2) for the formula in (row, col), ordered."""
        r1 = self.r1 if self.r1_abs else row + self.r1
        r2 = self.r2 if self.r2_abs else row + self.r2
        c1 = self.c1 if self.c1_abs else col + self.c1
        c2 = self.c2 if self.c2_abs else col + self.c2
        return min(r1, r2), min(c1, c2), max(r1, r2), max(c1, c2)

    def swept_area(self, first: int, last: int, col: int) -> tuple[int, int, int, int]:
        """(r1, c1, r2, c2) covering what the reference reads from each of rows ``first..last`` of column ``col``
        (a relative reference sweeps the rows)."""
        a1, a2 = self.area(first, col), self.area(last, col)
        return min(a1[0], a2[0]), min(a1[1], a2[1]), max(a1[2], a2[2]), max(a1[3], a2[3])

    @property
    def is_cell(self) -> bool:
        return self.name is None and self.r1 == self.r2 and self.c1 == self.c2 and \
            self.r1_abs == self.r2_abs and self.c1_abs == self.c2_abs

    @property
    def rows_fixed(self) -> bool:
        return self.r1_abs and self.r2_abs

    @property
    def one_row_moving(self) -> bool:
        """Both rows relative with the same offset: a one-row range that moves with the cell."""
        return not self.r1_abs and not self.r2_abs and self.r1 == self.r2


def _ref_from_token(token: Range, raw: str, row: int, col: int) -> Ref:
    attr = token.attr
    if attr.get("is_reference") and "r1" not in attr:
        name = attr["name"].rpartition("!")[2]
        # a sheet-local name read from another sheet (``Defines!NR_To_A1``) keeps its sheet (the parser drops it)
        sheet = raw.strip().rpartition("!")[0]
        sheet = attr.get("sheet") or (sheet.strip("'").replace("''", "'") if sheet else None)
        return Ref(name=name.upper(), sheet=sheet)
    body = raw.split("!")[-1].strip()
    parts = body.split(":")
    a = _PART.fullmatch(parts[0].strip())
    b = _PART.fullmatch(parts[-1].strip())
    c1abs, _, r1abs, _ = a.groups()
    c2abs, _, r2abs, _ = b.groups()
    r1, r2 = int(attr["r1"]), int(attr["r2"])
    n1, n2 = int(attr["n1"]), int(attr["n2"])
    if r1 == 0:  # a column range A:C covers every row
        r1, r1abs, r2abs = 1, "$", "$"
    if a.group(2) is None and b.group(2) is None:  # a row range 2:5 covers every column
        c1abs = c2abs = "$"
        n1, n2 = 1, MAX_COLUMN
    return Ref(sheet=attr.get("sheet"),
               r1=r1 if r1abs else r1 - row, c1=n1 if c1abs else n1 - col,
               r2=r2 if r2abs else r2 - row, c2=n2 if c2abs else n2 - col,
               r1_abs=bool(r1abs), c1_abs=bool(c1abs), r2_abs=bool(r2abs), c2_abs=bool(c2abs))


# ---------------------------------------------------------------- the expression tree

@dataclasses.dataclass
class Node:
    """One node of a compiled formula.

    ``kind`` is ``"lit"`` (``value``), ``"ref"`` (``ref``), ``"empty"`` (a
    missing argument), ``"op"`` (an operator ``name``) or ``"fn"`` (a function
    ``name``, upper case as written, prefixes kept); ``args`` the operands.
    The engine puts ``"undefined"`` (``name`` says why) where a defined name
    has no definition it can read.
    """

    kind: str
    name: str = ""
    value: object = None
    ref: Ref | None = None
    args: tuple = ()

    def describe(self) -> str:
        if self.kind == "lit":
            return repr(self.value) if not isinstance(self.value, str) else f'"{self.value}"'
        if self.kind in ("ref", "empty"):
            return self.kind
        return f"{self.name}({', '.join(a.describe() for a in self.args)})"

    def walk(self) -> Iterator["Node"]:
        yield self
        for a in self.args:
            yield from a.walk()


@dataclasses.dataclass
class Compiled:
    """A formula compiled once for every cell that shares its key."""

    key: str
    tree: Node
    refs: tuple[Ref, ...]
    functions: frozenset[str]  # function names as written (upper case, prefixes kept)
    is_array: bool = False


def _operand_node(token, row: int, col: int, refs: list) -> Node:
    if isinstance(token, Range):
        raw = token.source[:token.end_match]
        ref = _ref_from_token(token, raw, row, col)
        refs.append(ref)
        return Node("ref", ref=ref)
    if isinstance(token, Empty):
        return Node("empty")
    if isinstance(token, (Number, String, Error)):
        value = token.compile()
        if isinstance(value, int) and not isinstance(value, bool):
            value = float(value)
        return Node("lit", value=value)
    raise FormulaSyntaxError(f"unsupported operand {token!r}")


class _TreeBuilder(AstBuilder):
    """Builds :class:`Node` trees from the parser's token stream instead of a dispatcher."""

    def __init__(self, *, row: int, col: int, refs: list, match=None):
        super().__init__(match=match)
        self.row, self.col, self.refs = row, col, refs

    def append(self, token):
        if isinstance(token, (Operator, Function)):
            n = token.get_n_args
            if len(self._deque) < n:
                raise formulas.errors.FormulaError()
            args = [self._deque.pop() for _ in range(n)][::-1]
            token.update_input_tokens(*[a[0] for a in args])
            kind = "op" if isinstance(token, Operator) else "fn"
            node = Node(kind, name=token.name.upper(), args=tuple(a[1] for a in args))
            if kind == "op" and is_double_negation(token):
                node = Node("op", name="U-", args=(Node("op", name="U-", args=node.args),))
        else:
            node = _operand_node(token, self.row, self.col, self.refs)
        self._deque.append((token, node))

    def finish(self):
        pass


def compile_formula(formula: str, row: int, col: int) -> Compiled:
    """Parse ``formula`` (as it stands in cell (row, col)) into a :class:`Compiled` tree."""
    text = formula.strip()
    is_array = text.startswith("{")
    if not text.startswith(("=", "{")):
        text = "=" + text
    refs: list[Ref] = []
    reader = parser()
    reader.ast_builder = functools.partial(_TreeBuilder, row=row, col=col, refs=refs)
    try:
        _, builder = reader.ast(text)
    except FormulaSyntaxError:
        raise
    except Exception as exc:  # the parser's exception types vary by version
        reason = syntax_reason(formula, reader, exc)
        raise FormulaSyntaxError(f"cannot read the formula {formula!r}: {reason}", reason) from None
    root = builder._deque[-1][1]
    key, _ = formula_key(text, row, col)
    functions = frozenset(n.name for n in root.walk() if n.kind == "fn")
    return Compiled(key=key, tree=root, refs=tuple(refs), functions=functions, is_array=is_array)
