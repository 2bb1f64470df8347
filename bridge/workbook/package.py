"""Open a saved workbook (.xlsx / .xlsm) as the zip package it is, and refuse what is not one.

:func:`open_workbook_package` checks a file before anything reads it and
raises :class:`UnusableWorkbook` with one clear line for every file that the
workbook processor must not touch:

=====================================  ===============================================
what                                   how it is recognised
=====================================  ===============================================
old binary workbook (.xls)             OLE2 compound-file signature ``D0 CF 11 E0``
password-protected / encrypted         OLE2 file holding an ``EncryptionInfo`` stream
OpenDocument spreadsheet (.ods)        zip whose ``mimetype`` entry is OpenDocument
text renamed (.csv), random bytes      no zip signature
corrupt zip (bad CRC, truncated)       ``zipfile`` refuses the directory or a CRC check
zip bomb                               declared uncompressed size over the limit, or a
                                       large entry compressed more than any real XML
no workbook part                       no officeDocument relationship / part
open in another program                its lock file sits next to it (``~$NAME`` or
                                       LibreOffice's ``.~lock.NAME#``)
=====================================  ===============================================

:class:`WorkbookPackage` then gives the parts the processor needs: the sheets
in order, shared strings, defined names, the workbook part, raw entry bytes.
Small XML parts (workbook, relationships) are read with ElementTree; shared
strings, which can hold a million entries, with regular expressions over bytes.

The size limits (``max_total``, ``max_ratio``) admit a real full-height
sheet (1,048,576 rows is about 1 GB of XML) and can be raised per call or
with the environment variables ``TRUEBAND_MAX_UNCOMPRESSED`` (bytes) and
``TRUEBAND_MAX_RATIO``.
"""

from __future__ import annotations

import dataclasses
import os
import posixpath
import zipfile
import zlib
from pathlib import Path
from xml.etree import ElementTree

from .files import NotARegularFile, regular_file
from .shared_strings import parse_shared_strings, safe_xml

__all__ = [
    "UnusableWorkbook", "WorkbookLocked", "WorkbookPackage", "SheetInfo", "DefinedName", "open_workbook_package",
    "lock_file_of", "DEFAULT_MAX_TOTAL", "DEFAULT_MAX_RATIO", "NS_MAIN", "NS_REL", "NS_PKG_REL", "NS_CT",
    "REL_OFFICE_DOCUMENT", "REL_WORKSHEET", "REL_SHARED_STRINGS", "REL_CALC_CHAIN",
]

#: Entries at least this large are inflated in one call, and the last one read is kept for a second read.
WHOLE_READ_SIZE = 1 << 20
#: Total uncompressed size allowed by default: 4 GiB (a full-height sheet of many columns fits).
DEFAULT_MAX_TOTAL = 4 * 1024 ** 3
#: Largest compression ratio allowed for an entry over RATIO_FLOOR bytes. Spreadsheet XML compresses
#: 5-50 times; deflate cannot exceed about 1032, and a bomb sits near that.
DEFAULT_MAX_RATIO = 400
RATIO_FLOOR = 16 * 1024 ** 2

NS_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
NS_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
NS_CT = "http://schemas.openxmlformats.org/package/2006/content-types"
_REL_BASE = "http://schemas.openxmlformats.org/officeDocument/2006/relationships/"
REL_OFFICE_DOCUMENT = _REL_BASE + "officeDocument"
REL_WORKSHEET = _REL_BASE + "worksheet"
REL_CHARTSHEET = _REL_BASE + "chartsheet"
REL_SHARED_STRINGS = _REL_BASE + "sharedStrings"
REL_CALC_CHAIN = _REL_BASE + "calcChain"
# Strict-conformance files use a different relationship namespace; only the last word matters.
_STRICT_REL_BASE = "http://purl.oclc.org/ooxml/officeDocument/relationships/"

_OLE2_SIGNATURE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ZIP_SIGNATURES = (b"PK\x03\x04", b"PK\x05\x06", b"PK\x07\x08")
_ENCRYPTION_INFO = "EncryptionInfo".encode("utf-16-le")
_ENCRYPTED_PACKAGE = "EncryptedPackage".encode("utf-16-le")


