"""The one registry of spreadsheet functions.

Every spreadsheet-facing function is a plain Python function in a topic module
(:mod:`~trueband.funcs.scores`, :mod:`~trueband.funcs.reliability`, ...)
decorated once with :func:`spreadsheet`. The decorator reads everything else
from the function itself:

* the arguments, their order, which are optional and their defaults: from the
  signature (spreadsheet order is signature order, keyword-only options
  included);
* each argument's kind: from its annotation (``float`` number, ``int`` whole
  number, ``bool`` logical, ``Literal[...]`` one of some words, ``Range`` a
  2-D range, ``Label`` one category label, a number or a text);
* an optional argument whose default is ``None`` may be left out altogether:
  the body receives ``None`` (for a method with an optional step, such as an
  adjustment that needs two further figures);
* the one-line description and each argument's description: from the
  numpydoc docstring.

The workbook processor, the HTTP bridge, the CLI catalog and the generated
docs all read :data:`REGISTRY`; none of them knows any single function.

Calling through the registry (or the decorated function directly) converts
scalar arguments to their kinds with the project's messages, fills defaults
for blank optional arguments, and checks the result: a non-finite number
never leaves a function silently.
"""

from __future__ import annotations

import dataclasses
import difflib
import functools
import inspect
import math
import re
import sys
import typing
from typing import Any, Callable, Literal, Mapping, Sequence

import numpy as np

from ._budget import check_time
from . import _validate as v
from ._columns import evaluate_rows, number_columns
from .errors import ArgumentCountError, ArgumentTypeError, DomainError, TruebandError, UnknownFunctionError

__all__ = [
    "Argument",
    "SpreadsheetFunction",
    "REGISTRY",
    "ALIASES",
    "RESULT_KINDS",
    "spreadsheet",
    "lookup",
    "call",
    "call_column",
    "catalog",
    "normalize_name",
    "NAME_PREFIXES",
]

REQUIRED = inspect.Parameter.empty

#: Result kinds: Python type and the closed range every result must lie in.
RESULT_KINDS: dict[str, tuple[type, float | None, float | None]] = {
    "number": (float, None, None),
    "nonnegative number": (float, 0.0, None),
    "proportion": (float, 0.0, 1.0),
    "probability": (float, 0.0, 1.0),
    "correlation": (float, -1.0, 1.0),
    "coefficient": (float, None, 1.0),  # reliabilities and agreement indices: at most 1, may be negative
    "percent": (float, 0.0, 100.0),
    "positive integer": (int, 1, None),
    "integer": (int, None, None),
    "boolean": (bool, None, None),
    "text": (str, None, None),  # a category word (e.g. an ETS DIF class "A", "B" or "C")
}

#: Prefixes that spreadsheet apps put before function names they do not know.
NAME_PREFIXES = ("_XLUDF.", "_XLFN._XLWS.", "_XLFN.", "_XLWS.", "COM.MICROSOFT.", "ORG.OPENOFFICE.")


@dataclasses.dataclass(frozen=True)
class Argument:
    name: str
    kind: str  # "number", "integer", "boolean", "text", "label", "range"
    default: Any = REQUIRED
    choices: tuple[str, ...] | None = None
    description: str = ""

    @property
    def required(self) -> bool:
        return self.default is REQUIRED

    def to_dict(self) -> dict:
        d: dict[str, Any] = {"name": self.name, "kind": self.kind}
        if not self.required:
            d["default"] = self.default
        if self.choices:
            d["choices"] = list(self.choices)
        if self.description:
            d["description"] = self.description
        return d

    def coerce(self, value):
        """Convert a scalar argument to its kind (ranges pass through to the function)."""
        if value is None and self.default is None:
            return None  # an optional argument without a default value, left out
        if self.kind == "range":
            if value is None:
                raise ArgumentTypeError(f"{self.name} is blank; it must be a range", argument=self.name)
            return value
        if self.kind == "number":
            return v.number(self.name, value)
        if self.kind == "integer":
            return v.integer(self.name, value)
        if self.kind == "boolean":
            return v.boolean(self.name, value)
        if self.kind == "label":
            return v.label(self.name, value)
        if self.choices:
            return v.choice(self.name, value, self.choices)
        return v.text(self.name, value)


