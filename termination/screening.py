"""Screening: many structures through the per-structure report, in chunks, on any executor, resumable.

``termination screen`` finds the structures (files, folders, glob patterns,
prototype specs), skips those already in the output file, sends the rest in
chunks to a :class:`concurrent.futures.Executor` (none: in this process; a
process pool; a Dask cluster through its client's executor) and appends the
rows of each chunk to the output, in input order, as soon as the chunks
before it are written.  Each worker loads a structure and calls
:func:`termination.reports.screen_rows`; any failure of one structure
becomes its error row and never stops the run.

Output formats, by the file's suffix:

- JSON Lines (``.jsonl``, ``.ndjson``): a header line
  ``{"schema_version", "command": "screen", "settings": {...}}``, then one
  :class:`~termination.reports.ScreenRow` per line, keys as in ``--json``.
- CSV (``.csv``): one row per line, nested terminations flattened into
  ``; ``-separated columns (:data:`CSV_COLUMNS`).

A resumed run reads the structures already in the file (error rows
included), drops a trailing partial line left by an interrupted run, checks
that the JSON Lines header has the same settings, and appends the rest.
"""

from __future__ import annotations

import concurrent.futures as cf
import csv
import glob
import io
import json
import math
import os
import time
import warnings
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from termination.defaults import MAX_CELL, MAX_INDEX, SCREEN_CHUNK, SYMPREC_ANGSTROM
from termination.errors import StructureError, TerminationError
from termination.reports import ScreenReport, ScreenRow, ScreenTermination, screen_rows
from termination.serialise import SCHEMA_VERSION, to_jsonable
from termination.tables import fraction_text

__all__ = [
    "CSV_COLUMNS",
    "ScreenSettings",
    "find_structures",
    "output_format",
    "read_done",
    "screen",
    "screen_chunk",
    "screen_structure",
]

#: Columns of the CSV output, in order (JSON keys of the flat fields, then the flattened terminations).
CSV_COLUMNS = (
    "structure",
    "formula",
    "spacegroup_number",
    "hkl",
    "d_angstrom",
    "multiplicity",
    "cleavage_rank",
    "weighted_bonds_per_nm2",
    "termination_count",
    "smallest_step_angstrom",
    "polar",
    "terminations",
    "tasker_types",
    "compensations",
    "cells",
    "formal_charges",
    "error",
)

#: File-name endings read as structures inside a folder (explicit files are always read).
_STRUCTURE_SUFFIXES = (
    ".cif",
    ".mcif",
    ".vasp",
    ".poscar",
    ".xyz",
    ".extxyz",
    ".xsf",
    ".res",
    ".cell",
    ".gen",
    ".pdb",
    ".cfg",
    ".traj",
    ".json",
    ".in",
    ".pwi",
    ".cube",
    ".xtl",
)
_STRUCTURE_NAMES = ("POSCAR", "CONTCAR")


@dataclass(frozen=True)
class ScreenSettings:
    """What every structure of a screen is computed with (written in the JSON Lines header)."""

    max_index: int = MAX_INDEX
    max_cell: int = MAX_CELL
    use_pymatgen: bool = False
    symprec: float = SYMPREC_ANGSTROM
    termination_options: tuple[tuple[str, Any], ...] = ()

    def header(self) -> dict[str, Any]:
        """The settings as the JSON Lines header holds them."""
        out = {
            "max_index": self.max_index,
            "max_cell": self.max_cell,
            "use_pymatgen": self.use_pymatgen,
            "symprec_angstrom": self.symprec,
        }
        out.update({k: v for k, v in self.termination_options})
        return out


# --------------------------------------------------------------------------- finding the structures


def _is_structure_name(name: str) -> bool:
    base = os.path.basename(name)
    if base.startswith("."):
        return False
    return base.lower().endswith(_STRUCTURE_SUFFIXES) or base.startswith(_STRUCTURE_NAMES)


