"""Reconstruction cells: supercells in which top sites, of one or of the top two layers, are removed or added.

A polar termination asks for a charge dq per surface cell to be taken from
(or given to) its surface.  The compensation sites are the atoms of the top
layer, or whole top units such as a B6 octahedron; below them, the sites of
the next layer (or unit) may give charge too, so that the compensation can
spread over the top two layers (the octopolar p(2×2) of rock salt (111)
removes 3/4 of the top layer and 1/4 of the second).  Every sublattice of the
surface mesh up to a given index is a candidate cell; a cell realises dq
when whole numbers of its sites carry exactly that charge, and its
occupation patterns are ranked by :data:`CRITERION`.  When no cell up to the
largest index realises dq, the cells that come nearest are listed with the
charge they leave over (:attr:`Reconstruction.residual_charge`).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache
from itertools import chain, combinations
from math import comb, prod
from typing import Literal, NamedTuple, SupportsInt

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.lattice2d import (
    Wood,
    coset_representatives,
    gauss_reduce,
    matrix_text,
    supercell_classes,
    translation_permutations,
    wood_notation,
)
from termination.arrays import BoolArray, FloatArray, IntArray
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
from termination.surface.domains import cell_domains, face_point_group
from termination.surface.electrostatics import (
    COULOMB_EV_ANGSTROM,
    ewald_bulk_potential,
    ewald_pair_matrix,
    ewald_slab_matrix,
)
from termination.surface.layers import cluster_layers
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
    "best_occupation",
    "check_max_cell",
    "compensation_layers",
    "compensation_sites",
    "rank_occupations",
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
    "electrostatic energy of the compensated surface (the changed sites as point charges in their layers, in "
    "the field of the crystal below and of each other, removed ions back in the bulk at their Madelung energy; "
    "Ewald sums) relative to the same charge taken evenly from the top layer, eV per 1×1 cell (lower is better)"
)

#: Fourier components of the crystal's potential below the top layers must have decayed to this
#: fraction at the bottom of the model slab (sets its thickness).
_SLAB_DECAY = 1e-6


@dataclass(frozen=True, eq=False)
class Reconstruction:
    """A supercell that compensates a termination, with its best vacancy or adatom pattern.

    Attributes
    ----------
    matrix : Matrix2
        (2, 2) ints; rows are the supercell vectors in units of the mesh
        vectors a, b (``A_super = matrix @ mesh_inplane``); the Wood cell's
        basis when the notation is primitive, else a reduced basis.
    hnf : Matrix2
        (2, 2) ints; row Hermite normal form of the same supercell.
    wood : str or None
        Standard Wood notation ('(2×1)', 'c(2×2)', '(√3×√3)R30°'); None
        where none is standard, and for the 1×1 cell, which is no
        reconstruction.
    name : str
        How the cell is shown: the Wood notation, else the matrix
        ('(2 1 / 0 2)'); a change within the 1×1 cell is named for what it
        is ('1×1 with 1 of 2 O removed').
    sites : int
        Candidate sites of the top layer (or top unit) in the supercell.
    changed : int
        Sites removed (``mode`` 'remove') or added ('add'), over all layers.
    mode : str
        'remove' or 'add'.
    site_label : str
        What one top site is ('Na', 'B6', 'SrTiO').
    layer_labels : tuple of str
        What one site is in each layer that takes part, top first ('Na', 'Cl').
    layer_sites, layer_changed : tuple of int
        Sites of each such layer in the supercell, and how many change.
    residual_charge : float
        Compensating charge per 1×1 cell that the cell does not supply, e:
        dq minus the charge its changed sites carry (0 when it realises the
        compensation exactly; negative when it supplies too much).  Left to
        electronic compensation or adsorbates.
    domains : tuple of str
        The cell's orientations under the point group of the face (its own
        first): ('(2×1)', '(1×2)') on a square surface.
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
        The best pattern's criterion value, eV per 1×1 cell.
    patterns : int
        Distinct patterns with exactly this cell's period, up to a translation.
    """

    matrix: Matrix2
    hnf: Matrix2
    wood: str | None
    name: str
    sites: int
    changed: int
    mode: Mode
    site_label: str
    layer_labels: tuple[str, ...]
    layer_sites: tuple[int, ...]
    layer_changed: tuple[int, ...]
    residual_charge: float = field(metadata=E)
    domains: tuple[str, ...]
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

    @property
    def exact(self) -> bool:
        """Whether the cell realises the compensation exactly."""
        return self.residual_charge == 0.0

    @property
    def label(self) -> str:
        """The name, with '+Cl' for every layer below the top one that gives sites too: '(2×2) +Cl'."""
        below = [lab for lab, k in zip(self.layer_labels[1:], self.layer_changed[1:]) if k]
        return " ".join([self.name, *(f"+{lab}" for lab in below)])


@dataclass(frozen=True, eq=False)
class CompensationSites:
    """The candidate sites of one layer of a compensation: whole units or the atoms of one layer.

    ``inplane`` ((g, 2) FloatArray) and ``depth`` ((g,) FloatArray) locate one
    representative atom per site (face frame, Å) and ``species`` names it;
    ``members`` holds g IntArrays indexing the atoms of each site in ``unit``,
    the atoms the sites come from (the termination's repeat unit, or two
    periods of it for a second layer); ``charge`` ((g,) FloatArray) is the
    charge of each site (e), None without charges.
    """

    kind: SiteKind
    label: str
    inplane: FloatArray = field(metadata=ANGSTROM)
    depth: FloatArray = field(metadata=ANGSTROM)
    species: tuple[str, ...]
    charge: FloatArray | None = field(metadata=E)
    members: tuple[IntArray, ...]
    unit: SurfaceAtoms = field(repr=False)


def _tol(ft: FaceTerminations) -> float:
    return max(ft.layer_tol_angstrom, LENGTH_EPS_ANGSTROM)


def _site_group(atoms: SurfaceAtoms, chosen: IntArray, kind: SiteKind, tol: float) -> CompensationSites:
    """Sites made of the atoms ``chosen`` of ``atoms``: one whole unit ('unit'), or per atom of one layer.

    A layer of several species is one site per surface cell (its formula
    unit), unless it repeats within the cell.
    """
    members: tuple[IntArray, ...]
    if kind == "unit" or len(count_species(atoms.species[i] for i in chosen)) > 1:
        members = (chosen,)
    else:
        members = tuple(np.array([i]) for i in chosen)
    q = None if atoms.charges is None else np.asarray(atoms.charges, dtype=float)
    inplane: list[FloatArray] = []
    depth: list[float] = []
    rep_species: list[str] = []
    charge: list[float] = []
    inv_mesh = np.linalg.inv(atoms.mesh_inplane)
    for m in members:
        # One atom stands for a site: its topmost atom; among several, the one
        # nearest the site's centroid (unwrapped over the mesh).
        tops = m[atoms.depth[m] <= atoms.depth[m].min() + tol]
        top = tops[0]
        if len(tops) > 1:
            frac = atoms.inplane[m] @ inv_mesh
            rel = frac - frac[0]
            rel -= np.rint(rel)
            centre = frac[0] + rel.mean(axis=0)
            off = atoms.inplane[tops] @ inv_mesh - centre
            off -= np.rint(off)
            top = tops[np.argmin(np.linalg.norm(off @ atoms.mesh_inplane, axis=1))]
        inplane.append(atoms.inplane[top])
        depth.append(float(atoms.depth[top]))
        rep_species.append(atoms.species[top])
        charge.append(np.nan if q is None else float(q[m].sum()))
    label = composition_label(count_species(atoms.species[i] for i in members[0]))
    return CompensationSites(
        kind=kind,
        label=label,
        inplane=np.array(inplane).reshape(-1, 2),
        depth=np.array(depth, dtype=float),
        species=tuple(rep_species),
        charge=None if q is None else np.array(charge),
        members=members,
        unit=atoms,
    )


def _layer_labels(depth: FloatArray, tol: float) -> IntArray:
    """Layer index of each depth (single linkage, top first)."""
    labels, _ = cluster_layers(depth, None, tol)
    return labels


def compensation_sites(
    ft: FaceTerminations, key: str, kind: SiteChoice = "auto", charge_tol_e: float = CHARGE_TOL_E
) -> CompensationSites:
    """The candidate sites of termination ``key``: one per top unit, or the top layer's sites.

    ``kind`` is 'unit', 'layer' or 'auto': the unit when it has several
    layers and carries a charge (or charges are unknown), else the layer.
    """
    t = ft.termination(key)
    ru = ft.repeat_unit(t.id)
    tol = _tol(ft)
    in_unit = np.flatnonzero(ru.unit == 0)
    in_layer = np.flatnonzero(np.abs(ru.depth) <= tol)
    q = None if ru.charges is None else np.asarray(ru.charges, dtype=float)
    site_kind: SiteKind = "layer" if kind == "auto" else kind
    if kind == "auto" and len(t.layers) > 1:
        site_kind = "unit" if q is None or abs(q[in_unit].sum()) > charge_tol_e else "layer"
    if site_kind == "unit" and len(t.layers) == 1:
        site_kind = "layer"
    return _site_group(ru, in_unit if site_kind == "unit" else in_layer, site_kind, tol)


def compensation_layers(
    ft: FaceTerminations, key: str, kind: SiteChoice = "auto", charge_tol_e: float = CHARGE_TOL_E, layers: int = 2
) -> tuple[CompensationSites, ...]:
    """The sites of the top layer (or unit) of termination ``key`` and, with ``layers`` 2, of the next one below.

    Parameters
    ----------
    ft : FaceTerminations
    key : str
        Termination id or label.
    kind : {'auto', 'unit', 'layer'}
        What a top site is (see :func:`compensation_sites`).
    charge_tol_e : float
        Charges below this (e) count as zero.
    layers : {1, 2}
        How many layers (or units) may give the compensation.

    Returns
    -------
    tuple of CompensationSites
        The top sites first.  The second entry, when there is one: the sites
        of the next termination unit below, by the same rule as the top one
        (whole units when it has several layers and carries a charge, as a
        B6 octahedron does, else its top layer; the Cl layer under the Na
        layer of rock salt (111)).  A layer inside the top unit is not a
        second layer: the As under the Ga of the zinc-blende (111) bilayer
        goes with it.  A second layer that is neutral, or charged with the
        sign of the top one (the next bilayer of zinc blende (111)), cannot
        help the compensation and is left out.
    """
    first = compensation_sites(ft, key, kind, charge_tol_e)
    if layers < 2 or first.charge is None:
        return (first,)
    ru = first.unit
    tol = _tol(ft)
    # The next unit: the second of the period, or the top one a period down.
    ext = _two_periods(ft, ru)
    below = 1 if np.any(ru.unit == 1) else int(ru.unit.max()) + 1
    idx = np.flatnonzero(ext.unit == below)
    labels = _layer_labels(ext.depth[idx], tol)
    charged = abs(float(np.asarray(ext.charges, dtype=float)[idx].sum())) > charge_tol_e
    if labels.max() > 0 and charged:
        second = _site_group(ext, idx, "unit", tol)
    else:
        second = _site_group(ext, idx[labels == 0], "layer", tol)
    q1 = float(np.sum(first.charge))
    q2 = float(np.sum(np.asarray(second.charge, dtype=float)))
    if abs(q2) <= charge_tol_e or q1 * q2 > 0:
        return (first,)
    return (first, second)


def _two_periods(ft: FaceTerminations, ru: SurfaceAtoms) -> SurfaceAtoms:
    """The repeat unit and its copy one period deeper (units of the copy numbered on)."""
    shift = np.asarray(ft.atoms.stack_inplane, dtype=float)
    n_units = int(ru.unit.max()) + 1
    return SurfaceAtoms(
        species=ru.species + ru.species,
        inplane=np.vstack([ru.inplane, ru.inplane - shift]),
        depth=np.concatenate([ru.depth, ru.depth + ft.d]),
        unit=np.concatenate([ru.unit, ru.unit + n_units]),
        charges=None if ru.charges is None else np.concatenate([ru.charges, ru.charges]),
        mesh_inplane=ru.mesh_inplane,
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
        Energy of each pattern, eV (:func:`rank_occupations`; per changed
        site for :func:`rank_patterns`); lower is better.
    distinct : int
        Number of such classes, P.
    total : int
        Number of ways to choose the changed sites.
    """

    patterns: IntArray
    energy_ev: FloatArray = field(metadata=EV)
    distinct: int
    total: int


