"""Command reports: the record each command of the command line shows, and the builder that makes it.

Every command calls one builder here and gets one frozen dataclass back; the
table (:mod:`termination.tables`) and the ``--json`` output
(:mod:`termination.serialise`) are two renderings of the same record.
Builders combine the layers below; they hold no computation of their own.
:func:`command_reports` names the record type of every command, from which
the JSON Schemas are generated.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING

from termination.bulk.charges import ChargeAssignment, with_formal_charges
from termination.bulk.crystal import Crystal
from termination.bulk.summary import StructureSummary, summarise_structure
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
from termination.surface.terminations import Termination, TerminationRef, face_terminations
from termination.units import ANGSTROM, DEG

if TYPE_CHECKING:
    from termination.imaging.analysis import HeightMapAnalysis

__all__ = [
    "CorrugationReport",
    "FaceRow",
    "ImageReport",
    "ImageSource",
    "LayerRow",
    "PlanesReport",
    "PolarityReport",
    "PrototypeRow",
    "StructureSummary",
    "StructuresReport",
    "TerminationCorrugation",
    "TerminationEntry",
    "TerminationsReport",
    "command_reports",
    "corrugation_report",
    "image_report",
    "planes_report",
    "polarity_report",
    "structures_report",
    "summarise_structure",
    "terminations_report",
]


# --------------------------------------------------------------------------- structures


@dataclass(frozen=True)
class PrototypeRow:
    """One built-in prototype: its spec name, the roles of its elements, space group and sites."""

    name: str
    elements: tuple[str, ...]
    spacegroup: str
    spacegroup_number: int
    sites: str
    free_parameter_x: float | None
    example: str
    description: str


@dataclass(frozen=True)
class StructuresReport:
    """Result of ``termination structures``."""

    prototypes: tuple[PrototypeRow, ...]


def structures_report() -> StructuresReport:
    """The built-in prototypes (:data:`termination.structures.PROTOTYPES`)."""
    from termination.structures import PROTOTYPES

    return StructuresReport(
        tuple(
            PrototypeRow(
                name=p.name,
                elements=tuple(p.roles),
                spacegroup=p.spacegroup,
                spacegroup_number=p.number,
                sites=p.wyckoff,
                free_parameter_x=p.default_x,
                example=p.example,
                description=p.description,
            )
            for p in PROTOTYPES.values()
        )
    )


# --------------------------------------------------------------------------- planes


@dataclass(frozen=True)
class FaceRow:
    """One face of the ``planes`` table.

    ``tilt`` is the smallest angle to the mount face over the symmetry
    variants, realised by ``tilt_variant`` about the direction ``tilt_axis``
    (None without a mount); ``polar`` is True when every termination is
    Tasker type III, None without formal charges.
    """

    hkl: tuple[int, int, int]
    d: float = field(metadata=ANGSTROM)
    multiplicity: int = 1
    tilt: float | None = field(default=None, metadata=DEG)
    tilt_variant: tuple[int, int, int] | None = None
    tilt_axis: tuple[int, int, int] | None = None
    mesh: Mesh | None = None
    terminations: tuple[TerminationRef, ...] = ()
    smallest_step: float = field(default=0.0, metadata=ANGSTROM)
    polar: bool | None = None


@dataclass(frozen=True)
class PlanesReport:
    """Result of ``termination planes``: the distinct faces up to ``max_index``."""

    structure: StructureSummary
    mount: tuple[int, int, int] | None
    max_index: int
    faces: tuple[FaceRow, ...]
    charges: ChargeAssignment | None = None


def planes_report(crystal: Crystal, max_index: int = MAX_INDEX, mount=None, charges=None, **termination_options):
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
            FaceRow(
                hkl=f.hkl,
                d=f.d,
                multiplicity=f.multiplicity,
                tilt=f.tilt,
                tilt_variant=f.tilt_variant,
                tilt_axis=f.tilt_axis,
                mesh=f.mesh,
                terminations=tuple(TerminationRef.of(t) for t in ft.terminations),
                smallest_step=ft.smallest_step,
                polar=None if assignment is None else face_is_polar(ft),
            )
        )
    m = None if mount is None else check_hkl(mount, "mount")
    return PlanesReport(summarise_structure(crystal), m, int(max_index), tuple(rows), assignment)


# --------------------------------------------------------------------------- terminations


@dataclass(frozen=True)
class LayerRow:
    """One atomic layer: depth below the highest layer and height in [0, d), with its atoms per surface cell."""

    depth: float = field(metadata=ANGSTROM)
    height: float = field(metadata=ANGSTROM)
    composition: dict[str, int] = field(default_factory=dict)


@dataclass(frozen=True)
class TerminationEntry:
    """A termination with the apparent lattice its topograph shows (default corrugation model).

    The fields of :class:`~termination.surface.terminations.Termination`,
    then ``apparent_lattice`` and its 2D Bravais type.
    """

    id: str
    label: str
    composition: dict[str, int]
    depth: float = field(metadata=ANGSTROM)
    layers: tuple[int, ...] = ()
    cut_height: float = field(default=0.0, metadata=ANGSTROM)
    broken_bonds_per_nm2: float = 0.0
    weighted_bonds_per_nm2: float = 0.0
    equivalent_to: str | None = None
    relation: str | None = None
    apparent_lattice: ApparentLattice | None = None
    lattice_type: str = ""

    @classmethod
    def of(cls, t: Termination, lattice: ApparentLattice) -> TerminationEntry:
        return cls(
            id=t.id,
            label=t.label,
            composition=dict(t.composition),
            depth=t.depth,
            layers=tuple(t.layers),
            cut_height=t.cut_height,
            broken_bonds_per_nm2=t.broken_bonds_per_nm2,
            weighted_bonds_per_nm2=t.weighted_bonds_per_nm2,
            equivalent_to=t.equivalent_to,
            relation=t.relation,
            apparent_lattice=lattice,
            lattice_type=lattice_type(lattice),
        )


@dataclass(frozen=True)
class TerminationsReport:
    """Result of ``termination terminations``: layers, terminations and steps of one face."""

    structure: StructureSummary
    hkl: tuple[int, int, int]
    d: float = field(metadata=ANGSTROM)
    mesh: Mesh | None = None
    layer_tol_angstrom: float = 0.0
    layers: tuple[LayerRow, ...] = ()
    terminations: tuple[TerminationEntry, ...] = ()
    steps: tuple[StepHeights, ...] = ()


def terminations_report(crystal: Crystal, hkl, **options) -> TerminationsReport:
    """Layers, terminations and steps of one face as a :class:`TerminationsReport`.

    ``options`` go to :func:`termination.surface.terminations.face_terminations`.
    """
    ft = face_terminations(crystal, hkl, **options)
    layers = tuple(LayerRow(depth=la.depth, height=la.height, composition=dict(la.composition)) for la in ft.layers)
    entries = tuple(TerminationEntry.of(t, termination_corrugation(ft, t.id).apparent_lattice) for t in ft.terminations)
    return TerminationsReport(
        structure=summarise_structure(crystal),
        hkl=ft.face.hkl,
        d=ft.d,
        mesh=ft.face.mesh,
        layer_tol_angstrom=ft.layer_tol_angstrom,
        layers=layers,
        terminations=entries,
        steps=ft.steps,
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
    crystal: Crystal,
    plane=None,
    max_index: int | None = None,
    *,
    charges=None,
    max_cell: int = MAX_CELL,
    use_pymatgen: bool = True,
    termination_options=None,
    **tolerances,
) -> PolarityReport:
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
    assert assignment is not None  # required=True raises instead
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
    """One termination's row of the ``corrugation`` report, or one of its reconstruction cells.

    The pattern's fields, with the termination id, the Bravais type of the
    apparent lattice and, for the 1x1 row, its reconstruction cells
    (``cell`` None for 1x1).
    """

    id: str
    label: str
    cell: str | None
    apparent_lattice: ApparentLattice
    lattice_type: str
    neighbour_distance: float = field(metadata=ANGSTROM)
    row_spacings: tuple[float, ...] = field(default=(), metadata=ANGSTROM)
    row_angles: tuple[float, ...] = field(default=(), metadata=DEG)
    spots: tuple[Spot, ...] = ()
    reconstructions: tuple[TerminationCorrugation, ...] = ()


def _corrugation_row(key: str, p: CorrugationPattern, reconstructions=()) -> TerminationCorrugation:
    return TerminationCorrugation(
        id=key,
        label=p.label,
        cell=p.cell,
        apparent_lattice=p.apparent_lattice,
        lattice_type=lattice_type(p.apparent_lattice),
        neighbour_distance=p.neighbour_distance,
        row_spacings=tuple(p.row_spacings),
        row_angles=tuple(p.row_angles),
        spots=tuple(p.spots),
        reconstructions=tuple(reconstructions),
    )


@dataclass(frozen=True)
class CorrugationReport:
    """Result of ``termination corrugation``: what a topograph of each termination of one face shows."""

    structure: StructureSummary
    hkl: tuple[int, int, int]
    mesh: Mesh
    visibility: Visibility
    terminations: tuple[TerminationCorrugation, ...]
    notes: tuple[str, ...]


def corrugation_report(
    crystal: Crystal,
    hkl,
    termination: str | None = None,
    *,
    visibility: Visibility | None = None,
    reconstructions: bool = True,
    charges=None,
    max_cell: int = MAX_CELL,
) -> CorrugationReport:
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
        hkl=ft.face.hkl,
        mesh=ft.face.mesh,
        visibility=v,
        terminations=tuple(rows),
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------- image


@dataclass(frozen=True)
class ImageSource:
    """The height map analysed: file, channel, size in pixels, pixel size, height range and calibration."""

    file: str
    nx: int
    ny: int
    pixel_size_x: float = field(metadata=ANGSTROM)
    pixel_size_y: float = field(metadata=ANGSTROM)
    height_min: float = field(default=0.0, metadata=ANGSTROM)
    height_max: float = field(default=0.0, metadata=ANGSTROM)
    channel: str | None = None
    direction: str | None = None
    scan_direction: str | None = None
    calibration: str = "arguments"


@dataclass(frozen=True)
class ImageReport:
    """Result of ``termination image``: the source and what its analysis found, with the files written."""

    source: ImageSource
    analysis: HeightMapAnalysis
    written: tuple[str, ...] = ()


def _source(path, hm) -> ImageSource:
    import numpy as np

    ny, nx = hm.shape
    finite = hm.heights[np.isfinite(hm.heights)]
    return ImageSource(
        file=str(path),
        nx=nx,
        ny=ny,
        pixel_size_x=hm.pixel_size[0],
        pixel_size_y=hm.pixel_size[1],
        height_min=float(finite.min()),
        height_max=float(finite.max()),
        channel=hm.channel,
        direction=hm.direction,
        scan_direction=hm.scan_direction,
        calibration=hm.calibration,
    )


def _image_comment(source: ImageSource, analysis) -> str:
    """Comment lines of files written from an image: the source, what was not determined, and the notes."""
    channel = (
        ""
        if source.channel is None
        else f", channel {source.channel}" + (f" {source.direction}" if source.direction else "")
    )
    lines = [
        f"from {source.file} ({source.nx} x {source.ny} px, pixel {source.pixel_size_x:g} x "
        f"{source.pixel_size_y:g} Å{channel}; calibration from {source.calibration})"
    ]
    if analysis.undetermined:
        lines.append("not determined: " + ", ".join(analysis.undetermined))
    lines += list(analysis.notes)
    return "\n".join(lines)


def image_report(
    path,
    *,
    pixel_size=None,
    z_unit=None,
    channel=None,
    mount=None,
    out=None,
    steps_out=None,
    force: bool = False,
    progress=None,
    **parameters,
) -> ImageReport:
    """Analyse a height-map file, write the requested outputs, and report.

    Parameters
    ----------
    path : path
        Height map (see :func:`termination.imaging.reading.read_heightmap`).
    pixel_size, z_unit : str, optional
        Calibration; default from the sidecar file, then from the file's metadata.
    channel : str, optional
        Channel of an instrument file.
    mount : 3 ints, optional
        Mount face, written to the measurement file.
    out, steps_out : path, optional
        Measurement file and step list to write. Neither is written when it
        would be empty: no step found, or nothing measured at all
        (:class:`~termination.errors.MeasurementError` with the reason).
    force : bool
        Overwrite existing outputs.
    progress : callable, optional
        ``progress(fraction, stage)``.
    **parameters
        Analysis settings (:class:`termination.imaging.parameters.ImageParameters`).

    Returns
    -------
    ImageReport
    """
    from termination.errors import MeasurementError
    from termination.identification.measurement import (
        Measurement,
        format_measurement,
        format_steps,
        measurement_from_image,
    )
    from termination.imaging.analysis import analyse_heightmap
    from termination.imaging.reading import read_heightmap, sidecar_path
    from termination.outputs import check_outputs, write_text

    check_outputs([out, steps_out], [path, sidecar_path(path)], force=force, error=MeasurementError)
    mount = None if mount is None else Measurement(mount=tuple(mount)).mount  # a bad mount fails before the work
    hm = read_heightmap(path, pixel_size=pixel_size, z_unit=z_unit, channel=channel)
    analysis = analyse_heightmap(hm.heights, hm.pixel_size, progress=progress, **parameters)
    source = _source(path, hm)
    comment = _image_comment(source, analysis)
    reasons = "; ".join(n for n in analysis.notes if "not determined" in n or n.startswith(("no ", "one ")))
    texts = []
    if out:
        measured = measurement_from_image(analysis, mount=mount)
        if measured.tilt is None and not measured.spacings and not measured.steps:
            raise MeasurementError(f"nothing measured in {path} ({reasons or 'see the notes'}): {out} not written")
        texts.append((out, format_measurement(measured, comment=comment)))
    if steps_out:
        steps = measurement_from_image(analysis).steps
        if not steps:
            raise MeasurementError(
                f"no step heights found in {path} ({reasons or 'one terrace'}): {steps_out} not written"
            )
        texts.append((steps_out, format_steps(steps, comment=comment)))
    for target, text in texts:  # every output checked and formatted before the first is written
        write_text(target, text, force=force, error=MeasurementError)
    return ImageReport(source=source, analysis=analysis, written=tuple(str(t) for t, _ in texts))


def image_measurement(path, *, pixel_size=None, z_unit=None, channel=None, progress=None, **parameters):
    """What a height-map file measures, for ``termination match --image``.

    Returns
    -------
    (Measurement, tuple of str)
        The measurement (:func:`termination.identification.measurement.measurement_from_image`)
        and lines that say what was measured and what was not, for the report.
    """
    from termination.identification.measurement import measurement_from_image
    from termination.imaging.analysis import analyse_heightmap
    from termination.imaging.reading import read_heightmap

    hm = read_heightmap(path, pixel_size=pixel_size, z_unit=z_unit, channel=channel)
    analysis = analyse_heightmap(hm.heights, hm.pixel_size, progress=progress, **parameters)
    m = measurement_from_image(analysis)
    source = _source(path, hm)
    parts = []
    if m.tilt is not None:
        parts.append(f"terrace tilt {m.tilt}°")
    if m.spacings:
        parts.append("spacings " + ", ".join(str(v) for v in m.spacings) + " Å")
    if m.row_angle is not None:
        parts.append(f"row angle {m.row_angle}°")
    if m.steps:
        parts.append("steps " + ", ".join(str(v) for v in m.steps) + " Å")
    lines = [
        f"Measured on {source.file} ({source.nx} × {source.ny} px, calibration from {source.calibration}): "
        + ("; ".join(parts) if parts else "nothing")
        + ("" if not analysis.undetermined else "; not determined: " + ", ".join(analysis.undetermined))
        + "; command-line values override these."
    ]
    lines += [n for n in analysis.notes if "not determined" in n or n.startswith(("no ", "one ", "drift"))]
    return m, tuple(lines)


# --------------------------------------------------------------------------- commands


def command_reports() -> dict[str, type]:
    """Command name -> the record type its ``--json`` serialises (imports the imaging layer)."""
    from termination.identification.likelihood import MatchReport

    return {
        "structures": StructuresReport,
        "planes": PlanesReport,
        "terminations": TerminationsReport,
        "polarity": PolarityReport,
        "corrugation": CorrugationReport,
        "match": MatchReport,
        "image": ImageReport,
    }
