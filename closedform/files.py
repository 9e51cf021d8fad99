"""Reading files named by others: a size-limited read of a regular file, and file names
made safe for a one-line message. Used for case files and the CSV files of table loads."""

from __future__ import annotations

import os
import stat
from pathlib import Path

from .errors import CaseError


def display_name(path: str) -> str:
    """A file name as it may appear in a one-line message: unchanged when printable,
    otherwise with control and invisible characters escaped (a file name from someone else
    must not break the line or drive the terminal)."""
    if path.isprintable():
        return path
    return "".join(c if c.isprintable() else ascii(c)[1:-1] for c in path)


def read_limited(path: Path, limit: int, shown: str, what: str, *, key: str | None = None,
                 line: int | None = None, file: str | None = None) -> bytes:
    """The bytes of a regular file of at most ``limit`` bytes, else a CaseError.

    The file is opened without blocking and checked to be a regular file before anything is
    read, so a FIFO, a device or a folder given as a case or CSV file cannot hang the tool or
    feed it endless data. Errors name ``file`` (default: ``shown``), ``key`` and ``line``.
    """
    where = {"file": file or shown, "key": key, "line": line}
    try:
        descriptor = os.open(path, os.O_RDONLY | getattr(os, "O_NONBLOCK", 0))
    except (OSError, ValueError) as error:
        reason = getattr(error, "strerror", None) or "the name holds a NUL character"
        raise CaseError(f"cannot read {what} ({reason})", **where)
    info = os.fstat(descriptor)
    if not stat.S_ISREG(info.st_mode):
        os.close(descriptor)
        kind = "a folder" if stat.S_ISDIR(info.st_mode) else "a special file"
        raise CaseError(f"cannot read {what} (expected a regular file, got {kind})", **where)
    with os.fdopen(descriptor, "rb") as stream:
        if info.st_size > limit:
            raise CaseError(f"{what} is too large (at most {limit} bytes, got {info.st_size})",
                            **where)
        try:
            raw = stream.read(limit + 1)
        except OSError as error:
            raise CaseError(f"cannot read {what} ({error.strerror})", **where)
    if len(raw) > limit:
        raise CaseError(f"{what} is too large (at most {limit} bytes)", **where)
    return raw

