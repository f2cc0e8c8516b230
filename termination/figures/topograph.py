"""Simulated topograph of a termination from the corrugation model, beside the measured terrace when there is one.

The corrugation model (:mod:`termination.surface.corrugation`) weighs each
imaging atom j by A_j = w(species) exp(-depth/lambda).  Its Fourier
coefficients F(G) = sum_j A_j exp(2 pi i G . r_j) over the *visible* spots
(|F(G)|/F(0) above the threshold) are what a topograph resolves, so the
simulated topograph is their synthesis

    z(r) = Re sum_G conj(F(G)) exp(2 pi i G . r) / F(0),

the site density low-pass filtered to the visible spots: its maxima sit on
the bright sites and its period is the apparent lattice.  The figure shows
it scaled to [0, 1] (an apparent height, not Å).  A measured height map,
when given, is shown beside it on the same length scale: a window of the
image its analysis measured the lattice on
(:func:`termination.imaging.analysis.levelled_maps`: plane, scan-line
offsets and terrace offsets of the terrace model removed, step edges and
adsorbates left out), where that image keeps the most pixels.

References
----------
J. Tersoff and D. R. Hamann, Phys. Rev. B 31, 805 (1985).
C. J. Chen, Introduction to Scanning Tunneling Microscopy (Oxford University
Press, 2nd ed. 2008), ch. 6 (corrugation as a Fourier series).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal
from termination.defaults import TOPOGRAPH_PIXELS
from termination.errors import ImageError
from termination.figures.canvas import new_figure, style
from termination.figures.labels import hkl_label, nice_length, scale_bar
from termination.figures.palette import relief_colormap
from termination.surface.corrugation import (
    CorrugationPattern,
    ImagingSites,
    Visibility,
    imaging_sites,
    reconstruction_corrugation,
    structure_factor,
    termination_corrugation,
)
from termination.surface.reconstructions import Reconstruction
from termination.surface.terminations import FaceTerminations
from termination.units import ANGSTROM

if TYPE_CHECKING:
    from termination.imaging.analysis import LevelledMaps

__all__ = [
    "MeasuredMap",
    "corrugation_heights",
    "measured_panel",
    "simulated_topograph",
]


@dataclass(frozen=True, eq=False)
class MeasuredMap:
    """A measured height map to show: heights (ny, nx), Å, and the pixel size (x, y), Å.

    ``parameters`` are the image parameters its analysis used
    (:class:`~termination.imaging.parameters.ImageParameters` fields, as
    (name, value) pairs); the figures show the maps that analysis levelled
    (:attr:`levelled`), not a filtering of their own.
    """

    heights: FloatArray = field(metadata=ANGSTROM)
    pixel_size: tuple[float, float] = field(metadata=ANGSTROM)
    name: str = "measured"
    parameters: tuple[tuple[str, Any], ...] = ()

    @cached_property
    def levelled(self) -> LevelledMaps:
        """The terrace model's levelled maps (:func:`termination.imaging.analysis.levelled_maps`), computed once."""
        from termination.imaging.analysis import levelled_maps

        return levelled_maps(self.heights, self.pixel_size, **dict(self.parameters))


def corrugation_heights(sites: ImagingSites, pattern: CorrugationPattern, points: FloatArray) -> FloatArray:
    """The simulated topograph z(r) at ``points`` (P, 2), Å in the face frame, in units of F(0).

    Notes
    -----
    z(r) = Re sum_G conj(F(G)) exp(2 pi i G . r) / F(0) over the visible
    spots of ``pattern`` (G = (h, k) inv(mesh)^T, both G and -G listed).
    """
    pts = np.asarray(points, dtype=float).reshape(-1, 2)
    if not pattern.spots:
        return np.zeros(len(pts))
    g = np.array([s.g for s in pattern.spots], dtype=float) @ np.linalg.inv(sites.mesh).T
    f = structure_factor(g, sites.inplane, sites.amplitudes) / float(np.sum(sites.amplitudes))
    phase = np.exp(2j * np.pi * (pts @ g.T))
    out: FloatArray = np.real(phase @ np.conj(f))
    return out


