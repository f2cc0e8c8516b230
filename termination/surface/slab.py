"""Slabs: a chosen termination of a face as a finite stack of repeat units, normal along z, for calculations.

A slab of N repeat units of the face (hkl) seen from termination T holds
the atoms from the cut above T down to the same cut N periods d lower: its
top is T, its bottom the surface the same cut leaves on the opposite face,
and its composition is N bulk repeat units.  A symmetric slab adds T's top
unit once more at the bottom, so that both surfaces are T.  A reconstruction
(:class:`~termination.surface.reconstructions.Reconstruction`) removes or
adds its changed atoms in its supercell; on a symmetric slab the same
pattern is also applied to the bottom, mapped by an operation of the slab
that turns z into -z.

The cell is right-handed: a and b span the surface mesh (or the
reconstruction cell) in the xy plane, a along x, and c is along +z, the
outward normal of the top surface.  ASE is imported only here and only
when a slab is built.
"""

from __future__ import annotations

import os
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, SupportsFloat, cast

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal
from termination.bulk.elements import count_species
from termination.defaults import (
    LAYER_TOL_ANGSTROM,
    MAX_SLAB_ATOMS,
    MAX_SLAB_LAYERS,
    MAX_VACUUM_ANGSTROM,
    RELATIVE_EPS,
    SLAB_LAYERS,
    SLAB_VACUUM_ANGSTROM,
    SYMPREC_ANGSTROM,
)
from termination.errors import PlaneError, StructureError
from termination.surface.layers import cluster_layers
from termination.surface.miller import hkl_text
from termination.surface.reconstructions import Reconstruction
from termination.surface.terminations import FaceTerminations, face_terminations
from termination.units import ANGSTROM, ANGSTROM2, E_ANGSTROM, E_PER_ANGSTROM, E

if TYPE_CHECKING:
    from ase import Atoms

__all__ = [
    "SlabDescription",
    "SlabLayer",
    "build_slab",
    "check_slab_size",
    "describe_slab",
    "slab_bytes",
    "slab_format",
    "slab_stack",
]

#: How close (Å) an atom of a reconstruction pattern must be to a slab atom to be that atom.
_MATCH_TOL_ANGSTROM = 1e-4


@dataclass(frozen=True)
class SlabLayer:
    """One atomic layer of a slab: its height z in the cell (Å) and its atoms per slab cell."""

    z: float = field(metadata=ANGSTROM)
    composition: dict[str, int]


@dataclass(frozen=True)
class SlabDescription:
    """What a slab holds: composition against the bulk, charge, dipole, symmetry and layer stack.

    Attributes
    ----------
    natoms : int
    composition : dict of str to int
        Atoms per slab cell.
    bulk_units : float
        The largest k with composition >= k x (the bulk's formula unit).
    excess : dict of str to float
        composition - bulk_units x bulk formula unit, elements with a
        non-zero excess only; empty for a stoichiometric slab.
    stoichiometric : bool
    lattice : (3, 3) tuple of float
        Cell rows a, b, c, Å; a, b in the xy plane, c along +z.
    area : float
        |a x b|, Å².
    thickness : float
        Height of the top atom above the bottom atom, Å.
    vacuum : float
        Gap between the top atom and the bottom atom of the next slab, Å.
    charge : float or None
        Net formal charge per slab cell, e; None without formal charges.
    dipole : float or None
        sum_i q_i (z_i - z_c) along the outward normal of the top surface,
        e Å per slab cell, z_c the mean height of the atoms (the centroid
        used by pymatgen's ``Slab.dipole``); None without formal charges.
    dipole_per_area : float or None
        dipole / area, e/Å.
    symmetric : bool
        True when an operation of the slab maps z onto -z (spglib, within
        the symmetry tolerance): top and bottom are the same surface.
    layers : tuple of SlabLayer
        Atomic layers, top first.
    """

    natoms: int
    composition: dict[str, int]
    bulk_units: float
    excess: dict[str, float]
    stoichiometric: bool
    lattice: tuple[tuple[float, float, float], ...] = field(metadata=ANGSTROM)
    area: float = field(metadata=ANGSTROM2)
    thickness: float = field(metadata=ANGSTROM)
    vacuum: float = field(metadata=ANGSTROM)
    charge: float | None = field(metadata=E)
    dipole: float | None = field(metadata=E_ANGSTROM)
    dipole_per_area: float | None = field(metadata=E_PER_ANGSTROM)
    symmetric: bool
    layers: tuple[SlabLayer, ...]


