"""termination: which face and atomic termination does a cleaved crystal show?

The library is pure computation on numpy arrays and small frozen dataclasses.
It never imports typer or rich; ``cli.py`` renders its results.
"""

from .corrugation import CorrugationPattern, supercell_corrugation, termination_corrugation
from .crystal import Crystal, build_crystal
from .errors import (
    ChargeError,
    ImageError,
    MeasurementError,
    PlaneError,
    StructureError,
    TerminationError,
)
from .planes import Face, Mesh, distinct_faces, face_geometry, interplanar_angle
from .charges import ChargeAssignment, assign_charges
from .polarity import Reconstruction, polarity_report, reconstructions, termination_polarity

__version__ = "0.1.0"

__all__ = [
    "Crystal",
    "build_crystal",
    "Face",
    "Mesh",
    "distinct_faces",
    "face_geometry",
    "interplanar_angle",
    "CorrugationPattern",
    "termination_corrugation",
    "supercell_corrugation",
    "ChargeAssignment",
    "assign_charges",
    "Reconstruction",
    "reconstructions",
    "termination_polarity",
    "polarity_report",
    "TerminationError",
    "StructureError",
    "PlaneError",
    "MeasurementError",
    "ChargeError",
    "ImageError",
]