def simulated_topograph(
    face_terminations: FaceTerminations,
    key: str,
    *,
    reconstruction: Reconstruction | None = None,
    visibility: Visibility | None = None,
    measured: MeasuredMap | None = None,
    crystal: Crystal | None = None,
    span_angstrom: float | None = None,
    pixels: int = TOPOGRAPH_PIXELS,
    title: str | None = None,
    hexagonal: bool | None = None,
    width_in: float | None = None,
) -> Any:
    """Simulated topograph of termination ``key`` (and a reconstruction cell), beside a measured map if given.

    Parameters
    ----------
    face_terminations : FaceTerminations
    key : str
        Termination id or label.
    reconstruction : Reconstruction, optional
    visibility : Visibility, optional
        Corrugation model (default :class:`Visibility()`).
    measured : MeasuredMap, optional
        Shown beside the simulation as its analysis levelled it, cut to the
        same side length where it is larger.
    crystal : Crystal, optional
        The bulk crystal; needed only for ``visibility.site_weights``.
    span_angstrom : float, optional
        Side of the simulated square, Å; default four apparent periods (at
        least 12 Å).
    pixels : int
        Pixels along each side of the simulation (8 to 1024).
    title : str, optional
    hexagonal : bool, optional
        Write the face (h k i l); default from ``crystal`` (three indices without it).
    width_in : float, optional

    Returns
    -------
    matplotlib.figure.Figure
        The simulation is the image with the gid 'simulated topograph' (its
        array is z at the pixel centres scaled to [0, 1], extent in Å), the
        measured map 'measured topograph'.
    """
    if int(pixels) != pixels or not 8 <= pixels <= 1024:
        raise ImageError(f"pixels must be an integer from 8 to 1024, got {pixels}")
    ft = face_terminations
    t = ft.termination(key)
    v = Visibility() if visibility is None else visibility
    pattern = (
        termination_corrugation(ft, t.id, v, crystal=crystal)
        if reconstruction is None
        else reconstruction_corrugation(ft, t.id, reconstruction, v, crystal=crystal)
    )
    sites = imaging_sites(ft, t.id, v, reconstruction, crystal=crystal)
    la = pattern.apparent_lattice
    period = la.a if np.isfinite(la.a) else ft.face.mesh.a
    period_b = la.b if np.isfinite(la.b) else period
    span = float(span_angstrom) if span_angstrom else max(12.0, 4.0 * max(period, period_b))
    n = int(pixels)
    axis = (np.arange(n) + 0.5) / n * span
    xx, yy = np.meshgrid(axis, axis)
    z = corrugation_heights(sites, pattern, np.column_stack([xx.ravel(), yy.ravel()])).reshape(n, n)
    panels = 2 if measured is not None else 1
    width = width_in if width_in is not None else 3.2 * panels + 0.6
    cmap = relief_colormap()
    with style():
        fig = new_figure(width, 3.3)
        axes = fig.subplots(1, panels, squeeze=False)[0]
        ax = axes[0]
        shown = (z - z.min()) / max(float(np.ptp(z)), 1e-12)
        im = ax.imshow(shown, origin="lower", extent=(0, span, 0, span), cmap=cmap, gid="simulated topograph")
        ax.set_xlabel("x along e1 (Å)")
        ax.set_ylabel("y (Å)")
        four = bool(hexagonal) if hexagonal is not None else crystal is not None and crystal.hexagonal_axes
        face = hkl_label(ft.face.hkl, hexagonal=four)
        name = f"{face} {t.label}" + (f" {reconstruction.label}" if reconstruction else "")
        ax.set_title(f"simulated: {name}\napparent {_lattice_text(pattern)}", fontsize=7.5)
        bar = fig.colorbar(im, ax=ax, shrink=0.8, pad=0.02)
        bar.set_label("apparent height (scaled)", fontsize=6.5)
        scale_bar(ax, nice_length(span), colour="#ffffff")
        if measured is not None:
            measured_panel(fig, axes[1], measured, span, cmap)
        if title:
            fig.suptitle(title)
    return fig


def _lattice_text(pattern: CorrugationPattern) -> str:
    la = pattern.apparent_lattice
    if not np.isfinite(la.a):
        return "none (flat)"
    if not np.isfinite(la.b):
        return f"stripes {la.a:.2f} Å"
    return f"{la.a:.2f} × {la.b:.2f} Å, {la.gamma:.0f}°"


def _fullest_window(kept: Any, cy: int, cx: int) -> tuple[int, int]:
    """(row, column) of the top left corner of the cy x cx window with the most pixels kept (the first of equals)."""
    integral = np.zeros((kept.shape[0] + 1, kept.shape[1] + 1))
    integral[1:, 1:] = kept.cumsum(axis=0).cumsum(axis=1)
    sums = integral[cy:, cx:] - integral[:-cy, cx:] - integral[cy:, :-cx] + integral[:-cy, :-cx]
    r, c = np.unravel_index(int(np.argmax(sums)), sums.shape)
    return int(r), int(c)


def measured_panel(fig: Any, ax: Any, measured: MeasuredMap, span: float, cmap: Any) -> None:
    """A window of ``span`` Å of the image the lattice was measured on, where it keeps the most pixels.

    The image is the analysis's own (:attr:`MeasuredMap.levelled`): every
    terrace levelled by the terrace model, step edges, adsorbates and pits
    left out (blank).
    """
    z = measured.levelled.lattice_image
    px, py = (float(v) for v in measured.pixel_size)
    ny, nx = z.shape
    cx, cy = min(nx, max(8, int(round(span / px)))), min(ny, max(8, int(round(span / py))))
    y0, x0 = _fullest_window(np.isfinite(z), cy, cx)
    crop = z[y0 : y0 + cy, x0 : x0 + cx]
    values = crop[np.isfinite(crop)]
    lo, hi = np.percentile(values, [1, 99]) if values.size else (0.0, 1.0)
    im = ax.imshow(
        crop,
        origin="lower",
        extent=(0, cx * px, 0, cy * py),
        cmap=cmap,
        vmin=lo,
        vmax=hi,
        gid="measured topograph",
    )
    ax.set_xlabel("x (Å)")
    ax.set_title(f"{measured.name}: {cx * px:.0f} Å window,\nlevelled by the terrace model", fontsize=7.5)
    bar = fig.colorbar(im, ax=ax, shrink=0.8, pad=0.02)
    bar.set_label("height (Å)", fontsize=6.5)
    scale_bar(ax, nice_length(cx * px), colour="#ffffff")