@dataclasses.dataclass(frozen=True)
class SpreadsheetFunction:
    name: str
    body: Callable  # the undecorated function (used with arrays on the column path)
    arguments: tuple[Argument, ...]
    returns: str
    description: str
    reference: str
    elementwise: frozenset[str]  # number/integer arguments the body accepts as float arrays
    topic: str
    python_name: str
    aliases: tuple[str, ...] = ()  # other spreadsheet names (e.g. one a cell can hold where NAME looks like a cell)

    @property
    def min_args(self) -> int:
        return sum(a.required for a in self.arguments)

    @property
    def max_args(self) -> int:
        return len(self.arguments)

    @property
    def signature(self) -> str:
        parts = [a.name if a.required else f"[{a.name}]" for a in self.arguments]
        return f"{self.name}({', '.join(parts)})"

    def bind(self, args: Sequence = (), kwargs: Mapping | None = None) -> dict:
        """Positional spreadsheet arguments (and/or named ones) as a name → value map."""
        kwargs = dict(kwargs or {})
        if len(args) > self.max_args:
            raise ArgumentCountError(
                f"{self.name} takes at most {self.max_args} arguments, got {len(args)}: {self.signature}")
        names = [a.name for a in self.arguments]
        bound = dict(zip(names, args))
        for key, value in kwargs.items():
            if key not in names:
                raise ArgumentCountError(f"{self.name} has no argument named {key!r}: {self.signature}", argument=key)
            if key in bound:
                raise ArgumentCountError(f"{self.name} got {key} twice", argument=key)
            bound[key] = value
        for arg in self.arguments:
            if bound.get(arg.name) is None and not arg.required:
                bound[arg.name] = arg.default  # a blank optional argument takes its default
            elif arg.name not in bound:
                raise ArgumentCountError(
                    f"{self.name} needs {arg.name} (at least {self.min_args} arguments): {self.signature}",
                    argument=arg.name)
        return bound

    def coerced(self, bound: Mapping) -> dict:
        return {a.name: a.coerce(bound[a.name]) for a in self.arguments}

    def check_result(self, value):
        """Convert a result to its declared kind and refuse non-finite or out-of-range values."""
        kind, low, high = RESULT_KINDS[self.returns]
        if kind is bool:
            return bool(value)
        if kind is str:
            if not isinstance(value, str):
                raise TypeError(f"{self.name} returned {type(value).__name__}, not text")
            return value
        if isinstance(value, np.ndarray):
            value = value.item() if value.ndim == 0 else value
        try:
            x = float(value)
        except (TypeError, ValueError):
            raise TypeError(f"{self.name} returned {type(value).__name__}, not a number") from None
        if not math.isfinite(x):
            raise DomainError(f"{self.name} has no finite result for these inputs")
        # A result a rounding error outside its closed range is clipped; a real excursion is a bug.
        if low is not None and x < low:
            if x < low - 1e-9:
                raise AssertionError(f"{self.name} returned {x}, below its range {low}")
            x = low
        if high is not None and x > high:
            if x > high + 1e-9:
                raise AssertionError(f"{self.name} returned {x}, above its range {high}")
            x = high
        return int(round(x)) if kind is int else x

    def check_results(self, values: np.ndarray) -> list:
        """:meth:`check_result` for a whole array at once (the column path)."""
        kind, low, high = RESULT_KINDS[self.returns]
        if kind is bool:
            return np.asarray(values, dtype=bool).tolist()
        if kind is str:
            return [self.check_result(value) for value in np.asarray(values, dtype=object).ravel().tolist()]
        x = np.asarray(values, dtype=float)
        if not np.isfinite(x).all():
            raise DomainError(f"{self.name} has no finite result for these inputs")
        if (low is not None and (x < low - 1e-9).any()) or (high is not None and (x > high + 1e-9).any()):
            raise AssertionError(f"{self.name} returned a value outside its range [{low}, {high}]")
        if low is not None or high is not None:
            x = np.clip(x, low, high)
        # Python ints, not int64: a count can exceed the 64-bit range
        return [int(round(value)) for value in x.tolist()] if kind is int else x.tolist()

    def __call__(self, *args, **kwargs):
        bound = self.bind(args, kwargs)
        with np.errstate(all="ignore"):  # overflow and the like surface as a non-finite result, refused below
            value = self.body(**self.coerced(bound))
        return self.check_result(value)

    @functools.cached_property
    def cell_call(self) -> Callable[[Sequence], Any]:
        """``self(*args)`` for positional arguments, with less work per call (a live spreadsheet cell
        calls this once per recomputation).

        The same binding, conversion, defaults, errors, numpy error state and result check as
        :meth:`__call__`; the per-argument steps are looked up once.

        >>> REGISTRY["SEM"].cell_call((10, 0.75))
        5.0
        """
        steps = tuple((a.name, a.coerce, a.required, a.default) for a in self.arguments)
        n_max, body, check = len(steps), self.body, self.check_result
        n_needed = max((i + 1 for i, a in enumerate(self.arguments) if a.required), default=0)
        errstate = np.errstate

        def call(args: Sequence):
            n = len(args)
            if n > n_max or n < n_needed:
                self.bind(args)  # raises the count error bind raises, before any argument is converted
            kwargs = {}
            for i, (name, coerce, required, default) in enumerate(steps):
                value = args[i] if i < n else None
                if value is None and not required:
                    value = default  # a blank optional argument takes its default, as bind does
                kwargs[name] = coerce(value)
            with errstate(all="ignore"):
                return check(body(**kwargs))

        return call

    @property
    def caution(self) -> str | None:
        """The topic module's ``CAUTION`` sentence, where it has one (e.g. adverse impact)."""
        return getattr(sys.modules.get(self.body.__module__), "CAUTION", None)

    def to_dict(self) -> dict:
        entry = {
            "name": self.name,
            "arguments": [a.to_dict() for a in self.arguments],
            "returns": self.returns,
            "description": self.description,
            "reference": self.reference,
            "topic": self.topic,
            "python": self.python_name,
            "elementwise": sorted(self.elementwise),
        }
        if self.aliases:
            entry["aliases"] = list(self.aliases)
        if self.caution:
            entry["caution"] = self.caution
        return entry


