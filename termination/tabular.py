"""Result records as tables in notebooks: ``to_dataframe()`` and ``_repr_html_`` for every command's record.

A record (a frozen dataclass) that inherits :class:`Tabular` names the
fields that hold its rows in ``_tables``: the first is the default table
(``faces`` of ``planes``, ``candidates`` of ``match``); a dotted name such as
``'faces.terminations'`` gives one row per termination of each face, the
face's own columns repeated on each.  Columns are the JSON keys of the
fields (:func:`termination.units.json_key`: a length is ``d_angstrom``), a
nested record becomes dotted columns (``mesh.a_angstrom``), a list of records
a list of dicts.  In a notebook the record shows as its scalar fields and its
default table; pandas is imported only by :meth:`Tabular.to_dataframe`.
"""

from __future__ import annotations

import dataclasses
import html
import math
from collections.abc import Mapping
from typing import Any, ClassVar

from termination.units import json_key

__all__ = ["Tabular", "flat_row", "record_rows"]

#: Rows shown by ``_repr_html_`` before it says how many more there are.
HTML_ROWS = 50


def _plain(value: Any, prefix: str, out: dict[str, Any]) -> None:
    """Put ``value`` into ``out`` under ``prefix``: records flattened with dots, arrays as lists."""
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        for k, v in flat_row(value).items():
            out[f"{prefix}.{k}"] = v
        return
    if hasattr(value, "tolist") and not isinstance(value, (str, bytes)):
        value = value.tolist()
    if (
        isinstance(value, (list, tuple))
        and value
        and all(dataclasses.is_dataclass(v) and not isinstance(v, type) for v in value)
    ):
        value = [flat_row(v) for v in value]
    elif isinstance(value, Mapping):
        value = dict(value)
    out[prefix] = value


def flat_row(record: Any) -> dict[str, Any]:
    """One record as a flat dict: JSON keys (unit suffixes included), nested records as dotted keys.

    >>> from dataclasses import dataclass, field
    >>> from termination.units import ANGSTROM
    >>> @dataclass(frozen=True)
    ... class Cell:
    ...     a: float = field(metadata=ANGSTROM)
    >>> @dataclass(frozen=True)
    ... class Face:
    ...     hkl: tuple[int, int, int]
    ...     mesh: Cell
    >>> flat_row(Face((0, 0, 1), Cell(2.5)))
    {'hkl': (0, 0, 1), 'mesh.a_angstrom': 2.5}
    """
    out: dict[str, Any] = {}
    for f in dataclasses.fields(record):
        if f.repr:
            _plain(getattr(record, f.name), json_key(f.name, f.metadata), out)
    return out


def record_rows(record: Any, path: str) -> list[dict[str, Any]]:
    """Rows of ``record`` along the dotted field ``path`` ('faces', 'faces.terminations').

    At each level but the last, the parent's scalar columns are repeated on
    its children's rows (prefixed with the parent field's name where a child
    has a column of the same name).
    """
    parts = path.split(".")
    rows: list[tuple[dict[str, Any], Any]] = [({}, record)]
    for depth, name in enumerate(parts):
        nxt: list[tuple[dict[str, Any], Any]] = []
        for carried, obj in rows:
            items = getattr(obj, name)
            for item in items if isinstance(items, (list, tuple)) else [items]:
                nxt.append((carried, item))
        if depth < len(parts) - 1:
            rows = []
            for carried, obj in nxt:
                own = {
                    k: v
                    for k, v in flat_row(obj).items()
                    if not isinstance(v, list) or not v or not isinstance(v[0], dict)
                }
                own.pop(parts[depth + 1], None)
                rows.append(({**carried, **{f"{name}.{k}": v for k, v in own.items()}}, obj))
        else:
            rows = nxt
    out = []
    for carried, obj in rows:
        mine = flat_row(obj) if dataclasses.is_dataclass(obj) else {"value": obj}
        parent = {}
        for k, v in carried.items():
            short = k.split(".", 1)[1]
            parent[k if short in mine or short in parent else short] = v
        out.append({**parent, **mine})
    return out


def _cell(value: Any) -> str:
    """Short text of a table cell."""
    if value is None:
        return ""
    if isinstance(value, float):
        return "∞" if math.isinf(value) else f"{value:.6g}"
    if isinstance(value, dict):
        return ", ".join(f"{k} {_cell(v)}" for k, v in value.items())
    if isinstance(value, (list, tuple)):
        if value and isinstance(value[0], dict):
            named = [v.get("label") or v.get("id") for v in value]
            return ", ".join(str(n) for n in named) if all(named) else f"{len(value)} entries"
        return "(" + " ".join(_cell(v) for v in value) + ")"
    return str(value)


class Tabular:
    """Adds ``to_dataframe()`` and ``_repr_html_`` to a result record (a dataclass) that names its ``_tables``.

    Its methods' names (``table_names``, ``table_rows``, ``to_dataframe``)
    must not be field names of the record: a dataclass would take an
    inherited method for a field's default.
    """

    #: Field paths of the record's tables, the default first.
    _tables: ClassVar[tuple[str, ...]] = ()

    def table_names(self) -> tuple[str, ...]:
        """Names of the tables :meth:`to_dataframe` can make, the default first."""
        return self._tables

    def table_rows(self, table: str | None = None) -> list[dict[str, Any]]:
        """The rows of ``table`` (default the first of :meth:`table_names`) as flat dicts."""
        path = table or (self._tables[0] if self._tables else None)
        if path is None:
            return [flat_row(self)]
        if path not in self._tables:
            from termination.errors import TerminationError

            raise TerminationError(f"{type(self).__name__} has the tables {', '.join(self._tables)}, not {table!r}")
        return record_rows(self, path)

    def to_dataframe(self, table: str | None = None) -> Any:
        """The rows of ``table`` as a pandas DataFrame (pandas is imported here, not before).

        Parameters
        ----------
        table : str, optional
            One of :meth:`table_names`; default the first.
        """
        import pandas as pd

        return pd.DataFrame(self.table_rows(table))

    def _repr_html_(self) -> str:
        """The record's scalar fields and its default table, as HTML (for notebooks)."""
        e = html.escape
        head = (type(self).__doc__ or type(self).__name__).strip().splitlines()[0]
        facts = []
        for f in dataclasses.fields(self):  # type: ignore[arg-type]
            value = getattr(self, f.name)
            if isinstance(value, (str, int, float, bool)) or (
                isinstance(value, tuple) and value and all(isinstance(v, (int, float)) for v in value)
            ):
                facts.append(
                    f"<tr><th style='text-align:left'>{e(json_key(f.name, f.metadata))}</th>"
                    f"<td style='text-align:left'>{e(_cell(value))}</td></tr>"
                )
        parts = [f"<div><p><strong>{e(head)}</strong></p>"]
        if facts:
            parts.append(f"<table>{''.join(facts)}</table>")
        if self._tables:
            rows = self.table_rows()
            columns: list[str] = []
            for r in rows:
                columns += [k for k in r if k not in columns]
            body = "".join(
                "<tr>" + "".join(f"<td>{e(_cell(r.get(c)))}</td>" for c in columns) + "</tr>" for r in rows[:HTML_ROWS]
            )
            more = (
                f"<p>… {len(rows) - HTML_ROWS} more rows (to_dataframe() has all)</p>" if len(rows) > HTML_ROWS else ""
            )
            header = "".join(f"<th>{e(c)}</th>" for c in columns)
            parts.append(f"<p>{e(self._tables[0])} ({len(rows)} rows)</p><table><tr>{header}</tr>{body}</table>{more}")
        parts.append("</div>")
        return "".join(parts)
