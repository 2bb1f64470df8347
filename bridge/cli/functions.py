"""``trueband functions`` (the catalog) and ``trueband eval`` (one formula of literals)."""

from __future__ import annotations

import json
import sys
import textwrap

from trueband.funcs.cautions import CAUTION
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import REGISTRY, catalog, lookup, topic_title

from .common import EXIT_CELL_ERRORS, EXIT_FAILED, EXIT_OK


def format_value(value) -> str:
    """A result as shown on the command line: 15 significant digits, as spreadsheet apps show numbers."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, float):
        return format(value, ".15g")
    return str(value)


def render_markdown() -> str:
    """The function reference, generated from the registry (``docs/functions.md``)."""
    out = [
        "# Function reference",
        "",
        "Generated from the function registry by `trueband functions --markdown`; do not edit by hand.",
        "Arguments in [brackets] are optional. Every function is also callable from Python "
        "(`trueband.funcs.call(NAME, ...)` or the Python function named below) and over the HTTP bridge.",
        "",
        f"> {CAUTION}",
        "",
    ]
    topic = None
    for entry in catalog():
        spec = REGISTRY[entry["name"]]
        if entry["topic"] != topic:
            topic = entry["topic"]
            out += [f"## {topic_title(topic)}", ""]
            if spec.caution:
                out += [f"> {spec.caution}", ""]
        out += [f"### `{spec.signature}`", "", entry["description"], ""]
        if spec.aliases:
            out += [f"Also callable as {', '.join(f'`{a}`' for a in spec.aliases)} (the name to use in a workbook cell).", ""]
        out += ["| argument | kind | default | meaning |", "|---|---|---|---|"]
        for arg in entry["arguments"]:
            kind = arg["kind"] + (" (" + ", ".join(f'"{c}"' for c in arg["choices"]) + ")" if "choices" in arg else "")
            default = json.dumps(arg["default"]) if "default" in arg else ""
            out.append(f"| `{arg['name']}` | {kind} | {default} | {arg.get('description', '')} |")
        out += ["", f"Returns: {entry['returns']}. Python: `trueband.funcs.{topic}.{entry['python']}`.", "",
                f"Reference: {entry['reference']}", ""]
    return "\n".join(out)


def _functions(args) -> int:
    if args.name:
        try:
            entries = [lookup(args.name).to_dict()]
        except TruebandError as exc:
            print(f"trueband functions: {exc}", file=sys.stderr)
            return EXIT_FAILED
    else:
        entries = catalog()
    if args.json:
        json.dump({"functions": entries}, sys.stdout, indent=2)
        print()
        return EXIT_OK
    if args.markdown:
        sys.stdout.write(render_markdown())
        return EXIT_OK
    if args.name:
        spec = REGISTRY[entries[0]["name"]]
        print(spec.signature)
        print(textwrap.fill(spec.description, 78))
        if spec.aliases:
            print(f"Also: {', '.join(spec.aliases)} (the name to use in a workbook cell)")
        for arg in entries[0]["arguments"]:
            extra = f" (default {json.dumps(arg['default'])})" if "default" in arg else ""
            choices = f" one of {', '.join(arg['choices'])}" if "choices" in arg else ""
            print(f"  {arg['name']:<18} {arg['kind']}{choices}{extra}: {arg.get('description', '')}")
        print(f"Returns: {spec.returns}")
        if spec.caution:
            print(textwrap.fill(f"Caution: {spec.caution}", 78))
        print(textwrap.fill(f"Reference: {spec.reference}", 78))
        return EXIT_OK
    topic = None
    for entry in entries:
        spec = REGISTRY[entry["name"]]
        if entry["topic"] != topic:
            print(("\n" if topic is not None else "") + topic_title(entry["topic"]))  # no blank first line
            topic = entry["topic"]
            if spec.caution:
                print(textwrap.fill(spec.caution, 78, initial_indent="  Caution: ", subsequent_indent="  "))
        print(f"  {spec.signature}" + (f"   also {', '.join(spec.aliases)}" if spec.aliases else ""))
        print(textwrap.fill(entry["description"], 78, initial_indent="      ", subsequent_indent="      "))
    print(f"\n{len(entries)} functions. `trueband functions NAME` shows one in full.\n"
          f"{textwrap.fill(CAUTION, 78)}")
    return EXIT_OK


def _eval(args) -> int:
    from ..engine.expression import UnreadableFormula, evaluate_expression

    try:
        value = evaluate_expression(args.expression)
    except UnreadableFormula as exc:
        print(f"trueband eval: {exc.message}", file=sys.stderr)
        return EXIT_FAILED
    except TruebandError as exc:  # the formula evaluated to an error value
        print(f"{exc.code}  {exc.message}", file=sys.stderr)
        return EXIT_CELL_ERRORS
    if isinstance(value, list):
        for row in value:
            print("\t".join(format_value(x) for x in row))
    else:
        print(format_value(value))
    return EXIT_OK


def register(sub) -> None:
    p = sub.add_parser("functions", help="list the registered functions (the catalog)",
                       description="List the registered spreadsheet functions, or show one in full.")
    p.add_argument("name", nargs="?", help="show this function only")
    form = p.add_mutually_exclusive_group()
    form.add_argument("--json", action="store_true", help="the catalog as JSON")
    form.add_argument("--markdown", action="store_true", help="the function reference as Markdown")
    p.set_defaults(handler=_functions)

    p = sub.add_parser("eval", help='evaluate one formula of literal arguments, e.g. "=SEM(12, 0.91)"',
                       description="Evaluate one formula whose arguments are literals (numbers, text, "
                                   "TRUE/FALSE, array constants such as {1,2;3,4}). Standard spreadsheet "
                                   "functions may be mixed in. Prints the value; an error prints its "
                                   "spreadsheet code and message and exits with 1.")
    p.add_argument("expression")
    p.set_defaults(handler=_eval)