REGISTRY: dict[str, SpreadsheetFunction] = {}

#: Further spreadsheet names → the registered name (see ``aliases`` of :func:`spreadsheet`).
ALIASES: dict[str, str] = {}

_KIND_OF = {float: "number", int: "integer", bool: "boolean", str: "text", v.Range: "range", v.Label: "label"}


def _argument_docs(doc: str) -> dict[str, str]:
    """Each entry of a numpydoc ``Parameters`` section: its first paragraph, without the final full stop."""
    m = re.search(r"^\s*Parameters\s*\n\s*-{3,}\s*\n(.*?)(?:\n\s*\n\s*[A-Z][A-Za-z ]+\n\s*-{3,}|\Z)", doc, re.S | re.M)
    if not m:
        return {}
    out: dict[str, list[str]] = {}
    current = None
    lines = m.group(1).splitlines()
    base = min((len(l) - len(l.lstrip()) for l in lines if l.strip()), default=0)
    for line in lines:
        if not line.strip():
            current = None
            continue
        indent = len(line) - len(line.lstrip())
        if indent == base:
            current = line.split(":")[0].strip()
            out[current] = []
        elif current:
            out[current].append(line.strip())
    # The whole first paragraph: a split at the first "." or ";" cut "(e.g. 0.3)" and "(one row or column; ...)"
    return {name: " ".join(words).rstrip(".;") for name, words in out.items()}


def _kind(annotation) -> tuple[str, tuple[str, ...] | None]:
    if typing.get_origin(annotation) is Literal:
        return "text", tuple(typing.get_args(annotation))
    try:
        return _KIND_OF[annotation], None
    except KeyError:
        raise TypeError(f"unsupported argument annotation {annotation!r}") from None


