"""The one way trueband puts a file (or a folder) in place: private, complete, with the right permissions.

=============================  =================================================================
name                           what it does
=============================  =================================================================
:func:`replacing`              a context manager: a private temporary file beside the target;
                               on success its permissions are set and it is renamed onto the
                               target (links followed), on failure it is removed
:func:`temporary_folder`       the same for a folder (the demo), renamed by the caller
:func:`private_temporary`      an empty temporary file (``0600``) for an intermediate step
:func:`copy_beside`            a complete copy (a backup) or nothing, never a truncated one
:func:`regular_file`           refuse what is not a regular file (a named pipe, a device, a folder)
:func:`remove_stale_temporaries`  remove what killed runs left in a folder
=============================  =================================================================

Every writer of the project goes through here (``workbook/save.py``, the study, its long sheets, the
demo folder, the add-in file): this module imports only the standard library, so it sits in the
lowest layer that writes files (``bridge/workbook``) and the add-in, which may otherwise import only
``funcs``, may import this one module (``tests/test_layers.py`` allows it by name).

The rules, and why:

* A temporary file is created readable and writable by its owner only (``0600``): while it is
  written it may hold applicant data, whatever the final permissions will be.
* The result takes the permission bits of the file it replaces, or of the input it was made from
  (``like``), or else the mode a new file gets here (``0666`` less the umask); the owner and group
  too where the process may set them (best effort: never an error, nothing on Windows).
* A target that is a symbolic link is followed: the file it points to is replaced and the link stays.
* A target (or input) that exists but is not a regular file is refused in one line, before anything
  is opened (a named pipe would otherwise block the reader for ever).
* Temporary names are ``.~trueband-<pid>-<random>-<what>.tmp`` (a step that needs a workbook's name
  adds ``.xlsx``). Each run removes, in the folder it
  writes to, the ones whose writing process is gone (on POSIX, asked with signal 0) or, where that
  cannot be asked (Windows), that are older than the running process; nothing else is touched.
"""

from __future__ import annotations

import contextlib
import os
import re
import shutil
import stat
import sys
import time
import uuid
from pathlib import Path

__all__ = ["TEMP_PREFIX", "NotARegularFile", "regular_file", "real_target", "replacing", "temporary_folder",
           "copy_beside", "remove_stale_temporaries", "apply_permissions", "temporary_name",
           "private_temporary"]

#: Every temporary file or folder trueband makes starts with this.
TEMP_PREFIX = ".~trueband-"
_TEMP_NAME = re.compile(re.escape(TEMP_PREFIX) + r"(?P<pid>[0-9]+)-[0-9a-f]{12}-.*\.tmp(?:\.[A-Za-z0-9]{1,8})?\Z",
                        re.DOTALL)
#: A leftover whose name carries no process number (an older trueband's) goes after this many seconds.
STALE_SECONDS = 3600
#: When this process started (close enough: when it first imported this module).
_STARTED = time.time()
_PRIVATE_FILE = 0o600


class NotARegularFile(OSError):
    """A path that exists but is not a regular file (a named pipe, a device, a folder): one line."""

    def __init__(self, message: str, path: Path):
        super().__init__(message)
        self.message = message
        self.path = path

    def __str__(self) -> str:
        return self.message


def regular_file(path: str | os.PathLike, what: str = "the file") -> Path:
    """``path`` when it is missing or a regular file (links followed); :class:`NotARegularFile` otherwise."""
    path = Path(path)
    try:
        st = os.stat(path)
    except FileNotFoundError:
        return path
    except OSError:
        return path  # unreadable: the caller's own open reports it
    if not stat.S_ISREG(st.st_mode):
        kind = ("a folder" if stat.S_ISDIR(st.st_mode) else "a named pipe" if stat.S_ISFIFO(st.st_mode)
                else "a device or socket")
        raise NotARegularFile(f"{what} {path.name} is {kind}, not a regular file", path)
    return path


def real_target(path: str | os.PathLike) -> Path:
    """The file a write to ``path`` must replace: the end of its chain of symbolic links."""
    path = Path(path)
    return Path(os.path.realpath(path)) if path.is_symlink() else path


def temporary_name(folder: Path, what: str, suffix: str = "") -> Path:
    """A fresh temporary name in ``folder`` that :func:`remove_stale_temporaries` recognises (``suffix``, such
    as ``.xlsx``, for a step that wants a workbook's name)."""
    safe = re.sub(r"[^A-Za-z0-9._-]", "_", what)[:60]
    return folder / f"{TEMP_PREFIX}{os.getpid()}-{uuid.uuid4().hex[:12]}-{safe}.tmp{suffix}"


def _default_mode() -> int:
    """A new file's mode here: 0666 less the umask."""
    try:  # Linux shows the umask without changing it (another thread could create a file meanwhile)
        with open("/proc/self/status", encoding="ascii") as fh:
            mask = next(int(line.split()[1], 8) for line in fh if line.startswith("Umask:"))
    except (OSError, StopIteration, ValueError, IndexError):
        mask = os.umask(0o077)  # elsewhere it can only be read by setting it (to the strictest), then back
        os.umask(mask)
    return 0o666 & ~mask


