"""The figures of each command, planned before any is drawn, and writing them to a folder.

A command's figures are first *planned*: a list of :class:`PlannedFigure`,
each a file name, a caption and a function that draws it.  Planning is cheap
(no matplotlib), so the number of files and their names are checked (against
:data:`~termination.defaults.MAX_FIGURES`, existing files and the inputs)
before anything is drawn; then every figure is drawn and rendered in memory,
and only then written (:func:`termination.outputs.write_bytes`), so a failure
leaves no partial set behind.

=============  ===============================================================
command        figures
=============  ===============================================================
planes         poles around the mount (or (0 0 1)); the tilt window shaded
terminations   allowed steps; per inequivalent termination: top view, topograph,
               Fourier pattern
polarity       per face and inequivalent termination: the layer-charge stack
corrugation    per termination and cell: top view, topograph, Fourier pattern
match          poles; measured steps against the top candidates; top view,
               topograph and Fourier pattern of the best candidate (beside or
               over the measured map when an image was analysed); its
               layer-charge stack when charges are known
image          the measured map; its power spectrum with the lattice found;
               the measured steps
=============  ===============================================================
"""

from __future__ import annotations

import functools
import os
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from termination.defaults import FIGURE_DPI, FIGURE_TOP, MAX_CELL, MAX_FIGURES
from termination.errors import TerminationError
from termination.figures.canvas import check_format
from termination.surface.miller import face_text

__all__ = [
    "PlannedFigure",
    "check_plot_folder",
    "corrugation_figures",
    "draw",
    "image_figures",
    "match_figures",
    "planes_figures",
    "polarity_figures",
    "read_measured",
    "terminations_figures",
    "write_figures",
]


@dataclass(frozen=True)
class PlannedFigure:
    """A figure to draw: its file name (no extension), caption and the function that draws it."""

    name: str
    caption: str
    make: Callable[[], Any] = field(repr=False, compare=False)


def _slug(*parts: object) -> str:
    """A file name from parts, None left out: (0, 0, -1) -> '00m1', '(2×1)' -> '2x1', only [A-Za-z0-9_.-] kept.

    >>> _slug((1, -1, 0), "T2", None, "c(4×2)")
    '1m10_T2_c4x2'
    """
    out = []
    for p in parts:
        if p is None:
            continue
        if isinstance(p, tuple):
            out.append("".join(f"m{-v}" if v < 0 else str(v) for v in p))
        else:
            out.append(re.sub(r"[^A-Za-z0-9.-]+", "", str(p).replace("×", "x").replace("√", "r")))
    return "_".join(o for o in out if o)


# --------------------------------------------------------------------------- plans


def planes_figures(report: Any, crystal: Any) -> list[PlannedFigure]:
    """Pole figure of a ``planes`` report (see :func:`termination.figures.poles.pole_figure`)."""
    from termination.figures.poles import pole_figure

    hexagonal = report.structure.hexagonal_axes
    around = face_text(report.mount if report.mount is not None else (0, 0, 1), hexagonal)
    caption = f"Stereographic projection of every face up to index {report.max_index} around {around}"
    if report.tilt_window is not None:
        lo, hi = report.tilt_window
        caption += f"; the tilt window {lo:g}° to {hi:g}° shaded, its easiest-cleaving faces highlighted"
    return [PlannedFigure("poles", caption + ".", lambda: pole_figure(report, crystal))]


class CellChoice:
    """A cell to draw on a termination: a reconstruction of the polarity step, or a cell given without atoms.

    ``name`` is how the reports print it, ``matrix`` its rows in mesh units.
    A reconstruction is given as its record, or as ``find``, a function that
    finds it when first drawn (plans stay cheap); a cell given with
    ``--cell`` has neither and is drawn without changed sites.
    """

    def __init__(
        self,
        name: str,
        matrix: Any = None,
        reconstruction: Any = None,
        find: Callable[[], Any] | None = None,
    ) -> None:
        self.name = name
        self._matrix = None if matrix is None else _matrix(matrix)
        self._record = reconstruction
        self._find = find

    @property
    def matrix(self) -> tuple[tuple[int, int], tuple[int, int]]:
        """Rows in mesh units (a reconstruction found on first use gives its own)."""
        if self._matrix is None:
            self._matrix = _matrix(self.record().matrix)
        return self._matrix

    @property
    def is_reconstruction(self) -> bool:
        return self._record is not None or self._find is not None

    def record(self) -> Any:
        """The reconstruction record (found on first use), or None for a cell given without atoms."""
        if self._record is None and self._find is not None:
            self._record = self._find()
        return self._record