def spreadsheet(name: str, *, returns: str, reference: str, elementwise: bool | Sequence[str] = False,
                aliases: Sequence[str] = ()):
    """Register a function under its spreadsheet name.

    ``returns`` is a key of :data:`RESULT_KINDS`; ``reference`` the published
    source of the method; ``elementwise`` says the function body accepts float
    arrays (numpy broadcasting) for all its ``float`` arguments (``True``) or
    for the ones named (``int`` arguments too), so a whole column can be
    computed in one call. ``aliases`` are further spreadsheet names for the same
    function: a name such as ``KR20`` reads as a cell address in spreadsheet
    apps, so a workbook cell needs ``KR_20``.
    """
    if name != name.upper() or not re.fullmatch(r"[A-Z][A-Z0-9_]*", name):
        raise ValueError(f"spreadsheet names are UPPER_CASE words, got {name!r}")
    if returns not in RESULT_KINDS:
        raise ValueError(f"unknown result kind {returns!r}")

    for alias in aliases:
        if not re.fullmatch(r"[A-Z][A-Z0-9_]*", alias):
            raise ValueError(f"spreadsheet names are UPPER_CASE words, got {alias!r}")

    def decorate(body: Callable) -> Callable:
        for key in (name, *aliases):
            if key in REGISTRY or key in ALIASES:
                raise ValueError(f"{key} is registered twice")
        hints = _type_hints(body)
        doc = inspect.getdoc(body) or ""
        arg_docs = _argument_docs(doc)
        arguments = []
        for p in inspect.signature(body).parameters.values():
            kind, choices = _kind(hints[p.name])
            arguments.append(Argument(p.name, kind, p.default, choices, arg_docs.get(p.name, "")))
        description = doc.split("\n\n")[0].replace("\n", " ").strip()
        # True means every float argument; whole-number arguments take part only where named.
        numbers = {a.name for a in arguments if a.kind in ("number", "integer")}
        vector = {a.name for a in arguments if a.kind == "number"} if elementwise is True else set(elementwise or ())
        if not vector <= numbers:
            raise ValueError(f"{name}: elementwise arguments must be number arguments, got {sorted(vector - numbers)}")
        spec = SpreadsheetFunction(
            name=name, body=body, arguments=tuple(arguments), returns=returns,
            description=description, reference=reference, elementwise=frozenset(vector),
            topic=_topic(body), python_name=body.__name__, aliases=tuple(aliases))
        REGISTRY[name] = spec
        ALIASES.update({alias: name for alias in aliases})
        wrapper = python_function(spec)
        wrapper.spreadsheet = spec
        return wrapper

    return decorate


def _topic(body: Callable) -> str:
    """The catalog topic: the module's ``TOPIC`` where a method family has a module of its own
    (``intraclass`` is filed under ``agreement``), else the module's name."""
    module = body.__module__
    return getattr(sys.modules.get(module), "TOPIC", None) or module.rsplit(".", 1)[-1]


def python_function(spec: SpreadsheetFunction) -> Callable:
    """The Python face of a registered function: options keyword-only, arrays broadcast.

    The same checks and errors as the spreadsheet path (:meth:`SpreadsheetFunction.__call__`), with
    two differences a Python caller expects: arguments after the ``*`` of the signature (the
    options: ``part``, ``confidence``, ``level``, ...) must be given by keyword; and where the
    function is elementwise, a list, numpy array or pandas Series for its number arguments gives an
    array of results (a Series, with the same index, for a Series), computed as
    :func:`call_column` computes a column. A plain call still returns a Python number. An element
    the function refuses (NaN included: no silent NaN) raises that element's error, naming its position.
    """
    body = spec.body
    params = inspect.signature(body).parameters.values()
    positional = tuple(p.name for p in params if p.kind is inspect.Parameter.POSITIONAL_OR_KEYWORD)
    options = tuple(p.name for p in params if p.kind is inspect.Parameter.KEYWORD_ONLY)

    @functools.wraps(body)
    def wrapper(*args, **kwargs):
        if len(args) > len(positional):
            extra = options[: len(args) - len(positional)]
            given = ", ".join(f"{o}={v.show(a)}" for o, a in zip(extra, args[len(positional):]))
            hint = f"; give the options by keyword, e.g. {given}" if given else ""
            raise ArgumentCountError(
                f"{body.__name__} takes {len(positional)} positional arguments ({', '.join(positional)}), "
                f"got {len(args)}{hint}", argument=extra[0] if extra else None)
        if spec.elementwise:
            named = {**dict(zip(positional, args)), **kwargs}
            varying = {k: x for k, x in named.items() if k in spec.elementwise and _is_sequence(x)}
            if varying:
                return _broadcast_call(spec, named, varying)
        return spec(*args, **kwargs)

    return wrapper


