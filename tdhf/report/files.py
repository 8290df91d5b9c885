"""Result files: every output path checked before any work, written without destroying what is not ours.

Rules (the same for ``--json``, ``--csv`` and the files of ``tdhf series --out``):

* A new path, or an existing *regular file*, is written atomically: the text goes to a temporary
  file in the same folder, which is then renamed over the path, so the path holds either its
  previous content or the complete new file, never a partial one.  A replaced file keeps its
  permission bits.
* A *symbolic link* is followed: the file it points to is written (the link itself stays a link).
* A *character device or FIFO* (``/dev/null``, ``/dev/stdout``, a named pipe) is written through,
  never replaced by a regular file.
* Refused before any work (:class:`~tdhf.errors.InputError`, exit code 2): a folder, a block
  device or socket, a read-only file (even for root), a missing or read-only parent folder.
* A write that still fails after the computation (disk full, file-size limit, the folder removed
  meanwhile) raises :class:`~tdhf.errors.OutputError` naming the file; the previous content of
  the file is kept and no temporary file is left behind.

Temporary files are named ``.<name>.<random>.tmp`` and lock files ``.<name>.lock``, next to the
result file; :func:`remove_stale_temporaries` deletes temporary files an interrupted writer left.
"""

from __future__ import annotations

import contextlib
import fcntl
import os
import stat
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

from tdhf.errors import InputError, OutputError

__all__ = ["OutputTarget", "check_output_file", "check_output_folder", "write_text", "write_bytes", "claim",
           "remove_stale_temporaries"]


class _Refused(Exception):
    """A path that must not be written; the message says why and what to do."""


@dataclass(frozen=True)
class OutputTarget:
    """Where the bytes of one output go.

    ``option`` names the command-line option (``--json``), ``path`` is the path as given,
    ``target`` the file actually written (a symlink's target) and ``atomic`` whether it is
    written by temporary file and rename (regular files and new paths) or written through.
    """

    option: str
    path: Path
    target: Path
    atomic: bool


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISBLK(mode):
        return "a block device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _writable_folder(folder: Path) -> None:
    if folder.exists() and not folder.is_dir():
        raise _Refused(f"{folder} is not a folder; give a folder")
    if not folder.is_dir():
        raise _Refused(f"the folder {folder} does not exist; create it or give another path")
    if not os.access(folder, os.W_OK | os.X_OK):
        raise _Refused(f"the folder {folder} is not writable; choose a folder you can write to")


def _plan(path: Path, option: str) -> OutputTarget:
    """Decide how ``path`` is written, or raise _Refused."""
    try:
        info = os.stat(path)  # follows symlinks
    except FileNotFoundError:
        info = None
    except OSError as err:
        raise _Refused(f"cannot inspect it: {err.strerror or err}") from None
    if info is None:  # a new file, or a dangling symlink whose target is created
        target = Path(os.path.realpath(path))
        _writable_folder(target.parent)
        return OutputTarget(option, path, target, atomic=True)
    mode = info.st_mode
    if stat.S_ISREG(mode):
        target = Path(os.path.realpath(path))
        # root may write anything, so the permission bits are checked too: a read-only file is
        # someone's decision not to overwrite it.
        if not (mode & 0o222) or not os.access(target, os.W_OK):
            raise _Refused("the file is read-only; make it writable (chmod u+w) or choose another name")
        _writable_folder(target.parent)
        return OutputTarget(option, path, target, atomic=True)
    if stat.S_ISCHR(mode) or stat.S_ISFIFO(mode):
        if not os.access(path, os.W_OK):
            raise _Refused("it is not writable")
        return OutputTarget(option, path, path, atomic=False)
    fix = "; give a file name" if stat.S_ISDIR(mode) else "; give the name of a regular file"
    raise _Refused(f"it is {_kind(mode)}{fix}")


def check_output_file(path: str | Path, option: str) -> OutputTarget:
    """Check before any work that ``path`` can be written; raise InputError (one line) if not."""
    path = Path(path)
    try:
        return _plan(path, option)
    except _Refused as why:
        raise InputError(f"{option} {path}: {why}") from None


