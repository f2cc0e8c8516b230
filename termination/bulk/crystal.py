"""The bulk crystal: lattice, atoms, optional charges and their symmetry.

One :class:`Crystal` is built once (with spglib) and passed everywhere; no
other module derives symmetry again.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from math import gcd
from typing import TYPE_CHECKING, cast

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.integer import rationalise, row_basis
from termination.arrays import FloatArray, IntArray
from termination.bulk.elements import SYMBOLS, atomic_number, check_symbol, count_species
from termination.defaults import MAX_LENGTH_ANGSTROM, MIN_DISTANCE_ANGSTROM, RELATIVE_EPS, SYMPREC_ANGSTROM
from termination.errors import StructureError
from termination.units import ANGSTROM, E

if TYPE_CHECKING:
    from spglib.spg import SpgCell, SpglibDataset

__all__ = ["Crystal", "build_crystal", "reduced_formula"]


@dataclass(frozen=True, eq=False)
class Crystal:
    """A periodic bulk crystal in its conventional standard cell.

    Attributes
    ----------
    lattice : (3, 3) FloatArray
        Conventional lattice vectors as rows, Cartesian, Å.
    positions : (N, 3) FloatArray
        Fractional coordinates in [0, 1).
    species : tuple of str
        Element symbol per atom.
    charges : (N,) FloatArray or None
        Formal charges per atom (units of e), if known.
    name : str
        Short label (formula or file name).
    spacegroup, spacegroup_number : str, int
        Hermann-Mauguin symbol and number found by spglib.
    rotations, translations : (M, 3, 3) IntArray, (M, 3) FloatArray
        All space-group operations in the fractional basis of ``lattice``
        (x' = R x + t), centring copies included.
    point_group : (P, 3, 3) IntArray
        The distinct rotations (the crystal's point group), identity first.
    centring : (K, 3) FloatArray
        Pure lattice translations of the conventional cell, fractional, zero first.
    primitive_fractional : (3, 3) FloatArray
        A primitive basis of the lattice as rows, in fractional coordinates of
        ``lattice``.
    note : str or None
        Says how the input cell was transformed, when it was.
    symprec : float
        Symmetry tolerance used, Å.
    origin : str
        Where the structure came from (file name or prototype spec).
    """

    lattice: FloatArray = field(metadata=ANGSTROM)
    positions: FloatArray
    species: tuple[str, ...]
    charges: FloatArray | None = field(metadata=E)
    name: str
    spacegroup: str
    spacegroup_number: int
    rotations: IntArray
    translations: FloatArray
    point_group: IntArray
    centring: FloatArray
    primitive_fractional: FloatArray
    note: str | None = None
    symprec: float = field(default=SYMPREC_ANGSTROM, metadata=ANGSTROM)
    origin: str = field(default="", compare=False)

    @property
    def natoms(self) -> int:
        """Number of atoms in the conventional cell."""
        return len(self.species)

    @property
    def metric(self) -> FloatArray:
        """(3, 3) metric tensor G = A A^T (Å²)."""
        return self.lattice @ self.lattice.T

    @property
    def reciprocal(self) -> FloatArray:
        """(3, 3) reciprocal lattice rows b_i with a_i . b_j = delta_ij (no 2 pi), 1/Å."""
        return cast(FloatArray, np.linalg.inv(self.lattice).T)

    @property
    def volume(self) -> float:
        """Volume of the conventional cell, Å³."""
        return float(abs(np.linalg.det(self.lattice)))

    @property
    def cartesian(self) -> FloatArray:
        """(N, 3) Cartesian positions, Å."""
        return self.positions @ self.lattice

    @property
    def centrosymmetric(self) -> bool:
        """True when the point group contains the inversion."""
        return bool(np.any(np.all(self.point_group == -np.eye(3, dtype=int), axis=(1, 2))))

    @property
    def formula(self) -> str:
        """Reduced formula in order of first appearance, e.g. 'TiNiSn'."""
        return reduced_formula(self.species)

    @property
    def cell_parameters(self) -> tuple[float, float, float, float, float, float]:
        """(a, b, c, alpha, beta, gamma) in Å and degrees."""
        g = self.metric
        a, b, c = np.sqrt(np.diag(g))
        alpha = np.degrees(np.arccos(g[1, 2] / (b * c)))
        beta = np.degrees(np.arccos(g[0, 2] / (a * c)))
        gamma = np.degrees(np.arccos(g[0, 1] / (a * b)))
        return float(a), float(b), float(c), float(alpha), float(beta), float(gamma)

    def with_charges(self, charges: ArrayLike) -> Crystal:
        """Copy with per-atom formal charges ((N,) array_like, units of e)."""
        q = np.asarray(charges, dtype=np.float64)
        if q.shape != (self.natoms,):
            raise StructureError(f"charges need one value per atom ({self.natoms}), got shape {q.shape}")
        return dataclasses.replace(self, charges=q)


def reduced_formula(species: Iterable[str]) -> str:
    """Reduced formula in order of first appearance.

    >>> reduced_formula(["Na", "Cl", "Na", "Cl"])
    'NaCl'
    """
    counts = count_species(species)
    g = 0
    for n in counts.values():
        g = gcd(g, n)
    return "".join(s + (str(n // g) if n // g > 1 else "") for s, n in counts.items())


def _check_cell(
    lattice_in: ArrayLike, positions_in: ArrayLike, species_in: Iterable[object]
) -> tuple[FloatArray, FloatArray, tuple[str, ...]]:
    """The spglib-style input check of :func:`build_crystal`: float64 C-ordered arrays and known symbols."""
    try:
        lattice = np.ascontiguousarray(lattice_in, dtype=np.float64)
    except (TypeError, ValueError):
        raise StructureError("lattice must be a 3x3 array of numbers") from None
    if lattice.shape != (3, 3):
        raise StructureError(f"lattice must be 3x3 (rows are vectors), got shape {lattice.shape}")
    if not np.all(np.isfinite(lattice)):
        raise StructureError("lattice contains NaN or infinite values")
    lengths = np.linalg.norm(lattice, axis=1)
    if np.any(lengths <= 0):
        raise StructureError(f"lattice vector lengths must be positive, got {np.round(lengths, 4).tolist()} Å")
    if np.any(lengths > MAX_LENGTH_ANGSTROM):
        raise StructureError(
            f"impossible lattice: vector lengths {np.round(lengths, 4).tolist()} Å exceed {MAX_LENGTH_ANGSTROM:g} Å"
        )
    volume = np.linalg.det(lattice)
    if abs(volume) < 1e-3 * np.prod(lengths):
        raise StructureError(f"impossible lattice: the cell vectors are (nearly) coplanar, volume {volume:.4g} Å³")
    try:
        positions = np.ascontiguousarray(positions_in, dtype=np.float64)
    except (TypeError, ValueError):
        raise StructureError("positions must be an (N, 3) array of numbers") from None
    if positions.ndim != 2 or positions.shape[1] != 3 or len(positions) == 0:
        raise StructureError(f"positions must be an (N, 3) array with N >= 1, got shape {positions.shape}")
    if not np.all(np.isfinite(positions)):
        raise StructureError("positions contain NaN or infinite values")
    species = tuple(check_symbol(s) for s in species_in)
    if len(species) != len(positions):
        raise StructureError(f"{len(species)} species given for {len(positions)} positions")
    return lattice, positions, species


def _closest_pair(lattice: FloatArray, positions: FloatArray) -> tuple[float, int, int]:
    """Smallest interatomic distance (Å), its atom indices, over neighbouring images.

    ``lattice`` is (3, 3), rows, Å; ``positions`` (N, 3), fractional.
    """
    n = len(positions)
    shifts = np.array(np.meshgrid([-1, 0, 1], [-1, 0, 1], [-1, 0, 1], indexing="ij")).reshape(3, -1).T
    diff = positions[None, :, :] - positions[:, None, :]
    diff -= np.rint(diff)
    dist = np.linalg.norm((diff[:, :, None, :] + shifts[None, None]) @ lattice, axis=-1)
    zero = np.flatnonzero(np.all(shifts == 0, axis=1))[0]
    dist[np.arange(n), np.arange(n), zero] = np.inf
    i, j, _ = np.unravel_index(np.argmin(dist), dist.shape)
    return float(dist[i, j].min()), int(i), int(j)


def build_crystal(
    lattice: ArrayLike,
    positions: ArrayLike,
    species: Iterable[object],
    charges: ArrayLike | Mapping[str, float] | None = None,
    *,
    name: str | None = None,
    symprec: float = SYMPREC_ANGSTROM,
    origin: str = "",
) -> Crystal:
    """Build a :class:`Crystal` and standardise it to the conventional cell.

    Parameters
    ----------
    lattice : (3, 3) array_like
        Lattice vectors as rows, Cartesian, Å.
    positions : (N, 3) array_like
        Fractional coordinates.
    species : sequence of str
        Element symbols, one per atom.
    charges : (N,) array_like or mapping, optional
        Formal charges per atom, or per element as ``{"Na": 1, "Cl": -1}``.
    name : str, optional
        Label; defaults to the reduced formula.
    symprec : float
        spglib symmetry tolerance, Å.
    origin : str
        Where the structure came from (file name or prototype spec).

    Returns
    -------
    Crystal
        In spglib's conventional standard setting.  ``note`` says whether the
        input was transformed (different cell, rotation or origin shift).

    Notes
    -----
    spglib idealises the standardised cell: lattice parameters and positions
    are symmetrised to the space group within ``symprec``.

    References
    ----------
    A. Togo, K. Shinohara and I. Tanaka, Sci. Technol. Adv. Mater. Meth. 4,
    2384822 (2024) (spglib).
    """
    import spglib

    if hasattr(spglib, "error"):  # spglib >= 2.5: raise instead of returning None
        spglib.error.OLD_ERROR_HANDLING = False
    cell_lattice, cell_positions, cell_species = _check_cell(lattice, positions, species)
    if not (np.isfinite(symprec) and symprec > 0):
        raise StructureError(f"symprec must be a positive length in Å, got {symprec}")
    cell_positions = cell_positions - np.floor(cell_positions)
    dmin, i, j = _closest_pair(cell_lattice, cell_positions)
    if dmin < MIN_DISTANCE_ANGSTROM:
        raise StructureError(
            f"impossible structure: atoms {i + 1} ({cell_species[i]}) and {j + 1} ({cell_species[j]}) "
            f"are {dmin:.3f} Å apart"
        )
    per_atom: FloatArray | None = None
    if charges is not None:
        if isinstance(charges, Mapping):
            missing = [s for s in set(cell_species) if s not in charges]
            if missing:
                raise StructureError(f"no charge given for {', '.join(sorted(missing))}")
            per_atom = np.array([float(charges[s]) for s in cell_species])
        else:
            per_atom = np.asarray(charges, dtype=np.float64)
            if per_atom.shape != (len(cell_species),):
                raise StructureError(f"charges need one value per atom, got shape {per_atom.shape}")
    numbers = np.array([atomic_number(s) for s in cell_species], dtype=np.intc)
    # spglib's stubs ask for sequences; it reads any array (its own docs pass numpy arrays).
    cell = cast("SpgCell", (cell_lattice, cell_positions, numbers))
    try:
        dataset = spglib.get_symmetry_dataset(cell, symprec=symprec)
    except Exception:  # spglib.error.SpglibError in new releases
        dataset = None
    if dataset is None:
        raise StructureError(f"spglib could not find the symmetry of the structure (symprec {symprec} Å)")
    std_lattice = np.array(dataset.std_lattice, dtype=float)
    std_positions = np.array(dataset.std_positions, dtype=float) % 1.0
    std_positions[np.isclose(std_positions, 1.0, atol=1e-10)] = 0.0
    std_numbers = np.array(dataset.std_types)
    std_species = tuple(SYMBOLS[z] for z in std_numbers)

    std_charges: FloatArray | None = None
    if per_atom is not None:
        prim_charge: dict[int, float] = {}
        for q, p in zip(per_atom, dataset.mapping_to_primitive):
            prim_charge.setdefault(int(p), q)
        std_charges = np.array([prim_charge[int(p)] for p in dataset.std_mapping_to_primitive])

    std_cell = cast("SpgCell", (std_lattice, std_positions, std_numbers.astype(np.intc)))
    sym = spglib.get_symmetry(std_cell, symprec=symprec)
    if sym is None:  # the standard cell of a found dataset always has a symmetry; guard spglib's optional
        raise StructureError(f"spglib could not find the symmetry of the standard cell (symprec {symprec} Å)")
    rotations = np.array(sym["rotations"], dtype=np.int64)
    translations = np.array(sym["translations"], dtype=float) % 1.0
    translations[np.isclose(translations, 1.0, atol=1e-8)] = 0.0

    # Distinct rotations in order of first appearance, identity first.
    _, first = np.unique(rotations.reshape(len(rotations), 9), axis=0, return_index=True)
    first = np.sort(first)
    is_identity = np.all(rotations[first] == np.eye(3, dtype=np.int64), axis=(1, 2))
    point_group = np.concatenate([np.eye(3, dtype=np.int64)[None], rotations[first[~is_identity]]])

    identity = np.all(rotations == np.eye(3, dtype=int), axis=(1, 2))
    centring = translations[identity]
    centring = centring[np.lexsort(centring.T[::-1])]
    centring_int = rationalise(centring, 12)
    gens = np.vstack([12 * np.eye(3, dtype=np.int64), centring_int])
    primitive_fractional = row_basis(gens) / 12.0

    note = _describe_transformation(cell_lattice, numbers, std_lattice, std_numbers, dataset)
    return Crystal(
        lattice=std_lattice,
        positions=std_positions,
        species=std_species,
        charges=std_charges,
        name=name or reduced_formula(std_species),
        spacegroup=str(dataset.international),
        spacegroup_number=int(dataset.number),
        rotations=rotations,
        translations=translations,
        point_group=point_group,
        centring=centring,
        primitive_fractional=primitive_fractional,
        note=note,
        symprec=float(symprec),
        origin=origin,
    )


def _describe_transformation(
    lattice: FloatArray,
    numbers: ArrayLike,
    std_lattice: FloatArray,
    std_numbers: ArrayLike,
    dataset: SpglibDataset,
) -> str | None:
    """A sentence on how the input differs from the standard cell, or None.

    ``lattice`` and ``std_lattice`` are (3, 3) rows in Å; ``numbers`` and
    ``std_numbers`` the atomic numbers of the input and standard cells.
    """
    n_in, n_std = np.size(numbers), np.size(std_numbers)
    same_metric = np.allclose(lattice @ lattice.T, std_lattice @ std_lattice.T, atol=1e-4)
    if n_in != n_std or not same_metric:
        a = np.linalg.norm(std_lattice, axis=1)
        return (
            f"input cell ({n_in} atoms) standardised to the conventional {dataset.international} "
            f"cell ({n_std} atoms, a={a[0]:.4f} b={a[1]:.4f} c={a[2]:.4f} Å)"
        )
    rotated = not np.allclose(lattice, std_lattice, atol=1e-4)
    shift = np.asarray(dataset.origin_shift, dtype=float)
    shifted = not np.allclose(shift - np.rint(shift), 0.0, atol=RELATIVE_EPS)
    permuted = not np.allclose(np.asarray(dataset.transformation_matrix), np.eye(3), atol=RELATIVE_EPS)
    parts = []
    if rotated:
        parts.append("rotated to the standard orientation")
    if permuted:
        parts.append("axes permuted")
    if shifted:
        parts.append("origin shifted")
    if not parts:
        return None
    return "input cell " + ", ".join(parts) + f" ({dataset.international} standard setting)"
