"""Helpers shared by the tests."""

from __future__ import annotations

import contextlib

import pytest

from trueband.funcs.errors import TruebandError


@contextlib.contextmanager
def raises_code(code: str, argument: str | None = None, match: str | None = None):
    """Expect a project error with this spreadsheet code (and argument name, and message pattern)."""
    with pytest.raises(TruebandError, match=match) as info:
        yield info
    assert info.value.code == code, f"expected {code}, got {info.value.code}: {info.value}"
    if argument is not None:
        assert info.value.argument == argument, f"expected argument {argument!r}, got {info.value.argument!r}"
        assert argument in info.value.message, f"message does not name {argument!r}: {info.value.message}"