@lru_cache(maxsize=64)
def _subsets_touching_first_cell(n: int, k: int, g: int) -> tuple[IntArray, BoolArray]:
    """k-subsets of range(n) whose smallest element is < g: (m, k) sorted rows and their (m, n) indicator rows.

    Cached; both arrays are read-only.
    """
    blocks: list[IntArray] = []
    for first in range(min(g, n - k + 1)):
        rest = _all_subsets(n - first - 1, k - 1) + (first + 1)
        blocks.append(np.hstack([np.full((len(rest), 1), first, dtype=np.int64), rest]))
    return _with_indicator(np.vstack(blocks) if blocks else np.zeros((0, k), dtype=np.int64), n)


@lru_cache(maxsize=64)
def _all_subsets_indicated(n: int, k: int) -> tuple[IntArray, BoolArray]:
    """Every k-subset of range(n): (C(n, k), k) sorted rows and their indicator rows (cached, read-only)."""
    return _with_indicator(_all_subsets(n, k), n)


def _with_indicator(combos: IntArray, n: int) -> tuple[IntArray, BoolArray]:
    indicator = np.zeros((len(combos), n), dtype=bool)
    indicator[np.arange(len(combos))[:, None], combos] = True
    combos.flags.writeable = False
    indicator.flags.writeable = False
    return combos, indicator


