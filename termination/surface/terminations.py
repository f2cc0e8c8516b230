"""Terminations of a face and the step heights between them.

A termination is the top layer, or top unit of layers, of the semi-infinite
crystal left by a cut between two consecutive atomic layers.

Rules (documented in the README):

1. Every gap between consecutive layers of the period is a candidate cut.  For
   each, the bonds that cross the cut plane are counted per surface cell, per
   nm², and weighted by the bond-strength proxy w = (r_i + r_j)/R.
2. Unit bonds (between two unit-forming non-metals: B-B, C-O, Si-O, ...)
   hold polyanions and clusters together.  A gap that breaks more unit bonds
   than the cheapest gap of the face lies inside a unit (a B6 octahedron, a
   CO3 group) and is not a cut.
3. Of the remaining gaps, one whose weighted broken-bond density exceeds
   ``unit_ratio`` times the cheapest lies inside a strongly bonded slab (the
   F-Ca-F unit of fluorite (111), the bilayer of diamond (111)) and is not a cut.
4. Layers between consecutive cuts form one termination unit.  Terminations
   related by a space-group operation that maps the face onto itself
   (h R^-1 = h) are equivalent: they share a label and the relating in-plane
   rotation or mirror is given.
5. A cut that no bond crosses (in a crystal that has bonds) is a van der
   Waals gap: when the face has one, only such gaps are cuts, and the unit
   between two of them is a van der Waals layer (a graphene sheet, an MoS2
   sandwich, a Bi2Se3 quintuple layer).
6. Terminations are ordered by broken-bond density, then by the composition
   of their unit and the layer stack below it (gaps and compositions, which
   do not depend on the crystal's origin): T1 comes first, and depths are
   measured down from its top layer; inequivalent namesakes get primes in
   this order.
7. A step from a terrace of termination i up to one of termination j has the
   height delta_ij + n d, delta_ij = (z_j - z_i) mod d with z the height of
   the top layer.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import NamedTuple, SupportsFloat

import numpy as np

from termination.arrays import FloatArray, IntArray
from termination.bulk.bonds import BondGraph, bond_graph
from termination.bulk.crystal import Crystal
from termination.bulk.elements import composition_label
from termination.defaults import (
    BOND_FACTOR,
    LAYER_TOL_ANGSTROM,
    LENGTH_EPS_ANGSTROM,
    MAX_MULTIPLE,
    MAX_MULTIPLE_LIMIT,
    ROUNDING_EPS,
    UNIT_RATIO,
    ZERO_EPS,
)
from termination.errors import StructureError
from termination.surface.faces import Face, face_geometry
from termination.surface.layers import FaceAtoms, Layer, cluster_layers, face_atoms
from termination.surface.miller import hkl_text
from termination.surface.steps import StepHeights, class_steps
from termination.surface.symmetry import describe_operation, keeps_face, operation_tables
from termination.units import ANGSTROM, PER_NM2, E

__all__ = [
    "Cut",
    "FaceTerminations",
    "SurfaceAtoms",
    "Termination",
    "face_terminations",
]


@dataclass(frozen=True)
class Cut:
    """A gap between consecutive layers (per surface primitive cell).

    ``below`` and ``above`` are layer indices (top-first numbering);
    ``height`` is the cut plane's height in [0, d), Å; ``broken_bonds``,
    ``weighted_bonds`` (weighted by w = (r_i+r_j)/R) and ``unit_bonds`` count
    the bonds crossing it per surface primitive cell; ``allowed`` says whether
    it is a cut (see the module notes).
    """

    height: float = field(metadata=ANGSTROM)
    below: int
    above: int
    broken_bonds: float
    weighted_bonds: float
    unit_bonds: float
    allowed: bool


@dataclass(frozen=True)
class Termination:
    """One termination of a face.

    Attributes
    ----------
    id : str
        'T1', 'T2', ... in order of increasing broken-bond density (ties: module notes, rule 6).
    label : str
        Composition of the top unit, electropositive element first ('SrO', 'B6').
    composition : dict of str to int
        Atoms of the top unit per surface primitive cell.
    depth : float
        Depth of the top layer below the top layer of T1, in [0, d), Å.
    layers : tuple of int
        Layer indices of the top unit, top first.
    cut_height : float
        Height of the cut plane above the top layer's reference, in [0, d), Å.
    broken_bonds_per_nm2, weighted_bonds_per_nm2 : float
        Bonds crossing the cut, per nm² (count, and weighted by w = (r_i+r_j)/R).
    equivalent_to : str or None
        Id of the first symmetry-equivalent termination, if any.
    relation : str or None
        How it relates to that termination ('rotated 90°', 'mirror at 45°').
    van_der_waals : bool
        The top unit is a van der Waals layer: no bond crosses the cuts above
        and below it.
    """

    id: str
    label: str
    composition: dict[str, int]
    depth: float = field(metadata=ANGSTROM)
    layers: tuple[int, ...]
    cut_height: float = field(metadata=ANGSTROM)
    broken_bonds_per_nm2: float = field(metadata=PER_NM2)
    weighted_bonds_per_nm2: float = field(metadata=PER_NM2)
    equivalent_to: str | None
    relation: str | None
    van_der_waals: bool = False


@dataclass(frozen=True)
class SurfaceAtoms:
    """Atoms below a termination's surface (one surface primitive cell wide).

    Attributes
    ----------
    species : tuple of str
        One entry per atom.
    inplane : (N, 2) FloatArray
        Position in the face frame (e1, e2), Å.
    depth : (N,) FloatArray
        Depth below the top layer (0 for the top layer), Å.
    unit : (N,) IntArray
        0 for the top termination unit, 1 for the next, ...
    charges : (N,) FloatArray or None
        Formal charges, units of e.
    mesh_inplane : (2, 2) FloatArray
        Mesh vectors a, b as rows in the face frame, Å.
    """

    species: tuple[str, ...]
    inplane: FloatArray = field(metadata=ANGSTROM)
    depth: FloatArray = field(metadata=ANGSTROM)
    unit: IntArray
    charges: FloatArray | None = field(metadata=E)
    mesh_inplane: FloatArray = field(metadata=ANGSTROM)


@dataclass(frozen=True, eq=False)
class FaceTerminations:
    """Layers, cuts, terminations and steps of one face.

    ``layer_tol_angstrom`` and ``unit_ratio`` are the settings they were found with.
    """

    face: Face
    atoms: FaceAtoms
    layers: tuple[Layer, ...]
    cuts: tuple[Cut, ...]
    terminations: tuple[Termination, ...]
    steps: tuple[StepHeights, ...]
    layer_tol_angstrom: float = field(metadata=ANGSTROM)
    unit_ratio: float

    @property
    def d(self) -> float:
        """Period of the face, Å."""
        return self.face.d

    @property
    def smallest_step(self) -> float:
        """Smallest allowed step height of the face, Å."""
        return min(h for s in self.steps for h in s.heights)

    def termination(self, key: str) -> Termination:
        """Termination by id ('T2') or label ('SrO'; the first one with it)."""
        for t in self.terminations:
            if key in (t.id, t.label):
                return t
        known = ", ".join(f"{t.id} ({t.label})" for t in self.terminations)
        raise StructureError(f"face {hkl_text(self.face.hkl)} has no termination {key!r}; it has {known}")

    def _top_height(self, t: Termination) -> float:
        """Height of the top layer of ``t`` in [0, d), Å."""
        return self.layers[t.layers[0]].height

    def surface_atoms(self, key: str, max_depth_angstrom: float) -> SurfaceAtoms:
        """Atoms from the top layer of termination ``key`` down to ``max_depth_angstrom``.

        Returns
        -------
        SurfaceAtoms
            Periodic images along the normal are included, so any depth works.
        """
        t = self.termination(key)
        return self._atoms_between(t, -LENGTH_EPS_ANGSTROM, float(max_depth_angstrom))

    def repeat_unit(self, key: str) -> SurfaceAtoms:
        """The atoms of one period, from the cut above termination ``key`` down.

        Depths are measured from the top layer; atoms satisfy
        cut_depth <= depth < cut_depth + d with cut_depth <= 0 the depth of
        the cut plane.  Summing over them gives the stack's repeat unit that
        starts at this termination (used for dipoles).
        """
        t = self.termination(key)
        z_top = self._top_height(t)
        cut_depth = -((t.cut_height - z_top) % self.d)
        out = self._atoms_between(t, cut_depth, cut_depth + self.d - ROUNDING_EPS)
        return out

    def _atoms_between(self, t: Termination, dmin: float, dmax: float) -> SurfaceAtoms:
        """Atoms (periodic images included) with dmin <= depth <= dmax below the top layer of ``t``, Å."""
        a = self.atoms
        d = self.d
        z_top = self._top_height(t)
        # depth of image k of atom i: z_top - (z_i + k d)
        base = z_top - a.heights
        kmin = np.floor((base - dmax) / d).astype(np.int64)
        kmax = np.ceil((base - dmin) / d).astype(np.int64)
        n_images = np.maximum(kmax - kmin + 1, 0)
        rows = np.repeat(np.arange(len(base)), n_images)
        first = np.repeat(np.cumsum(n_images) - n_images, n_images)
        images = np.repeat(kmin, n_images) + (np.arange(len(rows)) - first)
        z_all = base[rows] - images * d
        inside = (z_all >= dmin) & (z_all <= dmax)
        idx = rows[inside].astype(np.int64)
        ks = images[inside].astype(np.float64)
        depth = base[idx] - ks * d
        inplane = a.inplane[idx] + ks[:, None] * a.stack_inplane[None, :]
        allowed = [c.height for c in self.cuts if c.allowed]
        z_atom = z_top - depth
        unit = np.zeros(len(idx), dtype=np.int64)
        for c in allowed:
            # allowed cut planes strictly between the atom and the top cut
            unit += (np.floor((z_top - c) / d) - np.floor((z_atom - c) / d)).astype(int)
        order = np.lexsort((inplane[:, 1], inplane[:, 0], depth))
        return SurfaceAtoms(
            species=tuple(a.species[i] for i in idx[order]),
            inplane=inplane[order],
            depth=depth[order],
            unit=unit[order],
            charges=None if a.charges is None else a.charges[idx[order]],
            mesh_inplane=a.mesh_inplane,
        )


def face_terminations(
    crystal: Crystal,
    hkl: Iterable[SupportsFloat],
    *,
    layer_tol_angstrom: float = LAYER_TOL_ANGSTROM,
    bond_factor: float = BOND_FACTOR,
    bond_cutoff_angstrom: float | None = None,
    unit_ratio: float = UNIT_RATIO,
    max_multiple: int = MAX_MULTIPLE,
    face: Face | None = None,
) -> FaceTerminations:
    """Layers, terminations and step heights of the face ``hkl``.

    Parameters
    ----------
    crystal : Crystal
    hkl : 3 ints
        Face; its outward normal is the reciprocal vector (h k l).
    layer_tol_angstrom : float
        Atoms within this height of each other form one layer, Å.
    bond_factor, bond_cutoff_angstrom : float, float or None
        Bond rule, see :func:`termination.bulk.bonds.bond_graph`.
    unit_ratio : float
        Gaps whose weighted broken-bond density exceeds this factor times the
        cheapest gap lie inside a unit (``inf`` switches the rule off).
    max_multiple : int
        Steps are listed for n = 0 .. max_multiple extra periods.
    face : Face, optional
        Precomputed geometry of ``hkl``.

    Returns
    -------
    FaceTerminations

    References
    ----------
    P. W. Tasker, J. Phys. C 12, 4977 (1979) for the stacking picture of
    layers and repeat units.
    """
    tol = float(layer_tol_angstrom)
    if not (np.isfinite(tol) and tol >= 0):
        raise StructureError(f"layer tolerance must be a non-negative length in Å, got {layer_tol_angstrom}")
    ratio = float(unit_ratio)
    if not ratio >= 1:
        raise StructureError(f"unit ratio must be at least 1, got {unit_ratio}")
    if int(max_multiple) != max_multiple or not 0 <= max_multiple <= MAX_MULTIPLE_LIMIT:
        raise StructureError(f"max multiple must be an integer from 0 to {MAX_MULTIPLE_LIMIT}, got {max_multiple}")
    if face is None:
        face = face_geometry(crystal, hkl)
    graph = bond_graph(crystal, bond_factor, bond_cutoff_angstrom)
    return _face_terminations(crystal, face, graph, tol, ratio, int(max_multiple))


class _Candidate(NamedTuple):
    """An allowed cut above layer ``k`` and the unit below it, before ids and labels are given."""

    k: int
    comp: dict[str, int]
    layers: tuple[int, ...]
    cut: float
    bb: float
    wb: float
    key: tuple[object, ...]


def _signature(k: int, centres: FloatArray, comps: list[dict[str, int]], d: float) -> tuple[object, ...]:
    """The layer stack read down one period from layer ``k``: (gap to the next layer, composition) per layer.

    Heights are differences, so the signature does not depend on the
    crystal's origin; symmetry-equivalent terminations have equal ones.
    """
    nl = len(centres)
    out: list[object] = []
    for j in range(nl):
        m = (k + j) % nl
        below = centres[(m + 1) % nl]
        gap = (centres[m] - below) % d if nl > 1 else d
        out.append((round(float(gap), 4), tuple(sorted(comps[m].items()))))
    return tuple(out)


def _lateral_signature(
    k: int, atoms: FaceAtoms, labels: IntArray, centres: FloatArray, d: float
) -> tuple[tuple[float, ...], ...]:
    """How the layers of one period below layer ``k`` sit laterally under it, as sorted distances.

    For each layer m read down from ``k`` (``k`` itself first), the in-plane
    distances from every atom of layer ``k`` to its nearest copy of each atom
    of m (over the mesh translations; the copy one period lower is shifted
    by the stacking vector), sorted and rounded to 10^-4 Å.  Lengths only: the
    same for any origin, orientation and mesh basis, and for
    symmetry-equivalent terminations.  It tells apart inequivalent
    terminations whose layer gaps and compositions agree (the two Zn
    terminations of wurtzite (0 3 1)), which would otherwise be ordered by
    the input setting.
    """
    nl = len(centres)
    top = np.flatnonzero(labels == k)
    mesh = atoms.mesh_inplane
    inv = np.linalg.inv(mesh)
    shifts = np.array([(i, j) for i in (-1, 0, 1) for j in (-1, 0, 1)], dtype=float) @ mesh
    out: list[tuple[float, ...]] = []
    for step in range(nl):
        m = (k + step) % nl
        below = np.flatnonzero(labels == m)
        # periods between the top atom's layer and layer m's copy that lies below it (0 or 1)
        down = 1.0 if m < k else 0.0
        diff = atoms.inplane[below][None, :, :] - down * atoms.stack_inplane - atoms.inplane[top][:, None, :]
        frac = diff @ inv
        frac -= np.rint(frac)
        lateral = np.linalg.norm((frac @ mesh)[:, :, None, :] + shifts[None, None, :, :], axis=-1).min(axis=-1)
        out.append(tuple(np.round(np.sort(lateral.ravel()), 4).tolist()))
    return tuple(out)


def _face_terminations(
    crystal: Crystal, face: Face, graph: BondGraph, tol: float, ratio: float, max_multiple: int
) -> FaceTerminations:
    """:func:`face_terminations` after its input checks."""
    d = face.d
    atoms = face_atoms(crystal, face)
    labels, centres = cluster_layers(atoms.heights, d, tol)
    nl = len(centres)
    # Top-first numbering: layer k+1 lies below layer k (cyclically); renumbered below so that
    # layer 0 is the top layer of T1.
    top_first = np.argsort(-centres, kind="stable")
    new_index = np.empty(nl, dtype=np.int64)
    new_index[top_first] = np.arange(nl)
    labels = new_index[labels]
    centres = centres[top_first]
    members = [[int(i) for i in np.flatnonzero(labels == k)] for k in range(nl)]
    comps: list[dict[str, int]] = []
    for in_layer in members:
        comp: dict[str, int] = {}
        for i in in_layer:
            comp[atoms.species[i]] = comp.get(atoms.species[i], 0) + 1
        comps.append(comp)

    # Gaps: below layer k (top-first) lies layer k+1; the gap above layer k is
    # between layer k and the layer above it (k-1, or the last one one period up).
    above_of = [(k - 1) % nl for k in range(nl)]
    cut_heights = np.empty(nl)
    for k in range(nl):
        za = centres[above_of[k]] + (d if above_of[k] >= k else 0.0)
        cut_heights[k] = ((centres[k] + za) / 2.0) % d

    counts, weighted, unit = _crossings(crystal, face, graph, cut_heights)
    area_nm2 = face.mesh.area / 100.0
    allowed = unit <= unit.min() + ROUNDING_EPS
    wmin = weighted[allowed].min()
    if wmin <= ZERO_EPS:
        allowed &= weighted <= ZERO_EPS
    else:
        allowed &= weighted <= ratio * wmin * (1 + ROUNDING_EPS)
    # A cut no bond crosses, in a crystal that has bonds, is a van der Waals gap.
    gap = (counts <= ZERO_EPS) & (len(graph.length) > 0)

    # Units: from an allowed cut above layer k down to the next allowed cut.
    allowed_layers = [k for k in range(nl) if allowed[k]]
    units: dict[int, tuple[int, ...]] = {}
    for k in allowed_layers:
        unit_members = [k]
        j = (k + 1) % nl
        while not allowed[j]:
            unit_members.append(j)
            j = (j + 1) % nl
        units[k] = tuple(unit_members)

    classes, relations = _equivalence(crystal, face, cut_heights, allowed_layers, tol, d)

    raw: list[_Candidate] = []
    for k in allowed_layers:
        unit_comp: dict[str, int] = {}
        for m in units[k]:
            for el, n in comps[m].items():
                unit_comp[el] = unit_comp.get(el, 0) + n
        bb, wb = float(counts[k] / area_nm2), float(weighted[k] / area_nm2)
        key = (round(bb, 6), round(wb, 6), composition_label(unit_comp), _signature(k, centres, comps, d))
        raw.append(_Candidate(k, unit_comp, units[k], float(cut_heights[k]), bb, wb, key))
    # Cheapest first; ties by the unit's composition and the stack below it (gaps, then how the
    # layers sit laterally), none of which depends on the crystal's origin or the face variant:
    # T1, its depth reference and the primes are the same for any input setting.  Candidates
    # still tied are equivalent.
    tied = Counter(c.key for c in raw)  # the lateral signature is needed for ties only
    lateral = {c.k: _lateral_signature(c.k, atoms, labels, centres, d) if tied[c.key] > 1 else () for c in raw}
    order = sorted(range(len(raw)), key=lambda i: (raw[i].key, lateral[raw[i].k], raw[i].k))
    ids = {raw[i].k: f"T{n + 1}" for n, i in enumerate(order)}

    # Renumber the layers so that layer 0 is the top layer of T1, and measure depths from it.
    ref = raw[order[0]].k
    renumber = [(k - ref) % nl for k in range(nl)]
    by_new = sorted(range(nl), key=lambda k: renumber[k])
    layers = [
        Layer(
            height=float(centres[k]),
            depth=float((centres[ref] - centres[k]) % d) if k != ref else 0.0,
            composition=comps[k],
            atoms=tuple(members[k]),
        )
        for k in by_new
    ]
    cuts = tuple(
        sorted(
            (
                Cut(
                    height=float(cut_heights[k]),
                    below=renumber[k],
                    above=renumber[above_of[k]],
                    broken_bonds=float(counts[k]),
                    weighted_bonds=float(weighted[k]),
                    unit_bonds=float(unit[k]),
                    allowed=bool(allowed[k]),
                )
                for k in range(nl)
            ),
            key=lambda c: c.below,
        )
    )

    # Labels: equivalent terminations share one; inequivalent namesakes get primes in the order above.
    rep_of = {
        k: min((j for j in allowed_layers if classes[j] == classes[k]), key=lambda j: ids[j]) for k in allowed_layers
    }
    label_of: dict[int, str] = {}
    used: dict[str, int] = {}
    for i in order:
        k = raw[i].k
        if rep_of[k] != k:
            continue
        base = composition_label(raw[i].comp)
        label_of[k] = base + "'" * used.get(base, 0)
        used[base] = used.get(base, 0) + 1
    found = []
    for i in order:
        r = raw[i]
        k = r.k
        rep = rep_of[k]
        below_unit = (r.layers[-1] + 1) % nl
        found.append(
            Termination(
                id=ids[k],
                label=label_of[rep],
                composition=r.comp,
                depth=layers[renumber[k]].depth,
                layers=tuple(renumber[m] for m in r.layers),
                cut_height=r.cut,
                broken_bonds_per_nm2=r.bb,
                weighted_bonds_per_nm2=r.wb,
                equivalent_to=None if rep == k else ids[rep],
                relation=None if rep == k else relations.get((rep, k)),
                van_der_waals=bool(gap[k] and gap[below_unit]),
            )
        )
    terminations = tuple(found)
    tops = {t.id: layers[t.layers[0]].height for t in terminations}
    classes_of_ids = [
        (t.label, tuple(u.id for u in terminations if (u.equivalent_to or u.id) == t.id))
        for t in terminations
        if t.equivalent_to is None
    ]
    steps = class_steps(classes_of_ids, tops, d, max_multiple, tol)
    return FaceTerminations(
        face=face,
        atoms=atoms,
        layers=tuple(layers),
        cuts=cuts,
        terminations=terminations,
        steps=steps,
        layer_tol_angstrom=tol,
        unit_ratio=ratio,
    )


def _crossings(
    crystal: Crystal, face: Face, graph: BondGraph, cut_heights: FloatArray
) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Bonds crossing each cut plane, per surface primitive cell: counts, weighted counts, unit bonds, each (C,).

    ``cut_heights`` (C,) are the heights of the cut planes in [0, d), Å.

    Notes
    -----
    A bond from height z to z + dz (dz > 0) crosses the planes c + k d with
    z < c + k d <= z + dz; their number is floor((z + dz - c)/d) -
    floor((z - c)/d).  With z in [0, d) and dz = m d + r (0 <= r < d) that is
    m for every cut plus one for the cuts with c in (z, z + r] (modulo d), so
    each bond adds m everywhere and one on an arc of heights: a sorted sweep
    over the cuts, O((B + C) log C), with no B x C array.
    """
    d = face.d
    G = np.asarray(face.hkl, dtype=float) @ crystal.reciprocal
    gnorm = np.linalg.norm(G)
    z_conv = (crystal.positions @ np.asarray(face.hkl, dtype=float)) / gnorm % d
    dz = graph.vector @ (G / gnorm)
    up = dz > ROUNDING_EPS
    z0 = z_conv[graph.source[up]]
    step = dz[up]
    full = np.floor(step / d)
    rest = step - full * d
    z1 = z0 + rest
    per_cell = 1.0 / len(crystal.centring)
    weights = np.stack([np.ones(len(z0)), graph.weight[up], graph.unit[up]]).astype(np.float64)  # (3, B)
    order = np.argsort(cut_heights, kind="stable")
    sorted_cuts = cut_heights[order]
    n_cuts = len(cut_heights)
    # Each bond adds w on the arc (z0, z1] of cut heights; z1 < 2d, so the arc is covered by the cuts
    # c in (z0, z1] and c + d in (z0, z1].  A +w at the first sorted cut above the lower end and a -w
    # at the first above the upper end, summed cumulatively, give every cut's total: one set of
    # indices, one bincount for the three weights (each in its own block of n_cuts + 1 bins).
    index = np.searchsorted(sorted_cuts, np.concatenate([z0, z1, z0 - d, z1 - d]), side="right")
    signed = weights[:, None, :] * np.array([1.0, -1.0, 1.0, -1.0])[None, :, None]  # (3, 4, B)
    blocks = (index[None, :] + (n_cuts + 1) * np.arange(3)[:, None]).ravel()
    arcs = np.bincount(blocks, weights=signed.ravel(), minlength=3 * (n_cuts + 1)).reshape(3, n_cuts + 1)
    totals = np.cumsum(arcs, axis=1)[:, :n_cuts] + (full[None, :] * weights).sum(axis=1)[:, None]
    values = np.empty((3, n_cuts))
    values[:, order] = totals * per_cell
    return values[0], values[1], values[2]


