"""JSON form of the command reports: one serialisation of the result records, and their JSON Schemas.

Every command's ``--json`` output is :func:`json_document`: the record's
fields (:func:`to_jsonable`) after ``schema_version`` and ``command``.  The
same dataclass annotations give the JSON Schema of each command
(:func:`json_schema`), shipped in ``termination/schemas/<command>.json``;
``python -m termination.serialise`` writes them.

Conventions shared by every command:

- a field's key is its name with the suffix of its unit (``d_angstrom``,
  ``tilt_deg``; :mod:`termination.units`);
- a face is ``hkl`` ([h, k, l]), a list of faces ``faces``, a termination an
  object with ``id`` and ``label``; in a crystal with hexagonal axes (hexagonal
  and trigonal) every face key is followed by its Miller-Bravais form
  (``hkil``: [h, k, i, l]; ``mount_hkil``, ``tilt_variant_hkil``) and every
  direction key by its four-index form (``tilt_axis_uvtw``);
- the angle gamma of a 2D lattice is the obtuse one, 90° to 120°;
- floats are written as computed; infinite or undefined values are null.
"""

from __future__ import annotations

import dataclasses
import json
import math
import sys
import types
import typing
from collections.abc import Mapping
from importlib import resources
from pathlib import Path
from typing import Any

import numpy as np

from termination.units import SUFFIXES, json_key

__all__ = [
    "DIRECTION_KEYS",
    "FACE_KEYS",
    "SCHEMA_VERSION",
    "json_document",
    "json_schema",
    "shipped_schema",
    "to_jsonable",
    "write_schemas",
]

#: Fields that hold a face (h k l), and the key of its Miller-Bravais form (h k i l) added in hexagonal axes.
FACE_KEYS = {"hkl": "hkil", "mount": "mount_hkil", "tilt_variant": "tilt_variant_hkil"}
#: Fields that hold a direction [u v w], and the key of its four-index form [u v t w].
DIRECTION_KEYS = {"tilt_axis": "tilt_axis_uvtw"}


def _four_index(name: str, value: Any) -> Any:
    """The four-index form of a face or direction field's value (None when it holds none)."""
    from termination.surface.miller import to_four_index, uvtw

    if value is None or len(value) != 3:
        return None
    return list(to_four_index(value) if name in FACE_KEYS else uvtw(value))


#: Version of the JSON output of every command; the major number changes when a key changes meaning.
SCHEMA_VERSION = "2.0"


def to_jsonable(obj: Any, hexagonal: bool = False) -> Any:
    """Plain JSON-ready form of a result: dataclasses become dicts, arrays lists.

    A field's JSON key is its name with the suffix of its unit
    (:func:`termination.units.json_key`), or ``metadata["json"]`` where a
    name is not a valid identifier (``from``).  Fields declared with
    ``repr=False`` are internal and left out; a tuple of pairs marked
    ``metadata["mapping"]`` becomes an object.  Non-finite floats become
    None, so the output is strict JSON.  With ``hexagonal`` (a crystal with
    hexagonal axes), each face and direction field (:data:`FACE_KEYS`,
    :data:`DIRECTION_KEYS`) is followed by its four-index form.
    """
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        out = {}
        for f in dataclasses.fields(obj):
            if not f.repr:
                continue
            value = getattr(obj, f.name)
            if f.metadata.get("mapping") and value is not None:
                value = dict(value)
            out[json_key(f.name, f.metadata)] = to_jsonable(value, hexagonal)
            if hexagonal and f.name in FACE_KEYS | DIRECTION_KEYS:
                out[(FACE_KEYS | DIRECTION_KEYS)[f.name]] = _four_index(f.name, value)
        return out
    if isinstance(obj, Mapping):
        return {str(k): to_jsonable(v, hexagonal) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v, hexagonal) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist(), hexagonal)
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    return obj


def json_document(command: str, record: Any) -> dict[str, Any]:
    """The ``--json`` output of ``command``: schema version, command name, then the record's fields.

    Faces get their Miller-Bravais form too when the record's structure has hexagonal axes.
    """
    hexagonal = bool(getattr(getattr(record, "structure", None), "hexagonal_axes", False))
    return {"schema_version": SCHEMA_VERSION, "command": command, **to_jsonable(record, hexagonal)}


# --------------------------------------------------------------------------- schemas


