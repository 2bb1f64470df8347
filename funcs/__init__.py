"""trueband's functions: the math behind the spreadsheet.

Importing this package registers every spreadsheet function; call one by its
spreadsheet name with :func:`call`, or import its Python function from the
topic module:

=====================  ===================================================================================
module                 topic
=====================  ===================================================================================
``scores``             measurement error and score interpretation; score bands
``reliability``        reliability from item data, item analysis
``agreement``          rater agreement
``validity``           validity coefficients and their corrections, group differences (d)
``utility``            selection utility
``impact``             adverse impact: rates, ratio, four-fifths, z, Fisher
``impact_intervals``   adverse impact: ratio interval, odds ratio, flip count, small numbers, cuts
``impact_pooled``      adverse impact pooled across strata (the Mantel-Haenszel family)
``cutscores``          cut-score setting: Angoff
``standard_setting``   cut-score setting: Nedelsky, Ebel, Hofstee, Beuk, contrasting and borderline groups
``decision_accuracy``  conditional SEM, decision consistency and accuracy at a cut
``content``            content validity ratio (Lawshe)
``options``            item analysis from raw answers and a key
``dif``                item bias: differential item functioning
``fairness``           differential prediction
``composite``          several predictors combined
=====================  ===================================================================================

>>> from trueband.funcs import call
>>> round(call("SEM", 12, 0.91), 12)
3.6
"""

from . import (  # noqa: F401  (registers)
    agreement,
    composite,
    content,
    cutscores,
    decision_accuracy,
    dif,
    fairness,
    impact,
    impact_intervals,
    impact_pooled,
    options,
    reliability,
    scores,
    standard_setting,
    utility,
    validity,
)
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
