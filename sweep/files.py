"""Reading a user's file safely: regular files only, never more than a size limit.

A named pipe, a device (a link to /dev/zero) or a folder is refused before anything is read, so
reading can neither block nor run out of memory.
"""
from __future__ import annotations

import os
import stat

from .errors import InputError

MAX_TEXT = 1 * 2**20          # bytes: a study or timer-model file (a long study is a few KiB)


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "is a folder"
    if stat.S_ISFIFO(mode):
        return "is a named pipe"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "is a device"
    if stat.S_ISSOCK(mode):
        return "is a socket"
    return "is not a regular file"


def read_bytes_limited(path, limit: int, what: str, fname: str | None = None,
                       key: str = "") -> bytes:
    """The bytes of `path` if it is a regular file of at most `limit` bytes; else InputError
    naming the file (`fname`, default the path) and saying what is wrong.

    The file is opened without blocking and checked on the open descriptor, so a pipe or a
    device never gets a read."""
    fname = str(path) if fname is None else fname
    try:
        fd = os.open(path, os.O_RDONLY | os.O_NONBLOCK | getattr(os, "O_CLOEXEC", 0))
    except FileNotFoundError:
        raise InputError(fname, key, "file not found") from None
    except IsADirectoryError:
        raise InputError(fname, key, f"is a folder, not {what}") from None
    except OSError as e:
        raise InputError(fname, key, f"cannot open: {e.strerror}") from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            raise InputError(fname, key, f"{_kind(st.st_mode)}, not {what}")
        if st.st_size > limit:
            raise InputError(fname, key, f"{what} of {_size(st.st_size)}; the limit is {_size(limit)}")
        os.set_blocking(fd, True)
        with os.fdopen(fd, "rb", closefd=True) as f:
            fd = -1
            data = f.read(limit + 1)              # a file that grows while read stops here too
    except OSError as e:
        raise InputError(fname, key, f"cannot read: {e.strerror}") from None
    finally:
        if fd >= 0:
            os.close(fd)
    if len(data) > limit:
        raise InputError(fname, key, f"{what} larger than the limit of {_size(limit)}")
    return data


def _size(n: int) -> str:
    return f"{n / 2**20:,.1f}".removesuffix(".0") + " MiB" if n >= 2**20 else f"{n:,} bytes"