def check_slab_size(layers: int, vacuum_angstrom: float) -> tuple[int, float]:
    """``layers`` and ``vacuum_angstrom`` checked: a whole number of repeat units and a finite vacuum, Å."""
    try:
        n = int(layers)
    except (TypeError, ValueError):
        raise PlaneError(f"layers must be a whole number of repeat units, got {layers!r}") from None
    if n != layers or not 1 <= n <= MAX_SLAB_LAYERS:
        raise PlaneError(f"layers must be a whole number of repeat units from 1 to {MAX_SLAB_LAYERS}, got {layers}")
    v = float(vacuum_angstrom)
    if not (np.isfinite(v) and 0.0 <= v <= MAX_VACUUM_ANGSTROM):
        raise PlaneError(f"vacuum must be a length from 0 to {MAX_VACUUM_ANGSTROM:g} Å, got {vacuum_angstrom}")
    return n, v


def slab_stack(
    face_terminations: FaceTerminations, termination: str, layers: int, symmetric: bool = False
) -> tuple[tuple[str, ...], FloatArray, FloatArray, FloatArray | None]:
    """The atoms of a 1×1 slab: species, in-plane positions and depths below the top layer.

    Parameters
    ----------
    face_terminations : FaceTerminations
    termination : str
        Id or label of the top termination.
    layers : int
        Repeat units (periods d).
    symmetric : bool
        Add the top unit once more at the bottom.

    Returns
    -------
    species : tuple of str
    inplane : (N, 2) FloatArray
        Face frame (e1, e2), Å.
    depth : (N,) FloatArray
        Below the top layer, Å (0 for the top layer).
    charges : (N,) FloatArray or None
        Formal charges, e.

    Notes
    -----
    The cut above the termination lies at depth c0 = -((z_cut - z_top) mod d)
    <= 0.  The slab holds the atoms with c0 <= depth < c0 + N d: N repeat
    units, the bulk composition.  The symmetric slab extends down to the cut
    below the top unit, N periods lower.
    """
    ft = face_terminations
    t = ft.termination(termination)
    d = ft.d
    z_top = ft.layers[t.layers[0]].height
    cut_depth = -((t.cut_height - z_top) % d)
    bottom = layers * d + cut_depth
    if symmetric:
        ru = ft.repeat_unit(t.id)
        in_top = ru.unit == 0
        below_unit = ru.depth[~in_top]
        unit_bottom = float(ru.depth[in_top].max())
        next_cut = d + cut_depth if not len(below_unit) else 0.5 * (unit_bottom + float(below_unit.min()))
        bottom = layers * d + next_cut
    sa = ft.surface_atoms(t.id, bottom)
    return sa.species, np.asarray(sa.inplane, dtype=float), np.asarray(sa.depth, dtype=float), sa.charges