def apply_permissions(path: Path, like: Path | None) -> None:
    """Give ``path`` the permission bits (and, best effort, the owner) of ``like``, or a new file's mode."""
    st = None
    if like is not None:
        try:
            st = os.stat(like)
        except OSError:
            st = None
    mode = stat.S_IMODE(st.st_mode) if st is not None else _default_mode()
    if path.is_dir():
        mode |= (mode & 0o444) >> 2  # a folder needs x where it has r
    try:
        os.chmod(path, mode)
    except OSError:
        return  # a file system without permission bits: the file stays as created (owner only, where it has them)
    if st is not None and hasattr(os, "chown"):
        try:
            if (st.st_uid, st.st_gid) != (os.stat(path).st_uid, os.stat(path).st_gid):
                os.chown(path, st.st_uid, st.st_gid)
        except OSError:
            pass  # not allowed (an ordinary user cannot give a file away): keep ours


def _writer_gone(pid: int) -> bool | None:
    """True/False where it can be asked (POSIX), None where it cannot (Windows)."""
    if sys.platform == "win32":
        return None  # os.kill would end the process there, not ask about it
    if pid == os.getpid():
        return False
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return True
    except OSError:
        return False  # exists, owned by someone else
    return False


def remove_stale_temporaries(folder: str | os.PathLike) -> list[Path]:
    """Remove the temporary files and folders that killed runs left in ``folder``; returns what was removed."""
    removed = []
    try:
        entries = list(Path(folder).glob(f"{TEMP_PREFIX}*"))
    except OSError:
        return removed
    for entry in entries:
        try:
            st = os.lstat(entry)
            m = _TEMP_NAME.match(entry.name)
            if m:
                gone = _writer_gone(int(m.group("pid")))
                stale = gone if gone is not None else st.st_mtime < _STARTED
            else:
                stale = time.time() - st.st_mtime > STALE_SECONDS
            if not stale:
                continue
            if stat.S_ISDIR(st.st_mode):
                shutil.rmtree(entry)
            else:
                entry.unlink()
            removed.append(entry)
        except OSError:
            continue  # another run removed it first, or it is not ours to remove
    return removed


def _create_private(path: Path) -> None:
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
    os.close(os.open(path, flags, _PRIVATE_FILE))


def private_temporary(folder: str | os.PathLike, what: str, suffix: str = "") -> Path:
    """A new empty temporary file in ``folder``, readable by its owner only; the caller removes it."""
    path = temporary_name(Path(folder), what, suffix)
    _create_private(path)
    return path


def _fsync(path: Path) -> None:
    with open(path, "rb+") as fh:
        os.fsync(fh.fileno())


@contextlib.contextmanager
def replacing(target: str | os.PathLike, *, like: str | os.PathLike | None = None, sync: bool = True,
              replace=os.replace, suffix: str = ""):
    """Write a new ``target`` through a private temporary file beside it; yields the temporary path.

    The temporary file exists (empty, mode ``0600``) when the block starts; write it by name (open it
    with ``"wb"``, or a ``zipfile`` with ``"w"``). When the block ends normally it is flushed to disk,
    given the permissions of ``like`` (else of the file it replaces, else a new file's) and renamed onto
    the target (the end of its links) with ``replace``; when the block raises, it is removed.
    """
    dest = real_target(target)
    regular_file(dest, "the output")
    folder = dest.parent
    remove_stale_temporaries(folder)
    temp = temporary_name(folder, dest.name, suffix)
    _create_private(temp)
    try:
        yield temp
        if sync:
            _fsync(temp)
        source = Path(like) if like is not None else (dest if dest.exists() else None)
        apply_permissions(temp, source)
        replace(temp, dest)
    except BaseException:
        with contextlib.suppress(OSError):
            temp.unlink()
        raise


@contextlib.contextmanager
def temporary_folder(parent: str | os.PathLike, what: str):
    """A private folder beside the final one; yields its path, removed with its contents on failure.

    The caller fills it and renames it into place inside the block; give it a new folder's permissions
    first with ``apply_permissions(path, None)``.
    """
    parent = Path(parent)
    remove_stale_temporaries(parent)
    path = temporary_name(parent, what)
    path.mkdir(mode=0o700)
    try:
        yield path
    except BaseException:
        shutil.rmtree(path, ignore_errors=True)
        raise


def copy_beside(source: str | os.PathLike, dest: str | os.PathLike) -> Path:
    """Copy ``source`` to ``dest`` (a new name) completely, with its permissions, or leave nothing.

    Raises ``OSError`` (disk full...) with nothing written; ``FileExistsError`` when ``dest`` exists.
    """
    source, dest = Path(source), Path(dest)
    with replacing(dest, like=source, replace=_rename_new) as temp:
        with open(source, "rb") as src, open(temp, "wb") as out:
            shutil.copyfileobj(src, out, 1 << 20)
        shutil.copystat(source, temp)
    return dest


def _rename_new(src: Path, dst: Path) -> None:
    """Rename without replacing an existing file (a backup is never overwritten)."""
    if sys.platform == "win32":
        os.rename(src, dst)  # refuses an existing destination there
        return
    try:
        os.link(src, dst)  # refuses an existing destination; then drop the temporary name
    except FileExistsError:
        raise
    except OSError:  # a file system without hard links
        if dst.exists():
            raise FileExistsError(f"{dst.name} exists") from None
        os.rename(src, dst)
        return
    os.unlink(src)
