"""Result records that the command line shows, and their JSON form.

Every command builds one of these frozen dataclasses; the table and the
``--json`` output are two renderings of the same record.
"""

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from .elements import handling_caution
from .planes import Mesh, distinct_faces
from .terminations import face_terminations

__all__ = [
    "StructureSummary",
    "PlaneRow",
    "PlanesReport",
    "summarise_structure",
    "planes_report",
    "LayerRow",
    "TerminationsReport",
    "terminations_report",
    "to_jsonable",
]


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
    polar: bool | None = None  # every termination Tasker type III; None without charges (termination.polarity)


@dataclass(frozen=True)
class PlanesReport:
    structure: StructureSummary
    mount: tuple | None
    max_index: int
    planes: tuple
    charges: object = None  # termination.charges.ChargeAssignment behind the polar column, or None


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
    layers: tuple
    terminations: tuple
    steps: tuple
    apparent_lattices: tuple  # per termination, default corrugation model (termination.corrugation)


def terminations_report(crystal, hkl, **options):
    """Layers, terminations and steps of one face as a :class:`TerminationsReport`.

    ``options`` go to :func:`termination.terminations.face_terminations`.
    """
    from .corrugation import termination_corrugation

    ft = face_terminations(crystal, hkl, **options)
    layers = tuple(LayerRow(depth=l.depth, height=l.height, composition=l.composition) for l in ft.layers)
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


def summarise_structure(crystal):
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


def planes_report(crystal, max_index=3, mount=None, charges=None, **termination_options):
    """Distinct faces of ``crystal`` up to ``max_index`` as a :class:`PlanesReport`.

    ``charges`` (element -> formal charge), else the file's charges, else the
    light guess of :func:`termination.charges.assign_charges` (never
    pymatgen) mark the polar faces; without any, ``polar`` is None.
    ``termination_options`` go to :func:`termination.terminations.face_terminations`.
    """
    from .charges import assign_charges
    from .polarity import face_is_polar

    assignment = assign_charges(crystal, charges, use_pymatgen=False, required=False)
    if assignment is not None:
        crystal = crystal.with_charges(assignment.per_atom)
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
    rows = tuple(rows)
    m = None if mount is None else tuple(int(v) for v in mount)
    return PlanesReport(summarise_structure(crystal), m, int(max_index), rows, assignment)


def to_jsonable(obj):
    """Plain JSON-ready form of a result: dataclasses become dicts, arrays lists.

    A field's JSON key is its name, or ``metadata["json"]`` where a name is
    not a valid identifier (``from``).

    Non-finite floats become None, so the output is strict JSON.
    """
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return {
            f.metadata.get("json", f.name): to_jsonable(getattr(obj, f.name))
            for f in dataclasses.fields(obj)
            if f.repr
        }
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        v = float(obj)
        return v if math.isfinite(v) else None
    return obj
