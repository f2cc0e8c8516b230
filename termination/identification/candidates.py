"""Candidates of an identification: what every face, termination (and cell, and terrace mix) predicts, and its prior.

A candidate is a hypothesis about the imaged surface: a face (hkl) whose
terraces all show one termination; or, for faces with several inequivalent
terminations, terraces of two of them (a *mixed* surface, which is what
steps between different terminations imply); or a polar termination with
one of the reconstruction cells that could compensate it; or a termination
with a cell the user names (a dimer row, a missing row, an adsorbate phase),
on every face whose mesh it fits.  A cell predicts two lattices: that of one
domain, and that of all its rotational domains superposed
(:func:`termination.surface.corrugation.superpose_domains`); both are
accepted.
Symmetry-equivalent terminations (related by an operation that keeps the
face) are one candidate: no measurement of topography can tell them apart.

Each candidate predicts its tilt to the mount face for every upward-facing
variant of the face, the apparent lattices its terraces show
(:mod:`termination.surface.corrugation`) and every step its terraces can
make (:mod:`termination.surface.steps`).  The prior and the likelihood are
described in :mod:`termination.identification.likelihood`.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field, replace
from typing import TypedDict, Unpack, overload

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.lattice2d import CellSpec, cell_matrix, cell_notation, check_cells
from termination.arrays import FloatArray, IntArray
from termination.bulk.charges import with_formal_charges
from termination.bulk.crystal import Crystal
from termination.bulk.summary import StructureSummary, summarise_structure
from termination.defaults import MAX_CELL, MAX_CELLS_PER_TERMINATION, MAX_INDEX
from termination.errors import MeasurementError, StructureError
from termination.identification.lattices import periodicities
from termination.identification.model import MatchModel
from termination.surface.corrugation import (
    ApparentLattice,
    CorrugationPattern,
    Visibility,
    cell_corrugation,
    reconstruction_corrugation,
    superpose_domains,
    termination_corrugation,
)
from termination.surface.domains import face_point_group
from termination.surface.faces import distinct_faces, face_index, variant_tilts
from termination.surface.miller import HKL, face_text
from termination.surface.polarity import TerminationPolarity, termination_polarity
from termination.surface.reconstructions import Reconstruction
from termination.surface.steps import allowed_heights
from termination.surface.terminations import FaceTerminations, Termination, TerminationRef, face_terminations
from termination.units import ANGSTROM, DEG

__all__ = [
    "Candidate",
    "CandidateOptions",
    "CandidateTable",
    "CellBuilder",
    "CellSelector",
    "TerminationOptions",
    "candidate_table",
    "fraction_grid",
    "logsumexp",
]


@dataclass(frozen=True, eq=False)
class Candidate:
    """What one hypothesis about the imaged surface predicts; independent of the measurement.

    Attributes
    ----------
    hkl : tuple of int
    classes : tuple of TerminationRef
        The terminations whose terraces the surface shows: one, or two for a
        mixed surface.  Each stands for its class of symmetry-equivalent
        terminations (``members``).
    members : tuple of tuple of str
        Ids of the equivalent terminations of each class.
    relation : str or None
        How the members of the first class are related ('rotated 90°').
    cell : str or None
        Reconstruction cell (Wood or matrix notation, '+Cl' when the layer
        below gives sites too), or a user cell's notation followed by
        ' given'; None for 1x1.
    d : float
        Plane spacing, Å.
    tilts, tilt_variants
        Tilt of each upward-facing variant to the mount (degrees) and the
        variants; empty without a mount.
    lattices : tuple of tuple of ApparentLattice
        Per class, the apparent lattices its terraces may show (one for 1x1;
        a cell adds the lattice of its rotational domains superposed when
        that differs).
    periods : tuple of tuple of float
        Per class, the periods one measured spacing may be (Å), five per lattice.
    step_heights, step_multiples, step_lower, step_upper, step_factors, step_lower_id, step_upper_id
        Every allowed step: height (Å), extra periods n, class index of the
        lower and upper terrace, the factor rho^n / (|c_lower| |c_upper|) of its
        weight, and the termination ids.  At class fractions pi the weight is
        pi_lower pi_upper factor, normalised.
    log_prior : float
    polar : bool or None
        Tasker type III (None without formal charges).
    """

    hkl: tuple[int, int, int]
    classes: tuple[TerminationRef, ...]
    members: tuple[tuple[str, ...], ...]
    relation: str | None
    cell: str | None
    d: float = field(metadata=ANGSTROM)
    tilts: tuple[float, ...] = field(default=(), metadata=DEG)
    tilt_variants: tuple[tuple[int, int, int], ...] = ()
    lattices: tuple[tuple[ApparentLattice, ...], ...] = ()
    periods: tuple[tuple[float, ...], ...] = ()
    step_heights: tuple[float, ...] = ()
    step_multiples: tuple[int, ...] = ()
    step_lower: tuple[int, ...] = ()
    step_upper: tuple[int, ...] = ()
    step_factors: tuple[float, ...] = ()
    step_lower_id: tuple[str, ...] = ()
    step_upper_id: tuple[str, ...] = ()
    log_prior: float = 0.0
    polar: bool | None = None

    @property
    def termination(self) -> TerminationRef:
        """The first (for a single termination: the) termination."""
        return self.classes[0]

    @property
    def mixed(self) -> bool:
        return len(self.classes) > 1

    @property
    def label(self) -> str:
        """'SrO' or, for a mixed surface, 'SrO+TiO2'."""
        return "+".join(c.label for c in self.classes)

    @property
    def multiplicity(self) -> int:
        """Number of symmetry-equivalent terminations the first class stands for."""
        return len(self.members[0])


@dataclass(frozen=True, eq=False)
class CandidateTable:
    """All candidates of a crystal for one mount, with the options that made them."""

    structure: StructureSummary
    mount: tuple[int, int, int] | None
    max_index: int
    candidates: tuple[Candidate, ...]
    model: MatchModel
    visibility: Visibility = field(default_factory=Visibility)
    notes: tuple[str, ...] = ()


class TerminationOptions(TypedDict, total=False):
    """Options of :func:`candidate_table` passed on to :func:`termination.surface.terminations.face_terminations`.

    A ``max_multiple`` given here is replaced by the model's.
    """

    layer_tol_angstrom: float
    bond_factor: float
    bond_cutoff_angstrom: float | None
    unit_ratio: float
    max_multiple: int


#: Builds the reconstruction-cell candidates of one (hkl, termination id) and returns them (empty when
#: the termination has no cells to build); a second call for the same termination returns the same cells.
CellBuilder = Callable[[HKL, str], tuple[Candidate, ...]]

#: ``select_cells(candidates, build)``: calls ``build`` for the terminations whose cells may matter.
CellSelector = Callable[[tuple[Candidate, ...], CellBuilder], None]


class CandidateOptions(TerminationOptions, total=False):
    """The keyword options of :func:`candidate_table` (what ``match`` passes on)."""

    mount: Sequence[int] | None
    max_index: int
    visibility: Visibility | None
    model: MatchModel | None
    reconstructions: bool
    charges: Mapping[str, float] | None
    max_cell: int
    cells: Iterable[str | CellSpec]
    select_cells: CellSelector | None
    progress: Callable[[float, str], object] | None


class _FaceFields(TypedDict):
    """The fields of a :class:`Candidate` that its face decides."""

    hkl: HKL
    d: float
    tilts: tuple[float, ...]
    tilt_variants: tuple[HKL, ...]


class _StepFields(TypedDict):
    """The allowed steps of a :class:`Candidate` (see its attributes)."""

    step_heights: tuple[float, ...]
    step_multiples: tuple[int, ...]
    step_lower: tuple[int, ...]
    step_upper: tuple[int, ...]
    step_factors: tuple[float, ...]
    step_lower_id: tuple[str, ...]
    step_upper_id: tuple[str, ...]


class _TerminationFields(_FaceFields, _StepFields):
    """The fields of a :class:`Candidate` that its face and one termination class decide."""

    classes: tuple[TerminationRef, ...]
    members: tuple[tuple[str, ...], ...]
    relation: str | None
    polar: bool | None


@overload
def logsumexp(x: ArrayLike, axis: None = None) -> float: ...


@overload
def logsumexp(x: ArrayLike, axis: int) -> FloatArray: ...


def logsumexp(x: ArrayLike, axis: int | None = None) -> float | FloatArray:
    """log(sum(exp(x))) along ``axis``, stable for large and -inf entries.

    A float without ``axis``; with it, an array of the shape of ``x`` without that axis.
    """
    x = np.asarray(x, dtype=float)
    m = np.max(x, axis=axis, keepdims=True)
    m = np.where(np.isfinite(m), m, 0.0)
    with np.errstate(divide="ignore"):
        out = np.log(np.sum(np.exp(x - m), axis=axis, keepdims=True)) + m
    return np.squeeze(out, axis=axis) if axis is not None else float(out.squeeze())


def fraction_grid(k: int) -> FloatArray:
    """Points of the open simplex of k class fractions, uniformly spread: (G, k).

    One point (1,) for k = 1; for k = 2, 19 points 0.05 ... 0.95; for k = 3,
    the 55 points (i, j, l)/12 with i, j, l >= 1.  The mean over the grid
    approximates the integral over a uniform (Dirichlet(1, ..., 1)) prior.

    >>> fraction_grid(2).shape, float(fraction_grid(2)[0, 0])
    ((19, 2), 0.05)
    """
    if k == 1:
        return np.ones((1, 1))
    total = {2: 20, 3: 12}.get(k, 8)
    points = [c for c in itertools.product(range(1, total), repeat=k) if sum(c) == total]
    return np.array(points, dtype=float) / total


# --------------------------------------------------------------------------- prior


def _bond_scale(values: list[float]) -> float:
    """The unit of the broken-bond prior: the cheapest cost, or half the median where the cheapest is ~0.

    A face that breaks no bond (a van der Waals gap) has w = 0; measuring the
    others relative to it would make them impossible.  Half the median of the
    costs is the scale then, so the gap is favoured by a few units of log
    prior, not by infinity.
    """
    positive = [v for v in values if v > 0]
    if not positive:
        return 1.0
    return max(min(values), 0.5 * float(np.median(positive)))


def _class_steps(ft: FaceTerminations, classes: list[tuple[str, ...]], model: MatchModel) -> _StepFields:
    """Every step between terraces of the given classes, with its weight factor."""
    tops = {t.id: ft.layers[t.layers[0]].height for t in ft.terminations}
    out: list[tuple[float, int, int, int, float, str, str]] = []
    for ci, members_i in enumerate(classes):
        for cj, members_j in enumerate(classes):
            share = 1.0 / (len(members_i) * len(members_j))
            for a in members_i:
                for b in members_j:
                    for n, h in allowed_heights(tops[a], tops[b], ft.d, model.max_multiple, ft.layer_tol_angstrom):
                        out.append((h, n, ci, cj, share * model.step_decay**n, a, b))
    cols = list(zip(*out)) if out else [()] * 7
    return _StepFields(
        step_heights=tuple(float(v) for v in cols[0]),
        step_multiples=tuple(int(v) for v in cols[1]),
        step_lower=tuple(int(v) for v in cols[2]),
        step_upper=tuple(int(v) for v in cols[3]),
        step_factors=tuple(float(v) for v in cols[4]),
        step_lower_id=tuple(cols[5]),
        step_upper_id=tuple(cols[6]),
    )


def _lattice_entry(patterns: list[CorrugationPattern]) -> tuple[tuple[ApparentLattice, ...], tuple[float, ...]]:
    """The lattices a class's terraces may show, and their periods: each pattern's, and its domains' together."""
    lattices: list[ApparentLattice] = []
    periods: list[float] = []
    for p in patterns:
        entries = [(p.apparent_lattice, p.row_spacings)]
        dl = p.domain_lattice
        if dl is not None and _lattice_key(dl) != _lattice_key(p.apparent_lattice):
            entries.append((dl, ()))
        for lat, rows in entries:
            lattices.append(lat)
            periods += periodicities(lat.a, lat.b, lat.gamma, rows)
    return tuple(lattices), tuple(periods)