def _matrix(m: Any) -> tuple[tuple[int, int], tuple[int, int]]:
    return ((int(m[0][0]), int(m[0][1])), (int(m[1][0]), int(m[1][1])))


def _cell_pattern(crystal: Any, ft: Any, t_id: str, visibility: Any, cell: CellChoice | None) -> tuple[Any, int]:
    """The pattern a Fourier figure shows (1x1, or the cell's with its domains superposed) and the domain count."""
    from termination.surface.corrugation import (
        Visibility,
        cell_corrugation,
        reconstruction_corrugation,
        superpose_domains,
        termination_corrugation,
    )
    from termination.surface.domains import face_point_group

    v = Visibility() if visibility is None else visibility
    if cell is None:
        return termination_corrugation(ft, t_id, v, crystal=crystal), 1
    if cell.is_reconstruction:
        single = reconstruction_corrugation(ft, t_id, cell.record(), v, crystal=crystal)
    else:
        single = cell_corrugation(ft, t_id, cell.matrix, v, crystal=crystal, cell=cell.name)
    mesh = ft.atoms.mesh_inplane
    pattern = superpose_domains(single, cell.matrix, face_point_group(crystal, ft.face), mesh)
    return pattern, max(1, len(pattern.domains))


def _termination_views(
    context: Callable[[], tuple[Any, Any]],
    t_id: str,
    label: str,
    visibility: Any,
    cell: CellChoice | None = None,
    measured: Measured | None = None,
    stem: str | None = None,
    title: str | None = None,
) -> list[PlannedFigure]:
    """Planned top view, topograph and Fourier pattern of one termination (and cell).

    ``context()`` gives (crystal, face terminations) on first use, so plans stay cheap.  A cell given
    without atoms has no topograph of its own (its atoms are those of the 1x1 termination).
    """
    from termination.figures.fourier import fourier_pattern
    from termination.figures.topograph import simulated_topograph
    from termination.figures.topview import termination_top_view

    name = title or (label + (f" {cell.name}" if cell else ""))
    stem = stem or _slug(t_id, None if cell is None else cell.name)
    changes = cell is not None and cell.is_reconstruction

    def top() -> Any:
        crystal, ft = context()
        return termination_top_view(
            ft,
            t_id,
            reconstruction=None if cell is None else cell.record(),
            cell_matrix=None if cell is None else cell.matrix,
            cell_name=None if cell is None else cell.name,
            visibility=visibility,
            crystal=crystal,
        )

    def topograph() -> Any:
        crystal, ft = context()
        return simulated_topograph(
            ft,
            t_id,
            reconstruction=None if cell is None else cell.record(),
            visibility=visibility,
            crystal=crystal,
            measured=None if measured is None else measured.map,
        )

    def fourier() -> Any:
        crystal, ft = context()
        pattern, domains = _cell_pattern(crystal, ft, t_id, visibility, cell)
        return fourier_pattern(
            pattern,
            ft.atoms.mesh_inplane,
            hexagonal=crystal.hexagonal_axes,
            cell_inplane=None if cell is None else np.asarray(cell.matrix, dtype=float) @ ft.atoms.mesh_inplane,
            domains=domains,
            measured=None if measured is None else measured.map,
            measured_direction_deg=None if measured is None else measured.direction,
            hkl=ft.face.hkl,
        )

    beside = " beside the measured terrace" if measured is not None else ""
    over = " over the measured power spectrum" if measured is not None else ""
    domains = " (every rotational domain of the cell)" if cell is not None else ""
    plans = [
        PlannedFigure(
            f"topview_{stem}",
            f"{name} from above: atoms by species and depth, surface mesh, apparent lattice"
            + (", the cell and its changed sites" if changes else ", the cell" if cell else "")
            + ".",
            top,
        )
    ]
    if cell is None or changes:
        plans.append(
            PlannedFigure(
                f"topograph_{stem}", f"Simulated topograph of {name} from the corrugation model{beside}.", topograph
            )
        )
    plans.append(PlannedFigure(f"fourier_{stem}", f"Fourier spots predicted for {name}{domains}{over}.", fourier))
    return plans


