"""Write a changed workbook package without ever leaving a damaged file behind.

:class:`PackageChanges` collects what changes (parts replaced, parts added,
parts removed, and the package-level edits those imply: dropping the
calculation chain, clearing "recalculate everything on open");
:func:`save_workbook` writes the new package and puts it in place:

* every untouched zip entry keeps its exact uncompressed bytes, its name
  order, compression method, timestamp and attributes;
* the new package is written to a temporary file in the destination folder
  (:func:`~.files.replacing`: readable by the owner only while it is written,
  then given the input's permission bits and owner; a symbolic link is
  followed and its target replaced; what killed runs left is removed),
  flushed to disk and re-opened as a workbook; only then is it renamed onto
  the destination with :func:`os.replace` (atomic on Windows, macOS and
  Linux), so a crash, a kill or Ctrl-C at any moment leaves the input intact
  and no half-written file under the output name;
* by default the output is a new file next to the input (``BOOK.xlsx`` →
  ``BOOK.recalc.xlsx``), never the input itself, and an existing output is not
  overwritten unless asked; ``in_place=True`` replaces the input (after the
  new file is complete), ``backup=True`` keeps the original as
  ``BOOK.backup.xlsx`` (a complete copy or nothing: a backup that cannot be
  written, on a full disk, leaves no file and nothing changed);
* a replace refused because another program holds the file open
  (``PermissionError``, as on Windows) is retried briefly, then reported as
  :class:`~trueband.bridge.workbook.package.WorkbookLocked` in one line.

Test hook: the environment variable ``TRUEBAND_TEST_WRITE_HOOK`` set to
``pause:N:MARKER`` makes the writer create the file ``MARKER`` after ``N``
entries and sleep (so a test can kill it part-way); ``exit:N`` makes it exit
abruptly after ``N`` entries. Nothing else reads it.
"""

from __future__ import annotations

import dataclasses
import os
import re
import shutil
import time
import zipfile
from pathlib import Path

from .files import TEMP_PREFIX, NotARegularFile, copy_beside, real_target, replacing
from .package import (
    REL_CALC_CHAIN,
    UnusableWorkbook,
    WorkbookLocked,
    WorkbookPackage,
    lock_file_of,
    open_workbook_package,
    rels_part_of,
)

__all__ = [
    "PackageChanges",
    "set_compress_level",
    "OutputRefused",
    "save_workbook",
    "write_package",
    "default_output_path",
    "backup_path_for",
    "TEMP_PREFIX",
]

#: Parts at least this large are recompressed at zlib level 1 (speed) unless a level is given.
LARGE_PART = 64 * 1024 ** 2
_CHUNK = 1 << 20
_REPLACE_RETRIES = 10
_REPLACE_WAIT = 0.25


def _byte_count(data: bytes | list[bytes]) -> int:
    return len(data) if isinstance(data, bytes) else sum(map(len, data))


def _same_bytes(data: bytes | list[bytes], original: bytes) -> bool:
    if isinstance(data, bytes):
        return data == original
    pos = 0
    for piece in data:
        if original[pos:pos + len(piece)] != piece:
            return False
        pos += len(piece)
    return pos == len(original)


class OutputRefused(Exception):
    """The output cannot be written as asked (it exists, or it is the input); ``str()`` is one line."""