def _lattice_key(lat: ApparentLattice) -> tuple[float, float, float]:
    return (round(lat.a, 6), round(lat.b, 6), round(lat.gamma, 4))


def _kept_cells(records: tuple[Reconstruction, ...]) -> list[Reconstruction]:
    """The best cells of each kind: from the top layer alone and from two layers (records come best first)."""
    one = [r for r in records if sum(1 for k in r.layer_changed if k) == 1]
    two = [r for r in records if sum(1 for k in r.layer_changed if k) > 1]
    kept = set(id(r) for r in one[:MAX_CELLS_PER_TERMINATION] + two[:MAX_CELLS_PER_TERMINATION])
    return [r for r in records if id(r) in kept]


def candidate_table(
    crystal: Crystal,
    mount: Sequence[int] | None = None,
    max_index: int = MAX_INDEX,
    *,
    visibility: Visibility | None = None,
    model: MatchModel | None = None,
    reconstructions: bool = True,
    charges: Mapping[str, float] | None = None,
    max_cell: int = MAX_CELL,
    cells: Iterable[str | CellSpec] = (),
    select_cells: CellSelector | None = None,
    progress: Callable[[float, str], object] | None = None,
    **termination_options: Unpack[TerminationOptions],
) -> CandidateTable:
    """Predictions of every face x termination (x reconstruction, x terrace mix) of ``crystal``.

    Parameters
    ----------
    crystal : Crystal
    mount : 3 ints, optional
        Mount face; without it the tilt cannot be scored.
    max_index : int
        Largest Miller index of the candidate faces.
    visibility : Visibility, optional
        Corrugation model (:func:`termination.surface.corrugation.termination_corrugation`).
    model : MatchModel, optional
    reconstructions : bool
        Add reconstruction cells of polar terminations as candidates.
    charges : mapping, optional
        Formal charges per element for the polarity check.
    max_cell : int
        Largest supercell index of reconstruction candidates.
    cells : sequence of str or CellSpec
        Cells the user names (Wood notation or matrix,
        :func:`termination.algebra.lattice2d.parse_cell`): each adds a
        candidate per termination on every face whose mesh it fits, with the
        default modulation of :func:`termination.surface.corrugation.cell_corrugation`.
    select_cells : callable, optional
        Reconstruction cells are the expensive part.  When given, the
        candidates without cells are built first and
        ``select_cells(candidates, build)`` calls ``build(hkl, termination_id)``
        for the polar terminations whose cells are worth building, in the
        order it likes; ``build`` returns their cell candidates, so that the
        selector can score them before it decides on the next (``match``
        builds those whose tilt and steps leave them in contention).  In
        ``candidates`` the 1×1 candidate of a polar termination already
        gives up the prior share of its cells (``reconstructed_share``); the
        cells that are not built keep that share unspent.  Default: build the
        cells of every polar termination.
    progress : callable, optional
        ``progress(fraction, stage)``: the faces take the first half, the
        reconstruction cells the second (minutes with ``max_index`` and
        ``max_cell`` 12).
    termination_options
        Passed to :func:`termination.surface.terminations.face_terminations`
        (``layer_tol_angstrom``, ``bond_factor``, ``bond_cutoff_angstrom``, ``unit_ratio``).

    Returns
    -------
    CandidateTable
    """
    model = model or MatchModel()
    vis = Visibility() if visibility is None else visibility
    specs = check_cells(cells)
    mount = None if mount is None else face_index(crystal, mount, "mount")
    faces = distinct_faces(crystal, max_index=max_index, mount=mount)
    # Checked once for the crystal: per termination a species that is merely
    # absent from the top unit makes that termination flat, which is a result.
    vis.check(crystal.species, MeasurementError, "this crystal")
    termination_options["max_multiple"] = model.max_multiple  # the model's, whatever was passed
    crystal, polar_info, notes = _polarity_provider(crystal, charges, reconstructions, max_cell, vis)
    per_face = [(f, face_terminations(crystal, f.hkl, face=f, **termination_options)) for f in faces]
    face_costs = [min(t.weighted_bonds_per_nm2 for t in ft.terminations) for _, ft in per_face]
    scale = _bond_scale(face_costs)
    w_min = min(face_costs)
    groups: list[list[Candidate]] = []  # per termination: its 1x1 candidate, then its cells
    pending = []  # polar terminations whose reconstruction cells are still to build
    fitted: dict[str, int] = {spec.label: 0 for spec in specs}
    domains_seen: dict[str, list[tuple[tuple[int, int, int], tuple[str, ...]]]] = {}
    for n, ((f, ft), w_face) in enumerate(zip(per_face, face_costs)):
        if progress is not None:
            progress(0.5 * n / len(per_face), f"face {face_text(f.hkl, crystal.hexagonal_axes)}")
        mesh = ft.atoms.mesh_inplane
        user = [(spec, m) for spec in specs if (m := cell_matrix(spec, mesh)) is not None]
        for spec, _ in user:
            fitted[spec.label] += 1
        rotations = face_point_group(crystal, ft.face)
        tilts, variants = ((), ()) if mount is None else _upward_tilts(crystal, f.variants, mount)
        log_face = -model.index_weight * (sum(abs(v) for v in f.hkl) - 1) - model.bond_weight * (w_face - w_min) / scale
        reps = [t for t in ft.terminations if t.equivalent_to is None]
        members = [tuple(u.id for u in ft.terminations if (u.equivalent_to or u.id) == t.id) for t in reps]
        relation = {t.id: next((u.relation for u in ft.terminations if u.equivalent_to == t.id), None) for t in reps}
        cost = np.array([t.weighted_bonds_per_nm2 for t in reps])
        p_class = np.array([len(m) for m in members]) * np.exp(-model.bond_weight * (cost - w_face) / scale)
        p_class /= p_class.sum()
        patterns = {t.id: termination_corrugation(ft, t.id, vis, crystal=crystal) for t in reps}
        base = _FaceFields(hkl=f.hkl, d=ft.d, tilts=tilts, tilt_variants=variants)
        single_share = 1.0 - (model.mixed_share if len(reps) > 1 else 0.0)
        for k, t in enumerate(reps):
            lattices, periods = _lattice_entry([patterns[t.id]])
            steps = _class_steps(ft, [members[k]], model)
            polar, polarity = polar_info.polarity(ft, t) if polar_info else (None, None)
            given = [
                (
                    cell_notation(m, mesh) + " given",
                    [
                        superpose_domains(
                            cell_corrugation(ft, t.id, m, vis, crystal=crystal, cell=cell_notation(m, mesh)),
                            m,
                            rotations,
                            mesh,
                        )
                    ],
                )
                for _, m in user
            ]
            user_share = model.user_cell_share if given else 0.0
            if k == 0:
                for (spec, _), (_, cell_patterns) in zip(user, given):
                    domains_seen.setdefault(spec.label, []).append((f.hkl, cell_patterns[0].domains))
            log_single = log_face + math.log(single_share * p_class[k]) + math.log1p(-user_share)
            one = _TerminationFields(
                **base,
                classes=(TerminationRef.of(t),),
                members=(members[k],),
                relation=relation[t.id],
                polar=polar,
                **steps,
            )
            group: list[Candidate] = [
                Candidate(cell=None, lattices=(lattices,), periods=(periods,), log_prior=log_single, **one)
            ]
            log_given = log_face + math.log(single_share * p_class[k])
            for cell_name, cell_patterns in given:
                cl, cp = _lattice_entry(cell_patterns)
                group.append(
                    Candidate(
                        cell=cell_name,
                        lattices=(cl,),
                        periods=(cp,),
                        log_prior=log_given + math.log(user_share / len(given)),
                        **one,
                    )
                )
            groups.append(group)
            if polar_info is not None and polarity is not None and polar_info.may_have_cells(polarity):
                pending.append((len(groups) - 1, ft, t, rotations, polarity, log_single, one))
        if len(reps) > 1:
            cheapest = sorted(range(len(reps)), key=lambda k: -p_class[k])[: model.max_mixed_classes]
            pairs = [tuple(sorted(p)) for p in itertools.combinations(cheapest, 2)]
            weight = np.array([p_class[i] * p_class[j] for i, j in pairs])
            weight /= weight.sum()
            for (i, j), w in zip(pairs, weight):
                entries = [_lattice_entry([patterns[reps[k].id]]) for k in (i, j)]
                groups.append(
                    [
                        Candidate(
                            classes=(TerminationRef.of(reps[i]), TerminationRef.of(reps[j])),
                            members=(members[i], members[j]),
                            relation=relation[reps[i].id],
                            cell=None,
                            lattices=tuple(e[0] for e in entries),
                            periods=tuple(e[1] for e in entries),
                            log_prior=log_face + math.log(model.mixed_share * w),
                            polar=None,
                            **base,
                            **_class_steps(ft, [members[i], members[j]], model),
                        )
                    ]
                )
    # Reconstruction cells last: the expensive part, built where they may matter.  A polar
    # termination's 1×1 candidate gives the share of its cells away whether they are built or not
    # (it keeps all of it only when the search finds no cell).
    share = model.reconstructed_share
    for index, *_ in pending:
        first = groups[index][0]
        groups[index][0] = replace(first, log_prior=first.log_prior + math.log1p(-share))
    by_key = {(entry[1].face.hkl, entry[2].id): entry for entry in pending}
    built: dict[int, list[Candidate]] = {}

    def build(hkl: HKL, termination_id: str) -> tuple[Candidate, ...]:
        entry = by_key.get((hkl, termination_id))
        if entry is None:
            return ()
        index, ft, t, rotations, polarity, log_single, one = entry
        if index not in built:
            assert polar_info is not None  # only a provider fills pending
            if progress is not None:
                stage = f"cells of {face_text(ft.face.hkl, crystal.hexagonal_axes)} {t.label}"
                progress(0.5 + 0.5 * len(built) / len(pending), stage)
            recon = polar_info.cells(ft, t, rotations, polarity)
            built[index] = [
                Candidate(
                    cell=cell_name,
                    lattices=(cl,),
                    periods=(cp,),
                    log_prior=log_single + math.log(share / len(recon)),
                    **one,
                )
                for cell_name, (cl, cp) in ((name, _lattice_entry(pats)) for name, pats in recon)
            ]
        return tuple(built[index])

    if select_cells is None:
        for entry in pending:
            build(entry[1].face.hkl, entry[2].id)
    elif pending:
        select_cells(tuple(c for group in groups for c in group), build)
    if progress is not None:
        progress(1.0, f"{len(per_face)} faces")
    spent = []  # log prior mass of cells that were not built (their share stays out of the 1x1)
    for index, _, _, _, _, log_single, _ in pending:
        if index not in built:
            spent.append(log_single + math.log(share))
        elif built[index]:
            groups[index] += built[index]
        else:  # no cell found: the 1×1 keeps the whole mass
            groups[index][0] = replace(groups[index][0], log_prior=log_single)
    rows = [c for group in groups for c in group]
    if model.flat_prior:
        rows = [replace(r, log_prior=0.0) for r in rows]
    lp = np.array([r.log_prior for r in rows])
    lp -= logsumexp(np.concatenate([lp, spent if not model.flat_prior else []]))
    out = tuple(replace(r, log_prior=float(v)) for r, v in zip(rows, lp))
    if vis == Visibility():
        notes = [*notes, "imaging model: every species images alike (--visible and --weight change it)"]
    for label, count in fitted.items():
        if not count:
            notes = [*notes, f"cell {label} fits the mesh of no face up to index {int(max_index)}: not tried"]
    for label, seen in domains_seen.items():
        parts = [f"{face_text(hkl, crystal.hexagonal_axes)} {' + '.join(names)}" for hkl, names in seen[:4]]
        more = f"; and {len(seen) - 4} more faces" if len(seen) > 4 else ""
        notes = [*notes, f"cell {label}, rotational domains superposed: " + "; ".join(parts) + more]
    if specs:
        notes = [
            *notes,
            "given cells: one 1×1 cell per cell images twice as strongly; each is matched with one domain "
            "and with its rotational domains superposed",
        ]
    return CandidateTable(
        structure=summarise_structure(crystal),
        mount=mount,
        max_index=int(max_index),
        candidates=out,
        model=model,
        visibility=vis,
        notes=tuple(notes),
    )


