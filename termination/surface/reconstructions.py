"""Reconstruction cells: supercells in which a fraction of a termination's top sites is removed or added.

A polar termination asks for a fraction f of its top sites (atoms of the top
layer, or whole top units such as a B6 octahedron) to be removed (f < 0) or
added (f > 0).  Every sublattice of the surface mesh up to a given index is
a candidate cell; a cell with n sites realises f when |f| n is whole, and
its occupation patterns are ranked by :data:`CRITERION`.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from itertools import combinations
from math import comb
from typing import Literal, SupportsInt

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.lattice2d import (
    Wood,
    coset_representatives,
    gauss_reduce,
    supercell_classes,
    translation_permutations,
    wood_notation,
)
from termination.arrays import FloatArray, IntArray
from termination.bulk.crystal import Crystal
from termination.bulk.elements import composition_label, count_species
from termination.defaults import (
    CHARGE_TOL_E,
    FRACTION_TOL,
    LENGTH_EPS_ANGSTROM,
    MAX_CELL,
    MAX_CELL_LIMIT,
    MAX_PATTERNS,
    ROUNDING_EPS,
)
from termination.errors import PlaneError
from termination.surface.electrostatics import COULOMB_EV_ANGSTROM, ewald_pair_matrix
from termination.surface.symmetry import termination_operations
from termination.surface.terminations import FaceTerminations, SurfaceAtoms
from termination.units import ANGSTROM, EV, E

__all__ = [
    "CRITERION",
    "CompensationSites",
    "Matrix2",
    "Mode",
    "PatternRanking",
    "Reconstruction",
    "SiteChoice",
    "SiteKind",
    "check_max_cell",
    "compensation_sites",
    "rank_patterns",
    "reconstructions",
    "supercell_sites",
]

#: A (2, 2) integer matrix as nested tuples (rows), e.g. a supercell in mesh units.
Matrix2 = tuple[tuple[int, int], tuple[int, int]]
#: Whether a reconstruction removes top sites (vacancies) or adds them (adatoms).
Mode = Literal["remove", "add"]
#: What one compensation site is: a whole top unit or one atom (or formula unit) of the top layer.
SiteKind = Literal["unit", "layer"]
#: The ``sites`` argument of :func:`reconstructions`: a :data:`SiteKind` or 'auto'.
SiteChoice = Literal["auto", "unit", "layer"]

CRITERION = (
    "2D Ewald energy of the changed sites as point charges in the surface plane with a uniform "
    "compensating background, eV per changed site (lower is better)"
)


@dataclass(frozen=True, eq=False)
class Reconstruction:
    """A supercell that realises a termination's compensation, with its best vacancy or adatom pattern.

    Attributes
    ----------
    matrix : Matrix2
        (2, 2) ints; rows are the supercell vectors in units of the mesh
        vectors a, b (``A_super = matrix @ mesh_inplane``); the Wood cell's
        basis when the notation is primitive, else a reduced basis.
    hnf : Matrix2
        (2, 2) ints; row Hermite normal form of the same supercell.
    wood : str or None
        Wood notation ('(2×1)', 'c(2×2)', '(√3×√3)R30°'), None if none applies.
    sites : int
        Candidate sites (top-unit or top-layer sites) in the supercell.
    changed : int
        Sites removed (``mode`` 'remove') or added ('add').
    mode : str
        'remove' or 'add'.
    site_label : str
        What one site is ('Na', 'B6', 'SrTiO').
    cell_inplane : (2, 2) FloatArray
        Supercell vectors as rows, Cartesian in the face frame (e1, e2), Å.
    changed_inplane : (k, 2) FloatArray
        Cartesian in-plane positions (face frame, Å) of the changed sites of
        the best pattern: one atom per site (the topmost atom of a unit).
    changed_depth : (k,) FloatArray
        Their depths below the top layer, Å; negative for adatoms.
    changed_species : tuple of str
        Species of those atoms.
    changed_atoms_inplane, changed_atoms_depth, changed_atoms_species : (m, 2) FloatArray, (m,) FloatArray, tuple of str
        Every atom of the changed sites (a whole B6 unit, say), same frame and units.
    criterion : str
        How patterns are ranked (:data:`CRITERION`).
    score : float
        The best pattern's criterion value (eV per changed site).
    patterns : int
        Distinct patterns with exactly this cell's period, up to a translation.
    """

    matrix: Matrix2
    hnf: Matrix2
    wood: str | None
    sites: int
    changed: int
    mode: Mode
    site_label: str
    cell_inplane: FloatArray = field(metadata=ANGSTROM)
    changed_inplane: FloatArray = field(metadata=ANGSTROM)
    changed_depth: FloatArray = field(metadata=ANGSTROM)
    changed_species: tuple[str, ...]
    changed_atoms_inplane: FloatArray = field(metadata=ANGSTROM)
    changed_atoms_depth: FloatArray = field(metadata=ANGSTROM)
    changed_atoms_species: tuple[str, ...]
    criterion: str
    score: float = field(metadata=EV)
    patterns: int


@dataclass(frozen=True, eq=False)
class CompensationSites:
    """The candidate sites of a termination's compensation: whole top units or top-layer atoms.

    ``inplane`` ((g, 2) FloatArray) and ``depth`` ((g,) FloatArray) locate one
    representative atom per site (face frame, Å) and ``species`` names it;
    ``members`` holds g IntArrays indexing the atoms of each site in ``unit``,
    the termination's repeat unit; ``charge`` ((g,) FloatArray) is the charge
    of each site (e), None without charges.
    """

    kind: SiteKind
    label: str
    inplane: FloatArray = field(metadata=ANGSTROM)
    depth: FloatArray = field(metadata=ANGSTROM)
    species: tuple[str, ...]
    charge: FloatArray | None = field(metadata=E)
    members: tuple[IntArray, ...]
    unit: SurfaceAtoms = field(repr=False)


def compensation_sites(
    ft: FaceTerminations, key: str, kind: SiteChoice = "auto", charge_tol_e: float = CHARGE_TOL_E
) -> CompensationSites:
    """The candidate sites of termination ``key``: one per top unit, or the top layer's sites.

    ``kind`` is 'unit', 'layer' or 'auto': the unit when it has several
    layers and carries a charge (or charges are unknown), else the layer.
    """
    t = ft.termination(key)
    ru = ft.repeat_unit(t.id)
    tol = ft.layer_tol_angstrom
    in_unit = np.flatnonzero(ru.unit == 0)
    in_layer = np.flatnonzero(np.abs(ru.depth) <= max(tol, LENGTH_EPS_ANGSTROM))
    q = None if ru.charges is None else np.asarray(ru.charges, dtype=float)
    site_kind: SiteKind = "layer" if kind == "auto" else kind
    if kind == "auto" and len(t.layers) > 1:
        site_kind = "unit" if q is None or abs(q[in_unit].sum()) > charge_tol_e else "layer"
    if site_kind == "unit" and len(t.layers) == 1:
        site_kind = "layer"
    members: tuple[IntArray, ...]
    if site_kind == "unit":
        members = (in_unit,)
    else:
        if len(count_species(ru.species[i] for i in in_layer)) == 1:
            members = tuple(np.array([i]) for i in in_layer)
        else:
            # Several species in one layer: the whole layer of a surface cell
            # is one site (its formula unit), unless it repeats within the cell.
            members = (in_layer,)
    inplane: list[FloatArray] = []
    depth: list[float] = []
    rep_species: list[str] = []
    charge: list[float] = []
    inv_mesh = np.linalg.inv(ru.mesh_inplane)
    for m in members:
        # One atom stands for a site: its topmost atom; among several, the one
        # nearest the site's centroid (unwrapped over the mesh).
        tops = m[ru.depth[m] <= ru.depth[m].min() + max(tol, LENGTH_EPS_ANGSTROM)]
        top = tops[0]
        if len(tops) > 1:
            frac = ru.inplane[m] @ inv_mesh
            rel = frac - frac[0]
            rel -= np.rint(rel)
            centre = frac[0] + rel.mean(axis=0)
            off = ru.inplane[tops] @ inv_mesh - centre
            off -= np.rint(off)
            top = tops[np.argmin(np.linalg.norm(off @ ru.mesh_inplane, axis=1))]
        inplane.append(ru.inplane[top])
        depth.append(float(ru.depth[top]))
        rep_species.append(ru.species[top])
        charge.append(np.nan if q is None else float(q[m].sum()))
    label = composition_label(count_species(ru.species[i] for i in members[0]))
    return CompensationSites(
        kind=site_kind,
        label=label,
        inplane=np.array(inplane).reshape(-1, 2),
        depth=np.array(depth, dtype=float),
        species=tuple(rep_species),
        charge=None if q is None else np.array(charge),
        members=members,
        unit=ru,
    )


def supercell_sites(hnf: ArrayLike, mesh_inplane: ArrayLike, base_inplane: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Cartesian in-plane positions of all sites of the supercell.

    Parameters
    ----------
    hnf : (2, 2) int array_like
    mesh_inplane : (2, 2) array_like
        Mesh rows a, b, Å.
    base_inplane : (g, 2) array_like
        Sites of one mesh cell, Å.

    Returns
    -------
    positions : (D g, 2) FloatArray
        Site ``coset * g + base`` at base_inplane[base] + reps[coset] @ mesh, Å.
    cell : (2, 2) FloatArray
        Supercell rows, Å.
    """
    h = np.asarray(hnf, dtype=np.int64)
    mesh = np.asarray(mesh_inplane, dtype=np.float64)
    base = np.asarray(base_inplane, dtype=np.float64).reshape(-1, 2)
    shifts = coset_representatives(h) @ mesh
    positions = (shifts[:, None, :] + base[None, :, :]).reshape(-1, 2)
    return positions, h @ mesh


