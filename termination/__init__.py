"""termination: which face and atomic termination does a cleaved crystal show?

The library is pure computation on numpy arrays and small frozen dataclasses.
It never imports typer or rich; ``cli.py`` renders its results.

The public names below are re-exported lazily (PEP 562): a module is imported
the first time one of its names is used, so ``import termination`` stays
cheap and the command line starts fast.
"""

from .errors import (
    ChargeError,
    ImageError,
    MeasurementError,
    PlaneError,
    StructureError,
    TerminationError,
)

__version__ = "0.1.0"

_LAZY = {
    "crystal": ("Crystal", "build_crystal"),
    "planes": ("Face", "Mesh", "distinct_faces", "face_geometry", "interplanar_angle"),
    "terminations": ("FaceTerminations", "Termination", "face_terminations"),
    "corrugation": ("CorrugationPattern", "supercell_corrugation", "termination_corrugation"),
    "charges": ("ChargeAssignment", "assign_charges"),
    "polarity": ("Reconstruction", "polarity_report", "reconstructions", "termination_polarity"),
    "measurement": ("Measurement", "Value", "parse_value", "read_measurement", "write_measurement", "read_steps"),
    "matching": ("MatchModel", "candidate_table", "match", "score"),
    "heightmap_io": ("read_heightmap",),
    "heightmap": ("analyse_heightmap", "to_measurement"),
}
_WHERE = {name: module for module, names in _LAZY.items() for name in names}

__all__ = [
    "TerminationError",
    "StructureError",
    "PlaneError",
    "MeasurementError",
    "ChargeError",
    "ImageError",
    *_WHERE,
]


def __getattr__(name):
    module = _WHERE.get(name)
    if module is None:
        raise AttributeError(f"module 'termination' has no attribute {name!r}")
    import importlib

    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(set(globals()) | set(_WHERE))