def find_structures(paths: Iterable[str | os.PathLike[str]]) -> tuple[str, ...]:
    """The structures named by files, folders (searched recursively), glob patterns and prototype specs.

    Parameters
    ----------
    paths : iterable of str
        A file is taken as given; a folder contributes every file whose
        name looks like a structure (``*.cif``, ``POSCAR*``, ``*.xyz``, ...;
        hidden files skipped), sorted; a pattern with ``*``, ``?`` or ``[``
        every matching file, sorted; a prototype spec (``rocksalt:Na,Cl``)
        itself.

    Returns
    -------
    tuple of str
        In the order given, each structure once.

    Raises
    ------
    StructureError
        For a path that does not exist and is no prototype spec, or a
        pattern or folder that matches nothing: before any work starts.
    """
    found: dict[str, None] = {}
    for item in paths:
        text = os.fspath(item)
        if os.path.isdir(text):
            names = sorted(
                os.path.join(root, f)
                for root, dirs, files in os.walk(text)
                for f in files
                if _is_structure_name(f) and not any(part.startswith(".") for part in Path(root).parts[1:])
            )
            if not names:
                raise StructureError(f"folder {text} holds no structure files (*.cif, POSCAR*, *.xyz, ...)")
            found.update(dict.fromkeys(names))
        elif os.path.exists(text):
            found[text] = None
        elif any(ch in text for ch in "*?["):
            names = sorted(p for p in glob.glob(text, recursive=True) if os.path.isfile(p))
            if not names:
                raise StructureError(f"no file matches {text}")
            found.update(dict.fromkeys(names))
        elif ":" in text and os.sep not in text:
            found[text] = None  # a prototype spec; checked by the worker like any structure
        else:
            raise StructureError(f"no such structure file or folder: {text}")
    if not found:
        raise StructureError("no structures given")
    return tuple(found)


# --------------------------------------------------------------------------- the work


def screen_structure(source: str, settings: ScreenSettings) -> tuple[ScreenRow, ...]:
    """Rows of one structure, or its error row: nothing that goes wrong with one structure stops a screen."""
    from termination.structures import load_structure

    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # readers warn about things the rows report anyway
            crystal = load_structure(source, symprec=settings.symprec)
            return screen_rows(
                crystal,
                source,
                max_index=settings.max_index,
                max_cell=settings.max_cell,
                use_pymatgen=settings.use_pymatgen,
                termination_options=dict(settings.termination_options),
            )
    except TerminationError as exc:
        return (ScreenRow(structure=source, error=_first_line(exc)),)
    except Exception as exc:  # a structure the checks missed: still one row, never the end of the run
        return (ScreenRow(structure=source, error=f"unexpected {type(exc).__name__}: {_first_line(exc)}"),)


def screen_chunk(sources: Sequence[str], settings: ScreenSettings) -> tuple[tuple[ScreenRow, ...], ...]:
    """The rows of each structure of one chunk (the task a worker runs)."""
    return tuple(screen_structure(s, settings) for s in sources)


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


# --------------------------------------------------------------------------- output files


def output_format(path: str | os.PathLike[str]) -> str:
    """'jsonl' or 'csv' from the file name; anything else is an error naming the file."""
    name = os.fspath(path).lower()
    if name.endswith((".jsonl", ".ndjson")):
        return "jsonl"
    if name.endswith(".csv"):
        return "csv"
    raise StructureError(f"cannot tell the output format of {os.fspath(path)}: name it *.jsonl or *.csv")


def _csv_record(row: ScreenRow) -> list[str]:
    def text(v: Any) -> str:
        if v is None:
            return ""
        if isinstance(v, bool):
            return "true" if v else "false"
        return str(v)

    terms: Sequence[ScreenTermination] = row.terminations
    return [
        row.structure,
        text(row.formula),
        text(row.spacegroup_number),
        "" if row.hkl is None else " ".join(str(v) for v in row.hkl),
        text(row.d),
        text(row.multiplicity),
        text(row.cleavage_rank),
        text(row.weighted_bonds_per_nm2),
        text(row.termination_count),
        text(row.smallest_step),
        text(row.polar),
        "; ".join(f"{t.id} {t.label}" for t in terms),
        "; ".join(text(t.tasker_type) for t in terms) if any(t.tasker_type for t in terms) else "",
        "; ".join(_signed_fraction(t.compensation) for t in terms) if any(t.tasker_type for t in terms) else "",
        "; ".join(t.cell or "" for t in terms) if any(t.cell for t in terms) else "",
        text(row.formal_charges),
        text(row.error),
    ]


def _signed_fraction(f: float | None) -> str:
    if f is None:
        return ""
    if f == 0:
        return "0"
    return ("-" if f < 0 else "+") + fraction_text(f)


def _lines(rows: Iterable[ScreenRow], fmt: str) -> str:
    if fmt == "jsonl":
        return "".join(json.dumps(to_jsonable(r), ensure_ascii=False) + "\n" for r in rows)
    buf = io.StringIO()
    writer = csv.writer(buf, lineterminator="\n")
    for r in rows:
        writer.writerow(_csv_record(r))
    return buf.getvalue()


def _header(fmt: str, settings: ScreenSettings) -> str:
    if fmt == "jsonl":
        head = {"schema_version": SCHEMA_VERSION, "command": "screen", "settings": settings.header()}
        return json.dumps(head, ensure_ascii=False) + "\n"
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerow(CSV_COLUMNS)
    return buf.getvalue()


