"""Bulk structures: built-in prototypes, file loading and bundled data."""

from .loading import bundled, load_structure, read_structure_file
from .prototypes import KNOWN_LATTICE_CONSTANTS, PROTOTYPES, Prototype, build_prototype, parse_spec

__all__ = [
    "bundled",
    "load_structure",
    "read_structure_file",
    "KNOWN_LATTICE_CONSTANTS",
    "PROTOTYPES",
    "Prototype",
    "build_prototype",
    "parse_spec",
]
