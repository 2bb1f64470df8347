"""The LibreOffice Calc add-in, generated from the function registry.

================================  ==============================================================
function                          what
================================  ==============================================================
:func:`cell_names`                the names a Calc cell uses for one registered function
:func:`addin_functions`           every cell name → its registered function, argument names and
                                  wizard texts
:func:`type_library`              the UNO IDL text of the add-in interface (the type library)
:func:`component_source`          the Python UNO component LibreOffice runs
:func:`write_extension`           ``trueband.oxt``: all of the above, packaged as an extension
================================  ==============================================================

A Calc add-in is a UNO component that supports the service
``com.sun.star.sheet.AddIn`` and an interface of its own whose methods are the cell
functions; the interface is described by a type library inside the extension
(LibreOffice reads a plain ``.idl`` file as one since version 4.1). Calc stores a cell
function under ``SERVICE.METHOD``; the component's service name is ``_xludf``, so a workbook
saved as xlsx holds ``_xludf.SEM(...)``, the form other spreadsheet apps use for functions
they do not know and the form ``trueband recalc`` reads.

Every method takes each registered argument as ``any`` (a number, a text, a range as rows of
cells with an empty text for a blank cell; ``None`` for an argument left out or empty; a blank
single cell arrives as 0, which LibreOffice gives every add-in argument type that also takes
constants) and a last ``sequence<any>`` that collects any further
arguments, so that a wrong argument count reaches trueband (``#VALUE!``) instead of Calc
refusing the call (``Err:504``). Nothing here knows a single function: a function added to the
registry is in the next generated add-in.
"""

from __future__ import annotations

import ipaddress
import re
import sys
import sysconfig
import urllib.parse
import zipfile
from importlib import resources
from pathlib import Path
from typing import Iterable, Sequence
from xml.sax.saxutils import escape, quoteattr

from trueband.funcs.registry import REGISTRY, SpreadsheetFunction

__all__ = ["SERVICE_NAME", "INTERFACE", "EXTENSION_ID", "cell_names", "addin_functions", "plain_text", "type_library",
           "component_source", "write_extension", "install_line", "python_version_note", "site_folders",
           "libreoffice_python"]

#: The add-in's service name: Calc prefixes it to the function names it saves.
SERVICE_NAME = "_xludf"
#: The UNO interface whose methods are the cell functions.
INTERFACE = "truebandcalc.XTruebandFunctions"
IMPLEMENTATION_NAME = "truebandcalc.TruebandFunctions"
EXTENSION_ID = "trueband.calc.addin"
#: Category of the function wizard the functions are listed under.
CATEGORY = "Statistical"
COMPONENT_FILE = "trueband_calc.py"
TYPES_FILE = "trueband_calc.idl"

# A name of one to three letters and digits reads as a cell address in Calc (KR20 is column KR,
# row 20), so a cell cannot call it; its alias (KR_20) is the name a cell uses.
_CELL_ADDRESS = re.compile(r"[A-Z]{1,3}[0-9]+")


def cell_names(fn: SpreadsheetFunction) -> list[str]:
    """The names a Calc cell can call ``fn`` by: its name and aliases, less those that read as a cell address.

    >>> cell_names(REGISTRY["KR20"])
    ['KR_20']
    >>> cell_names(REGISTRY["SEM"])
    ['SEM']
    """
    return [name for name in (fn.name, *fn.aliases) if not _CELL_ADDRESS.fullmatch(name)]


# reST/numpydoc marks in docstrings (``code``, :role:`name`, `name`) that the wizard would show as typed.
_MARKUP = re.compile(r"``(.+?)``|(?::[a-z]+:)?`([^`]+)`")
_DEFAULT_SAID = re.compile(r"\bdefault\b", re.I)


def plain_text(text: str) -> str:
    """Docstring text as the wizard should show it: code marks dropped (``x`` and `x` shown as x).

    >>> plain_text("a whole number from 0 to ``focal_applicants``; see :func:`impact_ratio`")
    'a whole number from 0 to focal_applicants; see impact_ratio'
    """
    return _MARKUP.sub(lambda m: m.group(1) or m.group(2), text)


