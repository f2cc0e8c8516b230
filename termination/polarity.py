"""Polar surfaces: layer charges, dipole of the repeat unit, Tasker type, compensation, reconstructions.

The stack of a face (hkl) seen from a termination is the repeat unit of one
period d that starts at the cut above that termination
(:meth:`FaceTerminations.repeat_unit`).  With formal charges q_a on its atoms
and z_a their depth below the top layer (positive into the crystal, Å):

- layer charges sigma_i = sum of q_a over the atoms of layer i, per surface
  primitive cell (e),
- dipole mu = sum_a q_a z_a (e Å per surface cell; mu / A in e/Å),
- Tasker type: I if every layer is neutral, II if the layers are charged but
  mu = 0, III (polar) otherwise,
- compensating charge dq = mu / d (e per surface cell), the charge the top
  layer must gain (dq > 0) or lose (dq < 0) for the macroscopic field of a
  thick slab to vanish,
- compensation f = dq / Q, Q the charge of the top unit (or of the top layer
  when the top unit is neutral): f < 0 is the fraction of its sites to
  remove, f > 0 the fraction to add.

Sign convention: a slab of N repeat units with the cleaved termination on top
has the outward-normal dipole -N mu (pymatgen's ``Slab.dipole`` direction);
adding dq to the top layer and -dq to the bottom one adds N d dq and cancels
it.
"""

from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from .charges import assign_charges
from .errors import ChargeError, PlaneError
from .planes import check_hkl, distinct_faces, face_geometry, hkl_text
from .supercells import (
    MAX_PATTERNS,
    canonical_hnf,
    coset_representatives,
    rank_patterns,
    supercell_classes,
    supercell_sites,
    translation_permutations,
    wood_notation,
)
from .terminations import _face_operations, face_terminations

__all__ = [
    "DEFAULT_MAX_CELL",
    "MAX_CELL_LIMIT",
    "CRITERION",
    "LayerCharge",
    "Reconstruction",
    "TerminationPolarity",
    "FacePolarity",
    "PolarityReport",
    "termination_operations",
    "reconstructions",
    "termination_polarity",
    "face_polarity",
    "face_is_polar",
    "polarity_report",
]

#: Default largest supercell index searched for reconstructions.
DEFAULT_MAX_CELL = 4
#: Largest accepted ``max_cell``.
MAX_CELL_LIMIT = 12
#: How reconstruction patterns are ranked.
CRITERION = (
    "2D Ewald energy of the changed sites as point charges in the surface plane with a uniform "
    "compensating background, eV per changed site (lower is better)"
)


@dataclass(frozen=True)
class LayerCharge:
    """One atomic layer of the repeat unit: depth below the top layer (Å), atoms and charge per surface cell (e)."""

    depth: float
    composition: dict
    charge: float


@dataclass(frozen=True, eq=False)
class Reconstruction:
    """A supercell that realises a termination's compensation, with its best vacancy or adatom pattern.

    Attributes
    ----------
    matrix : tuple
        (2, 2) ints; rows are the supercell vectors in units of the mesh
        vectors a, b (``A_super = matrix @ mesh_inplane``); the Wood cell's
        basis when the notation is primitive, else a reduced basis.
    hnf : tuple
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
    cell_inplane : (2, 2) ndarray
        Supercell vectors as rows, Cartesian in the face frame (e1, e2), Å.
    changed_inplane : (k, 2) ndarray
        Cartesian in-plane positions (face frame, Å) of the changed sites of
        the best pattern: one atom per site (the topmost atom of a unit).
    changed_depth : (k,) ndarray
        Their depths below the top layer, Å; negative for adatoms.
    changed_species : tuple of str
        Species of those atoms.
    changed_atoms_inplane, changed_atoms_depth, changed_atoms_species
        Every atom of the changed sites (a whole B6 unit, say), same frame.
    criterion : str
        How patterns are ranked (:data:`CRITERION`).
    score : float
        The best pattern's criterion value (eV per changed site).
    patterns : int
        Distinct patterns with exactly this cell's period, up to a translation.
    """

    matrix: tuple
    hnf: tuple
    wood: str | None
    sites: int
    changed: int
    mode: str
    site_label: str
    cell_inplane: np.ndarray
    changed_inplane: np.ndarray
    changed_depth: np.ndarray
    changed_species: tuple
    changed_atoms_inplane: np.ndarray
    changed_atoms_depth: np.ndarray
    changed_atoms_species: tuple
    criterion: str
    score: float
    patterns: int