def build_slab(
    crystal: Crystal,
    hkl: Iterable[SupportsFloat],
    termination: str,
    *,
    layers: int = SLAB_LAYERS,
    vacuum_angstrom: float = SLAB_VACUUM_ANGSTROM,
    symmetric: bool = False,
    reconstruction: Reconstruction | None = None,
    face: FaceTerminations | None = None,
    symprec: float = SYMPREC_ANGSTROM,
    **termination_options: Any,
) -> Atoms:
    """A slab of ``crystal`` with ``termination`` of face ``hkl`` on top, as an :class:`ase.Atoms`.

    Parameters
    ----------
    crystal : Crystal
        Bulk crystal; with formal charges (``Crystal.with_charges``) they
        become the atoms' initial charges.
    hkl : 3 ints
        The face; the slab's top surface has the outward normal (h k l).
    termination : str
        Termination id ('T2') or label ('SrO').
    layers : int
        Repeat units (periods d of the face), 1 to
        :data:`~termination.defaults.MAX_SLAB_LAYERS`.
    vacuum_angstrom : float
        Gap between the slab and its periodic image along z, Å; the slab is
        centred in the cell.
    symmetric : bool
        The top unit once more at the bottom, so that both surfaces are the
        termination (and the pattern of ``reconstruction`` on both).
    reconstruction : Reconstruction, optional
        A cell of :func:`termination.surface.reconstructions.reconstructions`
        (or of ``termination_polarity``) for this face and termination,
        built from the same crystal: the slab takes its supercell and its
        changed atoms are removed or added.
    face : FaceTerminations, optional
        Precomputed terminations of ``hkl`` (built from ``crystal``).
    symprec : float
        Tolerance of the symmetry search that maps the pattern onto the
        bottom of a symmetric slab, Å.
    **termination_options
        Passed to :func:`termination.surface.terminations.face_terminations`.

    Returns
    -------
    ase.Atoms
        Periodic in all three directions (the vacuum separates the slabs).
        ``info`` holds 'hkl', 'termination', 'layers', 'symmetric' and, with
        a reconstruction, 'reconstruction' (its matrix in mesh units).

    Examples
    --------
    >>> from termination.structures import build_prototype
    >>> c = build_prototype("perovskite:Sr,Ti,O", a=3.905)
    >>> slab = build_slab(c, (0, 0, 1), "SrO", layers=2, vacuum_angstrom=10.0, symmetric=True)
    >>> slab.get_chemical_formula(), round(float(slab.cell[2, 2]), 3)
    ('O7Sr3Ti2', 17.81)
    """
    from ase import Atoms
    from ase.build import make_supercell as ase_make_supercell

    make_supercell: Any = ase_make_supercell  # ASE is untyped
    n_layers, vacuum = check_slab_size(layers, vacuum_angstrom)
    ft = face if face is not None else face_terminations(crystal, hkl, **termination_options)
    mesh = np.asarray(ft.atoms.mesh_inplane, dtype=float)
    matrix = np.eye(2, dtype=np.int64)
    if reconstruction is not None:
        matrix = np.array(reconstruction.matrix, dtype=np.int64)
        if round(float(np.linalg.det(matrix))) < 0:  # same lattice, right-handed basis
            matrix[1] = -matrix[1]
    cells = abs(round(float(np.linalg.det(matrix))))
    per_period = len(ft.atoms.species)
    expected = per_period * (n_layers + (1 if symmetric else 0)) * cells
    if expected > MAX_SLAB_ATOMS:
        raise PlaneError(
            f"the slab would hold about {expected} atoms, more than {MAX_SLAB_ATOMS}; "
            "use fewer layers or a smaller cell"
        )
    species, inplane, depth, charges = slab_stack(ft, termination, n_layers, symmetric)
    t = ft.termination(termination)
    cell2 = np.zeros((3, 3))
    cell2[:2, :2] = mesh
    # A temporary cell with room above and below: the supercell wraps positions into it.
    room = max(vacuum, 10.0)
    cell2[2, 2] = float(depth.max() - depth.min()) + 2.0 * room
    z_top = float(depth.max()) + room  # height of the top layer in the temporary cell
    positions = np.column_stack([inplane, z_top - depth])
    slab: Any = Atoms(symbols=list(species), positions=positions, cell=cell2, pbc=True)
    if charges is not None:
        slab.set_initial_charges(np.asarray(charges, dtype=float))
    if reconstruction is not None:
        flip = _z_flip(slab, symprec) if symmetric else None
        if symmetric and flip is None:
            raise PlaneError(
                f"face {hkl_text(ft.face.hkl)}, termination {t.label}: the symmetric slab has no operation "
                "that maps its top onto its bottom, so the pattern cannot be mirrored; build it without --symmetric"
            )
        big: Any = make_supercell(slab, _matrix3(matrix), wrap=True)
        slab = _apply_pattern(big, reconstruction, ft, flip, z_top)
    return cast("Atoms", _finish(slab, vacuum, ft, t.label, n_layers, symmetric, reconstruction))


def _matrix3(matrix: Any) -> Any:
    out = np.zeros((3, 3), dtype=np.int64)
    out[:2, :2] = matrix
    out[2, 2] = 1
    return out


def _types(atoms: Any) -> Any:
    """spglib types: one per (species, charge) pair, so that a symmetry keeps the charges."""
    keys = list(zip(atoms.get_chemical_symbols(), np.round(atoms.get_initial_charges(), 6)))
    index = {k: i + 1 for i, k in enumerate(sorted(set(keys)))}
    return [index[k] for k in keys]


def _z_flip(slab: Any, symprec: float) -> tuple[FloatArray, FloatArray] | None:
    """An operation of the slab that maps z onto -z, as (R, t) on Cartesian positions; None if there is none."""
    import spglib

    lattice = np.asarray(slab.cell, dtype=float)
    frac = slab.get_scaled_positions(wrap=True)
    found = spglib.get_symmetry((lattice.tolist(), frac.tolist(), _types(slab)), symprec=symprec)
    if found is None:
        return None
    for rot, trans in zip(found["rotations"], found["translations"]):
        if rot[2, 2] == -1 and rot[2, 0] == 0 and rot[2, 1] == 0:
            # x_frac' = R x_frac + t; Cartesian rows r = x L: r' = r L^-1 R^T L + t L.
            inv = np.linalg.inv(lattice)
            return inv @ rot.T @ lattice, trans @ lattice
    return None


