"""Files created and closed safely: exclusive creation that never follows a
symlink, room checks before HDF5 would run out of space, the file-size
signal, and files the library could not close."""
from __future__ import annotations

import atexit
import os
import resource
import signal
import stat
import sys
from pathlib import Path
from typing import Optional

import h5py

from ..errors import RunFileError, one_line
from . import layout

WRITE_ERRORS = (OSError, RuntimeError)   # h5py raises either for a failed write
HEADROOM = 64 * 1024  # bytes kept free for a last commit and the closing metadata


def ignore_file_size_signal() -> None:
    """Past a file-size limit (ulimit -f) the kernel kills a writer with SIGXFSZ;
    ignored, the write fails with EFBIG and the run stops with a message."""
    try:
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)
    except (ValueError, AttributeError, OSError):   # not the main thread / no such signal
        pass


_UNCLOSABLE: list = []   # files HDF5 failed to close after a write error


def _end_without_library_teardown() -> None:
    """HDF5 retries closing a file it could not close when the process ends,
    and crashes there (a segmentation fault in its teardown); a process that
    holds such a file therefore ends here, with exit code 2 (a run file error)."""
    for stream in (sys.stdout, sys.stderr):
        try:
            stream.flush()
        except (OSError, ValueError):
            pass
    os._exit(2)


def close_file(handle: h5py.File, owner=None) -> None:
    """Close an HDF5 file; one that cannot be closed (its last writes fail) is
    kept referenced with its `owner` (who holds its datasets), so that it is
    never half-freed, and the process ends without the library's teardown."""
    try:
        handle.close()
    except WRITE_ERRORS:
        _UNCLOSABLE.append((handle, owner))
        if len(_UNCLOSABLE) == 1:
            atexit.register(_end_without_library_teardown)
        raise


def room_for(folder: Path, need: int, size: int = 0) -> Optional[str]:
    """Why `need` more bytes do not fit in a file of `size` bytes in `folder`
    (the file size limit, the free disk space), or None."""
    limit = resource.getrlimit(resource.RLIMIT_FSIZE)[0]
    if limit != resource.RLIM_INFINITY and size + need > limit:
        return f"the file size limit ({limit / 2**20:.2f} MiB, ulimit -f) is reached"
    try:
        disk = os.statvfs(folder)
    except OSError:
        return None
    if disk.f_bavail * disk.f_frsize < need:
        return f"the disk is full ({disk.f_bavail * disk.f_frsize / 2**20:.1f} MiB free)"
    return None


def regular_or_absent(path: Path) -> Optional[os.stat_result]:
    """lstat of `path` (None if absent); refuses a symlink or a non-regular file."""
    try:
        info = os.lstat(path)
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise RunFileError(f"cannot look at {path}: {one_line(exc, 120)}") from None
    if stat.S_ISLNK(info.st_mode):
        raise RunFileError(f"{path} is a symbolic link; a run never writes through one "
                           "(remove it, or choose another output with -o)")
    if not stat.S_ISREG(info.st_mode):
        raise RunFileError(f"{path} is not a regular file; remove it, or choose another "
                           "output with -o")
    return info


def is_run_file(path: Path) -> bool:
    for mode in ({}, {"swmr": True}):
        try:
            with h5py.File(path, "r", **mode) as f:
                return f.attrs.get("format") == layout.FORMAT
        except (OSError, RuntimeError):
            continue
    return False


def create_exclusively(partial: Path) -> h5py.File:
    """A new HDF5 file at `partial`, which must not exist (O_EXCL, no symlink followed)."""
    try:
        fd = os.open(partial, os.O_WRONLY | os.O_CREAT | os.O_EXCL | os.O_NOFOLLOW, 0o644)
    except FileExistsError:
        raise RunFileError(f"{partial} appeared while the run was starting; "
                           "is another program writing there?") from None
    except OSError as exc:
        raise RunFileError(f"cannot create {partial}: {one_line(exc.strerror or exc, 160)}") \
            from None
    try:
        handle = h5py.File(partial, "w", libver="latest")
        if os.fstat(fd).st_ino != os.lstat(partial).st_ino:   # swapped under us
            handle.close()
            raise RunFileError(f"{partial} was replaced while the run was starting")
        return handle
    except WRITE_ERRORS as exc:
        raise RunFileError(f"cannot create {partial}: {one_line(exc, 160)}") from None
    finally:
        os.close(fd)