@dataclass(frozen=True)
class TerminationPolarity:
    """Polarity of one termination.

    Attributes
    ----------
    id, label : str
        As in :class:`~termination.terminations.Termination`.
    tasker_type : str
        'I', 'II' or 'III'.
    layers : tuple of LayerCharge
        Layers of the repeat unit, top first.
    dipole : float
        mu = sum q_a z_a over the repeat unit, e Å per surface cell (z = depth).
    dipole_per_area : float
        mu / A, e/Å.
    compensating_charge : float
        dq = mu / d, e per surface cell.
    compensation : float or None
        dq / Q: fraction of the sites to remove (< 0) or add (> 0); 0 when
        non-polar; None when the top unit and top layer are neutral.
    sites : str or None
        'top unit' or 'top layer': which sites ``compensation`` counts.
    site_label : str or None
        One such site ('Na', 'B6').
    reconstructions : tuple of Reconstruction
        Best first.
    note : str or None
    """

    id: str
    label: str
    tasker_type: str
    layers: tuple
    dipole: float
    dipole_per_area: float
    compensating_charge: float
    compensation: float | None
    sites: str | None
    site_label: str | None
    reconstructions: tuple
    note: str | None


@dataclass(frozen=True)
class FacePolarity:
    """Polarity of a face: its inequivalent terminations; ``polar`` when all are Tasker type III."""

    hkl: tuple
    d: float
    area: float
    polar: bool
    terminations: tuple


@dataclass(frozen=True)
class PolarityReport:
    """Result of ``termination polarity``."""

    structure: object
    charges: object
    max_cell: int
    criterion: str
    faces: tuple


@dataclass(frozen=True, eq=False)
class _Sites:
    kind: str
    label: str
    inplane: np.ndarray  # (g, 2) representative atom per site
    depth: np.ndarray  # (g,)
    species: tuple  # (g,) representative species
    charge: np.ndarray | None  # (g,) site charges
    members: tuple  # g arrays of repeat-unit atom indices
    unit: object = field(repr=False)


# Layers and sites ---------------------------------------------------------------------


def _layers(ru, tol):
    """Layer index per atom of a repeat unit (depth-sorted), and layer count."""
    order = np.argsort(ru.depth, kind="stable")
    gaps = np.diff(ru.depth[order]) > tol
    labels_sorted = np.concatenate([[0], np.cumsum(gaps)])
    labels = np.empty(len(order), dtype=int)
    labels[order] = labels_sorted
    return labels, int(labels_sorted[-1]) + 1 if len(order) else 0


def _layer_charges(ru, labels, nlayers):
    q = np.zeros(len(ru.species)) if ru.charges is None else np.asarray(ru.charges, dtype=float)
    out = []
    for k in range(nlayers):
        idx = np.flatnonzero(labels == k)
        comp = {}
        for i in idx:
            comp[ru.species[i]] = comp.get(ru.species[i], 0) + 1
        out.append(LayerCharge(depth=float(ru.depth[idx].mean()), composition=comp, charge=float(q[idx].sum())))
    return tuple(out)


def _gcd(values):
    from math import gcd

    g = 0
    for v in values:
        g = gcd(g, int(v))
    return g


def _label(species):
    from .elements import composition_label

    comp = {}
    for s in species:
        comp[s] = comp.get(s, 0) + 1
    return composition_label(comp)


