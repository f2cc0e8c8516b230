"""Command reports: the record each command of the command line shows, and the builder that makes it.

Every command calls one builder here and gets one frozen dataclass back; the
table (:mod:`termination.tables`) and the ``--json`` output
(:mod:`termination.serialise`) are two renderings of the same record.
Builders combine the layers below; they hold no computation of their own.
:func:`command_reports` names the record type of every command, from which
the JSON Schemas are generated.
"""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, ClassVar, SupportsFloat, Unpack

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.lattice2d import CellSpec, cell_matrix, cell_notation, check_cells
from termination.bulk.charges import ChargeAssignment, with_formal_charges
from termination.bulk.crystal import Crystal
from termination.bulk.summary import StructureSummary, summarise_structure
from termination.defaults import MAX_CELL, MAX_INDEX, SLAB_LAYERS, SLAB_VACUUM_ANGSTROM
from termination.errors import PlaneError
from termination.surface.cleavage import cleavage_cost, cleavage_ranks
from termination.surface.corrugation import (
    ApparentLattice,
    CorrugationPattern,
    Spot,
    Visibility,
    cell_corrugation,
    lattice_type,
    reconstruction_corrugation,
    superpose_domains,
    termination_corrugation,
)
from termination.surface.domains import face_point_group
from termination.surface.faces import Face, Mesh, distinct_faces, face_geometry, face_index
from termination.surface.faces import tilt_window as window_variants
from termination.surface.miller import hkl_text
from termination.surface.polarity import (
    FacePolarity,
    PolarityTolerances,
    TaskerType,
    face_is_polar,
    face_polarity,
    termination_polarity,
)
from termination.surface.reconstructions import CRITERION, Matrix2, Reconstruction, check_max_cell
from termination.surface.slab import SlabDescription
from termination.surface.steps import StepHeights
from termination.surface.terminations import Termination, TerminationRef, face_terminations
from termination.tabular import Tabular
from termination.units import ANGSTROM, DEG, EV, PER_NM2, SECOND

if TYPE_CHECKING:
    from termination.identification.candidates import TerminationOptions
    from termination.identification.measurement import Measurement
    from termination.imaging.analysis import HeightMapAnalysis
    from termination.imaging.reading import HeightMap

__all__ = [
    "CorrugationReport",
    "FaceRow",
    "ImageReport",
    "ImageSource",
    "LayerRow",
    "PlanesReport",
    "PolarityReport",
    "PrototypeRow",
    "ScreenReport",
    "ScreenRow",
    "ScreenTermination",
    "SlabReport",
    "StructureSummary",
    "StructuresReport",
    "TerminationCorrugation",
    "TerminationEntry",
    "TerminationsReport",
    "WindowRow",
    "cell_text",
    "command_reports",
    "corrugation_report",
    "image_report",
    "planes_report",
    "polarity_report",
    "screen_rows",
    "select_reconstruction",
    "slab_report",
    "structures_report",
    "summarise_structure",
    "terminations_report",
]


# --------------------------------------------------------------------------- structures


@dataclass(frozen=True)
class PrototypeRow:
    """One built-in prototype: its spec name, the roles of its elements, crystal system, space group and sites.

    ``lattice_constants`` names the lengths it takes ('a' or 'a, c');
    ``parameters`` are its free positional parameters (fractional) with their
    generic defaults; ``tabulated`` lists the compounds whose lattice
    constants and free parameters are built in.
    """

    name: str
    elements: tuple[str, ...]
    crystal_system: str
    spacegroup: str
    spacegroup_number: int
    sites: str
    lattice_constants: str
    parameters: dict[str, float]
    example: str
    description: str
    tabulated: tuple[str, ...] = ()


@dataclass(frozen=True)
class StructuresReport(Tabular):
    """Result of ``termination structures``."""

    _tables: ClassVar[tuple[str, ...]] = ("prototypes",)

    prototypes: tuple[PrototypeRow, ...]


