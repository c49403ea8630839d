"""Reading a file the user names, refusing anything that is not a regular file.

A FIFO blocks a reader forever and a device such as ``/dev/zero`` never ends
(its ``st_size`` is 0, so a size guard does not stop it).  Every command that
reads a user's file (imports, settings, key files, templates, rule sets) reads
it through :func:`read_regular`: the path is checked with ``os.stat`` before
opening, opened without blocking, and checked again on the open descriptor
(``fstat``), so a file swapped for a pipe in between is refused too.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path
from typing import BinaryIO

MAX_BYTES = 2 * 1024**3  # 2 GiB: larger files are refused before reading


class NotReadable(Exception):
    """The file cannot be read as a regular file; ``reason`` says why in a few words."""

    def __init__(self, reason: str):
        self.reason = reason
        super().__init__(reason)


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "is a folder, not a file"
    if stat.S_ISFIFO(mode):
        return "is a pipe (FIFO), not a regular file"
    if stat.S_ISCHR(mode) or stat.S_ISBLK(mode):
        return "is a device, not a regular file"
    if stat.S_ISSOCK(mode):
        return "is a socket, not a regular file"
    return "is not a regular file"


def check_regular(path: str | Path) -> os.stat_result:
    """``os.stat`` of ``path`` (following links); :class:`NotReadable` unless a regular file."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise NotReadable("file not found") from None
    except OSError as exc:
        raise NotReadable(f"cannot be read ({exc.strerror})") from None
    if not stat.S_ISREG(st.st_mode):
        raise NotReadable(_kind(st.st_mode))
    return st


def open_regular(path: str | Path, limit: int = MAX_BYTES) -> BinaryIO:
    """A binary file object for a regular file of at most ``limit`` bytes; :class:`NotReadable` otherwise."""
    check_regular(path)
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0))
    except OSError as exc:
        raise NotReadable(f"cannot be read ({exc.strerror})") from None
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):  # replaced between the check and the open
            raise NotReadable(_kind(st.st_mode))
        if st.st_size > limit:
            raise NotReadable(f"file is larger than {_size(limit)}")
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def read_regular(path: str | Path, limit: int = MAX_BYTES) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes; :class:`NotReadable` otherwise."""
    with open_regular(path, limit) as fh:
        try:
            data = fh.read()  # readall: sized from fstat
        except OSError as exc:
            raise NotReadable(f"cannot be read ({exc.strerror})") from None
    if len(data) > limit:  # the file grew while being read
        raise NotReadable(f"file is larger than {_size(limit)}")
    return data


def read_regular_text(path: str | Path, limit: int = MAX_BYTES) -> str:
    """:func:`read_regular` decoded as UTF-8 (``UnicodeDecodeError`` when it is not)."""
    return read_regular(path, limit).decode("utf-8")


def _size(n: int) -> str:
    if n % 1024**3 == 0:
        return f"{n // 1024**3} GiB"
    if n % 1024**2 == 0:
        return f"{n // 1024**2} MiB"
    return f"{n} bytes"