def _site_groups(ft, key, kind, charge_tol_e):
    """The candidate sites of termination ``key``: one per top unit, or the top layer's sites."""
    t = ft.termination(key)
    ru = ft.repeat_unit(t.id)
    tol = ft.layer_tol_angstrom
    in_unit = np.flatnonzero(ru.unit == 0)
    in_layer = np.flatnonzero(np.abs(ru.depth) <= max(tol, 1e-6))
    q = None if ru.charges is None else np.asarray(ru.charges, dtype=float)
    if kind == "auto":
        kind = "layer"
        if len(t.layers) > 1:
            kind = "unit" if q is None or abs(q[in_unit].sum()) > charge_tol_e else "layer"
    if kind == "unit" and len(t.layers) == 1:
        kind = "layer"
    if kind == "unit":
        members = (in_unit,)
    else:
        species = [ru.species[i] for i in in_layer]
        counts = {}
        for s in species:
            counts[s] = counts.get(s, 0) + 1
        if len(counts) == 1:
            members = tuple(np.array([i]) for i in in_layer)
        else:
            # Several species in one layer: the whole layer of a surface cell
            # is one site (its formula unit), unless it repeats within the cell.
            members = (in_layer,)
    inplane, depth, rep_species, charge = [], [], [], []
    inv_mesh = np.linalg.inv(ru.mesh_inplane)
    for m in members:
        # One atom stands for a site: its topmost atom; among several, the one
        # nearest the site's centroid (unwrapped over the mesh).
        tops = m[ru.depth[m] <= ru.depth[m].min() + max(tol, 1e-6)]
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
        depth.append(ru.depth[top])
        rep_species.append(ru.species[top])
        charge.append(np.nan if q is None else q[m].sum())
    label = _label([ru.species[i] for i in members[0]])
    return _Sites(
        kind=kind,
        label=label,
        inplane=np.array(inplane).reshape(-1, 2),
        depth=np.array(depth, dtype=float),
        species=tuple(rep_species),
        charge=None if q is None else np.array(charge),
        members=members,
        unit=ru,
    )


# Symmetry of a termination -------------------------------------------------------------


def termination_operations(crystal, face_terminations, termination_key, *, shift_tol_angstrom=1e-4):
    """2D point operations of a termination, as integer matrices on mesh coordinates.

    Parameters
    ----------
    crystal : Crystal
        The bulk crystal of ``face_terminations``.
    face_terminations : FaceTerminations
    termination_key : str
        Termination id or label.
    shift_tol_angstrom : float
        Tolerance on the height shift of an operation, Å.

    Returns
    -------
    (K, 2, 2) int ndarray
        Distinct S with u -> u S (u a row of mesh coordinates), identity first.

    Notes
    -----
    From the space-group operations (R, t) that keep the face
    (h R^-1 = h; :func:`termination.terminations._face_operations`) those
    that also keep the termination's cut, i.e. shift heights by
    (h . t) / |G| = 0 modulo d, form the symmetry of the semi-infinite
    crystal with this termination.  Their in-plane action on the mesh rows M
    (fractional, (2, 3)) is M R^T = S M.
    """
    ft = face_terminations
    ft.termination(termination_key)
    face = ft.face
    rots, trans = _face_operations(crystal, face)
    h = np.asarray(face.hkl, dtype=float)
    gnorm = np.linalg.norm(h @ crystal.reciprocal)
    d = ft.d
    shift = (trans @ h) / gnorm % d
    shift = np.minimum(shift, d - shift)
    keep = shift <= shift_tol_angstrom
    mesh = np.asarray(face.mesh_fractional, dtype=float)
    pinv = np.linalg.pinv(mesh)
    out = []
    for R in rots[keep]:
        S = mesh @ R.T @ pinv
        Si = np.rint(S).astype(np.int64)
        if np.max(np.abs(S - Si)) > 1e-6 or not np.allclose(Si @ mesh, mesh @ R.T, atol=1e-6):
            continue
        if not any(np.array_equal(Si, o) for o in out):
            out.append(Si)
    ident = np.eye(2, dtype=np.int64)
    out.sort(key=lambda s: not np.array_equal(s, ident))
    return np.array(out, dtype=np.int64).reshape(-1, 2, 2)


# Reconstructions ----------------------------------------------------------------------


def _wood_rank(w):
    if w is None:
        return (4, 0.0)
    return (2 * (w.angle > 0) + int(w.centred), -w.m + w.n if w.m < w.n else 0.0)


