"""Reading formula text: the parser every part of trueband uses, typed-formula separators, name suggestions.

* :func:`parser` gives the ``formulas`` library's parser with one token fixed: the
  library reads the start of a name such as ``TRUE_SCORE`` as the logical
  ``TRUE`` (its lookahead forgets ``_``), so ``TRUE_SCORE(…)`` and
  ``FALSE_…(…)`` could not be read at all. It also keeps the text still
  unread when it fails, so :func:`syntax_reason` can say where reading stopped.
  A line break inside a string literal is kept (``LEN("a⏎b")`` is 3, as in
  spreadsheet apps); the library drops every line break of a formula, which
  is right only outside literals.
* :func:`typed_formula` accepts a formula typed by a person (``trueband eval``,
  ``trueband fill``): spreadsheet apps in many settings show ``;`` between
  arguments, files always store ``,``.
* :func:`suggestions` lists the closest registered and standard function names
  for "did you mean", from both families (``SME`` → ``SEM`` and ``SUM``).

This module is the engine's; the command line imports it, never the reverse.
"""

from __future__ import annotations


import formulas
import regex
from formulas.errors import ParenthesesError
from formulas.tokens.operand import Number, String
from formulas.tokens.operator import OperatorToken

from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import REGISTRY

from .names import registered_name, standard_names
from .standard_functions import close_names

# The library's number-and-logical token, with "_" added to what may not follow TRUE/FALSE.
_LOOKAHEAD = r"(?!([a-z]|[0-9]|\.|\s*\:))"
_FIXED_LOOKAHEAD = r"(?!([a-z]|[0-9]|\.|_|\s*\:))"


class _Number(Number):
    _re = regex.compile(Number._re.pattern.replace(_LOOKAHEAD, _FIXED_LOOKAHEAD), Number._re.flags)



#: Stands for a line break inside a string literal while the library reads the formula (it drops line breaks).
_LINE_BREAK = "\ue000"
_LITERAL = regex.compile(r'"(?:[^"]|"")*"')


def _keep_line_breaks(text: str) -> str:
    if "\n" not in text:
        return text
    return _LITERAL.sub(lambda m: m.group(0).replace("\n", _LINE_BREAK), text)


class _String(String):
    def compile(self):
        return super().compile().replace(_LINE_BREAK, "\n")


def is_double_negation(token) -> bool:
    """True for a unary run of signs with an even number of minus signs (``--x``, ``-+-x``).

    The library folds such a run into one unary plus, which leaves its operand as it is; the spreadsheet
    applies each minus (OpenFormula 6.4.4: the prefix minus takes the number of its operand), so ``--TRUE``
    is 1, ``--"3"`` is 3 and ``SUMPRODUCT(--(A1:A4="B"))`` counts the matches."""
    return token.name == "u+" and "-" in (token.attr.get("sum_minus") or "")


class _Signs(OperatorToken):
    def set_expr(self, *tokens):
        super().set_expr(*tokens)
        if is_double_negation(self):  # its own node: "+x" stands for the unary plus
            self.attr["expr"] = "--" + tokens[0].get_expr

    def compile(self):
        if not is_double_negation(self):
            return super().compile()
        from formulas.functions.operators import OPERATORS
        negate = OPERATORS["U-"]
        return lambda x: negate(negate(x))


def _tracking(token_class):
    """A filter that notes, on the parser, the text still to read before it tries its token."""
    def read(text, context, parser):
        parser.rest = text
        return token_class(text, context, parser)
    return read


class _Parser(formulas.Parser):
    filters = [_tracking({Number: _Number, String: _String, OperatorToken: _Signs}.get(f, f)) for f in formulas.Parser.filters]
    rest: str | None = None

    def ast(self, expression, context=None):
        return super().ast(_keep_line_breaks(expression), context)


def parser() -> formulas.Parser:
    """A new parser (its ``ast`` as the library's; ``.rest`` is the unread text after a failure)."""
    return _Parser()


def syntax_reason(formula: str, parser_used: formulas.Parser, exc: Exception) -> str:
    """Why ``formula`` could not be read and where (characters counted from 1, as typed), without the formula.

    >>> p = parser()
    >>> try:
    ...     p.ast("=SEM(12,, 0.9))")
    ... except Exception as exc:
    ...     print(syntax_reason("=SEM(12,, 0.9))", p, exc))
    the ')' at character 15 closes no '('
    """
    text = formula.strip().replace("\n", "")
    semis = [i for i, ch, depth in _outside_literals(text) if ch == ";" and depth == 0]
    if semis:
        return (f"the ';' at character {semis[0] + 1} is not an argument separator in a file (files store ',' "
                f"between arguments)")
    if isinstance(exc, ParenthesesError) or _unmatched(text) is not None:
        where = _unmatched(text)
        if where is not None:
            pos, ch = where
            return (f"the ')' at character {pos + 1} closes no '('" if ch == ")"
                    else f"the '(' at character {pos + 1} is never closed")
        return "parentheses do not match"
    rest = getattr(parser_used, "rest", None)
    if rest and text.endswith(rest):
        pos = len(text) - len(rest) + 1
        shown = rest if len(rest) <= 20 else rest[:20] + "…"
        return f"stops at character {pos}, at {shown!r}"
    return "it is not a complete formula"


