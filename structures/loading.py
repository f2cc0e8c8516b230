"""Read bulk structures from files (CIF, POSCAR, extended XYZ and what ASE reads) or prototype specs."""

from __future__ import annotations

import os
from collections.abc import Mapping
from typing import Any

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal, build_crystal
from termination.defaults import SYMPREC_ANGSTROM
from termination.errors import StructureError
from termination.inputs import MAX_TEXT_BYTES, read_input_bytes

from .cif import check_declared_symmetry, read_cif
from .extxyz import read_extxyz
from .poscar import is_poscar_name, read_poscar
from .prototypes import build_prototype, find_prototype

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

    CIF files are read with pymatgen and checked field by field
    (:mod:`termination.structures.cif`; oxidation states, when the CIF
    gives them, become the crystal's charges); POSCAR/CONTCAR files and
    extended XYZ files by the readers of this package
    (:mod:`termination.structures.poscar`, :mod:`termination.structures.extxyz`),
    which import neither ASE nor scipy; every other format with ``ase.io``.
    Only a regular file of at most ``MAX_TEXT_BYTES`` is read (a FIFO or a
    device would block), and it is never written.  Partial occupancy is
    rejected.
    """
    name = os.fspath(path)
    if not os.path.exists(name):
        raise StructureError(f"no such structure file: {name}")
    base = os.path.basename(name)
    lower = base.lower()
    charges: FloatArray | None = None
    declared: int | None = None
    if lower.endswith((".cif", ".mcif")):
        lattice, positions, species, charges, declared = read_cif(_text(name), base)
    elif is_poscar_name(base):
        lattice, positions, species = read_poscar(_text(name), base)
    elif lower.endswith((".xyz", ".extxyz")):
        lattice, positions, species = read_extxyz(_text(name), base)
    else:
        read_input_bytes(name, what="structure file", error=StructureError, max_bytes=MAX_TEXT_BYTES)
        lattice, positions, species, charges = _read_with_ase(name)
    crystal = build_crystal(lattice, positions, species, charges, name=None, symprec=symprec, origin=base)
    check_declared_symmetry(crystal, declared, base)
    return crystal


def _text(path: str) -> str:
    """The text of a structure file: a regular file of at most MAX_TEXT_BYTES, UTF-8 (Latin-1 tolerated)."""
    data = read_input_bytes(path, what="structure file", error=StructureError, max_bytes=MAX_TEXT_BYTES)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        # Older CIFs carry Latin-1 author names; the numbers and symbols are ASCII either way.
        return data.decode("latin-1")


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
    spec: str | os.PathLike[str],
    a: float | None = None,
    x: float | None = None,
    symprec: float = SYMPREC_ANGSTROM,
    *,
    c: float | None = None,
    parameters: Mapping[str, float] | None = None,
) -> Crystal:
    """Crystal from a file path or a prototype spec ``NAME:EL1,EL2,...``.

    Parameters
    ----------
    spec : str
        Existing file, or prototype spec (``termination structures`` lists them).
    a, c : float, optional
        Lattice constants (Å) for prototypes.
    x : float, optional
        Free positional parameter for prototypes that have one.
    symprec : float
        Symmetry tolerance, Å.
    parameters : mapping, optional
        Free positional parameters of a prototype by name.
    """
    text = os.fspath(spec) if isinstance(spec, os.PathLike) else str(spec)
    if os.path.exists(text):
        if a is not None or c is not None or x is not None or parameters:
            raise StructureError("--a, --c and --x apply to prototypes only, not to a structure file")
        return read_structure_file(text, symprec=symprec)
    if ":" in text or find_prototype(text.partition(":")[0]) is not None:
        return build_prototype(text, a=a, x=x, symprec=symprec, c=c, parameters=parameters)
    raise StructureError(f"{text!r} is neither a structure file nor a prototype spec such as rocksalt:Na,Cl")