def terminations_figures(
    report: Any, crystal: Any, termination_options: Mapping[str, Any] | None = None
) -> list[PlannedFigure]:
    """Allowed steps, and top view, topograph and Fourier pattern of each inequivalent termination."""
    from termination.figures.steps import terminations_step_figure

    face = face_text(report.hkl, report.structure.hexagonal_axes)
    cache: dict[str, Any] = {}

    def context() -> tuple[Any, Any]:
        if "ft" not in cache:
            from termination.surface.terminations import face_terminations

            cache["ft"] = face_terminations(crystal, report.hkl, **dict(termination_options or {}))
        return crystal, cache["ft"]

    plans = [
        PlannedFigure(
            "steps",
            f"Allowed step heights of {face} between terraces of each pair of terminations.",
            lambda: terminations_step_figure(report),
        )
    ]
    for t in report.terminations:
        if t.equivalent_to is None:
            plans += _termination_views(context, t.id, f"{face} {t.label}", None)
    return plans


def polarity_figures(report: Any) -> list[PlannedFigure]:
    """The layer-charge stack of every inequivalent termination of every face of a ``polarity`` report."""
    from termination.figures.polarity import polarity_stack

    plans = []
    hexagonal = report.structure.hexagonal_axes
    for face in report.faces:
        for tp in face.terminations:
            plans.append(
                PlannedFigure(
                    f"polarity_{_slug(face.hkl, tp.id)}",
                    f"Layer charges of {face_text(face.hkl, hexagonal)} {tp.label}: Tasker type {tp.tasker_type}, "
                    "dipole and compensating charge.",
                    functools.partial(polarity_stack, tp, face.d, face.area, hkl=face.hkl, hexagonal=hexagonal),
                )
            )
    return plans


def corrugation_figures(
    report: Any, crystal: Any, charges: Mapping[str, float] | None = None, max_cell: int = MAX_CELL
) -> list[PlannedFigure]:
    """Top view, topograph and Fourier pattern of every termination of a ``corrugation`` report and its cells.

    ``charges`` and ``max_cell`` must be those of the report, so the reconstruction cells are found again.
    """
    cache: dict[str, Any] = {}

    def context() -> tuple[Any, Any]:
        if "ft" not in cache:
            from termination.bulk.charges import with_formal_charges
            from termination.surface.terminations import face_terminations

            charged, _ = with_formal_charges(crystal, charges)
            cache["crystal"] = charged
            cache["ft"] = face_terminations(charged, report.hkl)
        return cache["crystal"], cache["ft"]

    plans: list[PlannedFigure] = []
    face = face_text(report.hkl, report.structure.hexagonal_axes)
    for row in report.terminations:
        plans += _termination_views(context, row.id, f"{face} {row.label}", report.visibility)
        for cell_row in row.reconstructions:
            choice = CellChoice(
                cell_row.cell or "cell",
                cell_row.matrix,
                find=functools.partial(_find_reconstruction, context, row.id, cell_row.matrix, max_cell),
            )
            plans += _termination_views(context, row.id, f"{face} {row.label}", report.visibility, choice)
        for cell_row in row.cells:
            choice = CellChoice(cell_row.cell or "cell", _matrix(cell_row.matrix))
            plans += _termination_views(context, row.id, f"{face} {row.label}", report.visibility, choice)
    return plans


def _find_reconstruction(context: Callable[[], tuple[Any, Any]], t_id: str, matrix: Any, max_cell: int) -> Any:
    crystal, ft = context()
    return _reconstruction(crystal, ft, t_id, matrix=matrix, max_cell=max_cell)


def _reconstruction(
    crystal: Any,
    ft: Any,
    t_id: str,
    *,
    label: str | None = None,
    matrix: Any = None,
    max_cell: int = MAX_CELL,
) -> Any:
    """The polarity step's reconstruction of ``t_id`` with this ``label`` (as ``match`` names it) or matrix."""
    from termination.surface.polarity import termination_polarity

    records = termination_polarity(crystal, ft, t_id, max_cell=max_cell).reconstructions
    for r in records:
        if (label is not None and label in (r.label, r.name, r.wood)) or (
            matrix is not None and _matrix(matrix) in (_matrix(r.matrix), _matrix(r.hnf))
        ):
            return r
    raise TerminationError(f"termination {t_id} has no reconstruction cell {label or matrix}")


@dataclass(frozen=True, eq=False)
class Measured:
    """A measured map for the figures of ``match`` and ``image``, and the direction of its lattice vector a."""

    map: Any
    direction: float | None = None


