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

import os
import re
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from termination.defaults import FIGURE_DPI, FIGURE_TOP, MAX_CELL, MAX_FIGURES
from termination.errors import TerminationError
from termination.figures.canvas import check_format
from termination.figures.labels import hkl_label
from termination.surface.miller import hkl_text

__all__ = [
    "PlannedFigure",
    "check_plot_folder",
    "corrugation_figures",
    "draw",
    "image_figures",
    "match_figures",
    "measured_of",
    "planes_figures",
    "polarity_figures",
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
    """A file name from parts: '(0 0 1)' -> '001', '-1' -> 'm1', spaces to '_', nothing else but [A-Za-z0-9_.-]."""
    out = []
    for p in parts:
        if isinstance(p, tuple):
            out.append("".join(f"m{-v}" if v < 0 else str(v) for v in p))
        else:
            out.append(re.sub(r"[^A-Za-z0-9.-]+", "", str(p).replace("×", "x").replace("√", "r")))
    return "_".join(o for o in out if o)


# --------------------------------------------------------------------------- plans


def planes_figures(report: Any, crystal: Any) -> list[PlannedFigure]:
    """Pole figure of a ``planes`` report (see :func:`termination.figures.poles.pole_figure`)."""
    from termination.figures.poles import pole_figure

    around = hkl_text(report.mount) if report.mount is not None else "(0 0 1)"
    caption = f"Stereographic projection of every face up to index {report.max_index} around {around}"
    if report.tilt_window is not None:
        lo, hi = report.tilt_window
        caption += f"; the tilt window {lo:g}° to {hi:g}° shaded, its easiest-cleaving faces highlighted"
    return [PlannedFigure("poles", caption + ".", lambda: pole_figure(report, crystal))]


def _termination_views(
    ft: Any, t_id: str, label: str, visibility: Any, reconstruction: Any = None, measured: Any = None
) -> list[PlannedFigure]:
    """Top view, topograph and Fourier pattern of one termination (and cell)."""
    from termination.figures.fourier import fourier_pattern
    from termination.figures.topograph import simulated_topograph
    from termination.figures.topview import termination_top_view
    from termination.surface.corrugation import reconstruction_corrugation, termination_corrugation

    cell = None if reconstruction is None else (reconstruction.wood or "cell")
    stem = _slug(ft.face.hkl, t_id, cell)
    name = f"{hkl_label(ft.face.hkl)} {label}" + (f" {cell}" if cell else "")

    def fourier() -> Any:
        pattern = (
            termination_corrugation(ft, t_id, visibility)
            if reconstruction is None
            else reconstruction_corrugation(ft, t_id, reconstruction, visibility)
        )
        return fourier_pattern(
            pattern,
            ft.atoms.mesh_inplane,
            cell_inplane=None if reconstruction is None else reconstruction.cell_inplane,
            measured=None if measured is None else measured.map,
            measured_direction_deg=None if measured is None else measured.direction,
            hkl=ft.face.hkl,
        )

    beside = " beside the measured terrace" if measured is not None else ""
    over = " over the measured power spectrum" if measured is not None else ""
    return [
        PlannedFigure(
            f"topview_{stem}",
            f"{name} from above: atoms by species and depth, surface mesh, apparent lattice"
            + (", reconstruction cell and its changed sites" if reconstruction is not None else "")
            + ".",
            lambda: termination_top_view(ft, t_id, reconstruction=reconstruction, visibility=visibility),
        ),
        PlannedFigure(
            f"topograph_{stem}",
            f"Simulated topograph of {name} from the corrugation model{beside}.",
            lambda: simulated_topograph(
                ft,
                t_id,
                reconstruction=reconstruction,
                visibility=visibility,
                measured=None if measured is None else measured.map,
            ),
        ),
        PlannedFigure(f"fourier_{stem}", f"Fourier spots predicted for {name}{over}.", fourier),
    ]


def terminations_figures(
    report: Any, crystal: Any, termination_options: Mapping[str, Any] | None = None
) -> list[PlannedFigure]:
    """Allowed steps, and top view, topograph and Fourier pattern of each inequivalent termination."""
    from termination.figures.steps import terminations_step_figure

    cache: dict[str, Any] = {}

    def context() -> tuple[Any, Any]:
        if "ft" not in cache:
            from termination.surface.terminations import face_terminations

            cache["ft"] = face_terminations(crystal, report.hkl, **dict(termination_options or {}))
        return crystal, cache["ft"]

    plans = [
        PlannedFigure(
            "steps",
            f"Allowed step heights of {hkl_text(report.hkl)} between terraces of each pair of terminations.",
            lambda: terminations_step_figure(report),
        )
    ]
    for t in report.terminations:
        if t.equivalent_to is None:
            plans += _views_of(context, t.id, t.label, None)
    return plans


def polarity_figures(report: Any) -> list[PlannedFigure]:
    """The layer-charge stack of every inequivalent termination of every face of a ``polarity`` report."""
    import functools

    from termination.figures.polarity import polarity_stack

    plans = []
    for face in report.faces:
        for tp in face.terminations:
            plans.append(
                PlannedFigure(
                    f"polarity_{_slug(face.hkl, tp.id)}",
                    f"Layer charges of {hkl_text(face.hkl)} {tp.label}: Tasker type {tp.tasker_type}, "
                    "dipole and compensating charge.",
                    functools.partial(polarity_stack, tp, face.d, face.area, hkl=face.hkl),
                )
            )
    return plans


def corrugation_figures(report: Any, crystal: Any, charges: Mapping[str, float] | None = None) -> list[PlannedFigure]:
    """Top view, topograph and Fourier pattern of every termination of a ``corrugation`` report and its cells."""
    plans: list[PlannedFigure] = []
    cache: dict[str, Any] = {}

    def context() -> tuple[Any, Any]:
        if "ft" not in cache:
            from termination.bulk.charges import with_formal_charges
            from termination.surface.terminations import face_terminations

            charged, _ = with_formal_charges(crystal, charges)
            cache["crystal"] = charged
            cache["ft"] = face_terminations(charged, report.hkl)
        return cache["crystal"], cache["ft"]

    for row in report.terminations:
        plans += _views_of(context, row.id, row.label, report.visibility)
        for cell_row in row.reconstructions:
            plans += _views_of(context, row.id, row.label, report.visibility, cell=cell_row.cell)
    return plans


def _views_of(
    context: Callable[[], tuple[Any, Any]], t_id: str, label: str, visibility: Any, cell: str | None = None
) -> list[PlannedFigure]:
    """Planned views of one termination, and of one of its reconstruction cells named ``cell``."""
    stem = _slug(t_id, cell)
    kinds = ("topview", "topograph", "fourier")
    shown = f"{label}" + (f" {cell}" if cell else "")
    captions = (
        f"{shown} from above: atoms by species and depth, surface mesh, apparent lattice"
        + (", reconstruction cell and its changed sites." if cell else "."),
        f"Simulated topograph of {shown} from the corrugation model.",
        f"Fourier spots predicted for {shown}.",
    )
    out = []
    for i, kind in enumerate(kinds):

        def make(i: int = i) -> Any:
            crystal, ft = context()
            rec = None if cell is None else _reconstruction(crystal, ft, t_id, cell)
            return _termination_views(ft, t_id, label, visibility, rec)[i].make()

        out.append(PlannedFigure(f"{kind}_{stem}", captions[i], make))
    return out


def _reconstruction(crystal: Any, ft: Any, t_id: str, cell: str, max_cell: int = MAX_CELL) -> Any:
    """The reconstruction record of termination ``t_id`` named ``cell`` (as the reports print it)."""
    from termination.reports import cell_text
    from termination.surface.polarity import termination_polarity

    records = termination_polarity(crystal, ft, t_id, max_cell=max_cell).reconstructions
    for r in records:
        if cell_text(r) == cell or r.wood == cell:
            return r
    raise TerminationError(f"termination {t_id} has no reconstruction cell {cell!r}")


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
        caption = f"Poles of every candidate face within 90° of the mount {hkl_text(report.mount)}"
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

    def context() -> tuple[Any, Any, Any]:
        if "ft" not in cache:
            from termination.bulk.charges import with_formal_charges
            from termination.surface.terminations import face_terminations

            charged, assignment = with_formal_charges(crystal, charges)
            cache["crystal"], cache["charged"] = charged, assignment is not None
            cache["ft"] = face_terminations(charged, best.hkl, **dict(termination_options or {}))
        return cache["crystal"], cache["ft"], cache["charged"]

    t_id = best.termination.id
    label = f"#{best.rank} {hkl_label(best.hkl)} {best.label}" + (f" {best.cell}" if best.cell else "")

    def view(i: int) -> Any:
        c, ft, _ = context()
        rec = None if best.cell is None else _reconstruction(c, ft, t_id, best.cell, max_cell)
        return _termination_views(ft, t_id, best.termination.label, visibility, rec, measured)[i].make()

    beside = " beside the measured terrace" if measured is not None else ""
    over = " over the measured power spectrum" if measured is not None else ""
    plans += [
        PlannedFigure("topview_best", f"The best candidate, {label}, from above.", lambda: view(0)),
        PlannedFigure(
            "topograph_best", f"Simulated topograph of the best candidate, {label}{beside}.", lambda: view(1)
        ),
        PlannedFigure(
            "fourier_best", f"Fourier spots predicted for the best candidate, {label}{over}.", lambda: view(2)
        ),
    ]
    if report.candidates[0] is not None and _has_charges(report):

        def stack() -> Any:
            from termination.figures.polarity import polarity_stack
            from termination.surface.polarity import termination_polarity

            c, ft, _ = context()
            tp = termination_polarity(c, ft, t_id, with_reconstructions=False)
            return polarity_stack(tp, ft.d, ft.face.mesh.area, hkl=ft.face.hkl)

        plans.append(
            PlannedFigure(
                "polarity_best",
                f"Layer charges of the best candidate's termination {best.termination.label}: Tasker type, dipole "
                "and compensating charge.",
                stack,
            )
        )
    return plans


def measured_of(report: Any, *, pixel_size: Any = None, z_unit: Any = None) -> Measured:
    """The height map of an ``image`` report, read again with the same calibration, and its lattice direction."""
    from termination.figures.topograph import MeasuredMap
    from termination.imaging.reading import read_heightmap

    hm = read_heightmap(report.source.file, pixel_size=pixel_size, z_unit=z_unit)  # type: ignore[no-untyped-call]
    lattice = report.analysis.lattice
    name = Path(report.source.file).name
    return Measured(MeasuredMap(hm.heights, hm.pixel_size, name=name), None if lattice is None else lattice.direction)


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
            "The height map with its terrace plane removed, and its flattest window high-pass filtered.",
            lambda: map_overview(measured.map, analysis),
        ),
        PlannedFigure(
            "spectrum",
            "Power spectrum of the high-pass filtered map with the reciprocal lattice found.",
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