def _equivalence(
    crystal: Crystal, face: Face, cut_heights: FloatArray, allowed_layers: list[int], tol: float, d: float
) -> tuple[dict[int, int], dict[tuple[int, int], str]]:
    """Classes of symmetry-equivalent allowed cuts and the relating operation.

    Returns the class (its smallest layer index) of each allowed cut, keyed by
    layer index, and for related pairs (i, j) how i maps onto j.
    """
    keep = keeps_face(crystal, face)
    # Identity first, then proper rotations, then improper ones (stable, so
    # spglib's order is kept within each group): the first operation that
    # matches a pair is the simplest description of their relation.
    order = np.argsort(operation_tables(crystal)[1][keep], kind="stable")
    rots, trans = crystal.rotations[keep][order], crystal.translations[keep][order]
    G = np.asarray(face.hkl, dtype=float) @ crystal.reciprocal
    shifts = (trans @ np.asarray(face.hkl, dtype=float)) / np.linalg.norm(G) % d
    parent = {k: k for k in allowed_layers}

    def find(k: int) -> int:
        while parent[k] != k:
            k = parent[k]
        return k

    relations: dict[tuple[int, int], str] = {}
    allowed = np.asarray(allowed_layers, dtype=np.int64)
    reach = max(tol, LENGTH_EPS_ANGSTROM)
    for i in allowed_layers:
        target = (cut_heights[i] + shifts) % d  # (M,)
        diff = (cut_heights[allowed][None, :] - target[:, None] + d / 2) % d - d / 2
        match = np.abs(diff) <= reach  # (M, A)
        for col in np.flatnonzero(match.any(axis=0)):
            j = int(allowed[col])
            if j == i:
                continue
            if (i, j) not in relations:
                relations[(i, j)] = describe_operation(crystal, face, rots[int(np.argmax(match[:, col]))])
            ri, rj = find(i), find(j)
            if ri != rj:
                parent[max(ri, rj)] = min(ri, rj)
    classes = {k: find(k) for k in allowed_layers}
    return classes, relations


@dataclass(frozen=True)
class TerminationRef:
    """A termination named in a result: its id ('T2') and label ('SrO')."""

    id: str
    label: str

    @classmethod
    def of(cls, termination: Termination) -> TerminationRef:
        return cls(termination.id, termination.label)