def match_figures(
    report: Any,
    crystal: Any,
    *,
    visibility: Any = None,
    charges: Mapping[str, float] | None = None,
    max_cell: int = MAX_CELL,
    termination_options: Mapping[str, Any] | None = None,
    measured: Measured | None = None,
    top: int = FIGURE_TOP,
) -> list[PlannedFigure]:
    """Figures of a ``match`` report (see the module table); the options must be those ``match`` ran with."""
    from termination.figures.poles import pole_figure
    from termination.figures.steps import match_step_figure

    plans: list[PlannedFigure] = []
    if report.mount is not None:
        tilt = report.measurement.tilt
        caption = (
            "Poles of every candidate face within 90° of the mount "
            f"{face_text(report.mount, report.structure.hexagonal_axes)}"
        )
        if tilt is not None:
            caption += f"; the measured tilt {tilt.value:g}° as a ring with its ±{tilt.sigma:.2g}° band"
        plans.append(
            PlannedFigure(
                "poles", caption + f"; the {top} most probable faces highlighted.", lambda: pole_figure(report, crystal)
            )
        )
    plans.append(
        PlannedFigure(
            "steps",
            f"Measured step heights (histogram and density) against the heights the top {top} candidates allow, "
            "each pair of terraces marked.",
            lambda: match_step_figure(report, crystal, top=top, termination_options=termination_options),
        )
    )
    if not report.candidates:
        return plans
    best = report.candidates[0]
    cache: dict[str, Any] = {}

    def context() -> tuple[Any, Any]:
        if "ft" not in cache:
            from termination.bulk.charges import with_formal_charges
            from termination.surface.terminations import face_terminations

            charged, _ = with_formal_charges(crystal, charges)
            cache["crystal"] = charged
            cache["ft"] = face_terminations(charged, best.hkl, **dict(termination_options or {}))
        return cache["crystal"], cache["ft"]

    t_id = best.termination.id
    cell = None
    if best.cell is not None:
        cell = _candidate_cell(context, t_id, best.cell, max_cell)
    title = f"the best candidate, #{best.rank} {face_text(best.hkl, report.structure.hexagonal_axes)} {best.label}" + (
        f" {best.cell}" if best.cell else ""
    )
    views = _termination_views(context, t_id, best.termination.label, visibility, cell, measured, "best", title)
    plans += [PlannedFigure(p.name, p.caption[0].upper() + p.caption[1:], p.make) for p in views]
    if _has_charges(report):

        def stack() -> Any:
            from termination.figures.polarity import polarity_stack
            from termination.surface.polarity import termination_polarity

            c, ft = context()
            tp = termination_polarity(c, ft, t_id, with_reconstructions=False)
            return polarity_stack(tp, ft.d, ft.face.mesh.area, hkl=ft.face.hkl, hexagonal=c.hexagonal_axes)

        plans.append(
            PlannedFigure(
                "polarity_best",
                f"Layer charges of the best candidate's termination {best.termination.label}: Tasker type, dipole "
                "and compensating charge.",
                stack,
            )
        )
    return plans


#: How ``match`` names a cell given with ``--cell`` (its notation, then this).
GIVEN = " given"


def _candidate_cell(context: Callable[[], tuple[Any, Any]], t_id: str, name: str, max_cell: int) -> CellChoice:
    """The cell of a ``match`` candidate: a cell given with ``--cell`` ('(2×1) given'), or a reconstruction by label."""
    if name.endswith(GIVEN):
        from termination.algebra.lattice2d import cell_matrix, check_cells

        spec = check_cells([name[: -len(GIVEN)]])[0]
        if spec.matrix is not None:
            return CellChoice(name, spec.matrix)
        _, ft = context()
        found = cell_matrix(spec, ft.atoms.mesh_inplane)
        if found is None:
            raise TerminationError(f"cell {name!r} is no supercell of the face's mesh")
        return CellChoice(name, found)

    def find() -> Any:
        crystal, ft = context()
        return _reconstruction(crystal, ft, t_id, label=name, max_cell=max_cell)

    return CellChoice(name, find=find)


