"""JSON form of the command reports: one serialisation of the result dataclasses."""

from __future__ import annotations

import dataclasses
import math
from typing import Any

import numpy as np

from termination.units import json_key

__all__ = ["to_jsonable"]


def to_jsonable(obj: Any) -> Any:
    """Plain JSON-ready form of a result: dataclasses become dicts, arrays lists.

    A field's JSON key is its name with the suffix of its unit
    (:func:`termination.units.json_key`), or ``metadata["json"]`` where a
    name is not a valid identifier (``from``).

    Non-finite floats become None, so the output is strict JSON.
    """
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {
            json_key(f.name, f.metadata): to_jsonable(getattr(obj, f.name)) for f in dataclasses.fields(obj) if f.repr
        }
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    return obj