class UnusableWorkbook(Exception):
    """A file the workbook processor cannot or must not process; ``str()`` is one clear line."""

    def __init__(self, message: str, *, path: str | os.PathLike | None = None):
        super().__init__(message)
        self.message = message
        self.path = None if path is None else Path(path)


class WorkbookLocked(UnusableWorkbook):
    """The workbook is open in another program (its lock file exists, or replacing it was refused)."""


@dataclasses.dataclass(frozen=True)
class SheetInfo:
    """One sheet of the workbook, in tab order.

    ``part`` is the zip entry name (``xl/worksheets/sheet1.xml``), ``state`` is
    ``"visible"``, ``"hidden"`` or ``"veryHidden"``, ``kind`` ``"worksheet"``
    or ``"chartsheet"`` (chart sheets hold no cells), another relationship type's last word for dialog and
    macro sheets, or ``"without a part"`` for a sheet entry whose ``r:id`` is empty (some writers keep a
    macro sheet's entry so, without its content; ``part`` is then ``""``), ``index`` the 0-based
    position (what ``localSheetId`` of a defined name counts).
    """

    name: str
    part: str
    state: str
    index: int
    rel_id: str
    kind: str = "worksheet"


@dataclasses.dataclass(frozen=True)
class DefinedName:
    """A defined name: ``text`` is its formula without ``=``; ``sheet`` the sheet it is local to (or None)."""

    name: str
    text: str
    sheet: str | None = None
    hidden: bool = False


def lock_file_of(path: str | os.PathLike) -> Path | None:
    """The lock file a spreadsheet app left beside ``path`` while it has the file open, if any.

    Desktop spreadsheet apps write an owner file ``~$NAME`` next to an open
    workbook; LibreOffice writes ``.~lock.NAME#``. A lock file left by a crash
    looks the same; the message then says to delete it.
    """
    p = Path(path)
    for candidate in (p.with_name("~$" + p.name), p.with_name(".~lock." + p.name + "#")):
        if candidate.exists():
            return candidate
    return None


# ------------------------------------------------------------------ shared strings

# ------------------------------------------------------------------ package


def _rel_type_is(rel_type: str, full: str) -> bool:
    return rel_type == full or rel_type == _STRICT_REL_BASE + full.rsplit("/", 1)[-1]


def _resolve_target(source_part: str, target: str) -> str:
    """Zip entry name of a relationship target, relative to the part that owns the relationship."""
    if target.startswith("/"):
        return target.lstrip("/")
    base = posixpath.dirname(source_part)
    return posixpath.normpath(posixpath.join(base, target))


def rels_part_of(part: str) -> str:
    """The relationships part of ``part`` (``xl/workbook.xml`` → ``xl/_rels/workbook.xml.rels``)."""
    folder, name = posixpath.split(part)
    return posixpath.join(folder, "_rels", name + ".rels")