def _upward_tilts(crystal: Crystal, variants: tuple[HKL, ...], mount: HKL) -> tuple[tuple[float, ...], tuple[HKL, ...]]:
    """Tilts (degrees) of the variants whose normals lie within 90° of the mount normal."""
    ang = variant_tilts(crystal, variants, mount)
    keep = ang <= 90.0 + 1e-6
    return tuple(float(a) for a in ang[keep]), tuple(v for v, k in zip(variants, keep) if k)


class _PolarityProvider:
    """Polarity of terminations (cheap) and their reconstruction cells with corrugation (expensive)."""

    def __init__(self, charged: Crystal, reconstructions: bool, max_cell: int, vis: Visibility) -> None:
        self.charged = charged
        self.reconstructions = reconstructions
        self.max_cell = max_cell
        self.vis = vis

    def polarity(self, ft: FaceTerminations, t: Termination) -> tuple[bool, TerminationPolarity]:
        """(Tasker type III?, the polarity record without cells)."""
        pol = termination_polarity(self.charged, ft, t.id, max_cell=self.max_cell, with_reconstructions=False)
        return pol.tasker_type == "III", pol

    def may_have_cells(self, pol: TerminationPolarity | None) -> bool:
        """Whether a cell search can give anything: reconstructions asked for, a polar termination to compensate."""
        return (
            bool(self.reconstructions) and pol is not None and pol.tasker_type == "III" and pol.compensation is not None
        )

    def cells(
        self, ft: FaceTerminations, t: Termination, rotations: IntArray, pol: TerminationPolarity
    ) -> list[tuple[str, list[CorrugationPattern]]]:
        """[(cell label, [pattern with its domains superposed]), ...] of the best cells, best first."""
        full = termination_polarity(self.charged, ft, t.id, max_cell=self.max_cell, keep_best=MAX_CELLS_PER_TERMINATION)
        out: list[tuple[str, list[CorrugationPattern]]] = []
        for r in _kept_cells(full.reconstructions):
            try:
                pattern = reconstruction_corrugation(ft, t.id, r, self.vis, crystal=self.charged)
            except StructureError:
                continue
            out.append((r.label, [superpose_domains(pattern, r.matrix, rotations, ft.atoms.mesh_inplane)]))
        return out


def _polarity_provider(
    crystal: Crystal, charges: Mapping[str, float] | None, reconstructions: bool, max_cell: int, vis: Visibility
) -> tuple[Crystal, _PolarityProvider | None, list[str]]:
    """Charged crystal, a :class:`_PolarityProvider` (None without formal charges) and notes.

    Without formal charges (given, from the file, or the built-in guess) the
    polarity is not assessed and no reconstruction candidates are added.
    """
    charged, found = with_formal_charges(crystal, charges)
    if found is None:
        return (
            crystal,
            None,
            ["no formal charges known (give --charge EL=Q): polarity not assessed, no reconstruction candidates"],
        )
    notes = [f"formal charges {found.method}: " + ", ".join(f"{el} {q:+g}" for el, q in found.charges.items())]
    if found.caution:
        notes.append(found.caution)
    return charged, _PolarityProvider(charged, reconstructions, max_cell, vis), notes