def _unmatched(text: str) -> tuple[int, str] | None:
    """(index, bracket) of the first ')' that closes nothing, else of the last '(' never closed; None if they match."""
    opened = []
    for i, ch, _ in _outside_literals(text):
        if ch == "(":
            opened.append(i)
        elif ch == ")":
            if not opened:
                return i, ")"
            opened.pop()
    return (opened[-1], "(") if opened else None


def _outside_literals(text: str):
    """Yield (index, character, brace depth) for each character outside "strings" and 'sheet names'."""
    quote, depth = None, 0
    for i, ch in enumerate(text):
        if quote:
            if ch == quote:
                quote = None  # a doubled quote reopens at once on the next character
            continue
        if ch in "\"'":
            quote = ch
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth -= 1
        else:
            yield i, ch, depth


class TypedFormulaError(ValueError):
    """A typed formula whose separators cannot be read either way."""


def typed_formula(text: str) -> str:
    """``text`` with ``;`` between arguments turned into ``,`` (outside strings, sheet names and arrays).

    Spreadsheet apps show ``;`` as the argument separator in many language
    settings, files store ``,``. A formula that uses both at the top level is
    refused (``SEM(10;0,9)`` is probably a decimal comma).

    >>> typed_formula('=SEM(10; 0.9)')
    '=SEM(10, 0.9)'
    >>> typed_formula('=IF(A1="a;b"; 1; 2)')
    '=IF(A1="a;b", 1, 2)'
    >>> typed_formula('=SUM({1,2;3,4})')
    '=SUM({1,2;3,4})'
    """
    semis, commas = [], False
    for i, ch, depth in _outside_literals(text):
        if depth == 0 and ch == ";":
            semis.append(i)
        elif depth == 0 and ch == ",":
            commas = True
    if not semis:
        return text
    if commas:
        raise TypedFormulaError(
            f"the formula {text!r} uses both ';' and ',' between its parts; write ',' between arguments and '.' "
            f"in decimals (0.9, not 0,9)")
    chars = list(text)
    for i in semis:
        chars[i] = ","
    return "".join(chars)


def suggestions(name: str) -> list[str]:
    """The registered and standard names within a slip or two of ``name``, closest first (trueband's on a tie):
    the one rule of "did you mean" for every way in (see :func:`.standard_functions.close_names`).

    >>> suggestions("SME")
    ['SEM']
    """
    return close_names(name, most=2)


def did_you_mean(name: str) -> str:
    """`` (did you mean X or Y?)`` for a message, or an empty string."""
    found = suggestions(name)
    return f" (did you mean {' or '.join(found)}?)" if found else ""


def call_findings(tree) -> tuple[list[str], list[str]]:
    """What is wrong with the function calls of a compiled formula tree (:class:`.compile.Node`).

    Returns (unknown names, each with its "did you mean"; registered calls
    with too few or too many arguments, each with the function's signature).
    """
    unknown, counts = [], []
    for node in tree.walk():
        if node.kind != "fn" or node.name in ("ARRAY", "ARRAYROW"):
            continue
        registered = registered_name(node.name)
        if registered is None:
            if node.name not in standard_names() and not any(u.split(" ", 1)[0] == node.name for u in unknown):
                unknown.append(node.name + did_you_mean(node.name))
            continue
        spec = REGISTRY[registered]
        n = len(node.args)
        if n < spec.min_args or n > spec.max_args:
            need = f"{spec.min_args}" if spec.min_args == spec.max_args else f"{spec.min_args} to {spec.max_args}"
            counts.append(f"{spec.name} takes {need} arguments, got {n}: {spec.signature}")
    return unknown, counts


def choice_findings(tree) -> list[str]:
    """Constant text given to a registered argument of fixed words that is not one of them.

    ``SCORE_CI(A2, 5, 0.9, "top")`` gives ``['SCORE_CI: part must be one of "lower", "upper", got "top"']``:
    every cell of a fill would otherwise show ``#NUM!``. Only quoted text written in the formula is
    checked (a cell's value is known when the formula is computed); words match without regard to case.
    """
    found = []
    for node in tree.walk():
        if node.kind != "fn":
            continue
        registered = registered_name(node.name)
        if registered is None:
            continue
        spec = REGISTRY[registered]
        for arg, given in zip(spec.arguments, node.args):
            if not arg.choices or given.kind != "lit" or not isinstance(given.value, str):
                continue
            try:
                arg.coerce(given.value)
            except TruebandError as exc:
                found.append(f"{spec.name}: {exc}")
    return found
