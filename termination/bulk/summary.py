"""A short description of a loaded crystal: name, origin, symmetry, cell, absolute structure and handling caution."""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from termination.bulk.crystal import Crystal
from termination.bulk.elements import handling_caution
from termination.units import ANGSTROM, DEG

__all__ = ["ABSOLUTE_STRUCTURE_NOTE", "CHIRAL_NOTE", "StructureSummary", "summarise_structure"]


@dataclass(frozen=True)
class StructureSummary:
    """What was loaded: name, symmetry, conventional cell and handling caution.

    ``crystal_system`` is that of the space group ('hexagonal' and
    'trigonal' crystals are given in hexagonal axes, with Miller-Bravais
    indices); ``note`` says how the input cell was transformed to spglib's
    standard setting, when it was; ``absolute_structure`` says, for a
    non-centrosymmetric crystal, what fixes (h k l) against (-h -k -l);
    ``caution`` is the handling caution for toxic or radioactive elements,
    when there are any.
    """

    name: str
    formula: str
    origin: str
    spacegroup: str
    spacegroup_number: int
    crystal_system: str
    natoms: int
    a: float = field(metadata=ANGSTROM)
    b: float = field(metadata=ANGSTROM)
    c: float = field(metadata=ANGSTROM)
    alpha: float = field(metadata=DEG)
    beta: float = field(metadata=DEG)
    gamma: float = field(metadata=DEG)
    note: str | None = None
    absolute_structure: str | None = None
    caution: str | None = None

    @property
    def hexagonal_axes(self) -> bool:
        """True for trigonal and hexagonal crystals: faces are written (h k i l)."""
        return self.crystal_system in ("trigonal", "hexagonal")


#: What tells (h k l) from (-h -k -l) in a non-centrosymmetric crystal with an improper operation.
ABSOLUTE_STRUCTURE_NOTE = (
    "non-centrosymmetric: (h k l) and (-h -k -l) are different faces, named by the polarity convention "
    "(README; GaAs (1 1 1) is the Ga face, ZnO (0 0 0 1) the Zn-polar face) whatever the input setting"
)
#: ... and in a chiral crystal (proper operations only), whose handedness the input fixes.
CHIRAL_NOTE = (
    "chiral: (h k l) and (-h -k -l) are different faces; the handedness (absolute structure) is that of the "
    "input, atoms as given"
)


def _tidy(x: float) -> float:
    """``x`` to 12 significant digits: float noise of a computed length or angle removed."""
    return float(f"{x:.12g}")


def _absolute_structure(crystal: Crystal) -> str | None:
    """The statement on (h k l) against (-h -k -l): None for a centrosymmetric crystal."""
    if crystal.centrosymmetric:
        return None
    improper = bool(np.any(np.linalg.det(crystal.point_group) < 0))
    return ABSOLUTE_STRUCTURE_NOTE if improper else CHIRAL_NOTE


def summarise_structure(crystal: Crystal) -> StructureSummary:
    """:class:`StructureSummary` of a crystal.

    Cell lengths are computed with ``math.hypot`` and kept to 12 significant
    digits, so that a cubic cell of 5.64 Å reads 5.64, not 5.640000000000001.
    """
    lattice = crystal.lattice
    # 12 significant digits: spglib's idealised hexagonal rows give 3.2497999999999996 for 3.2498.
    a, b, c = (_tidy(math.hypot(*(float(v) for v in row))) for row in lattice)
    alpha, beta, gamma = (_tidy(v) for v in crystal.cell_parameters[3:])
    return StructureSummary(
        name=crystal.name,
        formula=crystal.formula,
        origin=crystal.origin,
        spacegroup=crystal.spacegroup,
        spacegroup_number=crystal.spacegroup_number,
        crystal_system=crystal.crystal_system,
        natoms=crystal.natoms,
        a=a,
        b=b,
        c=c,
        alpha=alpha,
        beta=beta,
        gamma=gamma,
        note=crystal.note,
        absolute_structure=_absolute_structure(crystal),
        caution=handling_caution(crystal.species),
    )