def check_output_folder(path: str | Path, option: str) -> Path:
    """Check that ``path`` is, or can be made, a writable folder; create it.  InputError if not."""
    path = Path(path)
    try:
        if path.exists() or path.is_symlink():
            _writable_folder(Path(os.path.realpath(path)))
            return path
        ancestor = path.parent
        while not ancestor.exists() and ancestor != ancestor.parent:
            ancestor = ancestor.parent
        _writable_folder(ancestor)
        path.mkdir(parents=True, exist_ok=True)
    except _Refused as why:
        raise InputError(f"{option} {path}: {why}") from None
    except OSError as err:
        raise InputError(f"{option} {path}: cannot create the folder: {err.strerror or err}") from None
    return path


def _write_all(descriptor: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        written = os.write(descriptor, view)
        view = view[written:]


def _replace(target: Path, data: bytes) -> None:
    try:
        mode = stat.S_IMODE(os.stat(target).st_mode)
    except FileNotFoundError:
        mask = os.umask(0)
        os.umask(mask)
        mode = 0o666 & ~mask  # mkstemp makes the file private (0600); a new file gets the usual mode
    handle, temporary = tempfile.mkstemp(dir=target.parent, prefix=f".{target.name}.", suffix=".tmp")
    try:
        try:
            _write_all(handle, data)
            os.fsync(handle)
        finally:
            os.close(handle)
        os.chmod(temporary, mode)
        os.replace(temporary, target)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def _write_through(target: Path, data: bytes) -> None:
    handle = os.open(target, os.O_WRONLY)  # no O_CREAT, no O_TRUNC: a device or FIFO stays what it is
    try:
        _write_all(handle, data)
    finally:
        os.close(handle)


def write_text(path: str | Path | OutputTarget, text: str, option: str = "") -> None:
    """Write ``text`` (UTF-8) to a path by the rules of the module docstring.

    The path is checked again (it may have changed since :func:`check_output_file`).

    Raises
    ------
    OutputError
        If the file cannot be written; the message names it and the reason.
    """
    write_bytes(path, text.encode("utf-8"), option)


def write_bytes(path: str | Path | OutputTarget, data: bytes, option: str = "") -> None:
    """Write ``data`` (e.g. a PNG picture) to a path like :func:`write_text`."""
    if isinstance(path, OutputTarget):
        option, path = path.option, path.path
    path = Path(path)
    label = f"{option} {path}" if option else str(path)
    try:
        plan = _plan(path, option)
        (_replace if plan.atomic else _write_through)(plan.target, data)
    except _Refused as why:
        raise OutputError(f"{label}: cannot write the file: {why}") from None
    except OSError as err:
        raise OutputError(f"{label}: cannot write the file: {err.strerror or err}") from None


def remove_stale_temporaries(path: str | Path) -> int:
    """Delete the temporary files of ``path`` that an interrupted writer left; return how many.

    Call it only while holding :func:`claim` on ``path``: then no other writer is using them.
    """
    path = Path(path)
    removed = 0
    with contextlib.suppress(OSError):  # best effort: a leftover that stays harms nothing
        for leftover in path.parent.glob(f".{path.name}.*.tmp"):
            with contextlib.suppress(OSError):
                leftover.unlink()
                removed += 1
    return removed


@contextlib.contextmanager
def claim(path: str | Path, wait: bool = False) -> Iterator[bool]:
    """Hold an exclusive lock on the result file ``path`` (a lock file beside it).

    Yields True when the lock is held, False if another process holds it and ``wait`` is False.
    The operating system releases the lock when a process dies, so no lock is ever stale; the lock
    file is removed when the claim ends.
    """
    path = Path(path)
    lock = path.with_name(f".{path.name}.lock")
    while True:
        handle = os.open(lock, os.O_RDWR | os.O_CREAT, 0o666)
        try:
            fcntl.flock(handle, fcntl.LOCK_EX | (0 if wait else fcntl.LOCK_NB))
        except BlockingIOError:
            os.close(handle)
            yield False
            return
        # The previous holder removes the lock file before it lets go: a lock taken on a file that
        # is no longer at `lock` protects nothing, so take it again on the current one.
        try:
            current = os.stat(lock).st_ino == os.fstat(handle).st_ino
        except FileNotFoundError:
            current = False
        if current:
            break
        os.close(handle)
    try:
        yield True
    finally:
        with contextlib.suppress(FileNotFoundError):
            lock.unlink()
        os.close(handle)