class WorkbookPackage:
    """An opened .xlsx/.xlsm package (use :func:`open_workbook_package`).

    Attributes
    ----------
    path : Path
    entry_names : list of str
        Every zip entry name, in the order stored.
    infos : dict of str to zipfile.ZipInfo
    workbook_part : str
        Entry name of the workbook part (normally ``xl/workbook.xml``).
    workbook_xml : bytes
    sheets : list of SheetInfo
        In tab order.
    defined_names : list of DefinedName
    is_macro_enabled : bool
        True for an .xlsm (a ``vbaProject.bin`` part or the macro content type).
    shared_strings_part : str or None
    date1904 : bool
        The workbook's dates count from 1904 (``<workbookPr date1904="1"/>``).

    The zip file stays open until :meth:`close` (or the end of a ``with`` block).
    """

    def __init__(self, path: Path, zf: zipfile.ZipFile):
        self.path = path
        self._zip = zf
        self.infos: dict[str, zipfile.ZipInfo] = {}
        self.entry_names: list[str] = []
        for info in zf.infolist():
            self.infos[info.filename] = info
            self.entry_names.append(info.filename)
        self._shared_strings: list[str] | None = None
        self._last: tuple[str, bytes] | None = None  # the last large part read (a recalculation reads it twice)
        self._load()

    # -- basic access

    def close(self) -> None:
        self._last = None
        self._zip.close()

    def __enter__(self) -> "WorkbookPackage":
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    def __contains__(self, part: str) -> bool:
        return part in self.infos

    def read(self, part: str) -> bytes:
        """Uncompressed bytes of one entry; :class:`UnusableWorkbook` if it is missing or corrupt."""
        if part not in self.infos:
            raise UnusableWorkbook(f"{self.path.name}: the package has no part {part!r}", path=self.path)
        if self._last is not None and self._last[0] == part:
            return self._last[1]
        info = self.infos[part]
        try:
            if info.file_size < WHOLE_READ_SIZE or info.flag_bits & 0x1 or \
                    info.compress_type not in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED):
                return self._zip.read(part)
            data = self._read_whole(info)
            self._last = (part, data)
            return data
        except Exception as exc:  # BadZipFile (CRC), EOFError (truncated), zlib.error (damaged deflate data)
            raise UnusableWorkbook(f"{self.path.name} is damaged (part {part}: {exc}); "
                                   f"open and re-save it in a spreadsheet app", path=self.path) from None

    def _read_whole(self, info: zipfile.ZipInfo) -> bytes:
        """One large entry inflated in one call (the zip module inflates in small pieces and joins them)."""
        with open(self.path, "rb") as f:
            f.seek(info.header_offset)
            head = f.read(30)
            if len(head) < 30 or head[:4] != b"PK\x03\x04":
                raise zipfile.BadZipFile(f"bad local header of {info.filename}")
            name_len, extra_len = int.from_bytes(head[26:28], "little"), int.from_bytes(head[28:30], "little")
            f.seek(info.header_offset + 30 + name_len + extra_len)
            raw = f.read(info.compress_size)
        if len(raw) != info.compress_size:
            raise EOFError(f"{info.filename} is cut short")
        if info.compress_type == zipfile.ZIP_STORED:
            data = raw
        else:  # never more than the declared size, as the zip module's reader: an entry that lies is refused
            inflate = zlib.decompressobj(-15)
            data = inflate.decompress(raw, info.file_size)
            if inflate.unconsumed_tail or not inflate.eof:
                raise zipfile.BadZipFile(f"{info.filename} inflates to more or less than its declared size")
        del raw
        if len(data) != info.file_size or zlib.crc32(data) != info.CRC:
            raise zipfile.BadZipFile(f"bad CRC-32 or size for {info.filename}")
        return data

    def forget(self, part: str) -> None:
        """Drop the kept copy of a large part (the next :meth:`read` inflates it again)."""
        if self._last is not None and self._last[0] == part:
            self._last = None

    def open_part(self, part: str):
        """A readable binary stream of one entry (for copying large parts in chunks)."""
        return self._zip.open(self.infos[part])

    def xml(self, part: str) -> ElementTree.Element:
        try:
            return safe_xml(self.read(part))
        except ElementTree.ParseError as exc:
            raise UnusableWorkbook(f"{self.path.name}: part {part} is not well-formed XML ({exc})",
                                   path=self.path) from None

    def relationships(self, part: str) -> list[dict[str, str]]:
        """Relationships of a part: dicts with ``Id``, ``Type``, ``Target``, ``TargetMode``, ``part``."""
        rels = rels_part_of(part) if part else "_rels/.rels"
        if rels not in self.infos:
            return []
        out = []
        for el in self.xml(rels):
            if el.tag.rsplit("}", 1)[-1] != "Relationship":
                continue
            rel = dict(el.attrib)
            if rel.get("TargetMode") != "External" and "Target" in rel:
                rel["part"] = _resolve_target(part or "_rels", rel["Target"]) if part else rel["Target"].lstrip("/")
            out.append(rel)
        return out

    # -- derived views

    def _load(self) -> None:
        name = self.path.name
        if "[Content_Types].xml" not in self.infos:
            raise UnusableWorkbook(f"{name} is a zip file but not a spreadsheet package "
                                   f"(no [Content_Types].xml)", path=self.path)
        workbook_part = None
        for rel in self.relationships(""):
            if _rel_type_is(rel.get("Type", ""), REL_OFFICE_DOCUMENT):
                workbook_part = rel.get("part")
                break
        if workbook_part is None and "xl/workbook.xml" in self.infos:
            workbook_part = "xl/workbook.xml"
        if workbook_part is None or workbook_part not in self.infos:
            raise UnusableWorkbook(f"{name} has no workbook part; it is not a spreadsheet "
                                   f"(a text document or presentation saved as a package?)", path=self.path)
        self.workbook_part = workbook_part
        self.workbook_xml = self.read(workbook_part)
        root = self.xml(workbook_part)
        if root.tag.rsplit("}", 1)[-1] != "workbook":
            raise UnusableWorkbook(f"{name}: {workbook_part} is not a spreadsheet workbook part", path=self.path)
        ns_main = root.tag[1:].split("}", 1)[0] if root.tag.startswith("{") else ""
        qualified = (lambda tag: f"{{{ns_main}}}{tag}") if ns_main else (lambda tag: tag)

        self.workbook_rels = self.relationships(workbook_part)
        by_id = {r["Id"]: r for r in self.workbook_rels if "Id" in r}
        self.sheets: list[SheetInfo] = []
        sheets_el = root.find(qualified("sheets"))
        for index, el in enumerate([] if sheets_el is None else list(sheets_el)):
            rid = next((v for k, v in el.attrib.items() if k.endswith("}id")), "")
            rel = by_id.get(rid)
            if rid == "" and rel is None:  # no relationship at all: a macro or dialog sheet kept without content
                self.sheets.append(SheetInfo(name=el.get("name", ""), part="", state=el.get("state", "visible"),
                                             index=index, rel_id=rid, kind="without a part"))
                continue
            if rel is None or "part" not in rel:
                raise UnusableWorkbook(f"{name}: sheet {el.get('name')!r} points at a missing relationship "
                                       f"{rid!r}", path=self.path)
            kind = "worksheet"
            if _rel_type_is(rel.get("Type", ""), REL_CHARTSHEET):
                kind = "chartsheet"
            elif not _rel_type_is(rel.get("Type", ""), REL_WORKSHEET):
                kind = rel.get("Type", "").rsplit("/", 1)[-1]  # dialog and macro sheets: kept, not read
            self.sheets.append(SheetInfo(name=el.get("name", ""), part=rel["part"], state=el.get("state", "visible"),
                                         index=index, rel_id=rid, kind=kind))
        for sheet in self.sheets:
            if sheet.kind == "worksheet" and sheet.part not in self.infos:
                raise UnusableWorkbook(f"{name}: the part of sheet {sheet.name!r} ({sheet.part}) is missing",
                                       path=self.path)
        if not self.sheets:
            raise UnusableWorkbook(f"{name}: the workbook has no sheets", path=self.path)

        self.defined_names: list[DefinedName] = []
        names_el = root.find(qualified("definedNames"))
        for el in [] if names_el is None else list(names_el):
            local = el.get("localSheetId")
            sheet = None
            if local is not None and local.isdigit() and int(local) < len(self.sheets):
                sheet = self.sheets[int(local)].name
            self.defined_names.append(DefinedName(name=el.get("name", ""), text=(el.text or "").strip(),
                                                  sheet=sheet, hidden=el.get("hidden") in ("1", "true")))

        workbook_pr = root.find(qualified("workbookPr"))
        #: The workbook counts dates from 1904-01-01 (``workbookPr date1904``, Mac-made books) instead of 1900.
        self.date1904 = workbook_pr is not None and workbook_pr.get("date1904", "").strip().lower() in ("1", "true")

        calc = root.find(qualified("calcPr"))
        self.calc_properties: dict[str, str] = {} if calc is None else dict(calc.attrib)

        self.shared_strings_part = next((r["part"] for r in self.workbook_rels
                                         if _rel_type_is(r.get("Type", ""), REL_SHARED_STRINGS)
                                         and r.get("part") in self.infos), None)
        self.calc_chain_part = next((r["part"] for r in self.workbook_rels
                                     if _rel_type_is(r.get("Type", ""), REL_CALC_CHAIN)), None)
        content_types = self.read("[Content_Types].xml")
        self.is_macro_enabled = (any(n.lower().endswith("vbaproject.bin") for n in self.entry_names)
                                 or b"macroEnabled" in content_types)

    @property
    def shared_strings(self) -> list[str]:
        """The shared-string table (read once, on first use)."""
        if self._shared_strings is None:
            try:
                self._shared_strings = ([] if self.shared_strings_part is None
                                        else parse_shared_strings(self.read(self.shared_strings_part)))
            except ElementTree.ParseError as exc:
                raise UnusableWorkbook(f"{self.path.name}: part {self.shared_strings_part} is not well-formed XML "
                                       f"({exc})", path=self.path) from None
        return self._shared_strings

    @property
    def worksheets(self) -> list[SheetInfo]:
        """Only the sheets that hold cells."""
        return [sheet for sheet in self.sheets if sheet.kind == "worksheet"]

    def sheet(self, name: str) -> SheetInfo:
        """The sheet of that name (case-insensitive, as spreadsheet apps match sheet names)."""
        for sheet in self.sheets:
            if sheet.name.casefold() == name.casefold():
                return sheet
        raise KeyError(f"no sheet named {name!r}; the sheets are {', '.join(repr(s.name) for s in self.sheets)}")

    def sheet_xml(self, name: str) -> bytes:
        return self.read(self.sheet(name).part)

    def defined_name(self, name: str, sheet: str | None = None) -> DefinedName | None:
        """Resolve a defined name as a formula on ``sheet`` would: a name local to that sheet wins."""
        key = name.casefold()
        found = None
        for defined in self.defined_names:
            if defined.name.casefold() != key:
                continue
            if defined.sheet is not None and sheet is not None and defined.sheet.casefold() == sheet.casefold():
                return defined
            if defined.sheet is None:
                found = defined
        return found

    @property
    def names(self) -> dict[str, str]:
        """Defined names as ``name → text``; a sheet-local name is keyed ``Sheet!name``."""
        return {(f"{defined.sheet}!{defined.name}" if defined.sheet else defined.name): defined.text
                for defined in self.defined_names}


