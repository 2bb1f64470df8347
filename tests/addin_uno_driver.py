"""Drives a headless LibreOffice Calc through UNO for the add-in tests and benchmark.

Run by LibreOffice's Python (on Linux the system ``python3`` with ``python3-uno``), not by the
test environment: ``python3 addin_uno_driver.py < job.json``. The job names soffice, a fresh
profile, the folder of unpacked extensions and a list of steps; the answer (JSON on stdout)
has one entry per step. Steps:

- ``{"open": PATH}``; ``{"new": true}``; ``{"add_sheet": NAME}``; ``{"set": [[SHEET, CELL, FORMULA_OR_NUMBER_OR_NULL], ...]}``
  (``null`` clears the cell); ``{"recalc": true}``;
- ``{"read": [[SHEET, CELL], ...]}``: each cell's value, text or error code;
- ``{"formula": [[SHEET, CELL], ...]}``: each cell's formula as Calc shows it;
- ``{"store": PATH}``: save as xlsx;
- ``{"fill": {"sheet", "column", "rows", "formula"}}``: one formula down a column ({row} is the row);
- ``{"describe": [NAME, ...]}``: the function wizard's description, category and arguments of each;
- ``{"time_recalc": N}``: seconds for N full recomputations (calculateAll), fastest and all.
"""

import json
import os
import subprocess
import sys
import tempfile
import time

import uno
from com.sun.star.beans import PropertyValue
from com.sun.star.table.CellContentType import FORMULA, TEXT

ERROR_CODES = {503: "#NUM!", 519: "#VALUE!", 521: "#NULL!", 524: "#REF!", 525: "#NAME?", 532: "#DIV/0!",
               32767: "#N/A"}


def prop(name, value):
    p = PropertyValue()
    p.Name, p.Value = name, value
    return p


def soffice_environment():
    """This environment without an activated virtual environment's traces.

    LibreOffice's embedded Python finds its home through PATH: with a virtual environment's
    ``bin`` first on PATH it takes that environment's pyvenv.cfg, cannot import ``uno`` and
    loads no Python component at all (every add-in cell is then ``#NAME?``).
    """
    env = dict(os.environ)
    venv = env.pop("VIRTUAL_ENV", None)
    for name in ("PYTHONHOME", "PYTHONPATH"):
        env.pop(name, None)
    if venv:
        bins = os.path.normcase(os.path.abspath(venv))
        env["PATH"] = os.pathsep.join(p for p in env.get("PATH", "").split(os.pathsep)
                                      if not os.path.normcase(os.path.abspath(p)).startswith(bins))
    return env


def connect(job):
    pipe = "trueband_test_%d" % os.getpid()
    args = [job["soffice"], "-env:UserInstallation=" + job["profile"], "--headless", "--invisible", "--norestore",
            "--nologo", "--nodefault", "--accept=pipe,name=%s;urp;" % pipe]
    if job.get("bundled"):
        args.insert(1, "-env:BUNDLED_EXTENSIONS=" + job["bundled"])
    # soffice's stderr (where the add-in reports) goes to a file: a pipe nobody reads could fill and stall it
    errors = tempfile.TemporaryFile()
    proc = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=errors, env=soffice_environment())
    local = uno.getComponentContext()
    resolver = local.ServiceManager.createInstanceWithContext("com.sun.star.bridge.UnoUrlResolver", local)
    deadline = time.monotonic() + job.get("start_timeout", 120)
    while True:
        try:
            ctx = resolver.resolve("uno:pipe,name=%s;urp;StarOffice.ComponentContext" % pipe)
            break
        except Exception:
            if time.monotonic() > deadline or proc.poll() is not None:
                proc.kill()
                errors.seek(0)
                raise SystemExit("soffice did not start: " + errors.read().decode(errors="replace")[-2000:])
            time.sleep(0.3)
    desktop = ctx.ServiceManager.createInstanceWithContext("com.sun.star.frame.Desktop", ctx)
    return proc, desktop, ctx


