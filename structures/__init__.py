"""Bulk structures: built-in prototypes, structure files and bundled demo data.

In the repository this package sits at the top level (``structures/``); it
is installed as :mod:`termination.structures`.
"""

from .loading import bundled, load_structure, read_structure_file
from .prototypes import (
    KNOWN_LATTICE_CONSTANTS,
    PROTOTYPES,
    TABULATED,
    Prototype,
    build_prototype,
    find_prototype,
    parse_spec,
)

__all__ = [
    "KNOWN_LATTICE_CONSTANTS",
    "PROTOTYPES",
    "TABULATED",
    "Prototype",
    "build_prototype",
    "bundled",
    "find_prototype",
    "load_structure",
    "parse_spec",
    "read_structure_file",
]