def read_measured(
    path: Any,
    pixel_size: Any = None,
    z_unit: Any = None,
    channel: Any = None,
    lattice: Any = None,
    parameters: dict[str, Any] | None = None,
) -> Measured:
    """A height-map file read again with the calibration the command used, for its figures.

    ``lattice`` (an ``image`` analysis's) gives the direction of the measured
    lattice vector a; without it a Fourier figure turns its prediction onto the
    measured spectrum by itself (:func:`termination.figures.fourier.best_turn`).
    ``parameters`` are the image parameters the command's analysis used, so
    that the figures show the maps it levelled.
    """
    from termination.figures.topograph import MeasuredMap
    from termination.imaging.reading import read_heightmap

    hm = read_heightmap(path, pixel_size=pixel_size, z_unit=z_unit, channel=channel)
    name = Path(path).name
    settings = tuple(sorted((parameters or {}).items()))
    return Measured(
        MeasuredMap(hm.heights, hm.pixel_size, name=name, parameters=settings),
        None if lattice is None else lattice.direction,
    )


def _has_charges(report: Any) -> bool:
    """Whether ``match`` knew formal charges (it notes when it did not)."""
    return not any(n.startswith("no formal charges known") for n in report.notes)


def image_figures(report: Any, measured: Measured) -> list[PlannedFigure]:
    """Figures of an ``image`` report: the measured map, its power spectrum with the lattice, the steps."""
    from termination.figures.measured import lattice_spectrum, map_overview
    from termination.figures.steps import step_histogram

    analysis = report.analysis
    plans = [
        PlannedFigure(
            "image",
            "The height map levelled by the terrace model, and a window of the image the lattice was measured on.",
            lambda: map_overview(measured.map, analysis),
        ),
        PlannedFigure(
            "spectrum",
            "Power spectrum of the image the lattice was measured on, with the reciprocal lattice found.",
            lambda: lattice_spectrum(measured.map, analysis.lattice),
        ),
    ]
    if analysis.steps:
        steps = [(s.height, s.sigma) for s in analysis.steps]
        plans.append(
            PlannedFigure(
                "steps",
                "Step heights between adjacent terraces (histogram and density).",
                lambda: step_histogram(steps, title=f"{Path(report.source.file).name}: measured step heights"),
            )
        )
    return plans


# --------------------------------------------------------------------------- drawing and writing


def check_plot_folder(
    folder: str | os.PathLike[str], fmt: str, error: type[TerminationError] = TerminationError
) -> str:
    """Check ``--plot DIR`` and ``--plot-format`` before any work: a folder or a new name in one, a known format."""
    f = check_format(fmt, error)
    path = Path(folder)
    if path.exists() and not path.is_dir():
        raise error(f"--plot {folder}: not a folder")
    parent = path.parent if str(path.parent) else Path(".")
    if not path.exists() and not parent.is_dir():
        raise error(f"--plot {folder}: folder {parent} does not exist")
    return f


def draw(plans: Sequence[PlannedFigure], fmt: str, dpi: float = FIGURE_DPI) -> list[tuple[PlannedFigure, bytes]]:
    """Draw and render every planned figure (each figure is closed after rendering, nothing is kept)."""
    from termination.figures.canvas import render

    out = []
    for plan in plans:
        fig = plan.make()
        out.append((plan, render(fig, fmt, dpi)))
    return out


def write_figures(
    plans: Sequence[PlannedFigure],
    folder: str | os.PathLike[str],
    fmt: str = "png",
    *,
    force: bool = False,
    inputs: Sequence[str | os.PathLike[str] | None] = (),
    error: type[TerminationError] = TerminationError,
    dpi: float = FIGURE_DPI,
) -> list[Path]:
    """Draw ``plans`` and write them to ``folder`` as ``<name>.<fmt>``; return the paths written.

    The count (at most :data:`~termination.defaults.MAX_FIGURES`) and every
    target (not an input, not existing unless ``force``) are checked before
    the first figure is drawn; the folder is created if missing (its parent
    must exist); all figures are rendered before the first is written.
    """
    from termination.outputs import check_outputs, write_bytes

    f = check_plot_folder(folder, fmt, error)
    if len(plans) > MAX_FIGURES:
        raise error(
            f"{len(plans)} figures would be written, more than {MAX_FIGURES}: "
            "ask for fewer (one --plane, one --termination)"
        )
    path = Path(folder)
    targets = [path / f"{p.name}.{f}" for p in plans]
    if len(set(targets)) != len(targets):
        raise error("two figures would have the same file name")
    if path.exists():  # a new folder holds no file to overwrite and no input
        check_outputs(targets, inputs, force=force, error=error)
    rendered = draw(plans, f, dpi)
    path.mkdir(exist_ok=True)
    return [write_bytes(t, data, force=force, error=error) for t, (_, data) in zip(targets, rendered)]