def read_done(path: str | os.PathLike[str], fmt: str, settings: ScreenSettings | None = None) -> set[str]:
    """Structures already in an output file (error rows included); drops a trailing partial line.

    With ``settings``, a JSON Lines file written with other settings is an
    error (resuming it would mix two screens).
    """
    name = os.fspath(path)
    with open(name, "rb") as fh:
        data = fh.read()
    if data and not data.endswith(b"\n"):
        # An interrupted write left a partial last line: cut it so that the file stays valid.
        keep = data.rfind(b"\n") + 1
        with open(name, "r+b") as fh:
            fh.truncate(keep)
        data = data[:keep]
    text = data.decode("utf-8")
    done: set[str] = set()
    if fmt == "jsonl":
        lines = text.splitlines()
        if not lines:
            return done
        try:
            head = json.loads(lines[0])
        except json.JSONDecodeError:
            head = None
        if not isinstance(head, dict) or head.get("command") != "screen":
            raise StructureError(f"{name} is not the output of termination screen (no header line)")
        if settings is not None and head.get("settings") != settings.header():
            raise StructureError(
                f"{name} was screened with other settings ({head.get('settings')}); "
                "resume with those or write a new file"
            )
        for ln in lines[1:]:
            if ln.strip():
                done.add(str(json.loads(ln)["structure"]))
        return done
    reader = csv.reader(io.StringIO(text))
    columns = next(reader, None)
    if columns is None:
        return done
    if tuple(columns) != CSV_COLUMNS:
        raise StructureError(f"{name} is not the CSV output of termination screen (other columns)")
    for rec in reader:
        if rec:
            done.add(rec[0])
    return done


def _append(path: str, text: str) -> None:
    """Append ``text`` with one write call per block, so that an interruption cuts at most the last line."""
    data = text.encode("utf-8")
    fd = os.open(path, os.O_WRONLY | os.O_APPEND)
    try:
        view = memoryview(data)
        while view:
            n = os.write(fd, view)
            view = view[n:]
    finally:
        os.close(fd)


# --------------------------------------------------------------------------- the run


def _executor_workers(executor: cf.Executor | None) -> int:
    if executor is None:
        return 1
    n = getattr(executor, "_max_workers", None)
    return int(n) if isinstance(n, int) and n > 0 else os.cpu_count() or 1


