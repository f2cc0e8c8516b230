"""Figures of a measured height map alone (``image``): the levelled map and its power spectrum with the lattice.

Both show the maps the analysis itself levelled
(:func:`termination.imaging.analysis.levelled_maps`, through
:attr:`termination.figures.topograph.MeasuredMap.levelled`), not a
filtering of their own: the map with the terrace plane, scan-line offsets
and smooth background of the terrace model removed, so terraces appear as
levels, beside a window of the image the lattice was measured on
(:mod:`termination.figures.topograph`). The power spectrum of that image
(Hann window, log scale) carries the reciprocal lattice of the lattice
found: the points h a* + k b*, with b taken on the side of a (turned by
+gamma or -gamma) where the spectrum has more power, since the analysis
reports the direction of a and the angle but not the handedness.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from termination.arrays import FloatArray
from termination.figures.canvas import new_figure, style
from termination.figures.fourier import power_spectrum, spectrum_limits
from termination.figures.labels import nice_length, scale_bar
from termination.figures.palette import COLOURS, relief_colormap
from termination.figures.topograph import MeasuredMap, measured_panel

__all__ = ["lattice_points_of", "lattice_spectrum", "map_overview"]


def lattice_points_of(lattice: Any, handedness: int, k_max: float) -> FloatArray:
    """(M, 2) reciprocal points h a* + k b* (1/Å, no 2 pi) with 0 < |G| <= k_max of a measured lattice.

    ``lattice`` has ``a``, ``b``, ``gamma`` (degrees) and ``direction`` (of a,
    degrees from +x towards +y); b lies at direction + handedness * gamma.
    """
    phi = math.radians(lattice.direction)
    psi = phi + handedness * math.radians(lattice.gamma)
    real = np.array([[math.cos(phi), math.sin(phi)], [math.cos(psi), math.sin(psi)]]) * np.array(
        [[lattice.a], [lattice.b]]
    )
    recip = np.linalg.inv(real).T
    n = int(math.ceil(k_max * max(lattice.a, lattice.b))) + 1
    i, j = np.meshgrid(np.arange(-n, n + 1), np.arange(-n, n + 1), indexing="ij")
    g = np.column_stack([i.ravel(), j.ravel()]).astype(float) @ recip
    r = np.linalg.norm(g, axis=1)
    out: FloatArray = g[(r > 0) & (r <= k_max)]
    return out


def map_overview(measured: MeasuredMap, analysis: Any, *, width_in: float = 7.0) -> Any:
    """The map levelled by the terrace model beside a window of the image the lattice was measured on.

    Returns
    -------
    matplotlib.figure.Figure
        The levelled map is the image 'levelled map' (its array is
        :attr:`MeasuredMap.levelled` ``.terraces``), the window 'measured
        topograph' (a crop of ``.lattice_image``).
    """
    tilt = analysis.tilt
    z = measured.levelled.terraces
    ny, nx = z.shape
    px, py = measured.pixel_size
    period = analysis.lattice.a if analysis.lattice is not None else 5.0
    cmap = relief_colormap()
    with style():
        fig = new_figure(width_in, 3.4)
        left, right = fig.subplots(1, 2)
        finite = z[np.isfinite(z)]
        lo, hi = np.percentile(finite, [0.5, 99.5]) if finite.size else (0.0, 1.0)
        im = left.imshow(
            z - lo, origin="lower", extent=(0, nx * px, 0, ny * py), cmap=cmap, vmin=0, vmax=hi - lo, gid="levelled map"
        )
        left.set_xlabel("x (Å)")
        left.set_ylabel("y (Å)")
        what = "levelled by the terrace model" + ("" if tilt.terrace is not None else " (terrace tilt not determined)")
        left.set_title(f"{measured.name}: {what}", fontsize=7.5)
        bar = fig.colorbar(im, ax=left, shrink=0.8, pad=0.02)
        bar.set_label("height (Å)", fontsize=6.5)
        scale_bar(left, nice_length(nx * px), colour="#ffffff")
        span = min(nx * px, ny * py, max(12.0, 5 * period))
        measured_panel(fig, right, measured, span, cmap)
    return fig


def lattice_spectrum(measured: MeasuredMap, lattice: Any, *, width_in: float = 4.6) -> Any:
    """Power spectrum of the image the lattice was measured on, with the reciprocal lattice of ``lattice`` (None: none).

    Returns
    -------
    matplotlib.figure.Figure
        The spectrum is the image 'measured power', the lattice points the
        scatter 'measured lattice' (offsets in 1/Å).
    """
    px, py = (float(v) for v in measured.pixel_size)
    power, kx, ky = power_spectrum(measured.levelled.lattice_image, (px, py))
    log_power = np.log10(power + power.max() * 1e-12)
    k_max = 1.0 / (2 * max(px, py))
    if lattice is not None:
        k_max = min(k_max, 2.3 / min(lattice.a, lattice.b))
    with style():
        fig = new_figure(width_in, width_in * 0.92)
        ax = fig.add_subplot()
        ax.set_aspect("equal")
        dkx, dky = kx[1] - kx[0], ky[1] - ky[0]
        lo, hi = spectrum_limits(log_power, kx, ky, k_max)
        ax.imshow(
            log_power,
            origin="lower",
            extent=(kx[0] - dkx / 2, kx[-1] + dkx / 2, ky[0] - dky / 2, ky[-1] + dky / 2),
            cmap=relief_colormap(),
            vmin=lo,
            vmax=hi,
            gid="measured power",
        )
        title = "power spectrum (levelled, Hann window)"
        if lattice is not None:
            candidates = [lattice_points_of(lattice, h, k_max) for h in (1, -1)]
            scores = [_power_at(log_power, kx, ky, g) for g in candidates]
            g = candidates[int(np.argmax(scores))]
            ax.scatter(
                g[:, 0],
                g[:, 1],
                s=90,
                facecolors="none",
                edgecolors=COLOURS[1],
                linewidths=1.4,
                gid="measured lattice",
                label=f"lattice found: {lattice.a:.2f} × {lattice.b:.2f} Å, {lattice.gamma:.1f}°",
            )
            ax.legend(loc="upper right", fontsize=6.5)
        else:
            title += ": no lattice found"
        ax.set_xlim(-k_max, k_max)
        ax.set_ylim(-k_max, k_max)
        ax.set_xlabel("kx (1/Å)")
        ax.set_ylabel("ky (1/Å)")
        ax.set_title(f"{measured.name}: {title}", fontsize=7.5)
    return fig


def _power_at(log_power: FloatArray, kx: FloatArray, ky: FloatArray, g: FloatArray) -> float:
    """Mean log power at the pixels nearest the points ``g`` (M, 2)."""
    if not len(g):
        return -math.inf
    cols = np.clip(np.searchsorted(kx, g[:, 0]), 0, len(kx) - 1)
    rows = np.clip(np.searchsorted(ky, g[:, 1]), 0, len(ky) - 1)
    return float(np.mean(log_power[rows, cols]))
