"""Function names in formulas: which are trueband's (the one home of "is this one of ours") and which are standard.

A registered function may be written in any letter case and with any of the
prefixes spreadsheet apps put before functions they do not know
(:data:`~trueband.funcs.registry.NAME_PREFIXES`, such as ``_xludf.``); every
part of trueband asks here whether a name or a formula is one of ours.

==================================  ==========================================================
name                                what
==================================  ==========================================================
:func:`registered_name`             the registry name behind a name as written, or None
:func:`is_registered`               whether a name as written is a registered function
:func:`bare_name`                   a name upper-cased with its app prefix taken off
:func:`uses_registered_function`    whether formula text calls a registered function
:func:`standard_names`              every name of the ``formulas`` engine's standard library
                                    (computed on first use: it imports the whole library)
==================================  ==========================================================

The standard library's modules are listed here too (:func:`library_modules`,
:func:`library_module_functions`), cheapest first, so the function table of
:mod:`.library` and the list of standard names load them the same way.
"""

from __future__ import annotations

import functools
import importlib
import re

from trueband.funcs.registry import NAME_PREFIXES, REGISTRY, normalize_name

__all__ = ["NAME_PREFIXES", "registered_name", "is_registered", "bare_name", "uses_registered_function",
           "standard_names", "library_modules", "library_module_functions"]


def registered_name(name: str) -> str | None:
    """The registry name behind a function name as written (any case, app prefixes, aliases), or None.

    >>> registered_name("_xludf.sem"), registered_name("SUM")
    ('SEM', None)
    """
    key = normalize_name(name)
    return key if key in REGISTRY else None


def is_registered(name: str) -> bool:
    """Whether a function name as written is a registered function (see :func:`registered_name`)."""
    return normalize_name(name) in REGISTRY


def bare_name(name: str) -> str:
    """``name`` upper-cased, without the app prefix it starts with (aliases are not resolved).

    >>> bare_name("_xlfn._xlws.Sme")
    'SME'
    """
    key = name.upper()
    for prefix in NAME_PREFIXES:
        if key.startswith(prefix):
            return key[len(prefix):]
    return key


# A quoted string (skipped), or a name, with an optional app prefix, followed by an opening bracket.
_PREFIX = "|".join(re.escape(prefix) for prefix in NAME_PREFIXES)
_NAME_CALL = re.compile(rf'"[^"]*"|((?:{_PREFIX})?[A-Za-z_][A-Za-z0-9_.]*)\s*\(', re.I)


def uses_registered_function(formula: str) -> bool:
    """True if the formula calls a registered function (any case, any app prefix; text in quotes ignored).

    >>> uses_registered_function('ROUND(_xludf.SEM(B1, B2), 2)')
    True
    >>> uses_registered_function('SUM(A1:A9) & "SEM("')
    False
    """
    return any(m.group(1) and is_registered(m.group(1)) for m in _NAME_CALL.finditer(formula))


#: The engine's modules of standard functions, cheapest to import first: ``.stat`` (and ``.comp``,
#: which imports it) load ``scipy.stats``, about a second, so they are imported only when a formula
#: uses a name no other module has. The library defines each name in one module only (a test checks
#: it), so the order of loading does not change what a name means.
_EXPENSIVE_MODULES = (".stat", ".comp")


def library_modules() -> list[str]:
    """The engine's modules of standard functions (relative to ``formulas.functions``), cheapest first."""
    from formulas.functions import SUBMODULES

    return [m for m in SUBMODULES if m not in _EXPENSIVE_MODULES] + [m for m in SUBMODULES if m in _EXPENSIVE_MODULES]


def library_module_functions(module: str) -> dict:
    """The function table of one of :func:`library_modules` (imports it)."""
    return importlib.import_module(module, "formulas.functions").FUNCTIONS


@functools.lru_cache(maxsize=1)
def standard_names() -> frozenset:
    """Every name of the engine's standard library (the first call imports all of it: about a second)."""
    from formulas.functions import FUNCTIONS as base

    names = set(base)
    for module in library_modules():
        names.update(library_module_functions(module))
    return frozenset(names)

