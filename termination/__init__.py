"""termination: which face and atomic termination does a cleaved crystal show?

The library is computation on numpy arrays and small frozen dataclasses, in
layers that follow the data flow::

    algebra -> bulk -> (structures) -> surface -> identification -> reports
                                   imaging ----------^

It never imports typer or rich; :mod:`termination.cli` renders its results.
The public names below are re-exported lazily (PEP 562): a module is
imported the first time one of its names is used, so ``import termination``
stays cheap and the command line starts fast.
"""

from __future__ import annotations

import importlib
from typing import Any

from termination.errors import (
    ChargeError,
    ImageError,
    MeasurementError,
    PlaneError,
    StructureError,
    TerminationError,
)

__version__ = "0.2.0"

_LAZY = {
    "bulk.crystal": ("Crystal", "build_crystal"),
    "bulk.charges": ("ChargeAssignment", "assign_charges"),
    "structures": ("build_prototype", "load_structure"),
    "surface.faces": ("Face", "Mesh", "distinct_faces", "face_geometry", "interplanar_angle"),
    "surface.terminations": ("FaceTerminations", "Termination", "face_terminations"),
    "surface.corrugation": ("Visibility", "CorrugationPattern", "supercell_corrugation", "termination_corrugation"),
    "surface.reconstructions": ("Reconstruction", "reconstructions"),
    "surface.polarity": ("termination_polarity",),
    "surface.slab": ("build_slab", "describe_slab"),
    "screening": ("screen",),
    "identification.measurement": (
        "Measurement",
        "Value",
        "parse_value",
        "read_measurement",
        "write_measurement",
        "read_steps",
        "measurement_from_image",
    ),
    "identification.model": ("MatchModel",),
    "identification.candidates": ("candidate_table",),
    "identification.likelihood": ("match", "score"),
    "imaging.reading": ("read_heightmap",),
    "imaging.analysis": ("analyse_heightmap",),
    "reports": ("planes_report", "terminations_report", "polarity_report", "corrugation_report"),
}
_WHERE = {name: module for module, names in _LAZY.items() for name in names}

__all__ = [
    "__version__",
    "TerminationError",
    "StructureError",
    "PlaneError",
    "MeasurementError",
    "ChargeError",
    "ImageError",
    *_WHERE,
]


def __getattr__(name: str) -> Any:
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'termination' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"termination.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_WHERE))