def structures_report() -> StructuresReport:
    """The built-in prototypes (:data:`termination.structures.PROTOTYPES`)."""
    from termination.structures import PROTOTYPES, TABULATED

    return StructuresReport(
        tuple(
            PrototypeRow(
                name=p.name,
                elements=tuple(p.roles),
                crystal_system=p.crystal_system,
                spacegroup=p.spacegroup,
                spacegroup_number=p.number,
                sites=p.wyckoff,
                lattice_constants="a" if p.lattice == "cubic" else "a, c",
                parameters={q.name: q.default for q in p.parameters},
                example=p.example,
                description=p.description,
                tabulated=tuple(",".join(els) for (name, els) in TABULATED if name == p.name),
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
class WindowRow:
    """One variant of a face inside the tilt window of ``planes --tilt-window``.

    The face ``hkl`` with its spacing ``d``; the variant ``tilt_variant``
    at ``tilt`` to the mount face about ``tilt_axis``; the face's
    ``cleavage_rank`` among all faces of the report (1 cleaves most easily:
    the lowest weighted broken-bond density of its cheapest cut,
    ``weighted_bonds_per_nm2``) and ``polar`` as in :class:`FaceRow`.
    """

    hkl: tuple[int, int, int]
    tilt_variant: tuple[int, int, int]
    tilt: float = field(metadata=DEG)
    tilt_axis: tuple[int, int, int] | None = None
    d: float = field(default=0.0, metadata=ANGSTROM)
    cleavage_rank: int = 0
    weighted_bonds_per_nm2: float = field(default=0.0, metadata=PER_NM2)
    polar: bool | None = None


@dataclass(frozen=True)
class PlanesReport(Tabular):
    """Result of ``termination planes``: the distinct faces up to ``max_index``.

    With a tilt window, ``window`` lists every variant of every face whose
    tilt to the mount lies in ``tilt_window`` (degrees), sorted by tilt.
    """

    _tables: ClassVar[tuple[str, ...]] = ("faces", "window")

    structure: StructureSummary
    mount: tuple[int, int, int] | None
    max_index: int
    faces: tuple[FaceRow, ...]
    charges: ChargeAssignment | None = None
    tilt_window: tuple[float, float] | None = field(default=None, metadata=DEG)
    window: tuple[WindowRow, ...] = ()


def planes_report(
    crystal: Crystal,
    max_index: int = MAX_INDEX,
    mount: Iterable[SupportsFloat] | None = None,
    charges: Mapping[str, float] | None = None,
    tilt_window: Iterable[SupportsFloat] | None = None,
    **termination_options: Unpack[TerminationOptions],
) -> PlanesReport:
    """Distinct faces of ``crystal`` up to ``max_index`` as a :class:`PlanesReport`.

    ``charges`` (element -> formal charge), else the file's charges, else the
    light guess of :func:`termination.bulk.charges.assign_charges` (never
    pymatgen) mark the polar faces; without any, ``polar`` is None.
    ``tilt_window`` (min, max) in degrees, with a ``mount``, lists every
    variant of every face inside it (:func:`termination.surface.faces.tilt_window`)
    with the face's cleavage rank (:func:`termination.surface.cleavage.cleavage_ranks`).
    ``termination_options`` go to
    :func:`termination.surface.terminations.face_terminations`.
    """
    if tilt_window is not None and mount is None:
        raise PlaneError("a tilt window needs the mount face (--mount H K L)")
    crystal, assignment = with_formal_charges(crystal, charges)
    faces = distinct_faces(crystal, max_index=max_index, mount=mount)
    rows = []
    costs = []
    for f in faces:
        ft = face_terminations(crystal, f.hkl, face=f, **termination_options)
        costs.append(cleavage_cost(ft))
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
    m = None if mount is None else face_index(crystal, mount, "mount")
    window: tuple[WindowRow, ...] = ()
    bounds = None
    if tilt_window is not None and mount is not None:  # a window without a mount was refused above
        lo, hi = (float(v) for v in tilt_window)
        ranks = cleavage_ranks(costs)
        by_face = {row.hkl: (row, int(rank), cost) for row, rank, cost in zip(rows, ranks, costs)}
        window = tuple(
            WindowRow(
                hkl=v.hkl,
                tilt_variant=v.tilt_variant,
                tilt=v.tilt,
                tilt_axis=v.tilt_axis,
                d=by_face[v.hkl][0].d,
                cleavage_rank=by_face[v.hkl][1],
                weighted_bonds_per_nm2=by_face[v.hkl][2],
                polar=by_face[v.hkl][0].polar,
            )
            for v in window_variants(crystal, mount, lo, hi, faces=faces)
        )
        bounds = (lo, hi)
    return PlanesReport(summarise_structure(crystal), m, int(max_index), tuple(rows), assignment, bounds, window)


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
    van_der_waals: bool = False
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
            van_der_waals=t.van_der_waals,
            apparent_lattice=lattice,
            lattice_type=lattice_type(lattice),
        )


@dataclass(frozen=True)
class TerminationsReport(Tabular):
    """Result of ``termination terminations``: layers, terminations and steps of one face."""

    _tables: ClassVar[tuple[str, ...]] = ("terminations", "layers", "steps")

    structure: StructureSummary
    hkl: tuple[int, int, int]
    d: float = field(metadata=ANGSTROM)
    mesh: Mesh | None = None
    layer_tol_angstrom: float = 0.0
    layers: tuple[LayerRow, ...] = ()
    terminations: tuple[TerminationEntry, ...] = ()
    steps: tuple[StepHeights, ...] = ()


def terminations_report(
    crystal: Crystal, hkl: Iterable[SupportsFloat], **options: Unpack[TerminationOptions]
) -> TerminationsReport:
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
class PolarityReport(Tabular):
    """Result of ``termination polarity``."""

    _tables: ClassVar[tuple[str, ...]] = ("faces.terminations", "faces")

    structure: StructureSummary
    charges: ChargeAssignment
    max_cell: int
    criterion: str
    faces: tuple[FacePolarity, ...]


def polarity_report(
    crystal: Crystal,
    plane: Sequence[int] | None = None,
    max_index: int | None = None,
    *,
    charges: Mapping[str, float] | None = None,
    max_cell: int = MAX_CELL,
    use_pymatgen: bool = True,
    termination_options: Mapping[str, Any] | None = None,
    progress: Callable[[float, str], object] | None = None,
    **tolerances: Unpack[PolarityTolerances],
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
    progress : callable, optional
        ``progress(fraction, stage)``, called before each face and at the end:
        with ``max_index`` 12 and ``max_cell`` 12 a run takes minutes.
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
    faces: tuple[Face, ...]
    if plane is not None:
        faces = (face_geometry(charged, face_index(charged, plane)),)
    else:
        faces = distinct_faces(charged, max_index=MAX_INDEX if max_index is None else max_index)
    rows = []
    for done, face in enumerate(faces):
        if progress is not None:
            progress(done / len(faces), f"face {hkl_text(face.hkl)} ({done + 1} of {len(faces)})")
        ft = face_terminations(charged, face.hkl, face=face, **dict(termination_options or {}))
        rows.append(face_polarity(charged, ft, max_cell=max_cell, **tolerances))
    if progress is not None:
        progress(1.0, f"{len(faces)} faces")
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
    """One termination's row of the ``corrugation`` report, or one of its cells.

    The pattern's fields, with the termination id, the Bravais type of the
    apparent lattice and, for the 1x1 row, its reconstruction cells (those
    the polarity step proposes) and the cells given with ``--cell``
    (``cell`` None for 1x1).  A cell's ``matrix`` holds its rows in mesh
    units (always given; ``cell`` is its Wood notation where that is
    standard), its ``spots`` are the union over its rotational ``domains``,
    and ``domain_lattice`` is the apparent lattice of that union.
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
    matrix: tuple[tuple[int, int], tuple[int, int]] | None = None
    domains: tuple[str, ...] = ()
    domain_lattice: ApparentLattice | None = None
    reconstructions: tuple[TerminationCorrugation, ...] = ()
    cells: tuple[TerminationCorrugation, ...] = ()


def _corrugation_row(
    key: str,
    p: CorrugationPattern,
    reconstructions: Iterable[TerminationCorrugation] = (),
    cells: Iterable[TerminationCorrugation] = (),
    matrix: ArrayLike | None = None,
) -> TerminationCorrugation:
    return TerminationCorrugation(
        id=key,
        label=p.label,
        cell=p.cell,
        matrix=None if matrix is None else _matrix2(matrix),
        apparent_lattice=p.apparent_lattice,
        lattice_type=lattice_type(p.apparent_lattice),
        neighbour_distance=p.neighbour_distance,
        row_spacings=tuple(p.row_spacings),
        row_angles=tuple(p.row_angles),
        spots=tuple(p.spots),
        domains=tuple(p.domains),
        domain_lattice=p.domain_lattice,
        reconstructions=tuple(reconstructions),
        cells=tuple(cells),
    )


def _matrix2(matrix: ArrayLike) -> tuple[tuple[int, int], tuple[int, int]]:
    m = np.asarray(matrix, dtype=np.int64)
    return (int(m[0, 0]), int(m[0, 1])), (int(m[1, 0]), int(m[1, 1]))


def _domains_row(
    key: str, p: CorrugationPattern, matrix: ArrayLike, rotations: ArrayLike, mesh: ArrayLike
) -> TerminationCorrugation:
    """The row of a cell whose pattern ``p`` is shown with its rotational domains superposed."""
    return _corrugation_row(key, superpose_domains(p, matrix, rotations, mesh), matrix=matrix)


@dataclass(frozen=True)
class CorrugationReport(Tabular):
    """Result of ``termination corrugation``: what a topograph of each termination of one face shows."""

    _tables: ClassVar[tuple[str, ...]] = ("terminations", "terminations.reconstructions", "terminations.spots")

    structure: StructureSummary
    hkl: tuple[int, int, int]
    mesh: Mesh
    visibility: Visibility
    terminations: tuple[TerminationCorrugation, ...]
    notes: tuple[str, ...]


def corrugation_report(
    crystal: Crystal,
    hkl: Iterable[SupportsFloat],
    termination: str | None = None,
    *,
    visibility: Visibility | None = None,
    reconstructions: bool = True,
    charges: Mapping[str, float] | None = None,
    max_cell: int = MAX_CELL,
    cells: Iterable[str | CellSpec] = (),
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
    cells : sequence of str or CellSpec
        Cells given by the user (Wood notation or a matrix,
        :func:`termination.algebra.lattice2d.parse_cell`), shown for every
        termination with the default modulation of
        :func:`termination.surface.corrugation.cell_corrugation`.

    Returns
    -------
    CorrugationReport
        Every cell with its rotational domains under the face's point group
        superposed (:func:`termination.surface.corrugation.superpose_domains`).
    """
    v = Visibility() if visibility is None else visibility
    specs = check_cells(cells)
    notes = []
    assignment = None
    if reconstructions:
        crystal, assignment = with_formal_charges(crystal, charges)
        if assignment is None:
            notes.append("no formal charges known (give them with --charge EL=Q): no reconstruction cells")
    ft = face_terminations(crystal, hkl)
    mesh = ft.atoms.mesh_inplane
    user = []
    for spec in specs:
        matrix = cell_matrix(spec, mesh)
        if matrix is None:
            m = ft.face.mesh
            raise PlaneError(
                f"cell {spec.label} is no supercell of the {hkl_text(ft.face.hkl)} mesh "
                f"({m.a:.3f} × {m.b:.3f} Å, {m.gamma:.1f}°); give it as a matrix"
            )
        user.append((spec, matrix))
    rotations = face_point_group(crystal, ft.face)
    keys = [t.id for t in ft.terminations] if termination is None else [ft.termination(termination).id]
    rows = []
    for key in keys:
        p = termination_corrugation(ft, key, v, crystal=crystal)
        recs: tuple[TerminationCorrugation, ...] = ()
        if assignment is not None:
            records = termination_polarity(crystal, ft, key, max_cell=max_cell).reconstructions
            recs = tuple(
                _domains_row(key, reconstruction_corrugation(ft, key, r, v, crystal=crystal), r.matrix, rotations, mesh)
                for r in records
            )
        given = tuple(
            _domains_row(
                key,
                cell_corrugation(ft, key, matrix, v, crystal=crystal, cell=cell_notation(matrix, mesh)),
                matrix,
                rotations,
                mesh,
            )
            for _, matrix in user
        )
        rows.append(_corrugation_row(key, p, recs, given))
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
class ImageReport(Tabular):
    """Result of ``termination image``: the source and what its analysis found, with the files written."""

    _tables: ClassVar[tuple[str, ...]] = ("analysis.steps",)

    source: ImageSource
    analysis: HeightMapAnalysis
    written: tuple[str, ...] = ()


def _source(path: str | os.PathLike[str], hm: HeightMap) -> ImageSource:
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


def _image_comment(source: ImageSource, analysis: HeightMapAnalysis) -> str:
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
    path: str | os.PathLike[str],
    *,
    pixel_size: Any = None,
    z_unit: Any = None,
    channel: str | None = None,
    mount: Iterable[int] | None = None,
    out: str | os.PathLike[str] | None = None,
    steps_out: str | os.PathLike[str] | None = None,
    force: bool = False,
    progress: Callable[[float, str], object] | None = None,
    **parameters: Any,
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


def image_measurement(
    path: str | os.PathLike[str],
    *,
    pixel_size: Any = None,
    z_unit: Any = None,
    channel: str | None = None,
    progress: Callable[[float, str], object] | None = None,
    **parameters: Any,
) -> tuple[Measurement, tuple[str, ...]]:
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


# --------------------------------------------------------------------------- screen


@dataclass(frozen=True)
class ScreenTermination:
    """A termination of a screened face: its Tasker type and best compensating cell.

    ``tasker_type`` and ``compensation`` (fraction of the top sites to
    remove, < 0, or add, > 0) are None without formal charges; ``cell`` is
    the best reconstruction cell of a polar termination (Wood notation, or
    the matrix as '(2 1 / 0 2)'), ``cell_matrix`` its matrix in mesh units
    and ``score`` its criterion value (:data:`termination.surface.reconstructions.CRITERION`).
    """

    id: str
    label: str
    tasker_type: TaskerType | None = None
    compensation: float | None = None
    cell: str | None = None
    cell_matrix: Matrix2 | None = None
    score: float | None = field(default=None, metadata=EV)


@dataclass(frozen=True)
class ScreenRow:
    """One row of ``termination screen``: a face of a structure, or the error that stopped the structure.

    ``cleavage_rank`` is 1 for the face that cleaves most easily (lowest
    weighted broken-bond density of its cheapest cut,
    ``weighted_bonds_per_nm2``; faces within
    :data:`~termination.defaults.CLEAVAGE_TIE_PER_NM2` share a rank);
    ``termination_count`` counts every termination (as ``planes``), and
    ``terminations`` lists the symmetry-inequivalent ones with their
    polarity (as ``polarity``).  ``formal_charges`` says which charges were
    used ('Na +1, Cl -1 (guess)'), None when none are known.  An error row
    has only ``structure`` and ``error``.
    """

    structure: str
    formula: str | None = None
    spacegroup_number: int | None = None
    hkl: tuple[int, int, int] | None = None
    d: float | None = field(default=None, metadata=ANGSTROM)
    multiplicity: int | None = None
    cleavage_rank: int | None = None
    weighted_bonds_per_nm2: float | None = field(default=None, metadata=PER_NM2)
    termination_count: int | None = None
    smallest_step: float | None = field(default=None, metadata=ANGSTROM)
    polar: bool | None = None
    terminations: tuple[ScreenTermination, ...] = ()
    formal_charges: str | None = None
    error: str | None = None


def cell_text(r: Reconstruction) -> str:
    """A reconstruction cell as its Wood notation, or its matrix as '(2 1 / 0 2)'."""
    (a, b), (c, d) = r.matrix
    return r.wood or f"({a} {b} / {c} {d})"


def screen_rows(
    crystal: Crystal,
    structure: str,
    *,
    max_index: int = MAX_INDEX,
    max_cell: int = MAX_CELL,
    use_pymatgen: bool = False,
    termination_options: Mapping[str, Any] | None = None,
) -> tuple[ScreenRow, ...]:
    """The rows of one structure in ``termination screen``: one per distinct face up to ``max_index``.

    Parameters
    ----------
    crystal : Crystal
    structure : str
        Name of the structure in the rows (its file).
    max_index : int
    max_cell : int
        Largest reconstruction cell searched for polar terminations.
    use_pymatgen : bool
        Allow pymatgen's oxidation-state guess when the file and the light
        guess give no charges (slow).
    termination_options : mapping, optional
        Passed to :func:`termination.surface.terminations.face_terminations`.

    Returns
    -------
    tuple of ScreenRow
        Faces in the order of :func:`termination.surface.faces.distinct_faces`.
        The face columns equal those of :func:`planes_report`, the
        terminations' polarity that of :func:`polarity_report` with the same
        charges.
    """
    max_cell = check_max_cell(max_cell)
    charged, assignment = with_formal_charges(crystal, None, use_pymatgen=use_pymatgen)
    faces = distinct_faces(charged, max_index=max_index)
    found = []
    for face in faces:
        ft = face_terminations(charged, face.hkl, face=face, **dict(termination_options or {}))
        entries: list[ScreenTermination] = []
        polar = None
        if assignment is None:
            entries = [ScreenTermination(t.id, t.label) for t in ft.terminations if t.equivalent_to is None]
        else:
            fp = face_polarity(charged, ft, max_cell=max_cell)
            polar = fp.polar
            for tp in fp.terminations:
                best = tp.reconstructions[0] if tp.reconstructions else None
                entries.append(
                    ScreenTermination(
                        id=tp.id,
                        label=tp.label,
                        tasker_type=tp.tasker_type,
                        compensation=tp.compensation,
                        cell=None if best is None else cell_text(best),
                        cell_matrix=None if best is None else best.matrix,
                        score=None if best is None else best.score,
                    )
                )
        found.append((face, ft, cleavage_cost(ft), polar, tuple(entries)))
    ranks = cleavage_ranks([cost for _, _, cost, _, _ in found])
    charges_text = None if assignment is None else f"{assignment.text} ({assignment.source})"
    return tuple(
        ScreenRow(
            structure=structure,
            formula=crystal.formula,
            spacegroup_number=crystal.spacegroup_number,
            hkl=face.hkl,
            d=face.d,
            multiplicity=face.multiplicity,
            cleavage_rank=int(rank),
            weighted_bonds_per_nm2=cost,
            termination_count=len(ft.terminations),
            smallest_step=ft.smallest_step,
            polar=polar,
            terminations=entries,
            formal_charges=charges_text,
        )
        for (face, ft, cost, polar, entries), rank in zip(found, ranks)
    )


@dataclass(frozen=True)
class ScreenReport(Tabular):
    """Result of ``termination screen``: the rows of this run (when not written to a file) and its counts.

    ``structures`` were found, ``skipped`` already in the output (resumed),
    ``screened`` done in this run, of which ``failed`` gave an error row;
    ``rows`` counts the rows written (or listed in ``results``);
    ``wall_time`` is the run's duration in seconds.
    """

    _tables: ClassVar[tuple[str, ...]] = ("results",)

    structures: int
    skipped: int
    screened: int
    failed: int
    rows: int
    out: str | None
    format: str | None
    max_index: int
    max_cell: int
    workers: int
    wall_time: float = field(metadata=SECOND)
    results: tuple[ScreenRow, ...] = ()


# --------------------------------------------------------------------------- slab


@dataclass(frozen=True)
class SlabReport(Tabular):
    """Result of ``termination slab``: the slab built, what it holds, and the file written.

    ``cell`` is the reconstruction cell applied (None for 1×1), with its
    ``cell_matrix`` in mesh units, the ``changed`` sites per surface and
    ``mode`` ('remove' or 'add'); ``requested_symmetric`` says whether both
    surfaces were asked to show the termination, ``slab.symmetric`` whether
    they are related by symmetry.
    """

    _tables: ClassVar[tuple[str, ...]] = ()

    structure: StructureSummary
    hkl: tuple[int, int, int]
    termination: TerminationRef
    layers: int
    requested_symmetric: bool
    cell: str | None
    cell_matrix: Matrix2 | None
    changed: int
    mode: str | None
    slab: SlabDescription
    charges: ChargeAssignment | None
    format: str | None
    written: tuple[str, ...]
    notes: tuple[str, ...]


def _cell_key(text: str) -> str:
    """A Wood notation reduced to compare typed and printed forms: '(sqrt3 x sqrt3)R30' ~ '(√3×√3)R30°'."""
    t = text.strip().lower().replace(" ", "").replace("×", "x").replace("√", "sqrt").replace("°", "")
    t = t.replace("deg", "").replace("p(", "(")
    return t if t.startswith(("(", "c(")) else f"({t})"


def select_reconstruction(
    reconstructions: tuple[Reconstruction, ...], cell: str | None = None, pattern: int | None = None
) -> Reconstruction:
    """The reconstruction named by ``cell`` and ``pattern`` among ``reconstructions`` (best first).

    Parameters
    ----------
    reconstructions : tuple of Reconstruction
        As :func:`termination.surface.polarity.termination_polarity` lists them.
    cell : str, optional
        Wood notation as ``polarity`` prints it ('(2×1)', 'c(4×2)',
        '(√3×√3)R30°'; ASCII '2x1', '(sqrt3xsqrt3)R30' too) or the matrix as
        four integers ('2 1 0 2', rows first).
    pattern : int, optional
        1 for the best of the cells left, 2 for the next, ... (default 1).

    Returns
    -------
    Reconstruction
    """
    import re

    options = tuple(reconstructions)
    listed = ", ".join(cell_text(r) for r in options) or "none"
    if cell is not None:
        numbers = re.findall(r"-?\d+", cell)
        if not re.search(r"[a-z√]", cell.lower()) and len(numbers) == 4:
            m = tuple(int(v) for v in numbers)
            key = ((m[0], m[1]), (m[2], m[3]))
            options = tuple(r for r in options if key in (r.matrix, r.hnf))
        else:
            options = tuple(r for r in options if r.wood is not None and _cell_key(r.wood) == _cell_key(cell))
        if not options:
            raise PlaneError(f"no reconstruction cell {cell!r} for this termination; the cells are: {listed}")
    n = 1 if pattern is None else pattern
    if int(n) != n or not 1 <= n <= len(options):
        raise PlaneError(f"pattern must be from 1 to {len(options)} (cells: {listed}), got {pattern}")
    return options[int(n) - 1]


def slab_report(
    crystal: Crystal,
    hkl: Iterable[SupportsFloat],
    termination: str,
    *,
    cell: str | None = None,
    pattern: int | None = None,
    layers: int = SLAB_LAYERS,
    vacuum_angstrom: float = SLAB_VACUUM_ANGSTROM,
    symmetric: bool = False,
    charges: Mapping[str, float] | None = None,
    max_cell: int = MAX_CELL,
    out: str | os.PathLike[str] | None = None,
    fmt: str | None = None,
    force: bool = False,
    inputs: Iterable[str | os.PathLike[str] | None] = (),
    termination_options: Mapping[str, Any] | None = None,
) -> SlabReport:
    """Build a slab of one termination (:func:`termination.surface.slab.build_slab`), describe it, write it.

    Parameters
    ----------
    crystal : Crystal
    hkl : 3 ints
    termination : str
        Id or label.
    cell, pattern : str, int, optional
        Reconstruction to apply (:func:`select_reconstruction` among the
        cells of :func:`termination.surface.polarity.termination_polarity`);
        ``pattern`` alone takes the pattern-th cell of the list.
    layers : int
        Repeat units (periods d).
    vacuum_angstrom : float
    symmetric : bool
    charges : mapping, optional
        Element -> formal charge; else the file's, else a guess (pymatgen's
        too when a cell is asked for).  Without charges the slab has no
        dipole and no cell can be chosen.
    max_cell : int
        Largest reconstruction cell searched.
    out : path, optional
        File to write through ASE (format from ``fmt`` or the file name).
    fmt : str, optional
        ASE format name ('cif', 'vasp', 'extxyz', ...).
    force : bool
        Overwrite an existing ``out``.
    inputs : iterable of path
        Files that must not be overwritten (the structure file).
    termination_options : mapping, optional
        Passed to :func:`termination.surface.terminations.face_terminations`.

    Returns
    -------
    SlabReport
    """
    from termination.outputs import check_outputs, write_bytes
    from termination.surface.slab import build_slab, check_slab_size, describe_slab, slab_bytes, slab_format

    check_slab_size(layers, vacuum_angstrom)
    check_outputs([out], inputs, force=force, error=PlaneError)
    used_format = None if out is None else slab_format(out, fmt)  # a bad format fails before the work
    wants_cell = cell is not None or pattern is not None
    max_cell = check_max_cell(max_cell)
    charged, assignment = with_formal_charges(crystal, charges, use_pymatgen=wants_cell, required=wants_cell)
    ft = face_terminations(charged, face_index(charged, hkl), **dict(termination_options or {}))
    t = ft.termination(termination)
    notes = []
    rec = None
    if wants_cell:
        tp = termination_polarity(charged, ft, t.id, max_cell=max_cell)
        if not tp.reconstructions:
            why = tp.note or f"it is Tasker type {tp.tasker_type}, nothing to compensate"
            raise PlaneError(f"termination {t.label} of {hkl_text(ft.face.hkl)} has no reconstruction cell: {why}")
        rec = select_reconstruction(tp.reconstructions, cell, pattern)
    elif assignment is not None:
        tp = termination_polarity(None, ft, t.id, with_reconstructions=False)
        if tp.tasker_type == "III":
            notes.append(
                f"{t.label} is polar (Tasker type III): the 1×1 slab carries the dipole of its repeat units; "
                "`termination polarity` lists the compensating cells (--cell, --pattern)"
            )
    atoms = build_slab(
        charged,
        ft.face.hkl,
        t.id,
        layers=layers,
        vacuum_angstrom=vacuum_angstrom,
        symmetric=symmetric,
        reconstruction=rec,
        face=ft,
    )
    description = describe_slab(atoms, charged if assignment is not None else crystal)
    if rec is not None and not symmetric:
        notes.append("only the top surface carries the pattern; the bottom is the bulk-terminated opposite face")
    if symmetric and not description.symmetric:
        notes.append(
            "the bottom shows the same unit, but no operation of the slab maps top onto bottom "
            "(the face and its opposite differ)"
        )
    if description.charge is not None and abs(description.charge) > 1e-6:
        notes.append(f"the slab carries a net formal charge of {description.charge:+g} e per cell")
    written: tuple[str, ...] = ()
    if out is not None and used_format is not None:
        data = slab_bytes(atoms, used_format)
        write_bytes(out, data, force=force, error=PlaneError)
        written = (str(out),)
    return SlabReport(
        structure=summarise_structure(crystal),
        hkl=ft.face.hkl,
        termination=TerminationRef.of(t),
        layers=int(layers),
        requested_symmetric=bool(symmetric),
        cell=None if rec is None else cell_text(rec),
        cell_matrix=None if rec is None else rec.matrix,
        changed=0 if rec is None else rec.changed,
        mode=None if rec is None else rec.mode,
        slab=description,
        charges=assignment,
        format=used_format,
        written=written,
        notes=tuple(notes),
    )


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
        "screen": ScreenReport,
        "slab": SlabReport,
    }