@dataclass(frozen=True, eq=False)
class PatternRanking:
    """Occupation patterns of one supercell, ranked by electrostatic energy.

    Attributes
    ----------
    patterns : (P, k) IntArray
        Changed-site indices of one pattern per class of mesh translations,
        for every class with exactly the supercell's period, best first.
    energy_ev : (P,) FloatArray
        Energy per changed site, E = (q²/2) sum_{i,j in pattern} Phi_ij / k,
        in eV (lower is better).
    distinct : int
        Number of such classes, P.
    total : int
        Number of k-subsets of the sites, C(n, k).
    """

    patterns: IntArray
    energy_ev: FloatArray = field(metadata=EV)
    distinct: int
    total: int


@lru_cache(maxsize=64)
def _subsets_touching_first_cell(n: int, k: int, g: int) -> IntArray:
    """(m, k) k-subsets of range(n), as sorted rows, whose smallest element is < g (cached, read-only)."""
    blocks: list[IntArray] = []
    for first in range(min(g, n - k + 1)):
        combos = list(combinations(range(first + 1, n), k - 1))
        rest = np.array(combos, dtype=np.int64).reshape(len(combos), k - 1)
        blocks.append(np.hstack([np.full((len(rest), 1), first, dtype=np.int64), rest]))
    out = np.vstack(blocks) if blocks else np.zeros((0, k), dtype=np.int64)
    out.flags.writeable = False
    return out


