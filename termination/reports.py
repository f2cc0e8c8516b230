"""Command reports: the records that each command of the command line shows, and how they are built.

Every command calls one builder here and gets one frozen dataclass back; the
table and the ``--json`` output are two renderings of the same record
(:mod:`termination.serialise`, :mod:`termination.tables`).  Builders combine
the bulk and surface layers; they hold no computation of their own.
"""

from __future__ import annotations

from dataclasses import dataclass

from termination.bulk.charges import ChargeAssignment, with_formal_charges
from termination.bulk.crystal import Crystal
from termination.bulk.elements import handling_caution
from termination.defaults import MAX_CELL, MAX_INDEX
from termination.errors import PlaneError
from termination.surface.corrugation import (
    ApparentLattice,
    CorrugationPattern,
    Spot,
    Visibility,
    lattice_type,
    reconstruction_corrugation,
    termination_corrugation,
)
from termination.surface.faces import Mesh, distinct_faces, face_geometry
from termination.surface.miller import check_hkl, hkl_text
from termination.surface.polarity import FacePolarity, face_is_polar, face_polarity, termination_polarity
from termination.surface.reconstructions import CRITERION, check_max_cell
from termination.surface.steps import StepHeights
from termination.surface.terminations import Termination, face_terminations

__all__ = [
    "CorrugationReport",
    "LayerRow",
    "PlaneRow",
    "PlanesReport",
    "PolarityReport",
    "StructureSummary",
    "TerminationCorrugation",
    "TerminationsReport",
    "corrugation_report",
    "planes_report",
    "polarity_report",
    "summarise_structure",
    "terminations_report",
]


# --------------------------------------------------------------------------- structure


@dataclass(frozen=True)
class StructureSummary:
    """What was loaded: name, symmetry, cell and handling caution."""

    name: str
    formula: str
    origin: str
    spacegroup: str
    spacegroup_number: int
    natoms: int
    a: float
    b: float
    c: float
    alpha: float
    beta: float
    gamma: float
    note: str | None
    caution: str | None


def summarise_structure(crystal: Crystal) -> StructureSummary:
    """:class:`StructureSummary` of a crystal."""
    a, b, c, alpha, beta, gamma = crystal.cell_parameters
    return StructureSummary(
        name=crystal.name,
        formula=crystal.formula,
        origin=crystal.origin,
        spacegroup=crystal.spacegroup,
        spacegroup_number=crystal.spacegroup_number,
        natoms=crystal.natoms,
        a=a,
        b=b,
        c=c,
        alpha=alpha,
        beta=beta,
        gamma=gamma,
        note=crystal.note,
        caution=handling_caution(crystal.species),
    )


# --------------------------------------------------------------------------- planes


@dataclass(frozen=True)
class PlaneRow:
    """One face in the ``planes`` table."""

    hkl: tuple
    d: float
    tilt: float | None
    tilt_variant: tuple | None
    tilt_axis: tuple | None
    multiplicity: int
    mesh: Mesh
    terminations: int
    smallest_step: float
    polar: bool | None = None  # every termination Tasker type III; None without charges


@dataclass(frozen=True)
class PlanesReport:
    structure: StructureSummary
    mount: tuple | None
    max_index: int
    planes: tuple
    charges: ChargeAssignment | None = None  # behind the polar column, or None


def planes_report(crystal, max_index=MAX_INDEX, mount=None, charges=None, **termination_options):
    """Distinct faces of ``crystal`` up to ``max_index`` as a :class:`PlanesReport`.

    ``charges`` (element -> formal charge), else the file's charges, else the
    light guess of :func:`termination.bulk.charges.assign_charges` (never
    pymatgen) mark the polar faces; without any, ``polar`` is None.
    ``termination_options`` go to
    :func:`termination.surface.terminations.face_terminations`.
    """
    crystal, assignment = with_formal_charges(crystal, charges)
    faces = distinct_faces(crystal, max_index=max_index, mount=mount)
    rows = []
    for f in faces:
        ft = face_terminations(crystal, f.hkl, face=f, **termination_options)
        rows.append(
            PlaneRow(
                hkl=f.hkl,
                d=f.d,
                tilt=f.tilt,
                tilt_variant=f.tilt_variant,
                tilt_axis=f.tilt_axis,
                multiplicity=f.multiplicity,
                mesh=f.mesh,
                terminations=len(ft.terminations),
                smallest_step=ft.smallest_step,
                polar=None if assignment is None else face_is_polar(ft),
            )
        )
    m = None if mount is None else tuple(int(v) for v in mount)
    return PlanesReport(summarise_structure(crystal), m, int(max_index), tuple(rows), assignment)


