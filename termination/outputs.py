"""Writing result files safely: never over an input, never over a file without ``force``, all or nothing.

Every file the package writes (measurement files, step lists, figures,
reports, slabs) goes through :func:`check_outputs` before any work is
written and :func:`write_text` to write it: the text goes to a temporary
file in the same folder, which then replaces the target in one rename, so an
interrupted or failed write leaves no partial file behind.
"""

from __future__ import annotations

import os
import tempfile
from collections.abc import Iterable
from pathlib import Path

from termination.errors import TerminationError

__all__ = ["check_outputs", "write_bytes", "write_text"]


def _same_file(a: Path, b: Path) -> bool:
    try:
        return os.path.samefile(a, b)
    except OSError:  # one of them does not exist
        return a.resolve() == b.resolve()


def check_outputs(
    outputs: Iterable[str | os.PathLike[str] | None],
    inputs: Iterable[str | os.PathLike[str] | None] = (),
    *,
    force: bool = False,
    error: type[TerminationError] = TerminationError,
) -> list[Path]:
    """Refuse outputs that are inputs (the same file, also through a link), repeat each other, or exist.

    Parameters
    ----------
    outputs : iterable of path or None
        Files about to be written; None entries are skipped.
    inputs : iterable of path or None
        Files that must never be written.
    force : bool
        Allow replacing existing files that are not inputs.
    error : exception type
        Raised, naming the file, for the first offending output.

    Returns
    -------
    list of Path
        The outputs to write.
    """
    ins = [Path(p) for p in inputs if p is not None]
    outs = [Path(p) for p in outputs if p is not None]
    for i, out in enumerate(outs):
        if any(_same_file(out, p) for p in ins):
            raise error(f"{out} is an input file; choose another output name")
        if any(_same_file(out, other) for other in outs[:i]):
            raise error(f"{out} is named twice as an output; choose two names")
        if out.is_dir():
            raise error(f"{out} is a folder, not a file")
        if out.exists() and not force:
            raise error(f"{out} exists; pass --force to overwrite it")
        parent = out.parent if str(out.parent) else Path(".")
        if not parent.is_dir():
            raise error(f"cannot write {out}: folder {parent} does not exist")
    return outs


def write_bytes(
    path: str | os.PathLike[str], data: bytes, *, force: bool = False, error: type[TerminationError] = TerminationError
) -> Path:
    """Write ``data`` to ``path`` through a temporary file and one rename.

    Without ``force`` an existing file is an error and is left alone.
    """
    target = Path(path)
    if target.exists() and not force:
        raise error(f"{str(target)!r} exists; pass force=True (--force) to overwrite it")
    folder = target.parent if str(target.parent) else Path(".")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
    except OSError as exc:
        raise error(f"cannot write {str(target)!r}: {exc.strerror}") from None
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
        # mkstemp makes the file private (0600); a result is an ordinary file, with the mode the
        # user's umask gives a new file.
        os.chmod(tmp, 0o666 & ~_umask())
        if not force and target.exists():  # appeared meanwhile
            raise error(f"{str(target)!r} exists; pass force=True (--force) to overwrite it")
        os.replace(tmp, target)
    except OSError as exc:
        raise error(f"cannot write {str(target)!r}: {exc.strerror}") from None
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)
    return target


def _umask() -> int:
    """The process's file-creation mask (read by setting it and putting it back)."""
    mask = os.umask(0)
    os.umask(mask)
    return mask


def write_text(
    path: str | os.PathLike[str], text: str, *, force: bool = False, error: type[TerminationError] = TerminationError
) -> Path:
    """Write UTF-8 ``text`` to ``path`` through a temporary file and one rename (see :func:`write_bytes`)."""
    return write_bytes(path, text.encode("utf-8"), force=force, error=error)
