"""trueband's functions: the math behind the spreadsheet, and a flat namespace for Python.

Every public function of every topic module is importable from here, as
``scipy.stats`` offers its functions (``trueband.funcs.cronbach_alpha``,
``trueband.funcs.standard_error_of_measurement``); ``__all__`` lists them.
Importing this package registers every spreadsheet function; call one by its
spreadsheet name with :func:`call` (spreadsheet argument order, options by
position too), or down a column with :func:`call_column`.

The Python functions take data positionally and options (``part``,
``confidence``, ``level``, ...) by keyword. Ranges may be lists of rows, numpy
arrays or pandas DataFrames and Series (NaN read as a blank); elementwise
functions broadcast over arrays and Series. Where a method gives an estimate
with limits and a p value there is a result object with
``confidence_interval(confidence_level=0.95)``:
:func:`cronbach_alpha_result`, :func:`correlation_result`,
:func:`intraclass_correlation`, :func:`impact_ratio_result`.

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
``results``        estimates with confidence intervals and p values
=================  ==================================================

>>> from trueband.funcs import call, cronbach_alpha
>>> round(call("SEM", 12, 0.91), 12)
3.6
>>> round(cronbach_alpha([[1, 2, 2], [2, 3, 3], [3, 3, 4], [4, 5, 4]]), 6)
0.948529
"""

from . import (  # noqa: F401  (registers)
    agreement, cutscores, impact, intraclass, krippendorff, reliability, results, scores, utility, validity)
from .agreement import *  # noqa: F401,F403  (the flat namespace: each module's __all__)
from .cutscores import *  # noqa: F401,F403
from .errors import (  # noqa: F401
    ArgumentCountError,
    ArgumentTypeError,
    DomainError,
    InsufficientDataError,
    TruebandError,
    UnknownFunctionError,
    ZeroVarianceError,
)
from .impact import *  # noqa: F401,F403
from .intraclass import *  # noqa: F401,F403
from .krippendorff import *  # noqa: F401,F403
from .registry import REGISTRY, call, call_column, catalog, lookup  # noqa: F401
from .reliability import *  # noqa: F401,F403
from .results import *  # noqa: F401,F403
from .scores import *  # noqa: F401,F403
from .utility import *  # noqa: F401,F403
from .validity import *  # noqa: F401,F403

_TOPICS = (agreement, cutscores, impact, intraclass, krippendorff, reliability, results, scores, utility, validity)

__all__ = sorted(
    {name for module in _TOPICS for name in module.__all__}
    | {"REGISTRY", "call", "call_column", "catalog", "lookup"}
    | {"ArgumentCountError", "ArgumentTypeError", "DomainError", "InsufficientDataError", "TruebandError",
       "UnknownFunctionError", "ZeroVarianceError"})


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
