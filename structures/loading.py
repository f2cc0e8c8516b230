"""Read bulk structures from files (CIF and what ASE reads) or prototype specs."""

from __future__ import annotations

import os
import warnings
from typing import Any

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal, build_crystal
from termination.defaults import SYMPREC_ANGSTROM
from termination.errors import StructureError

from .prototypes import PROTOTYPES, build_prototype

__all__ = ["bundled", "load_structure", "read_structure_file"]

_DATA = os.path.join(os.path.dirname(__file__), "data")

#: What a reader returns: lattice rows (3, 3) in Å, fractional positions (N, 3),
#: species, and charges per atom (N,) in e or None.
_Cell = tuple[FloatArray, FloatArray, list[str], FloatArray | None]


def bundled(name: str) -> str:
    """Path of a file bundled in ``structures/data``."""
    return os.path.join(_DATA, name)


def read_structure_file(path: str | os.PathLike[str], symprec: float = SYMPREC_ANGSTROM) -> Crystal:
    """Crystal from a structure file.

    CIF files are read with pymatgen (oxidation states, when the CIF gives
    them, become the crystal's charges); every other format with ``ase.io``.
    Partial occupancy is rejected.  The file is only read, never written.
    """
    name = os.fspath(path)
    if not os.path.isfile(name):
        raise StructureError(f"no such structure file: {name}")
    base = os.path.basename(name)
    if name.lower().endswith((".cif", ".mcif")):
        lattice, positions, species, charges = _read_cif(name)
    else:
        lattice, positions, species, charges = _read_with_ase(name)
    return build_crystal(lattice, positions, species, charges, name=None, symprec=symprec, origin=base)


def _read_cif(path: str) -> _Cell:
    """Lattice, positions, species and oxidation states (if given) of a CIF's first structure, via pymatgen."""
    base = os.path.basename(path)
    try:
        from pymatgen.io.cif import CifParser

        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            parser = CifParser(path, occupancy_tolerance=1.0)
            structures = parser.parse_structures(primitive=False)
    except Exception as exc:  # pymatgen raises many types for malformed files
        raise StructureError(
            f"cannot read CIF {base}: {str(exc).splitlines()[0] if str(exc) else type(exc).__name__}"
        ) from None
    if not structures:
        raise StructureError(f"cannot read CIF {base}: no structure found")
    s = structures[0]
    if not s.is_ordered:
        site = next(site for site in s if not site.is_ordered)
        raise StructureError(
            f"{base}: partial occupancy ({site.species_string} at {np.round(site.frac_coords, 4).tolist()}) "
            "is not supported; give an ordered structure"
        )
    species: list[str] = []
    charges: list[float | None] = []
    for site in s:
        sp = site.specie
        species.append(str(sp.symbol))
        charges.append(getattr(sp, "oxi_state", None))
    has_charges = all(q is not None for q in charges) and any(q for q in charges)
    return (
        np.asarray(s.lattice.matrix, dtype=np.float64),
        np.asarray(s.frac_coords, dtype=np.float64),
        species,
        (np.array(charges, dtype=float) if has_charges else None),
    )


def _read_with_ase(path: str) -> _Cell:
    """Lattice, scaled positions and species of any file ``ase.io`` reads (no charges)."""
    base = os.path.basename(path)
    try:
        import ase.io

        images = ase.io.read(path)  # without an index: the last image, one Atoms
        # ASE's Atoms methods carry no annotations: use them through Any.
        atoms: Any = images[-1] if isinstance(images, list) else images
    except Exception as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise StructureError(f"cannot read structure file {base}: {msg}") from None
    if not all(atoms.pbc) or abs(atoms.cell.volume) < 1e-6:
        raise StructureError(f"{base} holds no periodic 3D cell")
    return (
        np.array(atoms.cell, dtype=np.float64),
        np.asarray(atoms.get_scaled_positions(wrap=True), dtype=np.float64),
        [str(s) for s in atoms.get_chemical_symbols()],
        None,
    )


def load_structure(
    spec: str | os.PathLike[str], a: float | None = None, x: float | None = None, symprec: float = SYMPREC_ANGSTROM
) -> Crystal:
    """Crystal from a file path or a prototype spec ``NAME:EL1,EL2,...``.

    Parameters
    ----------
    spec : str
        Existing file, or prototype spec (``termination structures`` lists them).
    a : float, optional
        Lattice constant (Å) for prototypes.
    x : float, optional
        Free positional parameter for prototypes that have one.
    symprec : float
        Symmetry tolerance, Å.
    """
    text = os.fspath(spec) if isinstance(spec, os.PathLike) else str(spec)
    if os.path.exists(text):
        if a is not None or x is not None:
            raise StructureError("--a and --x apply to prototypes only, not to a structure file")
        return read_structure_file(text, symprec=symprec)
    name = text.partition(":")[0].strip().lower()
    if ":" in text or name in PROTOTYPES:
        return build_prototype(text, a=a, x=x, symprec=symprec)
    raise StructureError(f"{text!r} is neither a structure file nor a prototype spec such as rocksalt:Na,Cl")
