"""Read bulk structures from files (CIF and what ASE reads) or prototype specs."""

from __future__ import annotations

import os
import warnings

import numpy as np

from termination.bulk.crystal import build_crystal
from termination.defaults import SYMPREC_ANGSTROM
from termination.errors import StructureError

from .prototypes import PROTOTYPES, build_prototype

__all__ = ["bundled", "load_structure", "read_structure_file"]

_DATA = os.path.join(os.path.dirname(__file__), "data")


def bundled(name):
    """Path of a file bundled in ``structures/data``."""
    return os.path.join(_DATA, name)


def read_structure_file(path, symprec=SYMPREC_ANGSTROM):
    """Crystal from a structure file.

    CIF files are read with pymatgen (oxidation states, when the CIF gives
    them, become the crystal's charges); every other format with ``ase.io``.
    Partial occupancy is rejected.  The file is only read, never written.
    """
    path = os.fspath(path)
    if not os.path.isfile(path):
        raise StructureError(f"no such structure file: {path}")
    base = os.path.basename(path)
    if path.lower().endswith((".cif", ".mcif")):
        lattice, positions, species, charges = _read_cif(path)
    else:
        lattice, positions, species, charges = _read_with_ase(path)
    return build_crystal(lattice, positions, species, charges, name=None, symprec=symprec, origin=base)


def _read_cif(path):
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
    species, charges = [], []
    for site in s:
        sp = site.specie
        species.append(sp.symbol)
        charges.append(getattr(sp, "oxi_state", None))
    has_charges = all(q is not None for q in charges) and any(q for q in charges)
    return s.lattice.matrix, s.frac_coords, species, (np.array(charges, dtype=float) if has_charges else None)


def _read_with_ase(path):
    base = os.path.basename(path)
    try:
        import ase.io

        atoms = ase.io.read(path)
    except Exception as exc:
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise StructureError(f"cannot read structure file {base}: {msg}") from None
    if not all(atoms.pbc) or abs(atoms.cell.volume) < 1e-6:
        raise StructureError(f"{base} holds no periodic 3D cell")
    return np.array(atoms.cell), atoms.get_scaled_positions(wrap=True), atoms.get_chemical_symbols(), None


def load_structure(spec, a=None, x=None, symprec=SYMPREC_ANGSTROM):
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
    spec = str(spec)
    if os.path.exists(spec):
        if a is not None or x is not None:
            raise StructureError("--a and --x apply to prototypes only, not to a structure file")
        return read_structure_file(spec, symprec=symprec)
    name = spec.partition(":")[0].strip().lower()
    if ":" in spec or name in PROTOTYPES:
        return build_prototype(spec, a=a, x=x, symprec=symprec)
    raise StructureError(f"{spec!r} is neither a structure file nor a prototype spec such as rocksalt:Na,Cl")
