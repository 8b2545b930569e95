"""Writing the files of run and report folders: whole or not at all, never through a symlink.

Every file verirun writes under a run or report folder goes through here. A file is written to
a temporary beside it, fsynced and renamed over the old one, so a reader sees the old file or
the new one and never a part; the temporary is removed whatever stops the write. The last
component of every path is opened with ``O_NOFOLLOW``, so a symlink planted in a folder is
refused rather than followed. A full disk, a read-only folder or a path that is a file is a
fault of the bench, not of verirun: it becomes a :class:`StorageError` saying what to free or fix.
"""

from __future__ import annotations

import errno
import os
from pathlib import Path
from typing import Iterable

from verirun.errors import StorageError

#: Bytes gathered before each ``os.write`` of a file written in pieces.
CHUNK = 1 << 16

_NOFOLLOW = getattr(os, "O_NOFOLLOW", 0)
_CLOEXEC = getattr(os, "O_CLOEXEC", 0)


def what_to_do(exc: OSError, path: Path | str) -> str:
    """The fault behind ``exc`` in plain words, with what to free or fix."""
    path = str(getattr(exc, "filename", None) or path)
    code = exc.errno
    if code in (errno.ENOSPC, errno.EDQUOT):
        return (
            f"{path}: no space left on the device (or the disk quota is used up); free space on"
            " that disk"
        )
    if code in (errno.EROFS,):
        return f"{path}: the file system is read-only; remount it read-write or use another folder"
    if code in (errno.EACCES, errno.EPERM):
        return f"{path}: permission denied; make the folder writable for this user"
    if code in (errno.ENOTDIR, errno.EEXIST, errno.EISDIR):
        return (
            f"{path}: a file or folder is in the way (a path verirun needs is a file, or a file it"
            " writes is a folder); move it aside"
        )
    if code == errno.ELOOP:
        return f"{path}: is a symbolic link, which verirun does not write through; remove the link"
    return f"{path}: {exc.strerror or exc}"


def storage_error(exc: OSError, path: Path | str) -> StorageError:
    """The :class:`StorageError` of a failed write of ``path``."""
    return StorageError(what_to_do(exc, path))


def make_folder(path: Path | str, *, exist_ok: bool = True) -> Path:
    """Make ``path`` (and its parents); an existing folder, or a link to one, is kept.

    Raises
    ------
    StorageError
        If it cannot be made (a file is in the way, no space, read-only).
    """
    path = Path(path)
    try:
        path.mkdir(parents=True, exist_ok=exist_ok)
    except FileExistsError as exc:
        if not exist_ok or not path.is_dir():
            raise storage_error(exc, path) from None
    except OSError as exc:
        raise storage_error(exc, path) from None
    # A folder may be a link (runs kept on another disk); the files written in it never are.
    return path


def open_append(path: Path | str) -> int:
    """A file descriptor appending to ``path`` (made if missing), not through a symlink."""
    try:
        return os.open(path, os.O_WRONLY | os.O_APPEND | os.O_CREAT | _NOFOLLOW | _CLOEXEC, 0o644)
    except OSError as exc:
        raise storage_error(exc, path) from None


def sync_folder(path: Path | str) -> None:
    """fsync the folder ``path``, so a file made or renamed in it survives a power cut."""
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0) | _CLOEXEC)
    except OSError:  # a platform without folder descriptors: the file's own fsync is all there is
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_all(fd: int, data: bytes) -> None:
    """Write every byte of ``data`` to ``fd`` (``os.write`` may write fewer)."""
    view = memoryview(data)
    while view:
        written = os.write(fd, view)
        view = view[written:]


def write_atomic(path: Path | str, pieces: Iterable[str | bytes]) -> Path:
    """Write the text (or bytes) ``pieces`` as the whole of ``path``: temporary, fsync, rename.

    Raises
    ------
    StorageError
        If the file cannot be written; no temporary is left behind and the old file is kept.
    """
    path = Path(path)
    tmp = path.with_name(path.name + ".tmp")
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC | _NOFOLLOW | _CLOEXEC, 0o644)
    except OSError as exc:
        raise storage_error(exc, tmp) from None
    try:
        try:
            buffer: list[bytes] = []
            size = 0
            for piece in pieces:
                data = piece.encode("utf-8") if isinstance(piece, str) else piece
                buffer.append(data)
                size += len(data)
                if size >= CHUNK:
                    write_all(fd, b"".join(buffer))
                    buffer, size = [], 0
            write_all(fd, b"".join(buffer))
            os.fsync(fd)
        finally:
            os.close(fd)
        if path.is_symlink():
            raise OSError(errno.ELOOP, "is a symbolic link", str(path))
        os.replace(tmp, path)
        sync_folder(path.parent)
    except BaseException as exc:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise storage_error(exc, path) from None
        raise
    return path


def write_new(path: Path | str, data: bytes) -> Path:
    """Write ``data`` as a new file ``path``, which must not exist (not even as a symlink)."""
    path = Path(path)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL | _NOFOLLOW | _CLOEXEC, 0o644)
    except OSError as exc:
        raise storage_error(exc, path) from None
    try:
        try:
            write_all(fd, data)
            os.fsync(fd)
        finally:
            os.close(fd)
    except OSError as exc:
        try:
            os.unlink(path)
        except OSError:
            pass
        raise storage_error(exc, path) from None
    return path
