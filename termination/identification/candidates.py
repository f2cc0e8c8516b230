"""Candidates of an identification: what every face x termination (x cell) predicts, and its prior.

A candidate is a face (hkl) with one of its terminations and, for a polar
termination, optionally one of the reconstruction cells that could
compensate it.  Each candidate predicts its tilt to the mount face (for
every upward-facing symmetry variant), the periodicities and row angle of the
corrugation it shows (the apparent lattice of
:mod:`termination.surface.corrugation`) and the step heights between its
terraces and those of the other terminations of the face
(:mod:`termination.surface.steps`).  The prior is described in
:mod:`termination.identification.likelihood`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from termination.bulk.charges import with_formal_charges
from termination.bulk.summary import StructureSummary, summarise_structure
from termination.defaults import MAX_CELL, MAX_CELLS_PER_TERMINATION, MAX_INDEX
from termination.errors import MeasurementError, StructureError
from termination.identification.model import RECONSTRUCTED_SHARE, MatchModel
from termination.surface.corrugation import Visibility, reconstruction_corrugation, termination_corrugation
from termination.surface.faces import distinct_faces, variant_tilts
from termination.surface.miller import check_hkl
from termination.surface.polarity import termination_polarity
from termination.surface.steps import steps_from
from termination.surface.terminations import face_terminations

__all__ = ["Candidate", "CandidateTable", "candidate_table", "logsumexp"]


@dataclass(frozen=True)
class Candidate:
    """What one face x termination (x cell) predicts; independent of the measurement.

    Attributes
    ----------
    hkl : tuple of int
    termination : str
        Termination label.
    termination_id : str
    cell : str or None
        Reconstruction cell (Wood or matrix notation); None for 1x1.
    d : float
        Plane spacing, Å.
    tilts : tuple of float
        Tilt of each upward-facing variant to the mount, degrees (empty without a mount).
    tilt_variants : tuple of tuple
        The variants, same order.
    periodicities : tuple of float
        The K predicted spacings, Å.
    apparent : tuple of float
        Apparent lattice (a, b, gamma).
    step_heights, step_weights : tuple of float
        Allowed step heights (Å) from this termination and their mixture weights.
    step_labels : tuple of str
        'T1->T2' style description of each height.
    log_prior : float
    polar : bool or None
    """

    hkl: tuple
    termination: str
    termination_id: str
    cell: str | None
    d: float
    tilts: tuple
    tilt_variants: tuple
    periodicities: tuple
    apparent: tuple
    step_heights: tuple
    step_weights: tuple
    step_labels: tuple
    log_prior: float
    polar: bool | None = None


@dataclass(frozen=True, eq=False)
class CandidateTable:
    """All candidates of a crystal for one mount, with the options that made them."""

    structure: StructureSummary
    mount: tuple | None
    max_index: int
    candidates: tuple[Candidate, ...]
    model: MatchModel
    visibility: Visibility = field(default_factory=Visibility)
    notes: tuple[str, ...] = ()


def _upward_tilts(crystal, variants, mount):
    """Tilts (degrees) of the variants whose normals lie within 90° of the mount normal."""
    ang = variant_tilts(crystal, variants, mount)
    keep = ang <= 90.0 + 1e-6
    return tuple(float(a) for a in ang[keep]), tuple(v for v, k in zip(variants, keep) if k)


def _periodicities(a, b, gamma, row_spacings):
    """K = 5 predicted spacings: three shortest lattice-vector lengths and two row spacings."""
    if not np.isfinite(a):  # flat: nothing visible
        return (float("nan"),) * 5
    if not (np.isfinite(b) and np.isfinite(gamma)):  # stripes: one periodicity and its row spacing
        rows = [r for r in row_spacings if np.isfinite(r)][:1] or [a]
        return (float(a), float("nan"), float("nan"), float(rows[0]), float("nan"))
    g = np.radians(gamma)
    third = min(np.sqrt(a * a + b * b + 2 * a * b * np.cos(g)), np.sqrt(a * a + b * b - 2 * a * b * np.cos(g)))
    area = a * b * np.sin(g)
    rows = [r for r in row_spacings if np.isfinite(r)][:2] or [area / a, area / b]
    if len(rows) == 1:
        rows.append(rows[0])
    return (float(a), float(b), float(third), float(rows[0]), float(rows[1]))


def _step_mixture(ft, t, model):
    """Allowed heights from termination t (up and down) with weights rho^n."""
    tops = {x.id: ft.layers[x.layers[0]].height for x in ft.terminations}
    allowed = steps_from(t.id, tops, ft.d, model.max_multiple, ft.layer_tol_angstrom)
    w = np.array([model.step_decay**s.multiple for s in allowed])
    heights = tuple(s.height for s in allowed)
    labels = tuple(f"{s.lower}->{s.upper} {'up' if s.lower == t.id else 'down'}" for s in allowed)
    return heights, tuple(w / w.sum()), labels


def candidate_table(
    crystal,
    mount=None,
    max_index=MAX_INDEX,
    *,
    visibility=None,
    model=None,
    reconstructions=True,
    charges=None,
    max_cell=MAX_CELL,
    **termination_options,
):
    """Predictions of every face x termination (x reconstruction) of ``crystal``.

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
    termination_options
        Passed to :func:`termination.surface.terminations.face_terminations`.

    Returns
    -------
    CandidateTable
    """
    model = model or MatchModel()
    vis = Visibility() if visibility is None else visibility
    mount = None if mount is None else check_hkl(mount, "mount")
    faces = distinct_faces(crystal, max_index=max_index, mount=mount)
    # Checked once for the crystal: per termination a species that is merely
    # absent from the top unit makes that termination flat, which is a result.
    vis.check(crystal.species, MeasurementError, "this crystal")
    crystal, polar_info, notes = _polarity_provider(crystal, charges, reconstructions, max_cell, vis)
    per_face = []
    for f in faces:
        ft = face_terminations(crystal, f.hkl, face=f, max_multiple=model.max_multiple, **termination_options)
        per_face.append((f, ft))
    w_min = min(t.weighted_bonds_per_nm2 for _, ft in per_face for t in ft.terminations)
    w_min = max(w_min, 1e-9)
    rows = []
    for f, ft in per_face:
        tilts, variants = ((), ()) if mount is None else _upward_tilts(crystal, f.variants, mount)
        w_face = max(min(t.weighted_bonds_per_nm2 for t in ft.terminations), 1e-9)
        log_face = -model.index_weight * (sum(abs(v) for v in f.hkl) - 1) - model.bond_weight * (w_face / w_min - 1)
        log_t = np.array([-model.bond_weight * (t.weighted_bonds_per_nm2 / w_face - 1) for t in ft.terminations])
        log_t -= np.log(np.exp(log_t).sum())
        for t, lt in zip(ft.terminations, log_t):
            pattern = termination_corrugation(ft, t.id, vis)
            lat = pattern.apparent_lattice
            heights, sw, labels = _step_mixture(ft, t, model)
            base = dict(
                hkl=f.hkl,
                termination=t.label,
                termination_id=t.id,
                d=ft.d,
                tilts=tilts,
                tilt_variants=variants,
                step_heights=heights,
                step_weights=sw,
                step_labels=labels,
            )
            polar, recon = polar_info(ft, t) if polar_info else (None, ())
            share = np.log(1 - RECONSTRUCTED_SHARE) if recon else 0.0
            share_cell = np.log(RECONSTRUCTED_SHARE / len(recon)) if recon else 0.0
            rows.append(
                Candidate(
                    cell=None,
                    periodicities=_periodicities(lat.a, lat.b, lat.gamma, pattern.row_spacings),
                    apparent=(lat.a, lat.b, lat.gamma),
                    log_prior=float(log_face + lt + share),
                    polar=polar,
                    **base,
                )
            )
            for cell_name, rpat in recon:
                rl = rpat.apparent_lattice
                rows.append(
                    Candidate(
                        cell=cell_name,
                        periodicities=_periodicities(rl.a, rl.b, rl.gamma, rpat.row_spacings),
                        apparent=(rl.a, rl.b, rl.gamma),
                        log_prior=float(log_face + lt + share_cell),
                        polar=polar,
                        **base,
                    )
                )
    if model.flat_prior:
        rows = [Candidate(**{**r.__dict__, "log_prior": 0.0}) for r in rows]
    lp = np.array([r.log_prior for r in rows])
    lp -= logsumexp(lp)
    rows = tuple(Candidate(**{**r.__dict__, "log_prior": float(v)}) for r, v in zip(rows, lp))
    return CandidateTable(
        structure=summarise_structure(crystal),
        mount=mount,
        max_index=int(max_index),
        candidates=rows,
        model=model,
        visibility=vis,
        notes=tuple(notes),
    )


def _polarity_provider(crystal, charges, reconstructions, max_cell, vis):
    """Charged crystal and a function (ft, termination) -> (polar, [(cell, pattern), ...]).

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

    def info(ft, t):
        pol = termination_polarity(charged, ft, t.id, max_cell=max_cell, with_reconstructions=reconstructions)
        cells = []
        for r in pol.reconstructions[:MAX_CELLS_PER_TERMINATION]:
            try:
                pattern = reconstruction_corrugation(ft, t.id, r, vis)
            except StructureError:
                continue
            cells.append((pattern.cell, pattern))
        return pol.tasker_type == "III", cells

    return charged, info, notes


def logsumexp(x, axis=None):
    """log(sum(exp(x))) along ``axis``, stable for large and -inf entries."""
    x = np.asarray(x, dtype=float)
    m = np.max(x, axis=axis, keepdims=True)
    m = np.where(np.isfinite(m), m, 0.0)
    with np.errstate(divide="ignore"):
        out = np.log(np.sum(np.exp(x - m), axis=axis, keepdims=True)) + m
    return np.squeeze(out, axis=axis) if axis is not None else float(out.squeeze())