def _is_sequence(value) -> bool:
    """A list, tuple, numpy array (not 0-d) or pandas Series given for one number argument."""
    if isinstance(value, (list, tuple)):
        return True
    return getattr(value, "ndim", 0) >= 1 and (isinstance(value, np.ndarray) or _is_series(value))


def _broadcast_call(spec: SpreadsheetFunction, named: dict, varying: dict):
    """An elementwise function over broadcast arrays; the first failing element's error is raised."""
    series = _first_series(varying)
    arrays = {}
    for key, x in varying.items():
        arr = np.asarray(x.to_numpy() if _is_series(x) else x)
        if arr.dtype == object or arr.dtype.kind not in "fiub":
            arr = np.asarray(x, dtype=object)
        arrays[key] = arr
    try:
        shaped = np.broadcast_arrays(*arrays.values())
    except ValueError:
        shapes = ", ".join(f"{k} {a.shape}" for k, a in arrays.items())
        raise ArgumentTypeError(f"the arrays given do not broadcast to one shape: {shapes}") from None
    shape = shaped[0].shape
    each = {k: a.ravel() for k, a in zip(arrays, shaped)}
    same = {k: x for k, x in named.items() if k not in each}
    rows = _column_rows(spec, each, same)
    for i, row in enumerate(rows):
        if isinstance(row, TruebandError):
            where = tuple(int(j) for j in np.unravel_index(i, shape)) if len(shape) > 1 else i
            raise type(row)(f"{row.message} (element {where})", argument=row.argument)
    kind = RESULT_KINDS[spec.returns][0]
    values = np.array(rows, dtype=bool if kind is bool else float if kind is float else None).reshape(shape)
    return values if series is None else type(series)(values, index=series.index)


_EVALUATED: dict[tuple[str, str], object] = {}


def _type_hints(body: Callable) -> dict[str, object]:
    """The argument annotations of ``body``, evaluated as ``typing.get_type_hints`` does; each distinct
    annotation text of a module is evaluated once (the topic modules repeat a handful of them, and
    evaluating every one again was most of the package's import time)."""
    out = {}
    for name, annotation in body.__annotations__.items():
        if name == "return":
            continue
        if isinstance(annotation, str):
            key = (body.__module__, annotation)
            if key not in _EVALUATED:
                _EVALUATED[key] = eval(annotation, body.__globals__)  # noqa: S307 (our own annotations)
            annotation = _EVALUATED[key]
        out[name] = annotation
    return out


def normalize_name(name: str) -> str:
    """Upper-case a function name, strip the prefixes spreadsheet apps add, and resolve an alias."""
    key = name.strip().upper()
    for prefix in NAME_PREFIXES:
        if key.startswith(prefix):
            key = key[len(prefix):]
            break
    return ALIASES.get(key, key)


def lookup(name: str) -> SpreadsheetFunction:
    """The registered function of that spreadsheet name (any case, any app prefix)."""
    if not isinstance(name, str):
        raise UnknownFunctionError(f"function name must be text, got {v.show(name)}")
    key = normalize_name(name)
    try:
        return REGISTRY[key]
    except KeyError:
        close = difflib.get_close_matches(key, [*REGISTRY, *ALIASES], n=3, cutoff=0.6)
        hint = f"did you mean {' or '.join(close)}? " if close else ""
        raise UnknownFunctionError(f"no function named {name.strip()!r}; {hint}see `trueband functions`") from None


def call(name: str, *args, **kwargs):
    """Call a registered function by its spreadsheet name.

    >>> call("SEM", 10, 0.75)
    5.0
    """
    return lookup(name)(*args, **kwargs)


def _column_length(each: Mapping[str, Sequence]) -> int:
    lengths = {k: len(col) for k, col in each.items()}
    if len(set(lengths.values())) > 1:
        raise ArgumentTypeError(f"columns differ in length: {lengths}")
    return next(iter(lengths.values()), 0)


def _is_series(value) -> bool:
    """A pandas Series, recognised by its attributes (pandas is not a dependency of trueband)."""
    return hasattr(value, "index") and hasattr(value, "to_numpy") and getattr(value, "ndim", 0) == 1


