"""The command line's promise to scripts: no command ends in a traceback; an unexpected problem is one line on
stderr and exit code 2 (the codes are documented in trueband.bridge.cli)."""

from __future__ import annotations

import errno

import pytest

from trueband.bridge import cli
from trueband.funcs.errors import DomainError


def _failing(exc):
    def handler(args):
        raise exc
    return handler


@pytest.mark.parametrize("exc, words", [
    (KeyError("Sheet9"), ["unexpected problem", "KeyError", "'Sheet9'", "TRUEBAND_TRACEBACK=1"]),
    (RuntimeError("a\nb  c " + "word " * 200), ["RuntimeError: a b c word", "…"]),
    (PermissionError(errno.EACCES, "Permission denied", "C:\\hr\\scores.xlsx"),
     ["cannot use a file (C:\\hr\\scores.xlsx): Permission denied"]),
    (DomainError("reliability must be between 0 and 1, got 1.3", argument="reliability"),
     ["reliability must be between 0 and 1, got 1.3"]),
    (MemoryError(), ["not enough memory"]),
])
def test_an_unexpected_problem_is_one_line_and_exit_2(monkeypatch, capsys, exc, words):
    parser = cli.build_parser()
    args = parser.parse_args(["functions"])
    monkeypatch.setattr(cli, "build_parser", lambda: _Fixed(parser, args, _failing(exc)))
    monkeypatch.delenv("TRUEBAND_TRACEBACK", raising=False)
    assert cli.main(["functions"]) == cli.EXIT_FAILED
    captured = capsys.readouterr()
    err = captured.err.strip()
    assert len(err.splitlines()) == 1 and err.startswith("trueband functions: ") and "Traceback" not in err
    for word in words:
        assert word in err
    assert captured.out == ""


def test_the_traceback_is_shown_on_request(monkeypatch):
    parser = cli.build_parser()
    args = parser.parse_args(["functions"])
    monkeypatch.setattr(cli, "build_parser", lambda: _Fixed(parser, args, _failing(KeyError("x"))))
    monkeypatch.setenv("TRUEBAND_TRACEBACK", "1")
    with pytest.raises(KeyError):
        cli.main(["functions"])


class _Fixed:
    """A parser that returns the given arguments with another handler."""

    def __init__(self, parser, args, handler):
        self.parser, self.args, self.handler = parser, args, handler

    def parse_args(self, argv):
        self.args.handler = self.handler
        return self.args


def test_the_catalog_lists_the_families_as_a_study_runs_them(capsys):
    # Common practice: a validation study starts from the scores and their reliability and ends at the cut.
    from trueband.funcs.registry import REGISTRY, TOPICS, catalog

    assert {spec.topic for spec in REGISTRY.values()} <= set(TOPICS)  # every family has its title
    topics = list(dict.fromkeys(entry["topic"] for entry in catalog()))
    assert topics[:2] == ["scores", "reliability"]
    assert topics == [t for t in TOPICS if t in topics]
    assert cli.main(["functions"]) == 0
    out = capsys.readouterr().out
    assert out.startswith(TOPICS["scores"] + "\n")  # no blank first line
    assert out.index(TOPICS["reliability"]) < out.index(TOPICS["agreement"]) < out.index(TOPICS["impact"])