@dataclasses.dataclass
class PackageChanges:
    """What a command changes in a package.

    ``replace`` maps existing entry names to their new bytes, ``add`` new
    entry names to bytes (written after the existing entries, in insertion
    order), ``remove`` names entries to leave out. A large part may be given
    as a list of byte strings, written one after the other (no joined copy
    of a gigabyte-sized sheet is made). Edit helpers read the current state
    of a part through :meth:`current`, so several edits of the same part compose.
    """

    replace: dict[str, bytes | list[bytes]] = dataclasses.field(default_factory=dict)
    add: dict[str, bytes] = dataclasses.field(default_factory=dict)
    remove: set[str] = dataclasses.field(default_factory=set)

    def current(self, pkg: WorkbookPackage, part: str) -> bytes | None:
        """The part's bytes as they will be written (None if absent or removed)."""
        if part in self.remove:
            return None
        if part in self.add:
            return self.add[part]
        if part in self.replace:
            data = self.replace[part]
            if isinstance(data, list):
                data = self.replace[part] = b"".join(data)
            return data
        return pkg.read(part) if part in pkg else None

    def set(self, pkg: WorkbookPackage, part: str, data: bytes | list[bytes]) -> None:
        """Write ``data`` (bytes, or a list of byte strings to be written in turn) as ``part``
        (replacing an existing part or adding a new one)."""
        self.remove.discard(part)
        if part in pkg:
            # unchanged after all: copy the original (sizes first, so a large part is rarely read again)
            if pkg.infos[part].file_size == _byte_count(data) and _same_bytes(data, pkg.read(part)):
                self.replace.pop(part, None)
            else:
                self.replace[part] = data
        else:
            self.add[part] = data if isinstance(data, bytes) else b"".join(data)

    def delete(self, part: str) -> None:
        self.replace.pop(part, None)
        self.add.pop(part, None)
        self.remove.add(part)

    # -- package-level edits

    def drop_calc_chain(self, pkg: WorkbookPackage) -> None:
        """Remove ``xl/calcChain.xml``, its relationship and its content-type entry.

        The calculation chain lists formula cells in the order the app last
        computed them. After formulas are added or removed it is stale, and
        an app may report the file as damaged; without it, apps rebuild it on
        the next recalculation, so removing it is the safe edit.
        """
        part = pkg.calc_chain_part
        if part is None:
            return
        self.delete(part)
        rels_name = rels_part_of(pkg.workbook_part)
        rels = self.current(pkg, rels_name)
        if rels is not None:
            self.set(pkg, rels_name, _remove_relationship_of_type(rels, REL_CALC_CHAIN))
        content_types = self.current(pkg, "[Content_Types].xml")
        self.set(pkg, "[Content_Types].xml", remove_override(content_types, "/" + part))

    def keep_cached_values(self, pkg: WorkbookPackage) -> None:
        """Make the app show the cached values on open instead of recalculating everything.

        ``fullCalcOnLoad="1"`` in ``<calcPr>`` (written by some libraries)
        tells the app to recompute every formula when it opens the file; an
        app without trueband's functions would then replace the values
        written here with ``#NAME?``. The attribute is removed when present;
        when absent, the workbook part is left byte-identical.
        """
        wb = self.current(pkg, pkg.workbook_part)
        new = re.sub(rb'(<(?:[\w.-]+:)?calcPr\b[^>]*?)\s+fullCalcOnLoad\s*=\s*(["\'])(?:1|true)\2', rb"\1", wb,
                     count=1)
        if new != wb:
            self.set(pkg, pkg.workbook_part, new)

    @property
    def empty(self) -> bool:
        return not (self.replace or self.add or self.remove)


def _remove_relationship_of_type(rels: bytes, rel_type: str) -> bytes:
    word = re.escape(rel_type.rsplit("/", 1)[-1].encode())
    return re.sub(rb'<(?:[\w.-]+:)?Relationship\b[^>]*?Type\s*=\s*(["\'])[^"\']*/' + word + rb'\1[^>]*?/>', b"", rels)


def remove_override(content_types: bytes, part_name: str) -> bytes:
    """``[Content_Types].xml`` without the ``<Override>`` of ``part_name`` (``/xl/calcChain.xml``)."""
    return re.sub(rb'<(?:[\w.-]+:)?Override\b[^>]*?PartName\s*=\s*(["\'])' + re.escape(part_name.encode())
                  + rb'\1[^>]*?/>', b"",
                  content_types, flags=re.I)