# ------------------------------------------------------------------ opening and refusing


def _limit(env: str, value: int | None, default: int) -> int:
    if value is not None:
        return int(value)
    raw = os.environ.get(env)
    if raw:
        try:
            return int(float(raw))
        except ValueError:
            raise UnusableWorkbook(f"{env} must be a number of bytes, got {raw!r}") from None
    return default


def _classify_ole2(path: Path) -> str:
    """Why an OLE2 compound file is refused: encrypted package or old binary workbook."""
    # The directory entries store stream names in UTF-16; scanning for them avoids a full CFB parser.
    tail = b""
    with path.open("rb") as fh:
        while True:
            chunk = fh.read(1 << 20)
            if not chunk:
                break
            block = tail + chunk
            if _ENCRYPTION_INFO in block or _ENCRYPTED_PACKAGE in block:
                return (f"{path.name} is password-protected (encrypted); remove the password in the "
                        f"spreadsheet app (save a copy without one) and try again")
            tail = block[-64:]
    return (f"{path.name} is an old binary workbook (.xls) or another compound file, not .xlsx; "
            f"save it as .xlsx in a spreadsheet app and try again")


def _check_zip(path: Path, zf: zipfile.ZipFile, max_total: int, max_ratio: float) -> None:
    total = 0
    for info in zf.infolist():
        if info.flag_bits & 0x1:
            raise UnusableWorkbook(f"{path.name} has encrypted zip entries ({info.filename}); "
                                   f"it cannot be read", path=path)
        total += info.file_size
        if info.file_size > RATIO_FLOOR and info.file_size > max_ratio * max(info.compress_size, 1):
            raise UnusableWorkbook(
                f"{path.name} looks like a zip bomb: {info.filename} expands {info.file_size / max(info.compress_size, 1):.0f} "
                f"times (limit {max_ratio:g}; set TRUEBAND_MAX_RATIO to allow more)", path=path)
    if total > max_total:
        raise UnusableWorkbook(
            f"{path.name} expands to {total / 1024 ** 3:.1f} GiB, over the limit of {max_total / 1024 ** 3:.1f} GiB "
            f"(possibly a zip bomb; set TRUEBAND_MAX_UNCOMPRESSED to allow more)", path=path)
    bad = zf.testzip() if path.stat().st_size < 64 * 1024 ** 2 else None
    if bad is not None:
        raise UnusableWorkbook(f"{path.name} is damaged (entry {bad} fails its checksum); "
                               f"open and re-save it in a spreadsheet app", path=path)


