"""A short description of a loaded crystal: name, origin, symmetry, cell and handling caution."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

from termination.bulk.crystal import Crystal
from termination.bulk.elements import handling_caution
from termination.units import ANGSTROM, DEG

__all__ = ["StructureSummary", "summarise_structure"]


@dataclass(frozen=True)
class StructureSummary:
    """What was loaded: name, symmetry, conventional cell and handling caution.

    ``note`` says how the input cell was transformed to spglib's standard
    setting, when it was; ``caution`` is the handling caution for toxic or
    radioactive elements, when there are any.
    """

    name: str
    formula: str
    origin: str
    spacegroup: str
    spacegroup_number: int
    natoms: int
    a: float = field(metadata=ANGSTROM)
    b: float = field(metadata=ANGSTROM)
    c: float = field(metadata=ANGSTROM)
    alpha: float = field(metadata=DEG)
    beta: float = field(metadata=DEG)
    gamma: float = field(metadata=DEG)
    note: str | None = None
    caution: str | None = None


def summarise_structure(crystal: Crystal) -> StructureSummary:
    """:class:`StructureSummary` of a crystal.

    Cell lengths are computed with ``math.hypot`` so that a cubic cell of
    5.64 Å reads 5.64, not 5.640000000000001.
    """
    lattice = crystal.lattice
    a, b, c = (math.hypot(*(float(v) for v in row)) for row in lattice)
    _, _, _, alpha, beta, gamma = crystal.cell_parameters
    return StructureSummary(
        name=crystal.name,
        formula=crystal.formula,
        origin=crystal.origin,
        spacegroup=crystal.spacegroup,
        spacegroup_number=crystal.spacegroup_number,
        natoms=crystal.natoms,
        a=a,
        b=b,
        c=c,
        alpha=alpha,
        beta=beta,
        gamma=gamma,
        note=crystal.note,
        caution=handling_caution(crystal.species),
    )