def _first_series(each: Mapping[str, Any]):
    """The first pandas Series among the columns (None if none); every other Series must share its index."""
    first = None
    for key, col in each.items():
        if _is_series(col):
            if first is None:
                first = col
            elif not first.index.equals(col.index):
                raise ArgumentTypeError(f"the Series for {key} has another index than the first Series",
                                        argument=key)
    return first


def call_column(name: str, each: Mapping[str, Sequence], same: Mapping[str, Any] | None = None):
    """The same function down a column: ``each`` maps argument names to equal-length
    sequences, ``same`` holds the arguments shared by every row.

    Returns one entry per row: the value, or the :class:`TruebandError` for that
    row; a list, or a pandas Series with the same index when the columns are
    Series. Elementwise functions run as whole-array numpy calls
    (:func:`trueband.funcs._columns.evaluate_rows`); a failing block is split in
    halves until the failing rows are isolated, so one bad row costs a few extra
    array calls, not a Python call per row.

    >>> call_column("SEM", {"sd": [10, 20, "x"]}, {"reliability": 0.75})[:2]
    [5.0, 10.0]
    """
    fn = lookup(name)
    same = dict(same or {})
    if not each:
        raise ArgumentTypeError("each must name at least one argument that varies by row")
    series = _first_series(each)
    if series is None:
        return _column_rows(fn, each, same)
    # positions, not labels: the values are read in order and the index is put back on the result
    rows = _column_rows(fn, {k: (c.to_numpy() if _is_series(c) else c) for k, c in each.items()}, same)
    return type(series)(rows, index=series.index)


def _column_rows(fn: SpreadsheetFunction, each: Mapping[str, Sequence], same: dict) -> list:
    n = _column_length(each)
    for key in each:
        if key in same:
            raise ArgumentCountError(f"{key} is given both per row and for all rows", argument=key)
    if n == 0:
        return []

    def one(i: int):
        check_time()  # a budget set by the caller (the HTTP bridge) stops a long column between rows
        try:
            return fn(**same, **{k: col[i] for k, col in each.items()})
        except TruebandError as exc:
            return exc

    if not set(each) <= fn.elementwise:
        return [one(i) for i in range(n)]

    # Shared arguments are bound and coerced once. If that fails every row fails; the rows are
    # then called one by one so each reports the error a single call would (argument order decides).
    try:
        probe = fn.bind((), {**same, **{k: 0.0 for k in each}})
        fixed = {a.name: a.coerce(probe[a.name]) for a in fn.arguments if a.name not in each}
    except TruebandError:
        return [one(i) for i in range(n)]
    whole = {a.name for a in fn.arguments if a.kind == "integer"}
    arrays, ok = number_columns(each, whole, n)
    return evaluate_rows(fn.body, fn.check_results, fixed, arrays, ok, one).tolist()


#: The topics in the order a validation study runs (scores and their reliability first, the cut last), each
#: with the title the catalog shows; a topic missing here comes after these, by name.
TOPICS = {
    "scores": "Measurement error and score interpretation",
    "reliability": "Reliability from item data and item analysis",
    "options": "Item analysis from raw answers and a key",
    "agreement": "Rater agreement",
    "content": "Content validity",
    "validity": "Validity and its corrections",
    "composite": "Several predictors combined",
    "utility": "Selection utility",
    "impact": "Adverse impact",
    "impact_intervals": "Adverse impact: intervals, odds ratio, flip count, small numbers",
    "impact_pooled": "Adverse impact pooled across strata (sites, years, job groups)",
    "fairness": "Differential prediction",
    "dif": "Item bias (differential item functioning)",
    "cutscores": "Cut scores: Angoff",
    "standard_setting": "Cut scores: other standard-setting methods",
    "decision_accuracy": "Measurement error and decisions at the cut",
}


def topic_title(topic: str) -> str:
    """The catalog's title of a topic (its module name where it has none)."""
    return TOPICS.get(topic, topic)


def catalog() -> list[dict]:
    """Every registered function as a dict, by topic in :data:`TOPICS` order, then by name (for the CLI, HTTP
    and docs)."""
    order = {topic: i for i, topic in enumerate(TOPICS)}
    return [REGISTRY[k].to_dict()
            for k in sorted(REGISTRY, key=lambda k: (order.get(REGISTRY[k].topic, len(order)), REGISTRY[k].topic, k))]
