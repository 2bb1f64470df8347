"""trueband's functions: the math behind the spreadsheet.

Importing this package registers every spreadsheet function; call one by its
spreadsheet name with :func:`call`, or import its Python function from the
topic module:

=================  ==================================================
module             topic
=================  ==================================================
``scores``         measurement error and score interpretation
``reliability``    reliability from item data, item analysis
``agreement``      rater agreement: kappas, rwg (and, re-exported, the next two)
``intraclass``     intraclass correlations (rater agreement)
``krippendorff``   Krippendorff's alpha (rater agreement)
``validity``       validity coefficients and their corrections
``utility``        selection utility
``impact``         adverse impact
``cutscores``      cut-score setting
=================  ==================================================

>>> from trueband.funcs import call
>>> round(call("SEM", 12, 0.91), 12)
3.6
"""

from . import (  # noqa: F401  (registers)
    agreement, cutscores, impact, intraclass, krippendorff, reliability, scores, utility, validity)
from .errors import (  # noqa: F401
    ArgumentCountError,
    ArgumentTypeError,
    DomainError,
    InsufficientDataError,
    TruebandError,
    UnknownFunctionError,
    ZeroVarianceError,
)
from .registry import REGISTRY, call, call_column, catalog, lookup  # noqa: F401


def __getattr__(name: str):
    # The version is read from the installed metadata on first use (importlib.metadata costs start-up time).
    if name == "__version__":
        from importlib import metadata

        try:
            version = metadata.version("trueband")
        except metadata.PackageNotFoundError:  # running from a source tree that was never installed
            version = "0+unknown"
        globals()["__version__"] = version
        return version
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