def screen(
    paths: Iterable[str | os.PathLike[str]],
    *,
    out: str | os.PathLike[str] | None = None,
    resume: bool = False,
    force: bool = False,
    executor: cf.Executor | None = None,
    workers: int | None = None,
    chunk_size: int | None = None,
    progress: Callable[[int, int], None] | None = None,
    max_index: int = MAX_INDEX,
    max_cell: int = MAX_CELL,
    use_pymatgen: bool = False,
    symprec: float = SYMPREC_ANGSTROM,
    termination_options: Mapping[str, Any] | None = None,
) -> ScreenReport:
    """Screen many structures: one row per structure and face, on any executor, written as it goes.

    Parameters
    ----------
    paths : iterable of str
        Files, folders, glob patterns, prototype specs (:func:`find_structures`).
    out : path, optional
        JSON Lines (``*.jsonl``) or CSV (``*.csv``) file the rows are
        appended to; without it the rows are returned in the report.
    resume : bool
        Continue an existing ``out``: structures already in it are skipped.
    force : bool
        Replace an existing ``out`` (start again).
    executor : concurrent.futures.Executor, optional
        Runs the chunks: a ``ProcessPoolExecutor``, a Dask client's
        ``get_executor()``, ...; None runs them in this process.
    workers : int, optional
        Number of workers of ``executor`` (sizes the chunks and how many are
        in flight); default its ``_max_workers``, else the number of cores.
    chunk_size : int, optional
        Structures per task; default min(:data:`~termination.defaults.SCREEN_CHUNK`,
        ceil(n / (4 workers))), so that the per-task overhead stays small and
        the last tasks still spread over the workers.
    progress : callable, optional
        ``progress(done, total)`` after each chunk, counting the structures of this run.
    max_index, max_cell, use_pymatgen, symprec, termination_options
        Settings of every structure (:func:`termination.reports.screen_rows`).

    Returns
    -------
    ScreenReport
        Counts; with ``out`` None, the rows too.

    Notes
    -----
    At most 4 x workers chunks are in flight; rows are written in input
    order, so the output does not depend on the executor or on the timing.
    """
    if max_index != int(max_index) or max_cell != int(max_cell):
        raise StructureError(f"max index and max cell must be whole numbers, got {max_index} and {max_cell}")
    from termination.defaults import MAX_CELL_LIMIT, MAX_INDEX_LIMIT
    from termination.outputs import check_outputs, write_text

    if not 1 <= max_index <= MAX_INDEX_LIMIT:
        raise StructureError(f"max index must be an integer from 1 to {MAX_INDEX_LIMIT}, got {max_index}")
    if not 1 <= max_cell <= MAX_CELL_LIMIT:
        raise StructureError(f"max cell must be an integer from 1 to {MAX_CELL_LIMIT}, got {max_cell}")
    if chunk_size is not None and (chunk_size != int(chunk_size) or chunk_size < 1):
        raise StructureError(f"chunk size must be a positive whole number, got {chunk_size}")
    settings = ScreenSettings(
        max_index=int(max_index),
        max_cell=int(max_cell),
        use_pymatgen=bool(use_pymatgen),
        symprec=float(symprec),
        termination_options=tuple(sorted(dict(termination_options or {}).items())),
    )
    sources = find_structures(paths)
    fmt = None
    done: set[str] = set()
    target = None if out is None else os.fspath(out)
    if target is not None:
        fmt = output_format(target)
        files = [s for s in sources if os.path.exists(s)]
        if os.path.exists(target) and not (resume or force):
            raise StructureError(f"{target} exists; pass --resume to continue it or --force to start again")
        check_outputs([target], files, force=True, error=StructureError)
        if resume and os.path.exists(target):
            done = read_done(target, fmt, settings)
        else:
            write_text(target, _header(fmt, settings), force=True, error=StructureError)
    todo = [s for s in sources if s not in done]
    n_workers = max(1, int(workers) if workers is not None else _executor_workers(executor))
    size = int(chunk_size) if chunk_size else max(1, min(SCREEN_CHUNK, math.ceil(len(todo) / (4 * n_workers))))
    chunks = [tuple(todo[i : i + size]) for i in range(0, len(todo), size)]
    kept: list[ScreenRow] = []
    counts = {"rows": 0, "failed": 0, "done": 0}
    start = time.perf_counter()

    def write(chunk: tuple[tuple[ScreenRow, ...], ...]) -> None:
        rows = [r for per_structure in chunk for r in per_structure]
        counts["failed"] += sum(1 for per_structure in chunk if per_structure and per_structure[0].error)
        counts["rows"] += len(rows)
        if target is not None and fmt is not None:
            _append(target, _lines(rows, fmt))
        else:
            kept.extend(rows)

    def advance(n: int) -> None:
        counts["done"] += n
        if progress is not None:
            progress(counts["done"], len(todo))

    if progress is not None:
        progress(0, len(todo))
    if executor is None:
        for c in chunks:
            write(screen_chunk(c, settings))
            advance(len(c))
    else:
        _run_ordered(executor, chunks, settings, 4 * n_workers, write, advance)
    return ScreenReport(
        structures=len(sources),
        skipped=len(sources) - len(todo),
        screened=len(todo),
        failed=counts["failed"],
        rows=counts["rows"],
        out=target,
        format=fmt,
        max_index=settings.max_index,
        max_cell=settings.max_cell,
        workers=n_workers if executor is not None else 1,
        wall_time=time.perf_counter() - start,
        results=tuple(kept),
    )


def _run_ordered(
    executor: cf.Executor,
    chunks: list[tuple[str, ...]],
    settings: ScreenSettings,
    window: int,
    write: Callable[[tuple[tuple[ScreenRow, ...], ...]], None],
    advance: Callable[[int], None],
) -> None:
    """Run the chunks on ``executor`` with at most ``window`` in flight; write their rows in chunk order."""
    pending: dict[int, cf.Future[tuple[tuple[ScreenRow, ...], ...]]] = {}
    finished: dict[int, tuple[tuple[ScreenRow, ...], ...]] = {}
    next_submit = next_write = 0
    try:
        while next_write < len(chunks):
            while next_submit < len(chunks) and next_submit - next_write < window:
                pending[next_submit] = executor.submit(screen_chunk, chunks[next_submit], settings)
                next_submit += 1
            cf.wait(list(pending.values()), return_when=cf.FIRST_COMPLETED)
            for i in [i for i, f in pending.items() if f.done()]:
                future = pending.pop(i)
                try:
                    finished[i] = future.result()
                except cf.BrokenExecutor as exc:
                    raise StructureError(
                        f"the workers stopped ({_first_line(exc)}); the output holds every structure done so "
                        "far: run again with --resume"
                    ) from None
                except Exception as exc:  # the task failed as a whole (a lost worker): error rows, go on
                    message = f"worker failed: {type(exc).__name__}: {_first_line(exc)}"
                    finished[i] = tuple((ScreenRow(structure=s, error=message),) for s in chunks[i])
                advance(len(chunks[i]))
            while next_write in finished:
                write(finished.pop(next_write))
                next_write += 1
    finally:
        for f in pending.values():
            f.cancel()
