"""One writer per run folder, one verirun per calibrator: advisory locks held for a process's life.

A run folder is locked (``flock`` on ``writer.lock`` inside it) while a process writes its
journal, record or revisions; the calibrator's VISA resource is locked machine-wide (for this
user) by a lock file named after the resource string in the runtime folder. A second process
asking for a held lock is refused at once with a :class:`~verirun.errors.BusyError` naming the
run or the resource and the holder's process id. The operating system releases a lock when its
holder ends, however it ends (SIGKILL included), so a crash never leaves a run locked.
"""

from __future__ import annotations

import contextlib
import fcntl
import hashlib
import os
import tempfile
from pathlib import Path

from verirun import storage
from verirun.errors import BusyError, StorageError

#: The lock file of a run folder.
RUN_LOCK_NAME = "writer.lock"

_FLAGS = os.O_RDWR | os.O_CREAT | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_CLOEXEC", 0)


def runtime_folder() -> Path:
    """This user's folder for machine-wide locks: ``$XDG_RUNTIME_DIR/verirun``, else one in the
    temporary folder named after the user id."""
    base = os.environ.get("XDG_RUNTIME_DIR")
    if base and Path(base).is_dir():
        return Path(base) / "verirun"
    return Path(tempfile.gettempdir()) / f"verirun-{os.getuid()}"


@contextlib.contextmanager
def hold(path: Path, what: str):
    """Hold the lock file ``path`` for the block; ``what`` names the thing locked, for the
    message a second process gets.

    Raises
    ------
    BusyError
        If another process holds it.
    StorageError
        If the lock file cannot be made.
    """
    try:
        fd = os.open(path, _FLAGS, 0o644)
    except OSError as exc:
        raise storage.storage_error(exc, path) from None
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            holder = _holder(fd)
            raise BusyError(
                f"{what} is in use by another verirun process"
                + (f" (pid {holder})" if holder else "")
                + "; wait until it ends, or end that process, then try again"
            ) from None
        try:
            # Written over the old holder's, then cut to length: cutting a file to nothing before
            # its close makes the file system flush it to the disk there (about 35 us).
            pid = f"{os.getpid()}\n".encode()
            os.pwrite(fd, pid, 0)
            os.ftruncate(fd, len(pid))
        except OSError:  # a full disk: the lock holds all the same, only the pid is not said
            with contextlib.suppress(OSError):
                os.ftruncate(fd, 0)  # nor an earlier holder's, as if it were this one's
        yield
    finally:
        os.close(fd)  # releases the lock


def _holder(fd: int) -> int | None:
    try:
        text = os.pread(fd, 32, 0).decode("ascii", "replace").strip()
    except OSError:
        return None
    return int(text) if text.isdigit() else None


def run_lock(run_dir: Path):
    """The lock of one run folder (see :func:`hold`)."""
    return hold(Path(run_dir) / RUN_LOCK_NAME, f"run {run_dir}")


def calibrator_lock(resource: str):
    """The machine-wide lock of the calibrator at VISA ``resource`` (see :func:`hold`)."""
    folder = runtime_folder()
    try:
        folder.mkdir(mode=0o700, parents=True, exist_ok=True)
    except OSError as exc:
        raise storage.storage_error(exc, folder) from None
    if folder.is_symlink() or not folder.is_dir():
        raise StorageError(f"{folder}: not a folder verirun can keep its locks in; remove it")
    name = hashlib.sha256(resource.encode("utf-8")).hexdigest()[:32] + ".lock"
    return hold(folder / name, f"the calibrator at {resource!r}")