def _argument_text(arg) -> str:
    """An argument's wizard text: its description, its words or range, then required or optional (with the
    default, unless the description already says it); a description of several sentences gets its own last one."""
    text = plain_text(arg.description or arg.name)
    if arg.choices:
        text += " (one of: " + ", ".join(arg.choices) + ")"
    if arg.kind == "range":
        text += " (a range)"
    if not arg.required:
        default = arg.default
        shown = "TRUE" if default is True else "FALSE" if default is False else f'"{default}"' if isinstance(
            default, str) else format(default, "g") if isinstance(default, float) else str(default)
        status = "optional" if _DEFAULT_SAID.search(text) else f"optional, {shown} if left out"
    else:
        status = "required"  # the wizard marks every argument optional (Calc's rule for arguments of type any)
    if ". " in text:
        return f"{text.rstrip('.')}. {status[0].upper()}{status[1:]}."
    return f"{text}; {status}."


def addin_functions() -> dict[str, dict]:
    """Every cell name → ``{"registered", "description", "arguments"}``, ``arguments`` as (name, text) pairs.

    >>> functions = addin_functions()
    >>> functions["SEM"]["arguments"][1]
    ('reliability', 'Reliability of the scores, between 0 and 1; required.')
    >>> functions["KR_20"]["registered"]
    'KR20'
    """
    out = {}
    for key in sorted(REGISTRY):
        fn = REGISTRY[key]
        description = plain_text(fn.description)
        if fn.caution:
            description += " " + fn.caution
        arguments = [(a.name, _argument_text(a)) for a in fn.arguments]
        arguments.append(("more", "Leave empty: a further argument is an error (#VALUE!)."))
        for name in cell_names(fn):
            out[name] = {"registered": fn.name, "description": description, "arguments": arguments}
    return out


def type_library(functions: dict[str, dict] | None = None) -> str:
    """The UNO IDL of the add-in interface: one method per cell name, each argument ``any``.

    >>> print(type_library({"SEM": {"arguments": [("sd", ""), ("reliability", ""), ("more", "")]}}))
    module truebandcalc {
        interface XTruebandFunctions: com::sun::star::uno::XInterface {
            any SEM([in] any a0, [in] any a1, [in] sequence<any> more);
        };
    };
    """
    functions = addin_functions() if functions is None else functions
    module, interface = INTERFACE.split(".")
    lines = [f"module {module} {{", f"    interface {interface}: com::sun::star::uno::XInterface {{"]
    for name, spec in functions.items():
        # IDL names of our own (a0, a1, ...): an argument could be named like an IDL keyword.
        params = [f"[in] any a{i}" for i in range(len(spec["arguments"]) - 1)] + ["[in] sequence<any> more"]
        lines.append(f"        any {name}({', '.join(params)});")
    lines += ["    };", "};"]
    return "\n".join(lines)


#: The packages trueband's functions import at run time, besides trueband itself.
RUNTIME_DEPENDENCIES = ("numpy", "scipy")


def site_folders(dependencies: Sequence[str] = RUNTIME_DEPENDENCIES) -> list[str]:
    """Where this Python finds trueband and its dependencies: the folders LibreOffice's Python adds.

    The environment's site-packages first (with its ``.pth`` files, so an editable install works too);
    where trueband was loaded from somewhere else, the folder above its ``trueband`` package; then
    every other folder this Python imports one of ``dependencies`` from (a virtual environment made
    with ``--system-site-packages`` finds numpy in the system's folder, a user install in the user's
    site folder).
    """
    import importlib.util

    import trueband.funcs

    paths = sysconfig.get_paths()
    folders = list(dict.fromkeys([paths["purelib"], paths["platlib"]]))
    here = Path(trueband.funcs.__file__).resolve().parent.parent  # .../trueband, or a source tree's root
    if here.name == "trueband":
        folders.append(str(here.parent))
    for name in dependencies:
        spec = importlib.util.find_spec(name)
        if spec is not None and spec.origin:
            folders.append(str(Path(spec.origin).resolve().parent.parent))  # the folder that holds the package
    unique: dict[Path, str] = {}
    for folder in folders:
        unique.setdefault(Path(folder).resolve(), folder)
    return list(unique.values())


