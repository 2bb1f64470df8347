"""What ``trueband eval`` computes: one formula of literal arguments, evaluated without a workbook.

:func:`evaluate_expression` reads the formula as ``trueband check`` does (unknown names are
``#NAME?``), evaluates it with the formula engine and trueband's functions installed, and returns
its value, or raises the failing function's own error.
"""

from __future__ import annotations

import numpy as np
import schedula
from formulas.functions import XlError

from trueband.funcs.errors import TruebandError, error_for_code

from ..formulas.compile import FormulaSyntaxError, compile_formula
from ..formulas.library import ERROR_LOG, install, message_for
from ..formulas.text import TypedFormulaError, call_findings, parser, typed_formula

__all__ = ["UnreadableFormula", "evaluate_expression"]


class UnreadableFormula(TruebandError):
    """A formula that cannot be parsed, or that cannot be evaluated without a workbook."""


def evaluate_expression(expression: str):
    """Evaluate one formula of literal arguments, e.g. ``=SEM(12, 0.91)``.

    Returns the value; raises the project error of a failing registered
    function (with its message), or :class:`UnreadableFormula` for a formula
    that cannot be evaluated here.
    """
    install()
    text = expression.strip()
    if not text.startswith("="):
        text = "=" + text
    typed = text  # as typed (with "=" added): messages show it; ';' -> ',' keeps every position
    try:
        text = typed_formula(text)
    except TypedFormulaError as exc:
        raise UnreadableFormula(str(exc)) from None
    try:
        unknown, _ = call_findings(compile_formula(text, 1, 1).tree)
    except FormulaSyntaxError as exc:
        raise UnreadableFormula(f"cannot read the formula {typed!r}: {exc.reason}") from None
    if unknown:
        raise error_for_code("#NAME?", f"unknown function {', '.join(unknown)} in {expression}")
    ERROR_LOG.clear()  # before compiling: the engine folds constant calls at compile time
    try:
        fn = parser().ast(text)[1].compile()
    except Exception as exc:  # the engine's own exception types vary by version
        raise UnreadableFormula(f"cannot evaluate {expression!r}: {exc}") from None
    if fn.inputs:
        refs = ", ".join(fn.inputs)
        raise UnreadableFormula(f"eval takes literal arguments only; the formula refers to {refs}")
    try:
        value = fn()
    except schedula.DispatcherError as exc:
        cause = exc.args[2] if len(exc.args) > 2 else exc
        if isinstance(cause, NotImplementedError):
            raise error_for_code("#NAME?", f"the formula uses a function that is not available: {expression}") from None
        raise UnreadableFormula(f"cannot evaluate {expression!r}: {cause!r}") from None
    if isinstance(value, np.ndarray):
        value = value.ravel()[0] if value.size == 1 else value.tolist()
    if isinstance(value, XlError):
        if ERROR_LOG.entries:
            name, err = ERROR_LOG.entries[-1]
            raise error_for_code(str(value), message_for(name, err), argument=err.argument)
        raise error_for_code(str(value), f"the formula evaluates to {value}")
    if isinstance(value, np.generic):
        value = value.item()
    return value