def _reduced_basis(hnf, mesh):
    """Shortest right-handed basis of the supercell lattice, in mesh units."""
    from .lattice import gauss_reduce

    v1, v2 = gauss_reduce(*(np.asarray(hnf, dtype=float) @ mesh))
    basis = np.rint(np.array([v1, v2]) @ np.linalg.inv(mesh)).astype(np.int64)
    if round(np.linalg.det(basis)) < 0:
        basis[1] *= -1
    # Of the four orientation-keeping choices, the one whose first vector lies
    # closest to a, counter-clockwise (reads like (2 1 / 0 2), not (0 -2 / 2 1)).
    p, q = basis
    options = [np.array(o) for o in ((p, q), (-p, -q), (q, -p), (-q, p))]
    a = mesh[0]

    def angle(o):
        v = o[0] @ mesh
        return (np.degrees(np.arctan2(a[0] * v[1] - a[1] * v[0], a @ v)) + 1e-9) % 360.0

    return min(options, key=lambda o: (round(angle(o), 6), tuple(o.ravel())))


def reconstructions(crystal, face_terminations, termination_key, fraction, max_cell=DEFAULT_MAX_CELL, *,
                    sites="auto", fraction_tol=1e-6, charge_tol_e=1e-6, max_patterns=MAX_PATTERNS):
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
    operations (:func:`termination_operations`); each class is shown by the
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
    >>> from structures import build_prototype
    >>> c = build_prototype("rocksalt:Na,Cl", a=5.64)
    >>> ft = face_terminations(c, (1, 1, 1))
    >>> [r.wood for r in reconstructions(c, ft, "Na", -0.5, max_cell=2)]
    ['(2×1)']
    """
    f = float(fraction)
    if not (np.isfinite(f) and 0 < abs(f) < 1):
        raise PlaneError(f"fraction of sites to change must lie strictly between -1 and 1 and not be 0, got {fraction}")
    max_cell = _check_max_cell(max_cell)
    if sites not in ("auto", "unit", "layer"):
        raise PlaneError(f"sites must be 'auto', 'unit' or 'layer', got {sites!r}")
    ft = face_terminations
    group = _site_groups(ft, termination_key, sites, charge_tol_e)
    return _reconstructions(crystal, ft, termination_key, f, int(max_cell), group, fraction_tol, max_patterns)


def _reconstructions(crystal, ft, key, f, max_cell, group, fraction_tol, max_patterns):
    mesh = np.asarray(ft.atoms.mesh_inplane, dtype=float)
    mode = "remove" if f < 0 else "add"
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
    ops = termination_operations(crystal, ft, key)
    ru = group.unit
    out = []
    for members in supercell_classes(max_cell, ops):
        det = int(members[0][0, 0] * members[0][1, 1])
        n = det * g
        k = abs(f) * n
        if abs(k - round(k)) > fraction_tol or not 0 < round(k) < n:
            continue
        k = int(round(k))
        woods = [wood_notation(h, mesh) for h in members]
        pick = min(range(len(members)), key=lambda i: (_wood_rank(woods[i]), tuple(members[i].ravel())))
        hnf, wood = members[pick], woods[pick]
        positions, cell = supercell_sites(hnf, mesh, base)
        ranking = rank_patterns(cell, positions, k, translation_permutations(hnf, g), charge=q_site,
                                max_patterns=max_patterns)
        if ranking is None:
            continue
        best = ranking.patterns[0]
        reps = coset_representatives(hnf)
        coset, which = best // g, best % g
        shifts = reps[coset] @ mesh
        atom_xy, atom_z, atom_sp = [], [], []
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
                matrix=tuple(tuple(int(v) for v in row) for row in matrix),
                hnf=tuple(tuple(int(v) for v in row) for row in hnf),
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


# Polarity of terminations and faces ------------------------------------------------------


def _check_max_cell(max_cell):
    try:
        ok = int(max_cell) == max_cell and 1 <= max_cell <= MAX_CELL_LIMIT
    except (TypeError, ValueError, OverflowError):
        ok = False
    if not ok:
        raise PlaneError(f"max cell must be an integer from 1 to {MAX_CELL_LIMIT}, got {max_cell}")
    return int(max_cell)


def _fraction_text(f):
    fr = Fraction(abs(f)).limit_denominator(24)
    return f"{fr.numerator}/{fr.denominator}" if abs(float(fr) - abs(f)) < 1e-6 else f"{abs(f):.4g}"


def termination_polarity(crystal, face_terminations, termination_key, *, max_cell=DEFAULT_MAX_CELL,
                         charge_tol_e=1e-6, dipole_tol_e_per_angstrom=1e-4, fraction_tol=1e-6,
                         max_patterns=MAX_PATTERNS, with_reconstructions=True):
    """Layer charges, dipole, Tasker type, compensation and reconstructions of one termination.

    Parameters
    ----------
    crystal : Crystal
        Bulk crystal (for the termination's symmetry).
    face_terminations : FaceTerminations
        Built from a crystal with charges (its atoms carry them).
    termination_key : str
        Termination id or label.
    max_cell : int
        Largest supercell index for reconstructions.
    charge_tol_e : float
        Layer charges below this (e per surface cell) count as neutral.
    dipole_tol_e_per_angstrom : float
        |mu| / A below this (e/Å) counts as no dipole.
    fraction_tol, max_patterns
        See :func:`reconstructions`.
    with_reconstructions : bool
        Skip the supercell search when False.

    Returns
    -------
    TerminationPolarity

    Notes
    -----
    With z_a the depth of atom a below the top layer over the repeat unit
    that starts at the cut above the termination,

        sigma_i = sum_{a in layer i} q_a,    mu = sum_a q_a z_a,    dq = mu / d,

    per surface primitive cell of area A.  Tasker type I: all sigma_i = 0;
    II: some sigma_i != 0 but mu = 0; III: mu != 0.  A slab of N repeat
    units has the outward dipole -N mu; moving dq from the bottom to the top
    layer cancels it (the layer-stack condition of Goniakowski et al.,
    sigma_top' = sigma_top + dq).  The compensation is f = dq / Q with Q the
    top unit's charge (the top layer's when the unit is neutral).  For a
    rock-salt (111) stack (+-sigma layers, spacing d/2) f = -1/2.

    References
    ----------
    P. W. Tasker, J. Phys. C 12, 4977 (1979).
    J. Goniakowski, F. Finocchi and C. Noguera, Rep. Prog. Phys. 71, 016501 (2008).
    """
    ft = face_terminations
    max_cell = _check_max_cell(max_cell)
    t = ft.termination(termination_key)
    ru = ft.repeat_unit(t.id)
    labels, nlayers = _layers(ru, ft.layer_tol_angstrom)
    layers = _layer_charges(ru, labels, nlayers)
    area = ft.face.mesh.area
    d = ft.d
    if ru.charges is None:
        raise ChargeError(f"face {hkl_text(ft.face.hkl)}: the atoms carry no charges; build the terminations from a "
                          "crystal with charges (Crystal.with_charges)")
    q = np.asarray(ru.charges, dtype=float)
    mu = float(q @ ru.depth)
    dq = mu / d
    charged = any(abs(L.charge) > charge_tol_e for L in layers)
    if not charged:
        tasker = "I"
    elif abs(mu) / area <= dipole_tol_e_per_angstrom:
        tasker = "II"
    else:
        tasker = "III"
    note = None
    compensation, sites_kind, site_label, recs = 0.0, None, None, ()
    if tasker == "I" and abs(mu) / area > dipole_tol_e_per_angstrom:
        note = "neutral layers, but their rumpling gives the repeat unit a dipole"
    if tasker == "III":
        group = _site_groups(ft, t.id, "auto", charge_tol_e)
        Q = float(np.sum(group.charge))
        sites_kind = "top unit" if group.kind == "unit" else "top layer"
        site_label = group.label
        if abs(Q) <= charge_tol_e:
            compensation = None
            note = "the top unit and top layer are neutral: the compensation must come from deeper layers"
        else:
            compensation = round(dq / Q, 12)  # drop float noise: -0.25, not -0.24999999999999997
            if abs(compensation) >= 1 - fraction_tol:
                note = (f"compensation needs {_fraction_text(compensation)} of the {sites_kind}: more than "
                        "these sites can give")
            elif with_reconstructions:
                recs = _reconstructions(crystal, ft, t.id, compensation, int(max_cell), group, fraction_tol,
                                        max_patterns)
                if not recs:
                    note = f"no supercell up to index {max_cell} realises {_fraction_text(compensation)} of the sites"
    return TerminationPolarity(
        id=t.id,
        label=t.label,
        tasker_type=tasker,
        layers=layers,
        dipole=mu,
        dipole_per_area=mu / area,
        compensating_charge=dq,
        compensation=compensation,
        sites=sites_kind,
        site_label=site_label,
        reconstructions=recs,
        note=note,
    )


def face_polarity(crystal, hkl, *, max_cell=DEFAULT_MAX_CELL, face=None, with_reconstructions=True,
                  termination_options=None, **tolerances):
    """Polarity of every inequivalent termination of the face ``hkl``.

    Parameters
    ----------
    crystal : Crystal
        With charges (see :func:`termination.charges.assign_charges`).
    hkl : 3 ints
    max_cell : int
    face : Face, optional
        Precomputed geometry.
    with_reconstructions : bool
    termination_options : dict, optional
        Passed to :func:`termination.terminations.face_terminations`.
    **tolerances
        ``charge_tol_e``, ``dipole_tol_e_per_angstrom``, ``fraction_tol``,
        ``max_patterns`` of :func:`termination_polarity`.

    Returns
    -------
    FacePolarity
        ``polar`` is True when every termination is Tasker type III.
    """
    ft = face_terminations(crystal, hkl, face=face, **(termination_options or {}))
    return _face_polarity(crystal, ft, max_cell, with_reconstructions, tolerances)


def _face_polarity(crystal, ft, max_cell, with_reconstructions, tolerances):
    rows = tuple(
        termination_polarity(crystal, ft, t.id, max_cell=max_cell, with_reconstructions=with_reconstructions,
                             **tolerances)
        for t in ft.terminations
        if t.equivalent_to is None
    )
    return FacePolarity(hkl=ft.face.hkl, d=ft.d, area=ft.face.mesh.area,
                        polar=all(r.tasker_type == "III" for r in rows), terminations=rows)


def face_is_polar(face_terminations, **tolerances):
    """True when every termination of the face is Tasker type III; None when its atoms carry no charges.

    Cheap: no supercell search.  ``tolerances`` as in :func:`termination_polarity`.
    """
    ft = face_terminations
    if ft.atoms.charges is None:
        return None
    return all(
        termination_polarity(None, ft, t.id, with_reconstructions=False, **tolerances).tasker_type == "III"
        for t in ft.terminations
        if t.equivalent_to is None
    )


def polarity_report(crystal, plane=None, max_index=None, *, charges=None, max_cell=DEFAULT_MAX_CELL,
                    use_pymatgen=True, termination_options=None, **tolerances):
    """Polarity of one face or of all distinct faces up to ``max_index``.

    Parameters
    ----------
    crystal : Crystal
    plane : 3 ints, optional
        One face; otherwise all faces up to ``max_index`` (default 2).
    max_index : int, optional
    charges : mapping, optional
        Element -> formal charge; else from the file or a guess
        (:func:`termination.charges.assign_charges`).
    max_cell : int
        Largest supercell index for reconstructions (1 to 12).
    use_pymatgen : bool
        Allow pymatgen's oxidation-state guess as the last resort.
    termination_options : dict, optional
        Passed to :func:`termination.terminations.face_terminations`.
    **tolerances
        See :func:`termination_polarity`.

    Returns
    -------
    PolarityReport
    """
    from .report import summarise_structure

    if plane is not None and max_index is not None:
        raise PlaneError(f"give one face or a largest index, not both (plane {hkl_text(plane)}, max index {max_index})")
    max_cell = _check_max_cell(max_cell)
    assignment = assign_charges(crystal, charges, use_pymatgen=use_pymatgen)
    charged = crystal.with_charges(assignment.per_atom)
    if plane is not None:
        faces = (face_geometry(charged, check_hkl(plane)),)
    else:
        faces = distinct_faces(charged, max_index=2 if max_index is None else max_index)
    rows = []
    for face in faces:
        ft = face_terminations(charged, face.hkl, face=face, **(termination_options or {}))
        rows.append(_face_polarity(charged, ft, int(max_cell), True, tolerances))
    return PolarityReport(structure=summarise_structure(crystal), charges=assignment, max_cell=int(max_cell),
                          criterion=CRITERION, faces=tuple(rows))