def add_override(content_types: bytes, part_name: str, content_type: str) -> bytes:
    """``[Content_Types].xml`` with an ``<Override>`` for ``part_name`` (unchanged if it has one)."""
    if re.search(rb'PartName\s*=\s*["\']' + re.escape(part_name.encode()) + rb'["\']', content_types, re.I):
        return content_types
    el = f'<Override PartName="{part_name}" ContentType="{content_type}"/>'.encode()
    i = content_types.rindex(b"</")
    return content_types[:i] + el + content_types[i:]


# ------------------------------------------------------------------ paths


def default_output_path(input_path: str | os.PathLike, tag: str = "recalc") -> Path:
    """``BOOK.xlsx`` → ``BOOK.recalc.xlsx`` (same folder, same extension); the word is never written twice.

    An input whose name already ends with the same word counts up instead:
    ``BOOK.recalc.xlsx`` → ``BOOK.recalc-2.xlsx`` → ``BOOK.recalc-3.xlsx``. The name
    depends on the input's name only (not on which files exist), so an existing
    output is refused, or replaced with ``overwrite``, as for a plain input.
    """
    p = Path(input_path)
    m = re.fullmatch(rf"(.+)\.{re.escape(tag)}(?:-([0-9]{{1,6}}))?", p.stem, re.IGNORECASE)
    if m:
        return p.with_name(f"{m.group(1)}.{tag}-{int(m.group(2) or 1) + 1}{p.suffix}")
    return p.with_name(f"{p.stem}.{tag}{p.suffix}")


def backup_path_for(input_path: str | os.PathLike) -> Path:
    """``BOOK.backup.xlsx``, or ``BOOK.backup-2.xlsx`` and so on when that exists already (a backup is never
    overwritten).

    The input of a backup that is itself a backup (``BOOK.backup.xlsx``,
    ``BOOK.backup-2.xlsx``) is numbered from ``BOOK``: its backup is the first free
    ``BOOK.backup-N.xlsx``, never ``BOOK.backup.backup.xlsx``.
    """
    p = Path(input_path)
    m = re.fullmatch(r"(.+)\.backup(?:-[0-9]{1,6})?", p.stem, re.IGNORECASE)
    base = m.group(1) if m else p.stem
    candidate = p.with_name(f"{base}.backup{p.suffix}")
    n = 2
    while candidate.exists():
        candidate = p.with_name(f"{base}.backup-{n}{p.suffix}")
        n += 1
    return candidate


def _same_file(a: Path, b: Path) -> bool:
    try:
        return a.exists() and b.exists() and os.path.samefile(a, b)
    except OSError:
        return a.resolve() == b.resolve()


# ------------------------------------------------------------------ writing


def _test_write_hook():
    """(action, entries written, marker file) from ``TRUEBAND_TEST_WRITE_HOOK``, or None when it is not set."""
    raw = os.environ.get("TRUEBAND_TEST_WRITE_HOOK", "")
    if not raw:
        return None
    parts = raw.split(":", 2)
    return parts[0], int(parts[1]), (parts[2] if len(parts) > 2 else "")


def _run_test_write_hook(test_hook, written: int) -> None:
    """Pause or exit as the test hook asks once ``written`` entries are written."""
    if test_hook is None or written != test_hook[1]:
        return
    action, _, marker = test_hook
    if action == "pause":
        if marker:
            Path(marker).write_text(str(os.getpid()))
        time.sleep(120)
    elif action == "exit":
        os._exit(3)


def _copy_info(info: zipfile.ZipInfo) -> zipfile.ZipInfo:
    new = zipfile.ZipInfo(info.filename, date_time=info.date_time)
    new.compress_type = info.compress_type
    new.comment = info.comment
    new.create_system = info.create_system
    new.create_version = info.create_version
    new.extract_version = info.extract_version
    new.external_attr = info.external_attr
    new.internal_attr = info.internal_attr
    new.flag_bits = info.flag_bits & 0x0800  # keep only the UTF-8 name flag; sizes are rewritten
    return new


def _level_for(size: int, compresslevel: int | None) -> int | None:
    if compresslevel is not None:
        return compresslevel
    return 1 if size >= LARGE_PART else None