#: Host names of this computer that thin mode may send cells to (and any 127.x.x.x address).
LOOPBACK_HOSTS = ("localhost", "127.0.0.1", "::1")


def checked_server_url(url: str) -> str:
    """``url`` when it is ``http://`` on this computer's loopback with a port; otherwise ``ValueError`` saying why.

    Thin mode sends every cell's inputs (applicant data) to this address, so it must not leave the
    computer; ``trueband serve`` listens on loopback by default.

    >>> checked_server_url("http://127.0.0.1:8765")
    'http://127.0.0.1:8765'
    >>> checked_server_url("http://203.0.113.9:80")
    Traceback (most recent call last):
    ...
    ValueError: --url 'http://203.0.113.9:80': the server must be on this computer (127.0.0.1, ::1 or localhost), so that applicant data do not leave it
    """
    parts = urllib.parse.urlsplit(url)
    try:
        port = parts.port
    except ValueError:
        port = -1
    if parts.scheme != "http":
        raise ValueError(f"--url {url!r}: write http://127.0.0.1:PORT (`trueband serve` speaks plain HTTP on loopback)")
    host = parts.hostname or ""
    try:
        loopback = ipaddress.ip_address(host).is_loopback
    except ValueError:
        loopback = host.lower() == "localhost"
    if not loopback:
        raise ValueError(f"--url {url!r}: the server must be on this computer (127.0.0.1, ::1 or localhost), so that "
                         f"applicant data do not leave it")
    if port is None or port < 1 or parts.username or parts.password or parts.query or parts.fragment:
        raise ValueError(f"--url {url!r}: write http://HOST:PORT with a port number, e.g. http://127.0.0.1:8765")
    return url


def component_source(functions: dict[str, dict] | None = None, *, mode: str = "full",
                     server_url: str = "http://127.0.0.1:8765", folders: Iterable[str] | None = None) -> str:
    """The Python UNO component: the generated constants, then the fixed part from the package data."""
    if mode not in ("full", "thin"):
        raise ValueError(f"mode must be 'full' or 'thin', got {mode!r}")
    if mode == "thin":
        checked_server_url(server_url)
    functions = addin_functions() if functions is None else functions
    folders = site_folders() if folders is None else list(folders)
    header = [
        "# Generated by `trueband addin` from trueband's function registry; regenerate rather than edit.",
        f"MODE = {mode!r}",
        f"SERVER_URL = {server_url!r}",
        f"LOOPBACK_HOSTS = {LOOPBACK_HOSTS!r}",
        f"SITE_FOLDERS = {folders!r}",
        f"GENERATED_WITH = {'.'.join(map(str, sys.version_info[:3]))!r}",
        f"SERVICE_NAME = {SERVICE_NAME!r}",
        f"INTERFACE = {INTERFACE!r}",
        f"IMPLEMENTATION_NAME = {IMPLEMENTATION_NAME!r}",
        f"SERVICES = ('com.sun.star.sheet.AddIn', {IMPLEMENTATION_NAME!r})",
        f"CATEGORY = {CATEGORY!r}",
        f"FUNCTIONS = {functions!r}",
    ]
    body = resources.files("trueband.bridge.addin").joinpath("data/calc_addin_component.py").read_text(encoding="utf-8")
    return "\n".join(header) + "\n" + body


def _manifest() -> str:
    entries = [(COMPONENT_FILE, "application/vnd.sun.star.uno-component;type=Python"),
               (TYPES_FILE, "application/vnd.sun.star.uno-typelibrary;type=RDB")]
    lines = ['<?xml version="1.0" encoding="UTF-8"?>',
             '<manifest:manifest xmlns:manifest="http://openoffice.org/2001/manifest">']
    lines += [f'  <manifest:file-entry manifest:full-path={quoteattr(path)} manifest:media-type={quoteattr(kind)}/>'
              for path, kind in entries]
    lines.append("</manifest:manifest>")
    return "\n".join(lines) + "\n"