def _find(positions: FloatArray, symbols: list[str], target: FloatArray, symbol: str, cell2: FloatArray) -> int | None:
    """Index of the atom of ``symbol`` at ``target`` (Cartesian, Å) modulo the in-plane cell ``cell2``."""
    diff = positions - target
    frac = diff[:, :2] @ np.linalg.inv(cell2)
    diff[:, :2] = (frac - np.rint(frac)) @ cell2
    dist = np.linalg.norm(diff, axis=1)
    for i in np.argsort(dist, kind="stable")[:4]:
        if dist[i] <= _MATCH_TOL_ANGSTROM and symbols[i] == symbol:
            return int(i)
    return None


def _apply_pattern(
    big: Any, rec: Reconstruction, ft: FaceTerminations, flip: tuple[FloatArray, FloatArray] | None, z_top: float
) -> Any:
    """Remove (or add) the changed atoms of ``rec`` in the supercell slab ``big``, and at the bottom when ``flip``."""
    from ase import Atoms

    cell2 = np.asarray(big.cell, dtype=float)[:2, :2]
    targets = np.column_stack([rec.changed_atoms_inplane, z_top - np.asarray(rec.changed_atoms_depth, dtype=float)])
    species = list(rec.changed_atoms_species)
    if flip is not None:
        rot, trans = flip
        mapped = targets @ rot + trans
        mapped[:, 2] %= float(big.cell[2, 2])  # spglib's translations are modulo the cell
        targets = np.vstack([targets, mapped])
        species = species + species
    positions = big.get_positions()
    symbols = big.get_chemical_symbols()
    where = f"face {hkl_text(ft.face.hkl)}, cell {rec.wood or rec.matrix}"
    if rec.mode == "remove":
        drop = []
        for xyz, sp in zip(targets, species):
            i = _find(positions, symbols, xyz, sp, cell2)
            if i is None or i in drop:
                raise StructureError(f"{where}: the pattern's {sp} at {np.round(xyz, 3).tolist()} is not in the slab")
            drop.append(i)
        keep = np.setdiff1d(np.arange(len(big)), drop)
        return big[keep]
    # Added atoms continue the bulk: each is the copy, one period up, of a top-unit atom.
    stack = np.append(np.asarray(ft.atoms.stack_inplane, dtype=float), ft.d)
    charges = np.asarray(big.get_initial_charges(), dtype=float)
    new_q = []
    for xyz, sp in zip(targets, species):
        below = xyz - stack if xyz[2] > z_top else xyz + stack  # the bottom adatoms are copies one period down
        i = _find(positions, symbols, below, sp, cell2)
        if i is None:
            raise StructureError(f"{where}: the added {sp} at {np.round(xyz, 3).tolist()} continues no slab atom")
        new_q.append(charges[i])
    added: Any = Atoms(symbols=species, positions=targets, cell=big.cell, pbc=True)
    added.set_initial_charges(np.asarray(new_q, dtype=float))
    out: Any = big + added
    return out


def _finish(
    slab: Any,
    vacuum: float,
    ft: FaceTerminations,
    label: str,
    layers: int,
    symmetric: bool,
    rec: Reconstruction | None,
) -> Any:
    """Centre the slab in a cell with ``vacuum`` along z, wrap it in plane, and record what it is."""
    z = slab.positions[:, 2]
    thickness = float(z.max() - z.min())
    cell = np.array(slab.cell, dtype=float)
    cell[2] = (0.0, 0.0, thickness + vacuum)
    slab.set_cell(cell, scale_atoms=False)
    slab.positions[:, 2] += vacuum / 2.0 - z.min()
    slab.wrap(pbc=(True, True, False))
    order = np.lexsort((slab.positions[:, 1], slab.positions[:, 0], -np.round(slab.positions[:, 2], 6)))
    slab = slab[order]  # top layer first, deterministic
    slab.info.update(hkl=tuple(int(v) for v in ft.face.hkl), termination=label, layers=layers, symmetric=symmetric)
    if rec is not None:  # writers spell a missing value badly, so 1x1 slabs carry no key
        slab.info["reconstruction"] = [list(r) for r in rec.matrix]
    return slab


