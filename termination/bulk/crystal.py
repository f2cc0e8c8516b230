"""The bulk crystal: lattice, atoms, optional charges and their symmetry.

One :class:`Crystal` is built once (with spglib) and passed everywhere; no
other module derives symmetry again.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from math import gcd
from typing import TYPE_CHECKING, cast

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.integer import rationalise, row_basis
from termination.arrays import FloatArray, IntArray
from termination.bulk.elements import SYMBOLS, atomic_number, check_symbol, count_species, electronegativity
from termination.bulk.neighbours import neighbour_pairs
from termination.defaults import MAX_ATOMS, MAX_LENGTH_ANGSTROM, MIN_DISTANCE_ANGSTROM, RELATIVE_EPS, SYMPREC_ANGSTROM
from termination.errors import StructureError
from termination.units import ANGSTROM, E

if TYPE_CHECKING:
    from spglib.spg import SpgCell, SpglibDataset

__all__ = ["Crystal", "build_crystal", "crystal_system", "reduced_formula"]


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

    @cached_property
    def reciprocal(self) -> FloatArray:
        """(3, 3) reciprocal lattice rows b_i with a_i . b_j = delta_ij (no 2 pi), 1/Å.

        Computed once per crystal (every face asks for it) and read-only.
        """
        inverse = np.linalg.inv(self.lattice)
        inverse.flags.writeable = False
        return cast(FloatArray, inverse.T)

    @property
    def volume(self) -> float:
        """Volume of the conventional cell, Å³."""
        return float(abs(np.linalg.det(self.lattice)))

    @property
    def cartesian(self) -> FloatArray:
        """(N, 3) Cartesian positions, Å."""
        return self.positions @ self.lattice

    @property
    def crystal_system(self) -> str:
        """Crystal system of the space group: 'triclinic', ..., 'trigonal', 'hexagonal', 'cubic'."""
        return crystal_system(self.spacegroup_number)

    @property
    def hexagonal_axes(self) -> bool:
        """True for trigonal and hexagonal crystals, whose standard cell has hexagonal axes.

        spglib gives rhombohedral crystals in hexagonal axes too (the obverse
        triple cell), so every such face takes Miller-Bravais indices (h k i l).
        """
        return self.crystal_system in ("trigonal", "hexagonal")

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


#: Last space-group number of each crystal system (International Tables Vol. A).
_SYSTEMS = (
    (2, "triclinic"),
    (15, "monoclinic"),
    (74, "orthorhombic"),
    (142, "tetragonal"),
    (167, "trigonal"),
    (194, "hexagonal"),
    (230, "cubic"),
)


def crystal_system(number: int) -> str:
    """Crystal system of space group ``number`` (1 to 230).

    >>> crystal_system(166), crystal_system(194), crystal_system(225)
    ('trigonal', 'hexagonal', 'cubic')
    """
    for last, name in _SYSTEMS:
        if 1 <= number <= last:
            return name
    raise StructureError(f"space-group number must lie between 1 and 230, got {number}")


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


def _closest_pair(lattice: FloatArray, positions: FloatArray, radius: float) -> tuple[float, int, int] | None:
    """Smallest interatomic distance below ``radius`` (Å) and its atom indices, or None when there is none.

    ``lattice`` is (3, 3), rows, Å; ``positions`` (N, 3), fractional.  A
    cell-list search (:func:`termination.bulk.neighbours.neighbour_pairs`),
    so a large cell needs no N² array.
    """
    pairs = neighbour_pairs(lattice, positions, radius)
    if not len(pairs):
        return None
    k = int(np.argmin(pairs.distance))
    i, j = sorted((int(pairs.source[k]), int(pairs.target[k])))
    return float(pairs.distance[k]), i, j


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
    # The absolute structure is that of the atoms as given.  spglib turns a
    # left-handed basis right-handed by a change of basis that inverts the
    # structure, which would swap (hkl) and (-h -k -l) of a non-centrosymmetric
    # crystal; negating all three vectors and coordinates instead keeps every
    # atom where it is.
    left_handed = bool(np.linalg.det(cell_lattice) < 0)
    if left_handed:
        cell_lattice, cell_positions = -cell_lattice, -cell_positions
    cell_positions = cell_positions - np.floor(cell_positions)
    close = _closest_pair(cell_lattice, cell_positions, MIN_DISTANCE_ANGSTROM)
    if close is not None:
        dmin, i, j = close
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
    if len(numbers) > MAX_ATOMS:
        raise StructureError(f"the cell holds {len(numbers)} atoms; at most {MAX_ATOMS} are accepted")
    dataset, std_lattice, std_positions, std_numbers, std_charges = _standardise(
        cell_lattice, cell_positions, numbers, per_atom, symprec
    )
    # The cell whose spglib dataset is in hand (the input, or its inverse below).
    analysed: tuple[FloatArray, FloatArray, IntArray] = (cell_lattice, cell_positions, numbers.astype(np.int64))
    note = _describe_transformation(cell_lattice, numbers, std_lattice, std_numbers, dataset)
    if _inversion_preferred(dataset, std_positions, std_numbers):
        # An achiral non-centrosymmetric crystal: its inverted description is
        # the same crystal turned by a proper rotation, and names (h k l) and
        # (-h -k -l) the other way round.  Take the one the convention picks.
        analysed = (std_lattice, -std_positions % 1.0, std_numbers)
        dataset, std_lattice, std_positions, std_numbers, std_charges = _standardise(*analysed, std_charges, symprec)
        flipped = (
            "described in the orientation the polarity convention picks, the inverse of spglib's standard cell of "
            "the input: (h k l) of that cell is (-h -k -l) here"
        )
        note = flipped if note is None else f"{note}; {flipped}"
    if len(std_numbers) > MAX_ATOMS:
        raise StructureError(f"the conventional cell holds {len(std_numbers)} atoms; at most {MAX_ATOMS} are accepted")
    std_species = tuple(SYMBOLS[z] for z in std_numbers)

    if _same_cell(analysed, (std_lattice, std_positions, std_numbers)):
        # The input was spglib's standard cell already (a prototype, a standard file), perhaps with its
        # atoms in another order: its operations are those of the dataset in hand, and a second
        # symmetry search (spglib's dearest call) would repeat it.
        sym_rotations, sym_translations = dataset.rotations, dataset.translations
    else:
        std_cell = cast("SpgCell", (std_lattice, std_positions, std_numbers.astype(np.intc)))
        sym = spglib.get_symmetry(std_cell, symprec=symprec)
        if sym is None:  # the standard cell of a found dataset always has a symmetry; guard spglib's optional
            raise StructureError(f"spglib could not find the symmetry of the standard cell (symprec {symprec} Å)")
        sym_rotations, sym_translations = sym["rotations"], sym["translations"]
    rotations = np.array(sym_rotations, dtype=np.int64)
    translations = np.array(sym_translations, dtype=float) % 1.0
    translations[np.isclose(translations, 1.0, rtol=0.0, atol=1e-8)] = 0.0  # rtol 0: 0.99999 is no 1

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

    if left_handed:
        flipped = "left-handed input axes replaced by right-handed ones (atoms not moved)"
        note = flipped if note is None else f"{note}; {flipped}"
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


def _same_cell(a: tuple[FloatArray, FloatArray, IntArray], b: tuple[FloatArray, FloatArray, IntArray]) -> bool:
    """Whether two cells are the same lattice (to 1e-12 Å) with the same atoms (to 1e-10 in fractions), in any order."""
    (lat_a, pos_a, num_a), (lat_b, pos_b, num_b) = a, b
    if not np.allclose(lat_a, lat_b, rtol=0.0, atol=1e-12) or len(num_a) != len(num_b):
        return False

    def ordered(pos: FloatArray, num: IntArray) -> tuple[FloatArray, IntArray]:
        frac = np.round(np.asarray(pos, dtype=float) % 1.0, 10) % 1.0
        order = np.lexsort((*frac.T[::-1], np.asarray(num)))
        return frac[order], np.asarray(num)[order]

    fa, na = ordered(pos_a, num_a)
    fb, nb = ordered(pos_b, num_b)
    return bool(np.array_equal(na, nb) and np.all(np.abs((fa - fb + 0.5) % 1.0 - 0.5) <= 1e-10))


def _standardise(
    lattice: FloatArray, positions: FloatArray, numbers: ArrayLike, charges: FloatArray | None, symprec: float
) -> tuple[SpglibDataset, FloatArray, FloatArray, IntArray, FloatArray | None]:
    """spglib's dataset and conventional standard cell (lattice, positions in [0, 1), atomic numbers, charges)."""
    import spglib

    # spglib's stubs ask for sequences; it reads any array (its own docs pass numpy arrays).
    cell = cast("SpgCell", (lattice, positions, np.asarray(numbers, dtype=np.intc)))
    try:
        dataset = spglib.get_symmetry_dataset(cell, symprec=symprec)
    except Exception:  # spglib.error.SpglibError in new releases
        dataset = None
    if dataset is None:
        raise StructureError(f"spglib could not find the symmetry of the structure (symprec {symprec} Å)")
    std_lattice = np.array(dataset.std_lattice, dtype=float)
    std_positions = np.array(dataset.std_positions, dtype=float) % 1.0
    std_positions[np.isclose(std_positions, 1.0, rtol=0.0, atol=1e-10)] = 0.0  # rtol 0: an atom at 0.99999 stays
    std_numbers = np.array(dataset.std_types, dtype=np.int64)
    std_charges: FloatArray | None = None
    if charges is not None:
        prim_charge: dict[int, float] = {}
        for q, p in zip(charges, dataset.mapping_to_primitive):
            prim_charge.setdefault(int(p), float(q))
        std_charges = np.array([prim_charge[int(p)] for p in dataset.std_mapping_to_primitive])
    return dataset, std_lattice, std_positions, std_numbers, std_charges