def _description_text(mode: str) -> str:
    """What the Extension Manager shows about the add-in."""
    how = " (thin mode: each cell asks a running `trueband serve`)" if mode == "thin" else ""
    return (f"trueband's spreadsheet functions (reliability, SEM and score bands, validity, cut scores, adverse "
            f"impact) as live Calc functions{how}: type =SEM(B2; B3) and the cell computes with trueband's tested "
            f"code. The figures are statistical indicators to support professional judgment, not legal findings.\n")


def _description(version: str) -> str:
    return f"""<?xml version="1.0" encoding="UTF-8"?>
<description xmlns="http://openoffice.org/extensions/description/2006"
             xmlns:xlink="http://www.w3.org/1999/xlink">
  <identifier value={quoteattr(EXTENSION_ID)}/>
  <version value={quoteattr(version)}/>
  <display-name><name lang="en">{escape("trueband functions")}</name></display-name>
  <platform value="all"/>
  <dependencies>
    <lo:LibreOffice-minimal-version xmlns:lo="http://libreoffice.org/extensions/description/2011"
                                    lo:name="LibreOffice 4.1" value="4.1"/>
  </dependencies>
  <extension-description><src lang="en" xlink:href="description-en.txt"/></extension-description>
</description>
"""


def _version() -> str:
    from trueband.funcs import __version__

    return __version__ if re.fullmatch(r"[0-9]+(\.[0-9]+)*", __version__) else "0"


def write_extension(out: str | Path, *, mode: str = "full", server_url: str = "http://127.0.0.1:8765",
                    folders: Iterable[str] | None = None) -> Path:
    """Write the extension ``out`` (``trueband.oxt``): manifest, description, type library, component.

    The file is written beside its final name and renamed into place when complete.
    """
    out = Path(out)
    functions = addin_functions()
    parts = {
        "META-INF/manifest.xml": _manifest(),
        "description.xml": _description(_version()),
        "description-en.txt": _description_text(mode),
        TYPES_FILE: type_library(functions) + "\n",
        COMPONENT_FILE: component_source(functions, mode=mode, server_url=server_url, folders=folders),
    }
    from ..workbook.files import replacing  # the one safe writer (stdlib only; allowed by tests/test_layers.py)

    with replacing(out) as tmp, zipfile.ZipFile(tmp, "w", zipfile.ZIP_DEFLATED) as z:
        for name, text in parts.items():
            z.writestr(name, text.encode("utf-8"))
    return out


def libreoffice_python() -> tuple[str, str] | None:
    """(path, "major.minor") of the Python LibreOffice runs its Python components in, if one is found.

    Windows and macOS: the ``python`` LibreOffice bundles beside ``soffice``; Linux: a Python that
    imports ``uno`` (the system ``python3`` with ``python3-uno``).
    """
    import os
    import shutil
    import subprocess

    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    candidates = []
    if soffice:
        program = Path(os.path.realpath(soffice)).parent
        candidates += [program / "python.exe", program / "python", program.parent / "Resources" / "python"]
    candidates += [Path(p) for p in (shutil.which("python3"), "/usr/bin/python3") if p]
    for exe in dict.fromkeys(candidates):
        if not exe.is_file():
            continue
        try:
            done = subprocess.run([str(exe), "-c", "import sys, uno; print('%d.%d' % sys.version_info[:2])"],
                                  capture_output=True, text=True, timeout=60)
        except (OSError, subprocess.SubprocessError):
            continue
        if done.returncode == 0 and done.stdout.strip():
            return str(exe), done.stdout.strip()
    return None


def python_version_note() -> str:
    """Which Python LibreOffice must run for full mode, and where trueband is loaded from."""
    version = ".".join(map(str, sys.version_info[:2]))
    return (f"LibreOffice's Python must be Python {version} (as this one, {sys.executable}); it loads trueband "
            f"from {', '.join(site_folders())}. Otherwise use --thin.")


def install_line(path: str | Path) -> str:
    """The command that installs the extension for the current user."""
    return f'unopkg add "{Path(path)}"'
