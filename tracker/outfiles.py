"""Writing an output file: private (0600), whole or not at all, never through a symbolic link.

Every file the tool writes for the user (CSV, JSON, iCalendar, PDF, backups aside)
goes through :func:`output_path` or :func:`write_output`: the content is written to
a temporary file in the same folder, created with mode 0600 whatever the umask,
then renamed over the target in one step, so a reader never sees half a file and
a failure leaves nothing behind.  A target that is a symbolic link is refused
(the rename would replace the link, and following it could write anywhere), as is
an existing file when the caller does not allow replacing it.
"""

from __future__ import annotations

import errno
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from tracker.errors import UserError


def check_output(path: Path, *, force: bool = True, where: str = "--out") -> Path:
    """Refuse a target that cannot be written safely; returns ``path``."""
    path = Path(path)
    if path.is_symlink():
        raise UserError(f"{where} {path}: is a symbolic link; give the path of a plain file")
    if path.is_dir():
        raise UserError(f"{where} {path} is a folder; give a file name")
    if path.exists() and not force:
        raise UserError(f"{where} {path} exists; give --force to replace it")
    folder = path.parent
    if not folder.is_dir():
        raise UserError(f"{where} {path}: folder {folder} does not exist")
    return path


@contextmanager
def output_path(path: Path, *, force: bool = True, where: str = "--out") -> Iterator[Path]:
    """A private temporary path to write to; renamed to ``path`` when the block succeeds.

    Usage: ``with output_path(out) as tmp: write_pdf(doc, tmp)``.
    """
    path = check_output(path, force=force, where=where)
    fd, name = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".partial", dir=path.parent)  # mode 0600
    os.close(fd)
    tmp = Path(name)
    try:
        yield tmp
        os.chmod(tmp, 0o600)  # in case the writer replaced the file instead of writing into it
        check_output(path, force=force, where=where)  # nothing appeared at the target meanwhile
        os.replace(tmp, path)
    except OSError as exc:
        if exc.errno in (errno.ENOSPC, errno.EDQUOT):
            raise UserError(f"{where} {path}: the disk is full; nothing was written") from None
        raise
    finally:
        tmp.unlink(missing_ok=True)


def write_output(path: Path, data: str | bytes, *, force: bool = True, where: str = "--out",
                 newline: str | None = "") -> Path:  # fmt: skip
    """Write ``data`` (text as UTF-8) to ``path`` through :func:`output_path`."""
    with output_path(path, force=force, where=where) as tmp:
        if isinstance(data, bytes):
            tmp.write_bytes(data)
        else:
            with open(tmp, "w", encoding="utf-8", newline=newline) as fh:
                fh.write(data)
    return Path(path)