# --------------------------------------------------------------------------- terminations


@dataclass(frozen=True)
class LayerRow:
    """One atomic layer: depth below the highest layer (Å) and composition per surface cell."""

    depth: float
    height: float
    composition: dict


@dataclass(frozen=True)
class TerminationsReport:
    structure: StructureSummary
    plane: tuple
    d: float
    mesh: Mesh
    layer_tol_angstrom: float
    layers: tuple[LayerRow, ...]
    terminations: tuple[Termination, ...]
    steps: tuple[StepHeights, ...]
    apparent_lattices: tuple[ApparentLattice, ...]  # per termination, default corrugation model


def terminations_report(crystal, hkl, **options):
    """Layers, terminations and steps of one face as a :class:`TerminationsReport`.

    ``options`` go to :func:`termination.surface.terminations.face_terminations`.
    """
    ft = face_terminations(crystal, hkl, **options)
    layers = tuple(LayerRow(depth=la.depth, height=la.height, composition=la.composition) for la in ft.layers)
    apparent = tuple(termination_corrugation(ft, t.id).apparent_lattice for t in ft.terminations)
    return TerminationsReport(
        structure=summarise_structure(crystal),
        plane=ft.face.hkl,
        d=ft.d,
        mesh=ft.face.mesh,
        layer_tol_angstrom=ft.layer_tol_angstrom,
        layers=layers,
        terminations=ft.terminations,
        steps=ft.steps,
        apparent_lattices=apparent,
    )


# --------------------------------------------------------------------------- polarity


@dataclass(frozen=True)
class PolarityReport:
    """Result of ``termination polarity``."""

    structure: StructureSummary
    charges: ChargeAssignment
    max_cell: int
    criterion: str
    faces: tuple[FacePolarity, ...]


def polarity_report(
    crystal,
    plane=None,
    max_index=None,
    *,
    charges=None,
    max_cell=MAX_CELL,
    use_pymatgen=True,
    termination_options=None,
    **tolerances,
):
    """Polarity of one face or of all distinct faces up to ``max_index``.

    Parameters
    ----------
    crystal : Crystal
    plane : 3 ints, optional
        One face; otherwise all faces up to ``max_index``.
    max_index : int, optional
        Default :data:`~termination.defaults.MAX_INDEX`.
    charges : mapping, optional
        Element -> formal charge; else from the file or a guess
        (:func:`termination.bulk.charges.assign_charges`).
    max_cell : int
        Largest supercell index for reconstructions (1 to 12).
    use_pymatgen : bool
        Allow pymatgen's oxidation-state guess as the last resort.
    termination_options : mapping, optional
        Passed to :func:`termination.surface.terminations.face_terminations`.
    **tolerances
        See :func:`termination.surface.polarity.termination_polarity`.

    Returns
    -------
    PolarityReport
    """
    if plane is not None and max_index is not None:
        raise PlaneError(f"give one face or a largest index, not both (plane {hkl_text(plane)}, max index {max_index})")
    max_cell = check_max_cell(max_cell)
    charged, assignment = with_formal_charges(crystal, charges, use_pymatgen=use_pymatgen, required=True)
    if plane is not None:
        faces = (face_geometry(charged, check_hkl(plane)),)
    else:
        faces = distinct_faces(charged, max_index=MAX_INDEX if max_index is None else max_index)
    rows = []
    for face in faces:
        ft = face_terminations(charged, face.hkl, face=face, **dict(termination_options or {}))
        rows.append(face_polarity(charged, ft, max_cell=max_cell, **tolerances))
    return PolarityReport(
        structure=summarise_structure(crystal),
        charges=assignment,
        max_cell=max_cell,
        criterion=CRITERION,
        faces=tuple(rows),
    )