def rank_patterns(
    cell: ArrayLike,
    positions: ArrayLike,
    k: int,
    permutations: ArrayLike,
    charge: float = 1.0,
    max_patterns: int = MAX_PATTERNS,
) -> PatternRanking | None:
    """Rank the ways of changing ``k`` of the supercell's sites by their 2D Ewald energy.

    Parameters
    ----------
    cell : (2, 2) array_like
        Supercell rows, Å.
    positions : (n, 2) array_like
        Candidate sites, Å, numbered ``coset * g + base`` as by
        :func:`supercell_sites` (g = n / D sites per 1×1 cell).
    k : int
        Number of sites removed (vacancies) or added (adatoms), 0 < k < n.
    permutations : (D, n) int array_like
        Site permutations of the supercell's mesh translations
        (:func:`translation_permutations`); patterns left invariant by a
        non-trivial one have a smaller period and are dropped.
    charge : float
        Charge of one changed site, e (only scales the energies).
    max_patterns : int
        Refuse (return None) when more subsets than this would be examined.

    Returns
    -------
    PatternRanking or None
        None when there are too many subsets or none has the full period.

    Notes
    -----
    The criterion is the electrostatic energy of the changed sites as point
    charges ±q in the surface plane with a uniform compensating background,
    from :func:`ewald_pair_matrix`, per changed site.  Vacancies repel one
    another, so the lowest energy spreads them out as evenly as the cell
    allows (the 2D Wigner-lattice limit).  For equivalent candidate sites it
    differs from the energy of the whole modified top layer by a
    pattern-independent constant.

    The energy does not change under a mesh translation, so one pattern per
    translation class is enough: every class has a member with a site in the
    first 1×1 cell, and only those subsets are generated; classes are told
    apart by the smallest bit mask over their D translates.  Ties go to the
    lexicographically first pattern, so the result is deterministic.
    """
    pos = np.asarray(positions, dtype=float).reshape(-1, 2)
    n = len(pos)
    k = int(k)
    perms = np.asarray(permutations, dtype=np.int64)
    det = len(perms)
    g = n // det
    if not 0 < k < n or n > 62:  # subsets are int64 bit masks
        return None
    total = comb(n, k)
    examined = sum(comb(n - 1 - f, k - 1) for f in range(min(g, n - k + 1)))
    if examined > max_patterns:
        return None
    combos = _subsets_touching_first_cell(n, k, g)
    bits = np.left_shift(np.int64(1), np.arange(n, dtype=np.int64))
    masks = np.stack([bits[perm][combos].sum(axis=1) for perm in perms])  # (D, m): every translate's bits
    primitive = np.all(masks[1:] != masks[0][None, :], axis=0)
    combos, masks = combos[primitive], masks[:, primitive]
    if not len(combos):
        return None
    _, first = np.unique(masks.min(axis=0), return_index=True)
    combos = combos[np.sort(first)]
    phi = ewald_pair_matrix(cell, pos)
    energy = np.empty(len(combos))
    chunk = max(1, 2_000_000 // (k * k))
    for s in range(0, len(combos), chunk):
        c = combos[s : s + chunk]
        energy[s : s + chunk] = phi[c[:, :, None], c[:, None, :]].sum(axis=(1, 2))
    energy *= 0.5 * charge * charge * COULOMB_EV_ANGSTROM / k
    order = np.lexsort((np.arange(len(combos)), np.round(energy, 9)))
    return PatternRanking(combos[order], energy[order], len(combos), total)


def check_max_cell(max_cell: SupportsInt) -> int:
    """``max_cell`` as an int, or PlaneError naming it."""
    try:
        n = int(max_cell)
        ok = n == max_cell and 1 <= n <= MAX_CELL_LIMIT
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok:
        raise PlaneError(f"max cell must be an integer from 1 to {MAX_CELL_LIMIT}, got {max_cell}")
    return n


def _wood_rank(w: Wood | None) -> tuple[int, float]:
    """Preference among Wood notations of one class: unrotated primitive first, none last."""
    if w is None:
        return (4, 0.0)
    return (2 * (w.angle > 0) + int(w.centred), -w.m + w.n if w.m < w.n else 0.0)


def _reduced_basis(hnf: IntArray, mesh: FloatArray) -> IntArray:
    """Shortest right-handed basis of the (2, 2) supercell lattice, in mesh units; ``mesh`` rows in Å."""
    v1, v2 = gauss_reduce(*(np.asarray(hnf, dtype=float) @ mesh))
    basis = np.rint(np.array([v1, v2]) @ np.linalg.inv(mesh)).astype(np.int64)
    if round(np.linalg.det(basis)) < 0:
        basis[1] *= -1
    # Of the four orientation-keeping choices, the one whose first vector lies
    # closest to a, counter-clockwise (reads like (2 1 / 0 2), not (0 -2 / 2 1)).
    p, q = basis
    options = [np.array(o) for o in ((p, q), (-p, -q), (q, -p), (-q, p))]
    a = mesh[0]

    def angle(o: IntArray) -> float:
        v = o[0] @ mesh
        return float((np.degrees(np.arctan2(a[0] * v[1] - a[1] * v[0], a @ v)) + ROUNDING_EPS) % 360.0)

    return min(options, key=lambda o: (round(angle(o), 6), tuple(o.ravel())))


def reconstructions(
    crystal: Crystal,
    face_terminations: FaceTerminations,
    termination_key: str,
    fraction: float,
    max_cell: int = MAX_CELL,
    *,
    sites: SiteChoice = "auto",
    fraction_tol: float = FRACTION_TOL,
    charge_tol_e: float = CHARGE_TOL_E,
    max_patterns: int = MAX_PATTERNS,
) -> tuple[Reconstruction, ...]:
    """Supercells in which a termination's top sites can be removed or added by ``fraction``.

    Parameters
    ----------
    crystal : Crystal
        Bulk crystal of ``face_terminations`` (for the termination's symmetry).
    face_terminations : FaceTerminations
        Terminations of the face; site charges come from its atoms when known.
    termination_key : str
        Termination id or label.
    fraction : float
        Fraction of the sites to change: negative removes, positive adds,
        0 < |fraction| < 1.
    max_cell : int
        Largest supercell index (number of 1×1 cells), 1 to 12.
    sites : {'auto', 'unit', 'layer'}
        Count whole top units (a B6 octahedron, a CaF2 slab) or the atoms
        of the top layer; 'auto' takes the unit when it has several layers
        and carries a charge (or charges are unknown), else the layer.
    fraction_tol : float
        How close |fraction| x sites must be to an integer.
    charge_tol_e : float
        Charges below this (e) count as zero.
    max_patterns : int
        Cells with more k-subsets of their sites than this are skipped.

    Returns
    -------
    tuple of Reconstruction
        One per inequivalent supercell that realises the fraction with whole
        sites and has a pattern of exactly its period; best score first.

    Notes
    -----
    All sublattices of index D <= ``max_cell`` are enumerated as Hermite
    normal forms and grouped into classes under the termination's point
    operations (:func:`termination.surface.symmetry.termination_operations`); each class is shown by the
    member with the simplest Wood notation.  A supercell with n = D g sites
    (g per 1×1 cell) realises the fraction when k = |f| n is a whole number.
    Its patterns (k of the n sites) are ranked by :data:`CRITERION`; those
    repeating with a smaller cell belong to that cell and are dropped.  Added
    sites ('add') are the top sites one period up: the bulk continued.

    References
    ----------
    E. A. Wood, J. Appl. Phys. 35, 1306 (1964); J. Goniakowski, F. Finocchi
    and C. Noguera, Rep. Prog. Phys. 71, 016501 (2008).

    Examples
    --------
    >>> from termination.structures import build_prototype
    >>> c = build_prototype("rocksalt:Na,Cl", a=5.64)
    >>> from termination.surface.terminations import face_terminations
    >>> ft = face_terminations(c, (1, 1, 1))
    >>> [r.wood for r in reconstructions(c, ft, "Na", -0.5, max_cell=2)]
    ['(2×1)']
    """
    f = float(fraction)
    if not (np.isfinite(f) and 0 < abs(f) < 1):
        raise PlaneError(f"fraction of sites to change must lie strictly between -1 and 1 and not be 0, got {fraction}")
    n_cells = check_max_cell(max_cell)
    if sites not in ("auto", "unit", "layer"):
        raise PlaneError(f"sites must be 'auto', 'unit' or 'layer', got {sites!r}")
    ft = face_terminations
    group = compensation_sites(ft, termination_key, sites, charge_tol_e)
    return _reconstructions(crystal, ft, termination_key, f, n_cells, group, fraction_tol, max_patterns)


def _reconstructions(
    crystal: Crystal,
    ft: FaceTerminations,
    key: str,
    f: float,
    max_cell: int,
    group: CompensationSites,
    fraction_tol: float,
    max_patterns: int,
) -> tuple[Reconstruction, ...]:
    """:func:`reconstructions` after its input checks, for the sites ``group``."""
    mesh = np.asarray(ft.atoms.mesh_inplane, dtype=float)
    mode: Mode = "remove" if f < 0 else "add"
    g = len(group.inplane)
    base = group.inplane.copy()
    base_depth = group.depth.copy()
    shift_inplane = np.zeros(2)
    if mode == "add":
        shift_inplane = np.asarray(ft.atoms.stack_inplane, dtype=float)
        base = base + shift_inplane
        base_depth = base_depth - ft.d
    if group.charge is None or not np.all(np.isfinite(group.charge)):
        q_site = 1.0
    else:
        q_site = float(np.mean(np.abs(group.charge))) or 1.0
    ops = termination_operations(crystal, ft.face)
    ru = group.unit
    out = []
    for members in supercell_classes(max_cell, ops):
        det = int(members[0][0, 0] * members[0][1, 1])
        n = det * g
        share = abs(f) * n
        if abs(share - round(share)) > fraction_tol or not 0 < round(share) < n:
            continue
        k = int(round(share))
        woods = [wood_notation(h, mesh) for h in members]
        pick = min(range(len(members)), key=lambda i: (_wood_rank(woods[i]), tuple(members[i].ravel())))
        hnf, wood = members[pick], woods[pick]
        positions, cell = supercell_sites(hnf, mesh, base)
        ranking = rank_patterns(
            cell, positions, k, translation_permutations(hnf, g), charge=q_site, max_patterns=max_patterns
        )
        if ranking is None:
            continue
        best = ranking.patterns[0]
        reps = coset_representatives(hnf)
        coset, which = best // g, best % g
        shifts = reps[coset] @ mesh
        atom_xy: list[FloatArray] = []
        atom_z: list[FloatArray] = []
        atom_sp: list[str] = []
        for c, b in zip(coset, which):
            m = group.members[b]
            atom_xy.append(ru.inplane[m] + reps[c] @ mesh + shift_inplane)
            atom_z.append(ru.depth[m] - (ft.d if mode == "add" else 0.0))
            atom_sp += [ru.species[i] for i in m]
        if wood is not None and not wood.centred:
            matrix = np.array(wood.matrix, dtype=np.int64)
        else:
            matrix = _reduced_basis(hnf, mesh)
        out.append(
            Reconstruction(
                matrix=_matrix2(matrix),
                hnf=_matrix2(hnf),
                wood=None if wood is None else wood.label,
                sites=n,
                changed=k,
                mode=mode,
                site_label=group.label,
                cell_inplane=matrix @ mesh,
                changed_inplane=base[which] + shifts,
                changed_depth=base_depth[which],
                changed_species=tuple(group.species[b] for b in which),
                changed_atoms_inplane=np.vstack(atom_xy),
                changed_atoms_depth=np.concatenate(atom_z),
                changed_atoms_species=tuple(atom_sp),
                criterion=CRITERION,
                score=float(ranking.energy_ev[0]),
                patterns=int(ranking.distinct),
            )
        )
    out.sort(key=lambda r: (round(r.score, 6), r.sites, r.hnf))
    return tuple(out)


def _matrix2(matrix: IntArray) -> Matrix2:
    """A (2, 2) integer array as nested tuples of Python ints."""
    (a, b), (c, d) = ((int(v) for v in row) for row in matrix)
    return (a, b), (c, d)