def describe_slab(
    slab: Atoms,
    crystal: Crystal,
    *,
    layer_tol_angstrom: float = LAYER_TOL_ANGSTROM,
    symprec: float = SYMPREC_ANGSTROM,
) -> SlabDescription:
    """Composition against the bulk, net charge, dipole, symmetry and layers of a slab.

    Parameters
    ----------
    slab : ase.Atoms
        From :func:`build_slab` (c along z, vacuum in between).
    crystal : Crystal
        The bulk; its formula unit is the reference of the stoichiometry and
        its charges (when it has them) say whether the initial charges are
        formal charges.
    layer_tol_angstrom : float
        Atoms within this height form one layer, Å.
    symprec : float
        Symmetry tolerance of the z -> -z test, Å.

    Returns
    -------
    SlabDescription

    Notes
    -----
    dipole = sum_i q_i (z_i - z_c), z_c the mean height of the atoms; for a
    neutral slab it does not depend on z_c.  A slab of N repeat units of a
    termination whose repeat unit has the dipole mu (see
    :func:`termination.surface.polarity.termination_polarity`) has -N mu.
    """
    atoms: Any = slab
    symbols = [str(s) for s in atoms.get_chemical_symbols()]
    comp = count_species(symbols)
    bulk = count_species(crystal.species)
    unit = np.gcd.reduce(np.array(list(bulk.values()), dtype=np.int64))
    bulk = {el: n // int(unit) for el, n in bulk.items()}
    k = min(comp.get(el, 0) / n for el, n in bulk.items())
    excess = {el: comp.get(el, 0) - k * bulk.get(el, 0) for el in {**comp, **bulk}}
    excess = {el: float(v) for el, v in excess.items() if abs(v) > RELATIVE_EPS}
    order = {el: i for i, el in enumerate(comp)}
    excess = dict(sorted(excess.items(), key=lambda kv: order.get(kv[0], len(order))))
    lattice = np.asarray(atoms.cell, dtype=float)
    area = float(np.linalg.norm(np.cross(lattice[0], lattice[1])))
    z = np.asarray(atoms.positions[:, 2], dtype=float)
    thickness = float(z.max() - z.min())
    charge = dipole = per_area = None
    if crystal.charges is not None:
        q = np.asarray(atoms.get_initial_charges(), dtype=float)
        charge = float(q.sum())
        dipole = float(q @ (z - z.mean()))
        per_area = dipole / area
    labels, centres = cluster_layers(z, None, layer_tol_angstrom)
    layers = []
    for k_layer in np.argsort(-centres, kind="stable"):
        members = np.flatnonzero(labels == k_layer)
        layers.append(SlabLayer(z=float(centres[k_layer]), composition=count_species(symbols[i] for i in members)))
    return SlabDescription(
        natoms=len(symbols),
        composition=comp,
        bulk_units=float(k),
        excess=excess,
        stoichiometric=not excess,
        lattice=tuple((float(r[0]), float(r[1]), float(r[2])) for r in lattice),
        area=area,
        thickness=thickness,
        vacuum=float(lattice[2, 2] - thickness),
        charge=charge,
        dipole=dipole,
        dipole_per_area=per_area,
        symmetric=_z_flip(atoms, symprec) is not None,
        layers=tuple(layers),
    )


def slab_format(path: str | os.PathLike[str], fmt: str | None = None) -> str:
    """The ASE format a slab is written in: ``fmt``, else guessed from the file name ('POSCAR' -> 'vasp').

    Raises :class:`PlaneError` naming the file when ASE cannot write that format.
    """
    from ase.io.formats import filetype, ioformats

    name = os.fspath(path)
    if fmt is None:
        try:
            fmt = str(filetype(name, read=False))
        except Exception:
            raise PlaneError(
                f"cannot tell the format of {name} from its name; give it (cif, vasp, extxyz, ...)"
            ) from None
    found = ioformats.get(fmt)
    if found is None or not found.can_write:
        raise PlaneError(f"ASE cannot write the format {fmt!r} (for {name}); try cif, vasp or extxyz")
    return fmt


def slab_bytes(slab: Atoms, fmt: str) -> bytes:
    """The slab written by ASE's writer for ``fmt`` (through a temporary file, since some writers need a name)."""
    import tempfile

    import ase.io

    with tempfile.TemporaryDirectory() as folder:
        target = os.path.join(folder, "POSCAR" if fmt == "vasp" else f"slab.{fmt}")
        if fmt == "vasp":
            ase.io.write(target, slab, format=fmt, direct=True, sort=False)
        else:
            ase.io.write(target, slab, format=fmt)
        with open(target, "rb") as fh:
            return fh.read()