def _largest_up(vectors: FloatArray) -> tuple[float, float, float]:
    """The largest of (K, 3) fractional vectors compared by their c, then b, then a component (rounded)."""
    v = np.round(vectors[:, ::-1], 6)
    k = np.lexsort(v.T[::-1])[-1]
    return float(v[k, 0]), float(v[k, 1]), float(v[k, 2])


def _inversion_preferred(dataset: SpglibDataset, positions: FloatArray, numbers: IntArray) -> bool:
    """True when the polarity convention picks the inverted description of an achiral non-centrosymmetric cell.

    ``positions`` (N, 3) fractional and ``numbers`` (N,) are spglib's standard cell.

    Notes
    -----
    The convention: take the elements in order of increasing
    electronegativity (then atomic number) and, for each pair (p, q) in turn
    (cross pairs first, then like pairs), the set S of vectors x_q - x_p
    between their atoms, fractional and wrapped into [-1/2, 1/2).  Inversion
    maps S to -S.  The description whose set holds the vector that lies
    highest along c (then b, then a) is kept; the first pair that tells the
    two apart decides.  So GaAs (111) is the Ga face ("(111)A", As one
    quarter of the body diagonal above Ga) and ZnO (0001) the Zn-polar face
    (O above Zn along c).  A chiral crystal (no improper operation) is never
    inverted: its handedness is that of the input.
    """
    rotations = np.asarray(dataset.rotations)
    dets = np.rint(np.linalg.det(rotations))
    if np.any(np.all(rotations == -np.eye(3, dtype=rotations.dtype), axis=(1, 2))) or not np.any(dets < 0):
        return False
    elements = sorted(set(int(z) for z in numbers), key=lambda z: (electronegativity(SYMBOLS[z]), z))
    pairs = [(p, q) for k, p in enumerate(elements) for q in elements[k + 1 :]] + [(p, p) for p in elements]
    for p, q in pairs:
        xp, xq = positions[numbers == p], positions[numbers == q]
        best_up: tuple[float, float, float] | None = None
        best_down: tuple[float, float, float] | None = None
        step = max(1, 2_000_000 // max(1, len(xq)))
        for lo in range(0, len(xp), step):
            v = (xq[None, :, :] - xp[lo : lo + step, None, :]).reshape(-1, 3)
            v -= np.floor(v + 0.5)
            w = -v
            w -= np.floor(w + 0.5)
            up, down = _largest_up(v), _largest_up(w)
            best_up = up if best_up is None else max(best_up, up)
            best_down = down if best_down is None else max(best_down, down)
        if best_up != best_down:
            return bool(best_down is not None and best_up is not None and best_down > best_up)
    return False


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
        text = (
            f"input cell ({n_in} atoms) standardised to the conventional {dataset.international} "
            f"cell ({n_std} atoms, a={a[0]:.4f} b={a[1]:.4f} c={a[2]:.4f} Å)"
        )
        if str(dataset.international).startswith("R") and n_std == 3 * n_in:
            text += "; rhombohedral axes converted to hexagonal axes (obverse setting, three lattice points per cell)"
        return text
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