def _all_subsets(n: int, k: int) -> IntArray:
    """(C(n, k), k) every k-subset of range(n) as sorted rows."""
    count = comb(n, k)
    flat = np.fromiter(chain.from_iterable(combinations(range(n), k)), dtype=np.int64, count=count * k)
    return flat.reshape(count, k)


def _occupation_subsets(
    sizes: tuple[int, ...], ks: tuple[int, ...], det: int, max_patterns: int
) -> tuple[IntArray, BoolArray] | None:
    """The subsets :func:`rank_occupations` examines: (m, k) site rows and (m, n) indicator rows.

    The changed sites of each group, the first changing group's touching the
    first 1×1 cell, in lexicographic order; None when there would be more
    than ``max_patterns``.
    """
    n = sum(sizes)
    lead = next(i for i, k in enumerate(ks) if k)
    n_lead, k_lead = sizes[lead], ks[lead]
    examined = sum(comb(n_lead - 1 - f, k_lead - 1) for f in range(min(n_lead // det, n_lead - k_lead + 1)))
    examined *= prod(comb(s, k) for i, (s, k) in enumerate(zip(sizes, ks)) if i != lead)
    if examined > max_patterns:
        return None
    combos = np.zeros((1, 0), dtype=np.int64)
    indicator = np.zeros((1, 0), dtype=bool)
    offset = 0
    for i, (s, k) in enumerate(zip(sizes, ks)):
        if k == 0:
            indicator = np.hstack([indicator, np.zeros((len(indicator), s), dtype=bool)])
        else:
            block, block_ind = (
                _subsets_touching_first_cell(s, k, s // det) if i == lead else _all_subsets_indicated(s, k)
            )
            m = len(combos)
            combos = np.hstack([np.repeat(combos, len(block), axis=0), np.tile(block + offset, (m, 1))])
            indicator = np.hstack([np.repeat(indicator, len(block), axis=0), np.tile(block_ind, (m, 1))])
        offset += s
    assert indicator.shape[1] == n
    return combos, indicator


def _occupation_energies(
    indicator: BoolArray, phi: FloatArray, delta: ArrayLike, site_energy: ArrayLike | None
) -> FloatArray:
    """Energy (eV) of each subset: sum_c site_energy_c + (1/2) sum_{a,b} delta_a delta_b Phi_ab, as one BLAS product."""
    x = indicator.astype(float)
    d = np.asarray(delta, dtype=float)
    weighted = 0.5 * d[:, None] * d[None, :] * phi
    linear = np.zeros(len(d)) if site_energy is None else np.asarray(site_energy, dtype=float)
    energy: FloatArray = np.einsum("ij,ij->i", x @ weighted, x) + x @ linear
    return energy * COULOMB_EV_ANGSTROM


def _translate_masks(indicator: BoolArray, perms: IntArray) -> IntArray:
    """(D, m) int64 bit masks of the m subsets moved by each of the D translations (site j goes to perm[j])."""
    bits = np.left_shift(np.int64(1), np.arange(indicator.shape[1], dtype=np.int64))
    masks: IntArray = (indicator.astype(np.int64) @ bits[perms].T).T
    return masks


def _primitive_subsets(perms: IntArray, sizes: tuple[int, ...], ks: tuple[int, ...]) -> int:
    """How many subsets (k_i sites of group i) no translation but the identity maps onto themselves.

    The D translations act freely on the sites of each group, so the subsets
    a subgroup H fixes are unions of its orbits: prod_i C(s_i/|H|, k_i/|H|)
    when |H| divides every k_i, else none.  Möbius inversion over the
    subgroup lattice (every subgroup of the abelian translation group is
    generated by at most two elements) leaves those fixed by the identity
    alone: sum_H mu(1, H) Fix(H).
    """
    return _primitive_count(perms.tobytes(), perms.shape, sizes, ks)


@lru_cache(maxsize=1024)
def _primitive_count(perm_bytes: bytes, shape: tuple[int, ...], sizes: tuple[int, ...], ks: tuple[int, ...]) -> int:
    """:func:`_primitive_subsets` of int64 permutations given as bytes (cached: cells recur across terminations)."""
    perms = np.frombuffer(perm_bytes, dtype=np.int64).reshape(shape)
    det = len(perms)
    index = {tuple(int(v) for v in p): i for i, p in enumerate(perms)}
    product = [[index[tuple(int(v) for v in perms[j][perms[i]])] for j in range(det)] for i in range(det)]

    def closure(generators: tuple[int, ...]) -> frozenset[int]:
        elements, frontier = {0}, [0]
        while frontier:
            x = frontier.pop()
            for gen in generators:
                y = product[x][gen]
                if y not in elements:
                    elements.add(y)
                    frontier.append(y)
        return frozenset(elements)

    subgroups = sorted({closure((a, b)) for a in range(det) for b in range(a, det)}, key=lambda h: (len(h), sorted(h)))
    mu: dict[frozenset[int], int] = {}
    count = 0
    for h in subgroups:
        mu[h] = 1 if len(h) == 1 else -sum(m for k, m in mu.items() if k < h)
        order = len(h)
        if mu[h] and all(k % order == 0 for k in ks):
            count += mu[h] * prod(comb(s // order, k // order) for s, k in zip(sizes, ks))
    return count


def best_occupation(
    pair_matrix: ArrayLike,
    group_sizes: tuple[int, ...],
    counts: tuple[int, ...],
    permutations: ArrayLike,
    delta: ArrayLike,
    site_energy: ArrayLike | None = None,
    max_patterns: int = MAX_PATTERNS,
) -> PatternRanking | None:
    """The first pattern of :func:`rank_occupations` (same arguments), its energy, and the counts.

    Returns a :class:`PatternRanking` that holds only the best pattern and
    its energy, with the same ``distinct`` and ``total``; None where
    :func:`rank_occupations` returns None.  The classes are counted, not
    listed (:func:`_primitive_subsets`), and the energy is computed for every
    examined subset instead of one per class; the best is the first subset in
    the examined order with the lowest energy (rounded to 1e-9 eV) that has
    the full period, which is the pattern :func:`rank_occupations` puts
    first.
    """
    phi = np.asarray(pair_matrix, dtype=float)
    sizes = tuple(int(s) for s in group_sizes)
    ks = tuple(int(k) for k in counts)
    perms = np.asarray(permutations, dtype=np.int64)
    n = sum(sizes)
    if n > 62 or not all(0 <= k < s for k, s in zip(ks, sizes)) or not any(ks):
        return None
    subsets = _occupation_subsets(sizes, ks, len(perms), max_patterns)
    if subsets is None:
        return None
    distinct, rest = divmod(_primitive_subsets(perms, sizes, ks), len(perms))
    assert rest == 0, "a free action has orbits of size D"
    if distinct == 0:
        return None
    combos, indicator = subsets
    energy = _occupation_energies(indicator, phi, delta, site_energy)
    rounded = np.round(energy, 9)
    rounded[np.isnan(rounded)] = np.inf  # NaN ranks last, as in rank_occupations
    while True:  # lowest energy first; among equal ones, the first with the full period (distinct > 0: one has)
        tied = np.flatnonzero(rounded == rounded.min())
        masks = _translate_masks(indicator[tied], perms)
        primitive = np.flatnonzero(np.all(masks[1:] != masks[0][None, :], axis=0))
        if len(primitive):
            best = int(tied[primitive[0]])
            break
        rounded[tied] = np.inf
    total = prod(comb(s, k) for s, k in zip(sizes, ks))
    return PatternRanking(combos[best][None, :].copy(), energy[best : best + 1].copy(), distinct, total)


def rank_occupations(
    pair_matrix: ArrayLike,
    group_sizes: tuple[int, ...],
    counts: tuple[int, ...],
    permutations: ArrayLike,
    delta: ArrayLike,
    site_energy: ArrayLike | None = None,
    max_patterns: int = MAX_PATTERNS,
) -> PatternRanking | None:
    """Rank the ways of changing ``counts[i]`` sites of each group of a supercell by their electrostatic energy.

    Parameters
    ----------
    pair_matrix : (n, n) array_like
        Ewald pair matrix Phi of the n sites (1/Å; :func:`ewald_slab_matrix`).
    group_sizes : tuple of int
        Sites per group (layer), n = sum; sites are numbered group by group,
        within a group ``coset * g + base`` as by :func:`supercell_sites`.
    counts : tuple of int
        Sites changed in each group, 0 <= counts[i] < group_sizes[i], not all 0.
    permutations : (D, n) int array_like
        Site permutations of the supercell's mesh translations (identity
        first); patterns left invariant by another one have a smaller
        period and are dropped.
    delta : (n,) array_like
        Charge change of each site when it is changed, e (-q for a vacancy).
    site_energy : (n,) array_like, optional
        Energy of changing each site alone, e²/Å (zero by default): its
        charge change in the potential of everything that does not change,
        and whatever else goes with it.
    max_patterns : int
        Refuse (return None) when more subsets than this would be examined.

    Returns
    -------
    PatternRanking or None
        Energies E = sum_{c in P} site_energy_c + (1/2) sum_{a,b in P}
        delta_a delta_b Phi_ab in eV; None when there are too many subsets or
        none has the full period.

    Notes
    -----
    The energy does not change under a mesh translation, so one pattern per
    translation class is enough: every class has a member whose first
    changed site of the first changing group lies in the first 1×1 cell,
    and only those subsets are generated; classes are told apart by the
    smallest bit mask over their D translates.  Ties go to the
    lexicographically first pattern, so the result is deterministic.
    """
    phi = np.asarray(pair_matrix, dtype=float)
    sizes = tuple(int(s) for s in group_sizes)
    ks = tuple(int(k) for k in counts)
    perms = np.asarray(permutations, dtype=np.int64)
    n = sum(sizes)
    det = len(perms)
    if n > 62 or not all(0 <= k < s for k, s in zip(ks, sizes)) or not any(ks):  # subsets are int64 bit masks
        return None
    total = prod(comb(s, k) for s, k in zip(sizes, ks))
    subsets = _occupation_subsets(sizes, ks, det, max_patterns)
    if subsets is None:
        return None
    combos, indicator = subsets
    masks = _translate_masks(indicator, perms)
    primitive = np.all(masks[1:] != masks[0][None, :], axis=0)
    combos, masks, indicator = combos[primitive], masks[:, primitive], indicator[primitive]
    if not len(combos):
        return None
    _, first = np.unique(masks.min(axis=0), return_index=True)
    first.sort()
    combos = combos[first]
    energy = _occupation_energies(indicator[first], phi, delta, site_energy)
    order = np.lexsort((np.arange(len(combos)), np.round(energy, 9)))
    return PatternRanking(combos[order], energy[order], len(combos), total)


def rank_patterns(
    cell: ArrayLike,
    positions: ArrayLike,
    k: int,
    permutations: ArrayLike,
    charge: float = 1.0,
    max_patterns: int = MAX_PATTERNS,
) -> PatternRanking | None:
    """Rank the ways of changing ``k`` sites of one layer of a supercell by their in-plane Ewald energy.

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
        (:func:`translation_permutations`).
    charge : float
        Charge of one changed site, e (only scales the energies).
    max_patterns : int
        Refuse (return None) when more subsets than this would be examined.

    Returns
    -------
    PatternRanking or None
        Energies per changed site, eV; None when there are too many subsets
        or none has the full period.

    Notes
    -----
    The changed sites as point charges ±q in the surface plane with a
    uniform compensating background (:func:`ewald_pair_matrix`),
    E = (q²/2) sum_{i,j in pattern} Phi_ij / k: :func:`rank_occupations` for
    one layer without the field of the rest of the crystal (the same for
    every site of one layer).  Vacancies repel one another, so the lowest
    energy spreads them out as evenly as the cell allows (the 2D
    Wigner-lattice limit).
    """
    pos = np.asarray(positions, dtype=float).reshape(-1, 2)
    n = len(pos)
    k = int(k)
    if not 0 < k < n or n > 62:
        return None
    phi = ewald_pair_matrix(cell, pos)
    ranking = rank_occupations(phi, (n,), (k,), permutations, np.full(n, float(charge)), None, max_patterns)
    if ranking is None:
        return None
    return PatternRanking(ranking.patterns, ranking.energy_ev / k, ranking.distinct, ranking.total)


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
    layers: int = 2,
    nearest: bool = False,
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
        The compensation as a fraction f of the top sites: negative removes,
        positive adds, 0 < |fraction| < 1.  The charge to realise is f Q per
        1×1 cell, Q the charge of the top sites.
    max_cell : int
        Largest supercell index (number of 1×1 cells), 1 to 12.
    sites : {'auto', 'unit', 'layer'}
        Count whole top units (a B6 octahedron, a CaF2 slab) or the atoms
        of the top layer; 'auto' takes the unit when it has several layers
        and carries a charge (or charges are unknown), else the layer.
    layers : {1, 2}
        Whether the next layer (or unit) below the top one may give charge
        too (removal only, and only with charges).
    nearest : bool
        When no cell realises the charge exactly, return the cells that come
        nearest, from above and from below, with their residual charge.
    fraction_tol : float
        How close |fraction| x sites must be to an integer.
    charge_tol_e : float
        Charges below this (e) count as zero.
    max_patterns : int
        Cells with more subsets of their sites than this are skipped.

    Returns
    -------
    tuple of Reconstruction
        One per inequivalent supercell and split of the changed sites over
        the layers that realises the charge and has a pattern of exactly its
        period; best score first (nearest cells: smallest residual first).

    Notes
    -----
    All sublattices of index D <= ``max_cell`` are enumerated as Hermite
    normal forms and grouped into classes under the termination's point
    operations (:func:`termination.surface.symmetry.termination_operations`); each class is shown by the
    member with the simplest standard Wood notation.  A supercell with
    n_1 = D g_1 top sites and n_2 = D g_2 sites in the layer below realises
    the compensation dq (per 1×1 cell) when k_1 top and k_2 second-layer
    sites of charges q_1 and q_2 carry it: -(k_1 q_1 + k_2 q_2) = D dq for
    removal (0 <= k_i < n_i).  The slab dipole of N repeat units with such
    a top then grows as N d (dq - realised), whichever layer the charge
    comes from, so the condition on the total dipole is a condition on
    the total charge.  Patterns (which k_1 and k_2 sites) are ranked by
    :data:`CRITERION`; those repeating with a smaller cell belong to that
    cell and are dropped.  Added sites ('add') are the top sites one
    period up (the bulk continued), in one layer: a second layer of adatoms
    would have to sit on the first.

    The criterion: with delta the charge changes of the pattern (-q per
    vacancy), V the potential at the sites from the unchanged crystal, Phi
    the supercell's Ewald pair matrix (:func:`ewald_slab_matrix`, sites at
    their depths) and mu_c = q_c V_bulk,c / 2 a site's share of the bulk's
    Madelung energy (:func:`ewald_bulk_potential`),

        E = sum_c delta_c V_c + (1/2) sum_{a,b} delta_a delta_b Phi_ab + s sum_c mu_c,

    s = +1 for removals (the ions return to the bulk, a reservoir of the
    crystal itself) and -1 for additions, per 1×1 cell, minus the same for
    dq spread evenly over the top sites.  V comes from a slab of the repeat
    unit, thick enough that the potential's Fourier components from its
    bottom have decayed below 1e-6, whose bottom layer carries -dq as a
    uniform charge (the opposite surface, compensated).  A site that is a
    whole unit is one point charge at its representative atom; its own
    atoms are left out of its V.  Every listed cell changes the same net
    charge, so the bulk potential's zero drops out.  Any residual of a
    nearest cell is spread evenly over its top sites (as fractions of
    them), so that every listed cell is compared at the same total charge.
    For equivalent sites of one layer V and mu are constants and the ranking
    is that of the in-plane Ewald energy of the vacancies
    (:func:`rank_patterns`); across layers they say how much dearer a
    charge is below the top, and what a removed neutral pair (the extra
    NaCl of the octopole) gains back in the bulk.

    References
    ----------
    E. A. Wood, J. Appl. Phys. 35, 1306 (1964); D. Wolf, Phys. Rev. Lett. 68,
    3315 (1992) (octopolar rock-salt (111)); J. Goniakowski, F. Finocchi and
    C. Noguera, Rep. Prog. Phys. 71, 016501 (2008).

    Examples
    --------
    >>> from termination.structures import build_prototype
    >>> c = build_prototype("rocksalt:Na,Cl", a=5.64)
    >>> from termination.surface.terminations import face_terminations
    >>> ft = face_terminations(c, (1, 1, 1))
    >>> [r.name for r in reconstructions(c, ft, "Na", -0.5, max_cell=2)]
    ['(2×1)']
    """
    f = float(fraction)
    if not (np.isfinite(f) and 0 < abs(f) < 1):
        raise PlaneError(f"fraction of sites to change must lie strictly between -1 and 1 and not be 0, got {fraction}")
    n_cells = check_max_cell(max_cell)
    if sites not in ("auto", "unit", "layer"):
        raise PlaneError(f"sites must be 'auto', 'unit' or 'layer', got {sites!r}")
    if layers not in (1, 2):
        raise PlaneError(f"layers must be 1 or 2, got {layers!r}")
    ft = face_terminations
    groups = compensation_layers(ft, termination_key, sites, charge_tol_e, layers if f < 0 else 1)
    return _reconstructions(crystal, ft, termination_key, f, n_cells, groups, fraction_tol, max_patterns, nearest)


@dataclass(frozen=True)
class _Split:
    """One way to share the compensation over the layers: counts per group, the charge realised (e per cell)."""

    counts: tuple[int, ...]
    realised: float


def _splits(
    det: int, groups: tuple[CompensationSites, ...], q: tuple[float, ...], sign: float, top_changes: bool
) -> tuple[IntArray, FloatArray]:
    """Every (k_1, k_2) with 0 <= k_i < n_i, not all zero, and the charge per 1×1 cell each realises.

    With ``top_changes`` the top group's count must not be zero either.
    Returns the (N, L) counts in lexicographic order and the (N,) charges.
    """
    sizes = [det * len(g.inplane) for g in groups]
    grid = np.stack(np.meshgrid(*[np.arange(s) for s in sizes], indexing="ij"), axis=-1).reshape(-1, len(sizes))
    keep = grid.any(axis=1)
    if top_changes:
        keep &= grid[:, 0] != 0
    grid = grid[keep].astype(np.int64)
    realised = sign * (grid @ np.asarray(q, dtype=float)) / det
    return grid, realised


def _split_list(counts: IntArray, realised: FloatArray) -> list[_Split]:
    return [_Split(tuple(int(c) for c in row), float(r)) for row, r in zip(counts, realised)]


def _slab(ft: FaceTerminations, key: str, periods: int, dq: float) -> tuple[FloatArray, FloatArray]:
    """A slab of ``periods`` repeat units below termination ``key``: positions (s, 3: x, y, depth, Å), charges (s,).

    Its bottom layer carries -dq per 1×1 cell, shared evenly by its atoms:
    the opposite surface, compensated.
    """
    ru = ft.repeat_unit(key)
    shift = np.asarray(ft.atoms.stack_inplane, dtype=float)
    j = np.arange(periods)
    xy = (ru.inplane[None, :, :] - j[:, None, None] * shift[None, None, :]).reshape(-1, 2)
    depth = (ru.depth[None, :] + j[:, None] * ft.d).reshape(-1)
    q = np.tile(np.asarray(ru.charges, dtype=float), periods)
    bottom = depth >= depth.max() - _tol(ft)
    q[bottom] -= dq / int(bottom.sum())
    return np.column_stack([xy, depth]), q


def _site_potentials(
    ft: FaceTerminations, key: str, groups: tuple[CompensationSites, ...], xyz: FloatArray, dq: float
) -> tuple[FloatArray, FloatArray]:
    """Potential (e/Å) at each site ``xyz`` (t, 3: x, y, depth) below the termination, and at that site in the bulk.

    A site's own other atoms (the rest of a unit) are left out: the site
    moves as one point charge.  The surface potential comes from a slab of
    whole repeat units, thick enough that the 1×1 mesh's Fourier components
    from its bottom have decayed (exp(-2π |G| z) < 1e-6), compensated at
    the bottom; the bulk one from the 3D Ewald sum of the face's primitive
    cell (:func:`ewald_bulk_potential`, mean potential zero).
    """
    fa = ft.atoms
    mesh = np.asarray(fa.mesh_inplane, dtype=float)
    d = ft.d
    own = []
    for gr in groups:
        q_atoms = np.asarray(gr.unit.charges, dtype=float)
        for b, m in enumerate(gr.members):
            r = np.column_stack([gr.unit.inplane[m], gr.unit.depth[m]])
            dist = np.linalg.norm(r - np.array([*gr.inplane[b], gr.depth[b]]), axis=1)
            far = dist > LENGTH_EPS_ANGSTROM
            own.append(float(np.sum(q_atoms[m][far] / dist[far])))
    own_v = np.array(own)
    g_min = float(np.min(np.linalg.norm(np.linalg.inv(mesh).T, axis=1)))
    periods = int(np.ceil(max(2.0 * d, -np.log(_SLAB_DECAY) / (2.0 * np.pi * g_min)) / d)) + 1
    src, q = _slab(ft, key, periods, dq)
    v_surface = ewald_slab_matrix(mesh, xyz, src) @ q
    t = ft.termination(key)
    z_top = ft.layers[t.layers[0]].height
    cell = np.array([[*mesh[0], 0.0], [*mesh[1], 0.0], [*fa.stack_inplane, d]])
    atoms = np.column_stack([fa.inplane, fa.heights])
    points = np.column_stack([xyz[:, :2], z_top - xyz[:, 2]])
    v_bulk = ewald_bulk_potential(cell, atoms, np.asarray(fa.charges, dtype=float), points)
    return v_surface - own_v, v_bulk - own_v


def _reconstructions(
    crystal: Crystal,
    ft: FaceTerminations,
    key: str,
    f: float,
    max_cell: int,
    groups: tuple[CompensationSites, ...],
    fraction_tol: float,
    max_patterns: int,
    nearest: bool = False,
    keep: int | None = None,
) -> tuple[Reconstruction, ...]:
    """:func:`reconstructions` after its input checks, for the sites ``groups`` (top layer first).

    With ``keep``, only the first ``keep`` records that change one layer and
    the first ``keep`` that change several are made (the others are ranked,
    not described): the same records, in the same order, as the head of each
    kind in the full list.
    """
    mesh = np.asarray(ft.atoms.mesh_inplane, dtype=float)
    mode: Mode = "remove" if f < 0 else "add"
    top = groups[0]
    if mode == "add":
        groups = (top,)
    g = [len(gr.inplane) for gr in groups]
    shift_inplane = np.zeros(2)
    bases = [gr.inplane.copy() for gr in groups]
    base_depths = [gr.depth.copy() for gr in groups]
    if mode == "add":
        shift_inplane = np.asarray(ft.atoms.stack_inplane, dtype=float)
        bases[0] = bases[0] + shift_inplane
        base_depths[0] = base_depths[0] - ft.d
    charged = all(gr.charge is not None and np.all(np.isfinite(gr.charge)) for gr in groups)
    if charged:
        site_q = [np.asarray(gr.charge, dtype=float) for gr in groups]
    else:
        # Without charges only the in-plane spreading of equal sites counts.
        groups, g, bases, base_depths = groups[:1], g[:1], bases[:1], base_depths[:1]
        site_q = [np.ones(g[0])]
    q_mean = tuple(float(np.mean(qs)) for qs in site_q)
    sign = -1.0 if mode == "remove" else 1.0
    dq = f * q_mean[0] * g[0]  # the charge to realise per 1×1 cell
    tol_e = fraction_tol * abs(q_mean[0]) + 1e-12
    base_xyz = np.vstack([np.column_stack([b, z]) for b, z in zip(bases, base_depths)])
    site_delta = sign * np.concatenate(site_q)
    if charged:
        v_surface, v_bulk = _site_potentials(ft, key, groups, base_xyz, dq)
        reservoir = 0.5 * np.concatenate(site_q) * v_bulk  # a site's share of the bulk's energy, e²/Å
    else:
        v_surface = v_bulk = reservoir = np.zeros(len(base_xyz))
    # Changing one site alone: its charge in the surface's potential, and its ions to (or from) the bulk.
    single = site_delta * v_surface - sign * reservoir
    # Reference: dq spread evenly over the top sites of the 1×1 cell, as fractions of them.
    top_xyz = base_xyz[: g[0]]
    u0 = dq / g[0]
    share = u0 / site_delta[: g[0]]
    e_uniform = float(share @ single[: g[0]]) + 0.5 * u0 * u0 * ewald_slab_matrix(mesh, top_xyz, top_xyz).sum()
    offsets = np.concatenate([[0], np.cumsum(g)[:-1]])

    classes = supercell_classes(max_cell, termination_operations(crystal, ft.face))
    rotations = face_point_group(crystal, ft.face)
    per_class = [(members, int(members[0][0, 0] * members[0][1, 1])) for members in classes]
    # With two layers, a split that leaves the top layer whole belongs to the layer below: not listed.
    top_changes = len(groups) > 1 and mode == "remove"
    splits = [_splits(det, groups, q_mean, sign, top_changes) for _, det in per_class]
    exact: list[tuple[int, _Split]] = []
    for ci, ((counts, realised), (_, det)) in enumerate(zip(splits, per_class)):
        hit = np.abs(realised - dq) * det <= tol_e
        exact += [(ci, sp) for sp in _split_list(counts[hit], realised[hit])]
    if exact or not nearest:
        chosen = exact
    else:
        candidates = [(ci, sp) for ci, (counts, realised) in enumerate(splits) for sp in _split_list(counts, realised)]
        chosen = _nearest(candidates, dq, tol_e, [det for _, det in per_class])
    out = []
    ranked = []
    cache: dict[int, tuple[IntArray, FloatArray, FloatArray, FloatArray, IntArray]] = {}
    domain_names: dict[int, tuple[str, ...]] = {}
    for ci, sp in chosen:
        members, det = per_class[ci]
        if ci not in cache:
            woods = [wood_notation(h, mesh) for h in members]
            pick = min(range(len(members)), key=lambda i: (_wood_rank(woods[i]), tuple(members[i].ravel())))
            hnf = members[pick]
            xy = [supercell_sites(hnf, mesh, b)[0] for b in bases]
            z = [np.tile(bd, det) for bd in base_depths]
            xyz = np.vstack([np.column_stack([a, b]) for a, b in zip(xy, z)])
            cell = hnf @ mesh
            perms = np.hstack([translation_permutations(hnf, gi) + det * off for gi, off in zip(g, offsets)])
            phi = _periodic_pair_matrix(cell, xyz, perms, g, offsets, det)
            cache[ci] = (hnf, xyz, cell, phi, perms)
        hnf, xyz, cell, phi, perms = cache[ci]
        sizes = tuple(det * gi for gi in g)
        delta = _tiled(site_delta, g, det)
        site_energy = _tiled(single, g, det)
        residual = 0.0 if chosen is exact else dq - sp.realised  # per 1×1 cell
        const = 0.0
        if residual:
            # The residual, spread evenly over the top sites (as fractions of them), is part of every pattern.
            u = np.zeros(len(xyz))
            u[: sizes[0]] = residual * det / sizes[0]
            top_sites = slice(0, sizes[0])
            const = float((u / delta)[top_sites] @ site_energy[top_sites]) + 0.5 * float(u @ phi @ u)
            site_energy = site_energy + delta * (phi @ u)
        ranking = best_occupation(phi, sizes, sp.counts, perms, delta, site_energy, max_patterns)
        if ranking is None:
            continue
        score = (float(ranking.energy_ev[0]) + const * COULOMB_EV_ANGSTROM) / det - e_uniform * COULOMB_EV_ANGSTROM
        # The order of the records: score (nearest cells: residual charge first), sites, changed, cell.
        order: tuple[object, ...] = (round(score, 6), sizes[0], int(sum(sp.counts)), _matrix2(hnf))
        if chosen is not exact:
            order = (round(abs(residual), 9), *order)
        ranked.append((order, ci, sp, ranking, residual, score, sizes))
    ranked.sort(key=lambda item: item[0])  # stable: ties keep the order of ``chosen``
    made = {False: 0, True: 0}  # records made per kind: one layer changed, several
    for _, ci, sp, ranking, residual, score, sizes in ranked:
        several = sum(1 for k in sp.counts if k) > 1
        if keep is not None and made[several] >= keep:
            continue
        made[several] += 1
        hnf, det = cache[ci][0], per_class[ci][1]
        geometry = _Geometry(hnf, det, mesh, groups, bases, base_depths, sizes, shift_inplane)
        if ci not in domain_names:
            domain_names[ci] = tuple(d.name for d in cell_domains(hnf, rotations, mesh, _base_name(det, hnf, mesh)))
        out.append(_record(ft, geometry, sp, ranking, mode, residual, score, domain_names[ci]))
    return tuple(out)


def _periodic_pair_matrix(
    cell: FloatArray, xyz: FloatArray, perms: IntArray, g: list[int], offsets: IntArray, det: int
) -> FloatArray:
    """Ewald pair matrix of the supercell's sites from the rows of its first 1×1 cell.

    A mesh translation permutes the sites and leaves the pair potential
    unchanged, Phi[P a, P b] = Phi[a, b], and the ``det`` translations carry
    the first 1×1 cell onto every other, so the rows of its sites give the
    whole matrix (:func:`ewald_slab_matrix` on ``det`` times fewer targets).
    """
    first = np.concatenate([det * off + np.arange(gi) for gi, off in zip(g, offsets)]).astype(np.int64)
    rows = ewald_slab_matrix(cell, xyz[first], xyz)
    phi = np.empty((len(xyz), len(xyz)))
    for perm in perms:
        phi[np.ix_(perm[first], perm)] = rows
    return phi


def _tiled(per_base: FloatArray, g: list[int], det: int) -> FloatArray:
    """Values of the 1×1 sites of each group repeated over the supercell's cosets, group by group."""
    offsets = np.concatenate([[0], np.cumsum(g)[:-1]]).astype(int)
    return np.concatenate([np.tile(per_base[off : off + gi], det) for gi, off in zip(g, offsets)])


def _base_name(det: int, hnf: IntArray, mesh: FloatArray) -> str:
    """The cell's name before its pattern is known: standard Wood notation, else the reduced matrix."""
    wood = wood_notation(hnf, mesh)
    if wood is not None:
        return wood.label
    return matrix_text(_reduced_basis(hnf, mesh)) if det > 1 else "1×1"


def _nearest(
    candidates: list[tuple[int, _Split]], dq: float, tol_e: float, dets: list[int]
) -> list[tuple[int, _Split]]:
    """The candidates whose realised charge per 1×1 cell comes nearest to dq, from above and from below."""
    chosen: list[tuple[int, _Split]] = []
    for side in (1.0, -1.0):
        # "Above" realises more than dq (in its own direction), "below" less.
        gap = [((sp.realised - dq) * side * np.sign(dq), ci, sp) for ci, sp in candidates]
        gap = [x for x in gap if x[0] > 0 and abs(x[2].realised) * dets[x[1]] > tol_e]
        if not gap:
            continue
        best = min(x[0] for x in gap)
        chosen += [(ci, sp) for v, ci, sp in gap if v <= best + tol_e]
    return chosen


def _name(
    det: int, wood: Wood | None, matrix: IntArray, groups: tuple[CompensationSites, ...], sp: _Split, mode: Mode
) -> str:
    """The cell's name: standard Wood notation, else the matrix; a change within the 1×1 cell says what it is."""
    if det > 1:
        return wood.label if wood is not None else matrix_text(matrix)
    parts = [f"{k} of {len(gr.inplane)} {gr.label}" for gr, k in zip(groups, sp.counts) if k]
    return "1×1 with " + " and ".join(parts) + (" removed" if mode == "remove" else " added")


class _Geometry(NamedTuple):
    """A cell and its sites: HNF, index, mesh rows (Å), site groups, their 1×1 positions and depths (Å), sizes."""

    hnf: IntArray
    det: int
    mesh: FloatArray
    groups: tuple[CompensationSites, ...]
    bases: list[FloatArray]
    base_depths: list[FloatArray]
    sizes: tuple[int, ...]
    shift_inplane: FloatArray


def _record(
    ft: FaceTerminations,
    geometry: _Geometry,
    sp: _Split,
    ranking: PatternRanking,
    mode: Mode,
    residual: float,
    score: float,
    domains: tuple[str, ...],
) -> Reconstruction:
    """The :class:`Reconstruction` record of the best pattern of one cell and split."""
    hnf, det, mesh, groups, bases, base_depths, sizes, shift_inplane = geometry
    best = ranking.patterns[0]
    reps = coset_representatives(hnf)
    bounds = np.cumsum(sizes)
    xy: list[FloatArray] = []
    z: list[float] = []
    species: list[str] = []
    atom_xy: list[FloatArray] = []
    atom_z: list[FloatArray] = []
    atom_sp: list[str] = []
    for site in best:
        gi = int(np.searchsorted(bounds, site, side="right"))
        local = int(site - (bounds[gi - 1] if gi else 0))
        gsize = len(groups[gi].inplane)
        coset, b = divmod(local, gsize)
        shift = reps[coset] @ mesh
        xy.append(bases[gi][b] + shift)
        z.append(float(base_depths[gi][b]))
        species.append(groups[gi].species[b])
        group = groups[gi]
        m = group.members[b]
        up = mode == "add"
        atom_xy.append(group.unit.inplane[m] + shift + (shift_inplane if up else 0.0))
        atom_z.append(group.unit.depth[m] - (ft.d if up else 0.0))
        atom_sp += [group.unit.species[i] for i in m]
    wood = wood_notation(hnf, mesh) if det > 1 else None
    if wood is not None and not wood.centred:
        matrix = np.array(wood.matrix, dtype=np.int64)
    else:
        matrix = _reduced_basis(hnf, mesh)
    name = _name(det, wood, matrix, groups, sp, mode)
    return Reconstruction(
        matrix=_matrix2(matrix),
        hnf=_matrix2(hnf),
        wood=None if wood is None else wood.label,
        name=name,
        sites=sizes[0],
        changed=int(sum(sp.counts)),
        mode=mode,
        site_label=groups[0].label,
        layer_labels=tuple(gr.label for gr in groups),
        layer_sites=tuple(int(s) for s in sizes),
        layer_changed=tuple(int(k) for k in sp.counts),
        residual_charge=0.0 if residual == 0 else float(residual),
        domains=domains,
        cell_inplane=matrix @ mesh,
        changed_inplane=np.array(xy).reshape(-1, 2),
        changed_depth=np.array(z, dtype=float),
        changed_species=tuple(species),
        changed_atoms_inplane=np.vstack(atom_xy),
        changed_atoms_depth=np.concatenate(atom_z),
        changed_atoms_species=tuple(atom_sp),
        criterion=CRITERION,
        score=float(score),
        patterns=int(ranking.distinct),
    )


def _matrix2(matrix: IntArray) -> Matrix2:
    """A (2, 2) integer array as nested tuples of Python ints."""
    (a, b), (c, d) = ((int(v) for v in row) for row in matrix)
    return (a, b), (c, d)