def set_compress_level(info: zipfile.ZipInfo, level: int | None) -> None:
    """Compress the entry ``info`` describes at zlib ``level`` (None: zlib's default) when it is written."""
    # The attribute is private before Python 3.13 and public (compress_level) from it.
    info._compresslevel = level
    if hasattr(info, "compress_level"):
        info.compress_level = level


_set_level = set_compress_level


def write_package(pkg: WorkbookPackage, changes: PackageChanges, dest: str | os.PathLike, *,
                  compresslevel: int | None = None, exclusive: bool = True) -> None:
    """Write the changed package to ``dest`` directly (no temporary file; see :func:`save_workbook`).

    ``dest`` must not exist unless ``exclusive`` is False (then it is truncated, keeping its mode).

    Untouched entries are decompressed and written again with their original
    ZipInfo (name, timestamp, method, attributes), in their original order;
    replaced entries take the place of the original; added entries follow.
    """
    unknown = (set(changes.replace) | changes.remove) - set(pkg.entry_names)
    if unknown:
        raise KeyError(f"changes name parts the package does not have: {sorted(unknown)}")
    test_hook = _test_write_hook()
    written = 0
    default_method = zipfile.ZIP_DEFLATED
    with open(dest, "xb" if exclusive else "wb") as fh:
        with zipfile.ZipFile(fh, "w", allowZip64=True) as out:
            for name in pkg.entry_names:
                if name in changes.remove:
                    continue
                info = pkg.infos[name]
                new_info = _copy_info(info)
                if name in changes.replace:
                    data = changes.replace[name]
                    size = _byte_count(data)
                    if new_info.compress_type == zipfile.ZIP_STORED and size > 1024:
                        new_info.compress_type = default_method
                    _set_level(new_info, _level_for(size, compresslevel))
                    if isinstance(data, bytes):
                        out.writestr(new_info, data)
                    else:  # what writestr does, a piece at a time
                        new_info.file_size = size
                        with out.open(new_info, "w") as dst:
                            for piece in data:
                                dst.write(piece)
                elif info.file_size <= _CHUNK * 8:
                    _set_level(new_info, _level_for(info.file_size, compresslevel))
                    out.writestr(new_info, pkg.read(name))
                else:  # a large untouched part: stream it
                    _set_level(new_info, _level_for(info.file_size, compresslevel))
                    new_info.file_size = info.file_size
                    with pkg.open_part(name) as src, out.open(new_info, "w", force_zip64=True) as dst:
                        shutil.copyfileobj(src, dst, _CHUNK)
                written += 1
                _run_test_write_hook(test_hook, written)
            for name, data in changes.add.items():
                info = zipfile.ZipInfo(name, date_time=time.localtime(time.time())[:6])
                info.compress_type = default_method
                _set_level(info, _level_for(len(data), compresslevel))
                out.writestr(info, data)
                written += 1
                _run_test_write_hook(test_hook, written)
        fh.flush()
        os.fsync(fh.fileno())


def _verify(path: Path, pkg: WorkbookPackage, changes: PackageChanges) -> None:
    """Re-open the written file as a workbook and check it holds exactly the expected entries."""
    expected = [n for n in pkg.entry_names if n not in changes.remove] + list(changes.add)
    try:
        with open_workbook_package(path, check_lock=False, max_total=1 << 62, max_ratio=1e9) as new:
            if new.entry_names != expected:
                raise UnusableWorkbook(f"the written file {path.name} does not hold the expected parts")
            if path.stat().st_size < 256 * 1024 ** 2:
                bad = new._zip.testzip()
                if bad is not None:
                    raise UnusableWorkbook(f"the written file {path.name} fails its checksum at {bad}")
    except UnusableWorkbook as exc:
        raise UnusableWorkbook(f"writing failed, nothing was changed: {exc.message}") from None


