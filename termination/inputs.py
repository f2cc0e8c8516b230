"""Reading input files safely: regular files only, under a size limit, read once, never written.

A FIFO, a device such as /dev/zero or a directory given where a measurement
file, step list or structure file is expected would block or read without
end; a file larger than any plausible input is refused before it is read.
"""

from __future__ import annotations

import os
import stat
from pathlib import Path

from termination.defaults import MAX_STRUCTURE_BYTES
from termination.errors import TerminationError

__all__ = ["MAX_TEXT_BYTES", "read_input_bytes", "read_input_text"]

#: Largest input read when the caller names no limit, bytes (structure files; see ``termination.defaults``).
MAX_TEXT_BYTES = MAX_STRUCTURE_BYTES


def read_input_bytes(
    path: str | os.PathLike[str], *, what: str, error: type[TerminationError], max_bytes: int = MAX_TEXT_BYTES
) -> bytes:
    """The bytes of ``path`` if it is a regular file of at most ``max_bytes``; else ``error`` naming it."""
    p = Path(path)
    try:
        info = os.stat(p)
    except OSError as exc:
        raise error(f"cannot read {what} {str(p)!r}: {exc.strerror}") from None
    if not stat.S_ISREG(info.st_mode):
        raise error(f"{what} {str(p)!r} is not a regular file")
    if info.st_size > max_bytes:
        raise error(f"{what} {str(p)!r} is {info.st_size} bytes; at most {max_bytes} are read")
    try:
        with open(p, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as exc:
        raise error(f"cannot read {what} {str(p)!r}: {exc.strerror}") from None
    if len(data) > max_bytes:  # grew while being read
        raise error(f"{what} {str(p)!r} is larger than {max_bytes} bytes")
    return data


def read_input_text(
    path: str | os.PathLike[str], *, what: str, error: type[TerminationError], max_bytes: int = MAX_TEXT_BYTES
) -> str:
    """The UTF-8 text of ``path`` (see :func:`read_input_bytes`)."""
    data = read_input_bytes(path, what=what, error=error, max_bytes=max_bytes)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise error(f"{what} {str(path)!r} is not a UTF-8 text file") from None