# --------------------------------------------------------------------------- corrugation


@dataclass(frozen=True)
class TerminationCorrugation:
    """One termination's row of the ``corrugation`` report (or one of its reconstruction cells).

    The pattern's fields, with the termination id, the Bravais type of the
    apparent lattice and, for the 1x1 row, the rows of its reconstruction
    cells (``cell`` None for 1x1).
    """

    id: str
    label: str
    cell: str | None
    apparent_lattice: ApparentLattice
    lattice_type: str
    neighbour_distance: float
    row_spacings: tuple[float, ...]
    row_angles: tuple[float, ...]
    spots: tuple[Spot, ...]
    reconstructions: tuple[TerminationCorrugation, ...]


def _corrugation_row(key: str, p: CorrugationPattern, reconstructions=()) -> TerminationCorrugation:
    return TerminationCorrugation(
        id=key,
        label=p.label,
        cell=p.cell,
        apparent_lattice=p.apparent_lattice,
        lattice_type=lattice_type(p.apparent_lattice),
        neighbour_distance=p.neighbour_distance,
        row_spacings=p.row_spacings,
        row_angles=p.row_angles,
        spots=p.spots,
        reconstructions=tuple(reconstructions),
    )


@dataclass(frozen=True)
class CorrugationReport:
    """Predicted corrugation of the terminations of one face, with the model's settings."""

    structure: StructureSummary
    plane: tuple
    mesh: Mesh
    visible: tuple | None
    weights: dict
    decay_length_angstrom: float
    max_depth_angstrom: float | None
    threshold: float
    terminations: tuple[TerminationCorrugation, ...]
    notes: tuple[str, ...]


def corrugation_report(
    crystal, hkl, termination=None, *, visibility=None, reconstructions=True, charges=None, max_cell=MAX_CELL
):
    """Corrugation of every termination of ``hkl`` (or of one) as a :class:`CorrugationReport`.

    Parameters
    ----------
    crystal : Crystal
    hkl : 3 ints
    termination : str, optional
        Id or label of one termination; default all.
    visibility : Visibility, optional
        See :func:`termination.surface.corrugation.termination_corrugation`.
    reconstructions : bool
        Add the reconstruction cells that the polarity step proposes for
        polar (Tasker type III) terminations.
    charges : mapping, optional
        Formal charges per element for the polarity step; default: the
        built-in guess (no reconstructions when there is none).
    max_cell : int
        Largest supercell index of the reconstruction search.

    Returns
    -------
    CorrugationReport
    """
    v = Visibility() if visibility is None else visibility
    notes = []
    assignment = None
    if reconstructions:
        crystal, assignment = with_formal_charges(crystal, charges)
        if assignment is None:
            notes.append("no formal charges known (give them with --charge EL=Q): no reconstruction cells")
    ft = face_terminations(crystal, hkl)
    keys = [t.id for t in ft.terminations] if termination is None else [ft.termination(termination).id]
    rows = []
    for key in keys:
        p = termination_corrugation(ft, key, v)
        recs: tuple[TerminationCorrugation, ...] = ()
        if assignment is not None:
            records = termination_polarity(crystal, ft, key, max_cell=max_cell).reconstructions
            recs = tuple(_corrugation_row(key, reconstruction_corrugation(ft, key, r, v)) for r in records)
        rows.append(_corrugation_row(key, p, recs))
    return CorrugationReport(
        structure=summarise_structure(crystal),
        plane=ft.face.hkl,
        mesh=ft.face.mesh,
        visible=v.visible,
        weights=v.weight_map,
        decay_length_angstrom=v.decay_length_angstrom,
        max_depth_angstrom=v.max_depth_angstrom,
        threshold=v.threshold,
        terminations=tuple(rows),
        notes=tuple(notes),
    )