def _replace(src: Path, dst: Path) -> None:
    for attempt in range(_REPLACE_RETRIES):
        try:
            os.replace(src, dst)
            return
        except PermissionError:
            if attempt == _REPLACE_RETRIES - 1:
                raise WorkbookLocked(f"{dst.name} is open in another program (it cannot be replaced); "
                                     f"close it there and run again", path=dst) from None
            time.sleep(_REPLACE_WAIT)


def _backup(src: Path) -> Path:
    """A complete copy of the input as ``BOOK.backup.xlsx``, or nothing and a one-line error naming it."""
    for _ in range(_REPLACE_RETRIES):
        target = backup_path_for(src)
        try:
            return copy_beside(src, target)
        except FileExistsError:
            continue  # taken meanwhile by another run: the next free name
        except OSError as exc:
            reason = exc.strerror or type(exc).__name__
            raise UnusableWorkbook(f"the backup {target.name} could not be written ({reason}); nothing was "
                                   f"changed and no backup was left") from None
    raise UnusableWorkbook(f"no free backup name beside {src.name}; nothing was changed")


def save_workbook(pkg: WorkbookPackage, changes: PackageChanges, *, output: str | os.PathLike | None = None,
                  in_place: bool = False, backup: bool = False, overwrite: bool = False, tag: str = "recalc",
                  compresslevel: int | None = None) -> Path:
    """Write the changed workbook safely and return the path written.

    Parameters
    ----------
    pkg : WorkbookPackage
        The opened input (kept open while writing: untouched parts are copied from it).
    changes : PackageChanges
    output : path-like, optional
        Where to write; default ``BOOK.<tag>.xlsx`` beside the input. Must not
        be the input (use ``in_place``).
    in_place : bool
        Replace the input itself, after the new file is complete and re-opens.
    backup : bool
        With ``in_place``: keep the original as ``BOOK.backup.xlsx`` (or ``-2``...).
    overwrite : bool
        Allow replacing an existing ``output``; default False.
    tag : str
        The word in the default output name.

    Raises
    ------
    OutputRefused
        The output exists (and ``overwrite`` is False), is the input, or is combined with ``in_place``.
    WorkbookLocked
        The destination is held open by another program.
    UnusableWorkbook
        The written file did not re-open cleanly (nothing was changed).
    """
    src = pkg.path
    if in_place:
        if output is not None:
            raise OutputRefused("give either an output file or --in-place, not both")
        dest = src
    else:
        dest = Path(output) if output is not None else default_output_path(src, tag)
        if dest.suffix.lower() not in (".xlsx", ".xlsm"):
            raise OutputRefused(f"the output {dest.name} must end in .xlsx or .xlsm")
        if _same_file(dest, src) or dest.resolve() == src.resolve():
            raise OutputRefused(f"the output {dest.name} is the input; use --in-place to replace the input")
        if dest.exists() and not overwrite:
            raise OutputRefused(f"{dest} exists already; remove it, choose another output, or add --overwrite")
        if pkg.is_macro_enabled and dest.suffix.lower() == ".xlsx" and src.suffix.lower() == ".xlsm":
            raise OutputRefused(f"{src.name} holds macros; the output must end in .xlsm, not {dest.name}")
        lock = lock_file_of(dest) if dest.exists() else None
        if lock is not None:
            raise WorkbookLocked(f"{dest.name} is open in another program (lock file {lock.name} beside it); "
                                 f"close it there first, or choose another output", path=dest)
    dest = real_target(dest)  # through a symbolic link: the file it points to is replaced, the link stays
    try:
        with replacing(dest, like=src, sync=False,
                       replace=_replace) as temp:
            write_package(pkg, changes, temp, compresslevel=compresslevel, exclusive=False)
            _verify(temp, pkg, changes)
            if in_place and backup:
                _backup(src)
            if in_place:
                # On Windows the input is still open for reading through pkg; close it before replacing.
                pkg.close()
    except NotARegularFile as exc:
        raise OutputRefused(exc.message) from None
    return dest

