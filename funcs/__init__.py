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

=====================  ===================================================================================
module                 topic
=====================  ===================================================================================
``scores``             measurement error and score interpretation; score bands
``reliability``        reliability from item data, item analysis (in a group, retest gain: ``reliability_groups``)
``agreement``          rater agreement: kappas, rwg (and, re-exported, the next two)
``intraclass``         intraclass correlations (rater agreement)
``krippendorff``       Krippendorff's alpha (rater agreement)
``validity``           validity coefficients and their corrections, group differences (d; from whole columns: ``validity_groups``)
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
``results``            estimates with confidence intervals and p values
=====================  ===================================================================================

>>> from trueband.funcs import call, cronbach_alpha
>>> round(call("SEM", 12, 0.91), 12)
3.6
>>> round(cronbach_alpha([[1, 2, 2], [2, 3, 3], [3, 3, 4], [4, 5, 4]]), 6)
0.948529
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
    intraclass,
    krippendorff,
    options,
    reliability,
    reliability_groups,
    results,
    scores,
    standard_setting,
    utility,
    validity,
    validity_groups,
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
from .agreement import *  # noqa: F401,F403  (the flat namespace: each module's __all__)
from .composite import *  # noqa: F401,F403
from .content import *  # noqa: F401,F403
from .cutscores import *  # noqa: F401,F403
from .decision_accuracy import *  # noqa: F401,F403
from .dif import *  # noqa: F401,F403
from .fairness import *  # noqa: F401,F403
from .impact import *  # noqa: F401,F403
from .impact_intervals import *  # noqa: F401,F403
from .impact_pooled import *  # noqa: F401,F403
from .intraclass import *  # noqa: F401,F403
from .krippendorff import *  # noqa: F401,F403
from .options import *  # noqa: F401,F403
from .reliability import *  # noqa: F401,F403
from .reliability_groups import *  # noqa: F401,F403
from .results import *  # noqa: F401,F403
from .scores import *  # noqa: F401,F403
from .standard_setting import *  # noqa: F401,F403
from .utility import *  # noqa: F401,F403
from .validity import *  # noqa: F401,F403
from .validity_groups import *  # noqa: F401,F403

_TOPICS = (agreement, composite, content, cutscores, decision_accuracy, dif, fairness, impact, impact_intervals, impact_pooled, intraclass, krippendorff, options, reliability, reliability_groups, results, scores, standard_setting, utility, validity, validity_groups)

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