def open_workbook_package(path: str | os.PathLike, *, check_lock: bool = True, max_total: int | None = None,
                          max_ratio: float | None = None) -> WorkbookPackage:
    """Open a workbook package, or raise :class:`UnusableWorkbook` saying in one line why not.

    Parameters
    ----------
    path : path-like
        The .xlsx or .xlsm file.
    check_lock : bool, optional
        Refuse a workbook whose lock file shows it open in another program
        (:class:`WorkbookLocked`); default True.
    max_total : int, optional
        Largest total uncompressed size in bytes; default ``TRUEBAND_MAX_UNCOMPRESSED`` or 4 GiB.
    max_ratio : float, optional
        Largest uncompressed/compressed ratio of an entry over 16 MiB; default
        ``TRUEBAND_MAX_RATIO`` or 400.

    Notes
    -----
    CRCs of files under 64 MiB are all checked on opening; larger files are
    checked part by part as they are read (``zipfile`` verifies each CRC at
    the end of an entry), so a damaged large part still fails before anything
    is written.
    """
    p = Path(path)
    if not p.exists():
        raise UnusableWorkbook(f"{p} does not exist", path=p)
    if p.is_dir():
        raise UnusableWorkbook(f"{p} is a folder, not a workbook", path=p)
    try:
        regular_file(p, "the workbook")  # a named pipe would block the read below for ever
    except NotARegularFile as exc:
        raise UnusableWorkbook(exc.message, path=p) from None
    max_total = _limit("TRUEBAND_MAX_UNCOMPRESSED", max_total, DEFAULT_MAX_TOTAL)
    max_ratio = float(_limit("TRUEBAND_MAX_RATIO", None if max_ratio is None else int(max_ratio), DEFAULT_MAX_RATIO))
    try:
        with p.open("rb") as fh:
            head = fh.read(8)
    except PermissionError:
        raise WorkbookLocked(f"{p.name} cannot be read: it is open in another program or access is denied; "
                             f"close it there and try again", path=p) from None
    if head.startswith(_OLE2_SIGNATURE):
        raise UnusableWorkbook(_classify_ole2(p), path=p)
    if not head.startswith(_ZIP_SIGNATURES):
        kind = "an empty file" if not head else "not a zip package"
        raise UnusableWorkbook(f"{p.name} is not an .xlsx or .xlsm workbook ({kind}; a CSV or text file "
                               f"renamed?); open it in a spreadsheet app and save it as .xlsx", path=p)
    try:
        zf = zipfile.ZipFile(p)
    except (zipfile.BadZipFile, zipfile.LargeZipFile, EOFError, OSError, ValueError) as exc:
        raise UnusableWorkbook(f"{p.name} is a damaged zip file ({exc}); it may be truncated or not fully "
                               f"downloaded", path=p) from None
    try:
        names = set(zf.namelist())
        if "mimetype" in names and "[Content_Types].xml" not in names:
            mimetype = zf.read("mimetype")[:200]
            if b"opendocument" in mimetype:
                raise UnusableWorkbook(f"{p.name} is an OpenDocument file ({mimetype.decode('ascii', 'replace')}), "
                                       f"not .xlsx; save it as .xlsx and try again", path=p)
        _check_zip(p, zf, max_total, max_ratio)
        if check_lock:
            lock = lock_file_of(p)
            if lock is not None:
                raise WorkbookLocked(f"{p.name} is open in another program (lock file {lock.name} beside it); "
                                     f"close it there first, or delete the lock file if no program has it open",
                                     path=p)
        return WorkbookPackage(p, zf)
    except UnusableWorkbook:
        zf.close()
        raise
    except (zipfile.BadZipFile, EOFError, OSError, ValueError, KeyError) as exc:
        zf.close()
        raise UnusableWorkbook(f"{p.name} is damaged ({exc}); open and re-save it in a spreadsheet app",
                               path=p) from None
    except Exception as exc:  # zlib.error from a damaged deflate stream
        zf.close()
        raise UnusableWorkbook(f"{p.name} is damaged ({type(exc).__name__}: {exc}); open and re-save it in a "
                               f"spreadsheet app", path=p) from None