def _schema_of(tp: Any, defs: dict[str, Any], ns: dict[str, Any]) -> dict[str, Any]:
    """JSON Schema of a type annotation (dataclasses go to ``defs``)."""
    origin = typing.get_origin(tp)
    args = typing.get_args(tp)
    if tp is Any or tp is object:
        return {}
    if origin in (typing.Union, types.UnionType):
        options = [_schema_of(a, defs, ns) for a in args]
        return options[0] if len(options) == 1 else {"anyOf": options}
    if tp is type(None):
        return {"type": "null"}
    if tp is bool:
        return {"type": "boolean"}
    if tp is int:
        return {"type": "integer"}
    if tp is float:
        return {"type": ["number", "null"]}  # non-finite values are written as null
    if tp is str:
        return {"type": "string"}
    if dataclasses.is_dataclass(tp) and isinstance(tp, type):
        name = tp.__name__
        if name not in defs:
            defs[name] = {}  # placeholder: recursive records refer to themselves
            defs[name] = _dataclass_schema(tp, defs, ns)
        return {"$ref": f"#/$defs/{name}"}
    if origin is typing.Literal:
        return {"enum": list(args)}
    if origin in (tuple, list) or tp in (tuple, list):
        if origin is tuple and args and args[-1] is not Ellipsis:
            items = [_schema_of(a, defs, ns) for a in args]
            return {"type": "array", "prefixItems": items, "minItems": len(items), "maxItems": len(items)}
        item = _schema_of(args[0], defs, ns) if args else {}
        return {"type": "array", "items": item}
    if origin in (dict, Mapping) or tp in (dict, Mapping) or origin is typing.get_origin(Mapping[str, int]):
        value = _schema_of(args[1], defs, ns) if len(args) == 2 else {}
        return {"type": "object", "additionalProperties": value}
    if origin is np.ndarray or tp is np.ndarray:
        return {"type": "array"}
    return {}


def _dataclass_schema(cls: type, defs: dict[str, Any], ns: dict[str, Any]) -> dict[str, Any]:
    hints = typing.get_type_hints(cls, {**ns, **vars(sys.modules[cls.__module__])})
    properties: dict[str, Any] = {}
    optional: list[str] = []
    for f in dataclasses.fields(cls):
        if not f.repr:
            continue
        tp = hints[f.name]
        if f.metadata.get("mapping"):
            schema: dict[str, Any] = {"type": "object", "additionalProperties": {"type": "number"}}
        else:
            schema = _schema_of(tp, defs, ns)
        unit = f.metadata.get("unit")
        if isinstance(unit, str):
            schema = {**schema, "description": SUFFIXES[unit][1]}
        properties[json_key(f.name, f.metadata)] = schema
        if f.name in FACE_KEYS | DIRECTION_KEYS:
            optional.append((FACE_KEYS | DIRECTION_KEYS)[f.name])
            four = {"type": "array", "items": {"type": "integer"}, "minItems": 4, "maxItems": 4}
            properties[optional[-1]] = {
                "anyOf": [four, {"type": "null"}],
                "description": "four-index (Miller-Bravais) form, present in hexagonal axes",
            }
    doc = (cls.__doc__ or "").strip().splitlines()
    required = [k for k in properties if k not in optional]
    out: dict[str, Any] = {"type": "object", "properties": properties, "required": required}
    if doc:
        out["description"] = doc[0]
    out["additionalProperties"] = False
    return out


def json_schema(command: str, record_type: type, namespace: Mapping[str, Any] | None = None) -> dict[str, Any]:
    """JSON Schema (draft 2020-12) of the ``--json`` output of ``command``, whose record is ``record_type``.

    ``namespace`` resolves annotations that name types imported only for type checking.
    """
    defs: dict[str, Any] = {}
    body = _dataclass_schema(record_type, defs, dict(namespace or {}))
    body["properties"] = {
        "schema_version": {"const": SCHEMA_VERSION},
        "command": {"const": command},
        **body["properties"],
    }
    body["required"] = ["schema_version", "command", *body["required"]]
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": f"termination/{command}.schema.json",
        "title": f"termination {command} --json, schema {SCHEMA_VERSION}",
        **body,
        "$defs": dict(sorted(defs.items())),
    }


def shipped_schema(command: str) -> dict[str, Any]:
    """The JSON Schema of ``command`` shipped with the package."""
    text = resources.files("termination").joinpath("schemas", f"{command}.json").read_text(encoding="utf-8")
    return dict(json.loads(text))


def write_schemas(directory: str | Path | None = None) -> list[Path]:
    """Write the schema of every command (default: the package's ``schemas`` folder); return the paths."""
    from termination.reports import command_reports

    folder = Path(directory) if directory is not None else Path(__file__).with_name("schemas")
    folder.mkdir(exist_ok=True)
    paths = []
    reports = command_reports()
    namespace = {t.__name__: t for t in reports.values()} | _annotation_namespace()
    for command, record_type in reports.items():
        path = folder / f"{command}.json"
        schema = json_schema(command, record_type, namespace)
        path.write_text(json.dumps(schema, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")
        paths.append(path)
    return paths


def _annotation_namespace() -> dict[str, Any]:
    """Types that report annotations name but their modules import only for type checking."""
    from termination.imaging.analysis import HeightMapAnalysis

    return {"HeightMapAnalysis": HeightMapAnalysis}


if __name__ == "__main__":
    for p in write_schemas(sys.argv[1] if len(sys.argv) > 1 else None):
        print(p)
