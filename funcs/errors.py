"""The project's error family and its one mapping to spreadsheet and HTTP codes.

Every function in :mod:`trueband.funcs` validates its inputs and raises one of
the classes below. Each class carries the spreadsheet error code a workbook
cell shows and the HTTP status the bridge answers with, so the adapters never
keep a table of their own:

=========================  ==========  ======  ==========================================
class                      sheet code  HTTP    raised when
=========================  ==========  ======  ==========================================
``ArgumentTypeError``      ``#VALUE!`` 400     wrong type: text where a number belongs,
                                               a blank required argument, a range where
                                               a single value belongs
``ArgumentCountError``     ``#VALUE!`` 400     too few or too many arguments
``DomainError``            ``#NUM!``   422     a number outside its valid range
``ZeroVarianceError``      ``#DIV/0!`` 422     a variance (or a count) that divides is zero
``InsufficientDataError``  ``#N/A``    422     too little data for the method
``UnknownFunctionError``   ``#NAME?``  404     no registered function has that name
=========================  ==========  ======  ==========================================

Messages name the argument and the rule and echo the bad value, e.g.
``reliability must be between 0 and 1, got 1.3``.
"""

from __future__ import annotations

__all__ = [
    "TruebandError",
    "ArgumentTypeError",
    "ArgumentCountError",
    "DomainError",
    "ZeroVarianceError",
    "InsufficientDataError",
    "UnknownFunctionError",
    "ERROR_CLASSES",
    "error_for_code",
]


class TruebandError(ValueError):
    """Base of every error the project raises on bad input.

    ``argument`` names the offending argument where there is one (``None``
    otherwise); ``code`` is the spreadsheet error code and ``http_status`` the
    HTTP status that the adapters use.
    """

    code = "#VALUE!"
    http_status = 400

    def __init__(self, message: str, *, argument: str | None = None):
        super().__init__(message)
        self.message = message
        self.argument = argument

    def to_dict(self) -> dict:
        """The JSON error body used by the HTTP bridge."""
        body = {"code": self.code, "message": self.message}
        if self.argument is not None:
            body["argument"] = self.argument
        return body


class ArgumentTypeError(TruebandError):
    """An argument of the wrong type.

    Text for a number, a blank, a range for a value, or a word not among an option's choices.
    """

    code = "#VALUE!"
    http_status = 400


class ArgumentCountError(TruebandError):
    """Too few or too many arguments for a function."""

    code = "#VALUE!"
    http_status = 400


class DomainError(TruebandError):
    """A number outside the range where the method is defined."""

    code = "#NUM!"
    http_status = 422


class ZeroVarianceError(TruebandError):
    """A variance or count that the method divides by is zero."""

    code = "#DIV/0!"
    http_status = 422


class InsufficientDataError(TruebandError):
    """Too few people, items, raters or complete rows for the method."""

    code = "#N/A"
    http_status = 422


class UnknownFunctionError(TruebandError):
    """No registered function has the requested name."""

    code = "#NAME?"
    http_status = 404


ERROR_CLASSES = (
    ArgumentTypeError,
    ArgumentCountError,
    DomainError,
    ZeroVarianceError,
    InsufficientDataError,
    UnknownFunctionError,
)


def error_for_code(code: str, message: str, *, argument: str | None = None) -> TruebandError:
    """Build the project error that stands for a spreadsheet error code.

    Used where an input cell already holds an error (``#DIV/0!`` in, the same
    code out). Codes without a class of their own become :class:`TruebandError`
    with that code.
    """
    for cls in ERROR_CLASSES:
        if cls.code == code and cls is not ArgumentCountError:
            return cls(message, argument=argument)
    err = TruebandError(message, argument=argument)
    err.code = code
    return err
