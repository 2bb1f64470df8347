"""A computing budget that a caller may set around a call, checked inside long loops.

======================  ==========================================================
name                    what it does
======================  ==========================================================
:func:`time_budget`     a context manager: the calls inside it may compute for at
                        most so many seconds
:func:`check_time`      raise :class:`BudgetExceeded` once the deadline has passed
:func:`check_cost`      raise it before a computation whose known cost would not
                        fit in the time that is left
:class:`BudgetExceeded` the one error; deliberately *not* a
                        :class:`~trueband.funcs.errors.TruebandError`
======================  ==========================================================

The deadline lives in a context variable, so it belongs to the request (the
thread, or the task) that set it, and outside :func:`time_budget` there is no
budget at all: :func:`check_time` is then one dictionary look-up and a
comparison with ``None``, cheap enough for any loop. The HTTP bridge sets a
budget per request and answers :class:`BudgetExceeded` with ``422
too_much_work``; the command line, the workbook evaluator and the add-in set
none.

:class:`BudgetExceeded` is not one of the function errors on purpose: a batch
answers a function's error in the failing call's place and a column in the
failing row's place, whereas a spent budget must stop the whole request.
"""

from __future__ import annotations

import contextlib
import contextvars
import time

__all__ = ["BudgetExceeded", "time_budget", "check_time", "check_cost", "seconds_left",
           "OPERATIONS_PER_SECOND"]

#: A deliberately high rate for a cost estimate (simple numpy operations per second): a
#: computation is refused before it starts only when even this rate could not finish it in time,
#: so an estimate never refuses work that would have fitted; the deadline checks catch the rest.
OPERATIONS_PER_SECOND = 5e8

_DEADLINE: contextvars.ContextVar[tuple[float, float] | None] = contextvars.ContextVar(
    "trueband_deadline", default=None)


class BudgetExceeded(Exception):
    """The computing budget of the current request is spent (or would be by a computation's known cost)."""

    def __init__(self, message: str, seconds: float):
        super().__init__(message)
        self.message = message
        self.seconds = seconds


@contextlib.contextmanager
def time_budget(seconds: float | None, *, since: float | None = None):
    """Calls inside may compute for at most ``seconds`` (``None``: no budget), counted from ``since``
    (a ``time.perf_counter()`` reading, such as when a request arrived; default now).

    >>> with time_budget(60):
    ...     check_time()   # well inside the budget: nothing happens
    >>> check_time()       # no budget outside
    """
    if seconds is None:
        yield
        return
    start = time.perf_counter() if since is None else since
    token = _DEADLINE.set((start + float(seconds), float(seconds)))
    try:
        yield
    finally:
        _DEADLINE.reset(token)


def seconds_left() -> float | None:
    """Seconds until the deadline (negative once past it), or ``None`` when there is no budget."""
    budget = _DEADLINE.get()
    return None if budget is None else budget[0] - time.perf_counter()


def check_time() -> None:
    """Raise :class:`BudgetExceeded` when the current budget is spent; call it inside long loops."""
    budget = _DEADLINE.get()
    if budget is not None and time.perf_counter() > budget[0]:
        raise BudgetExceeded(f"the computation needs more than the {budget[1]:g} s budget", budget[1])


def check_cost(operations: float, what: str) -> None:
    """Refuse, before starting, a computation of ``operations`` simple steps that cannot fit the time left.

    >>> with time_budget(1):
    ...     try:
    ...         check_cost(1e15, "a square over 3e7 distinct values")
    ...     except BudgetExceeded as exc:
    ...         print(exc)
    a square over 3e7 distinct values needs about 2e+06 s, more than the 1 s budget
    """
    budget = _DEADLINE.get()
    if budget is None:
        return
    needed = operations / OPERATIONS_PER_SECOND
    if time.perf_counter() + needed > budget[0]:
        raise BudgetExceeded(f"{what} needs about {needed:.0g} s, more than the {budget[1]:g} s budget", budget[1])
