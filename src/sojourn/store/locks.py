"""The file locks: one writer per run file, one sweep per output folder.

Both are fcntl.flock locks on a small file beside what they protect, opened
without following a symlink; a folder where the lock cannot be created (read
only, missing) is reported in one line."""
from __future__ import annotations

import contextlib
import errno
import fcntl
import os
from pathlib import Path

from ..errors import RunFileError, SweepError, one_line
from .paths import lock_path

SWEEP_LOCK = ".sweep.lock"


def _open_lock_file(path: Path, error) -> int:
    """Open (create) a lock file, never through a symlink; `error` builds the
    exception for a file that cannot be opened."""
    try:
        return os.open(path, os.O_RDWR | os.O_CREAT | os.O_NOFOLLOW | os.O_CLOEXEC, 0o644)
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            reason = "it is a symbolic link; remove it"
        elif exc.errno in (errno.EACCES, errno.EPERM, errno.EROFS):
            reason = "the folder is not writable; choose another output"
        else:
            reason = one_line(exc.strerror or exc, 120)
        raise error(f"cannot create the lock file {path}: {reason}") from None


class WriteLock:
    """An exclusive lock (fcntl.flock on NAME.h5.lock) held while a run writes
    NAME.h5: a second writer of the same output is refused, not interleaved."""

    def __init__(self, final: Path):
        final = Path(final)
        self.path = lock_path(final)
        self.fd = None
        while True:
            fd = _open_lock_file(self.path, RunFileError)
            try:
                fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
            except OSError:
                os.close(fd)
                raise RunFileError(f"another run is writing {final} (it holds {self.path}); "
                                   "wait for it to finish, or choose another output with -o") \
                    from None
            try:   # the holder before us may have removed the file: lock the one on disk
                same = os.fstat(fd).st_ino == os.lstat(self.path).st_ino
            except FileNotFoundError:
                same = False
            if same:
                self.fd = fd
                return
            os.close(fd)

    def release(self) -> None:
        if self.fd is not None:
            try:
                os.unlink(self.path)
            except FileNotFoundError:
                pass
            os.close(self.fd)   # closing releases the lock
        self.fd = None


@contextlib.contextmanager
def folder_lock(folder: Path):
    """Hold an exclusive lock on a sweep's output folder (fcntl.flock on
    .sweep.lock, which records the holder's process id) and remove the lock file
    when done; yields the lock's path. The lock is on the file at that name when
    it was taken (a file removed meanwhile by its previous holder is taken anew)."""
    path = Path(folder) / SWEEP_LOCK
    for _ in range(10):
        fd = _open_lock_file(path, SweepError)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise SweepError(f"{folder}: another sweep is running in this folder"
                             f"{_lock_owner(path)} (it holds {SWEEP_LOCK}); wait for it to "
                             "finish or choose another output folder") from None
        try:
            same = os.fstat(fd).st_ino == os.lstat(path).st_ino
        except FileNotFoundError:
            same = False
        if same:
            break
        os.close(fd)
    else:
        raise SweepError(f"{folder}: could not take the lock {SWEEP_LOCK} (it keeps changing)")
    try:
        os.ftruncate(fd, 0)
        os.pwrite(fd, f"{os.getpid()}\n".encode(), 0)
        yield path
    finally:
        with contextlib.suppress(OSError):
            path.unlink()
        os.close(fd)


def _lock_owner(path: Path) -> str:
    try:
        pid = int(path.read_text().split()[0])
    except (OSError, ValueError, IndexError):
        return ""
    return f" (process {pid})"