def cell(doc, sheet, address):
    sheets = doc.Sheets
    s = sheets.getByName(sheet) if isinstance(sheet, str) else sheets.getByIndex(sheet)
    return s.getCellRangeByName(address)


def value_of(c):
    if c.getType() == FORMULA:
        err = c.getError()
        if err:
            return ERROR_CODES.get(err, "Err:%d" % err)
        # FormulaResultType2: 1 value, 2 text
        return c.getString() if c.FormulaResultType2 == 2 else c.getValue()
    if c.getType() == TEXT:
        return c.getString()
    return c.getValue() if c.getString() != "" else None


def run(job):
    proc, desktop, ctx = connect(job)
    out = []
    doc = None
    opened = []  # every document of the job, closed at the end (the last one is the one the steps work on)
    try:
        for step in job["steps"]:
            if "open" in step:
                url = uno.systemPathToFileUrl(os.path.abspath(step["open"]))
                doc = desktop.loadComponentFromURL(url, "_blank", 0, (prop("Hidden", True),))
                if doc is None:
                    raise SystemExit("Calc could not open %s" % step["open"])
                opened.append(doc)
                out.append(True)
            elif "new" in step:
                doc = desktop.loadComponentFromURL("private:factory/scalc", "_blank", 0, (prop("Hidden", True),))
                opened.append(doc)
                out.append(True)
            elif "add_sheet" in step:
                doc.Sheets.insertNewByName(step["add_sheet"], doc.Sheets.getCount())
                out.append(True)
            elif "set" in step:
                for sheet, address, value in step["set"]:
                    c = cell(doc, sheet, address)
                    if value is None:
                        c.setString("")
                    elif isinstance(value, str):
                        c.setFormula(value)
                    else:
                        c.setValue(value)
                out.append(True)
            elif "fill" in step:
                f = step["fill"]
                first, last = f["rows"]
                rng = cell(doc, f["sheet"], "%s%d:%s%d" % (f["column"], first, f["column"], last))
                rng.setFormulaArray(tuple((f["formula"].replace("{row}", str(r)),) for r in range(first, last + 1)))
                out.append(True)
            elif "recalc" in step:
                doc.calculateAll()
                out.append(True)
            elif "read" in step:
                out.append([value_of(cell(doc, sheet, address)) for sheet, address in step["read"]])
            elif "formula" in step:
                out.append([cell(doc, sheet, address).getFormula() for sheet, address in step["formula"]])
            elif "store" in step:
                url = uno.systemPathToFileUrl(os.path.abspath(step["store"]))
                doc.storeToURL(url, (prop("FilterName", "Calc MS Excel 2007 XML"),))
                out.append(True)
            elif "describe" in step:
                # what the function wizard shows: the sheet's function descriptions
                descriptions = ctx.ServiceManager.createInstanceWithContext(
                    "com.sun.star.sheet.FunctionDescriptions", ctx)
                found = {}
                for i in range(descriptions.getCount()):
                    entry = {p.Name: p.Value for p in descriptions.getByIndex(i)}
                    if entry["Name"] in step["describe"]:
                        found[entry["Name"]] = {
                            "description": entry["Description"], "category": entry["Category"],
                            "arguments": [[a.Name, a.Description, a.IsOptional] for a in entry["Arguments"]]}
                out.append(found)
            elif "time_recalc" in step:
                times = []
                for _ in range(step["time_recalc"]):
                    t = time.perf_counter()
                    doc.calculateAll()
                    times.append(time.perf_counter() - t)
                out.append(times)
            else:
                raise SystemExit("unknown step %r" % (step,))
    finally:
        for document in opened:
            try:
                document.close(True)
            except Exception:
                pass
        try:
            desktop.terminate()
        except Exception:
            pass
        try:
            proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            proc.kill()
    return out


if __name__ == "__main__":
    print(json.dumps(run(json.load(sys.stdin))))
