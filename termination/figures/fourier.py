"""Fourier pattern: the spots a termination's corrugation predicts, over the measured FFT when there is one.

Reciprocal space is drawn without the factor 2 pi (|G| = 1/period, 1/Å), in
the face frame (e1 to the right).  The 1x1 surface reciprocal net is a grid
of small rings, like a LEED pattern's integer-order beams; the predicted
visible spots (|F(G)|/F(0) above the threshold) are filled markers whose
area grows with |F(G)|/F(0): circles for integer orders, squares for the
fractional orders of a reconstruction cell.  Spots that only some rotational
domains of a cell give (``Spot.domains`` below the cell's domain count, when
the corrugation record lists domains) are drawn as diamonds.

With a measured height map the pattern is drawn over its power spectrum
(of the image its analysis measured the lattice on,
:attr:`termination.figures.topograph.MeasuredMap.levelled`; Hann window,
log scale), turned into the image's frame (which is not the crystal's): so
that the predicted apparent lattice vector a lies along the measured one when
its direction is given, otherwise by the turn that puts the most measured
power under its first shell of bright spots (:func:`best_turn`, every 0.25°;
as precise as the spectrum's pixels allow, a degree or two on a small map).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from termination.arrays import FloatArray
from termination.figures.canvas import new_figure, style
from termination.figures.labels import hkl_label
from termination.figures.palette import COLOURS, SLATE, relief_colormap
from termination.figures.topograph import MeasuredMap
from termination.figures.topview import apparent_vectors
from termination.surface.corrugation import CorrugationPattern, reciprocal_points

__all__ = [
    "SPECTRUM_DECADES",
    "best_turn",
    "first_shell",
    "fourier_pattern",
    "power_spectrum",
    "spectrum_limits",
    "spot_positions",
]


def spot_positions(pattern: CorrugationPattern, mesh_inplane: FloatArray, rotation_deg: float = 0.0) -> FloatArray:
    """(M, 2) Cartesian G of the pattern's spots, 1/Å (no 2 pi), in the face frame turned by ``rotation_deg``.

    Notes
    -----
    G = (h, k) B, B = inv(mesh)^T the reciprocal mesh rows (a . a* = 1).
    """
    if not pattern.spots:
        return np.zeros((0, 2))
    g = np.array([s.g for s in pattern.spots], dtype=float) @ np.linalg.inv(np.asarray(mesh_inplane, float)).T
    return _turned(g, rotation_deg)


def _turned(points: FloatArray, angle_deg: float) -> FloatArray:
    c, s = math.cos(math.radians(angle_deg)), math.sin(math.radians(angle_deg))
    out: FloatArray = np.asarray(points, dtype=float) @ np.array([[c, s], [-s, c]])
    return out


def best_turn(
    points: FloatArray, log_power: FloatArray, kx: FloatArray, ky: FloatArray, step_deg: float = 0.25
) -> float:
    """The turn (degrees, counterclockwise) that puts the most power of a spectrum under ``points`` (M, 2), 1/Å.

    Notes
    -----
    For each angle phi on a grid of ``step_deg`` the points are turned by phi
    and the log power above its median (negative values counted as 0) is
    interpolated bilinearly at them and summed; the angle with the largest
    sum wins.  Points outside the spectrum count 0.  Give the first shell of
    bright spots: they are what a topograph resolves best, and farther,
    weaker orders mostly add noise.
    """
    from scipy import ndimage

    g = np.asarray(points, dtype=float).reshape(-1, 2)
    if not len(g):
        return 0.0
    level = np.clip(np.asarray(log_power, dtype=float) - float(np.median(log_power)), 0.0, None)
    phi = np.radians(np.arange(0.0, 360.0, step_deg))
    c, s = np.cos(phi)[:, None], np.sin(phi)[:, None]
    x = g[None, :, 0] * c - g[None, :, 1] * s
    y = g[None, :, 0] * s + g[None, :, 1] * c
    rows = (y - ky[0]) / (ky[1] - ky[0])
    cols = (x - kx[0]) / (kx[1] - kx[0])
    values = ndimage.map_coordinates(level, [rows.ravel(), cols.ravel()], order=1, mode="constant", cval=0.0)
    return float(np.degrees(phi[int(np.argmax(values.reshape(x.shape).sum(axis=1)))]))


def first_shell(pattern: CorrugationPattern, mesh_inplane: FloatArray) -> FloatArray:
    """(K, 2) G of the shortest bright spots: |F(G)|/F(0) at least half the largest, |G| within 5 % of the shortest."""
    g = spot_positions(pattern, mesh_inplane)
    if not len(g):
        return g
    w = np.array([s.intensity for s in pattern.spots], dtype=float)
    r = np.linalg.norm(g, axis=1)
    bright = w >= 0.5 * w.max()
    out: FloatArray = g[bright & (r <= 1.05 * r[bright].min())]
    return out


#: Decades of power below the brightest spots that a measured spectrum shows.
SPECTRUM_DECADES = 4.0


def power_spectrum(heights: FloatArray, pixel_size: tuple[float, float]) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Power spectrum of a height map with a Hann window: (power (ny, nx), kx (nx,), ky (ny,)), k in 1/Å.

    Missing pixels (NaN: the step edges, adsorbates and pits the analysis
    left out) split the map into terraces.  When they do, only the largest
    terrace is transformed, as the lattice measurement transforms terraces
    one by one: the atomic lattice of one terrace is shifted laterally
    against the next, and a transform across them streaks every spot.  The
    terrace's box is windowed (Hann) and zero-padded to the map's size so that k keeps the map's grid.
    The mean of the finite pixels is removed first.  Frequencies are centred
    (``fftshift``); row index is y, column index x.
    """
    from scipy import ndimage

    z = np.asarray(heights, dtype=float)
    ny, nx = z.shape
    finite = np.isfinite(z)
    box: tuple[slice, slice] = (slice(0, ny), slice(0, nx))
    if finite.any() and not finite.all():
        labels, n = ndimage.label(finite)
        if n > 1:
            sizes = np.bincount(labels.ravel())[1:]
            largest = 1 + int(np.argmax(sizes))
            finite = labels == largest
            found = ndimage.find_objects(labels)[largest - 1]
            if found is not None:
                box = (found[0], found[1])
    mean = float(np.mean(z[finite])) if finite.any() else 0.0
    sub = np.where(finite, z - mean, 0.0)[box]
    window = np.outer(np.hanning(sub.shape[0]), np.hanning(sub.shape[1]))
    power = np.abs(np.fft.fftshift(np.fft.fft2(sub * window, s=(ny, nx)))) ** 2
    kx = np.fft.fftshift(np.fft.fftfreq(nx, float(pixel_size[0])))
    ky = np.fft.fftshift(np.fft.fftfreq(ny, float(pixel_size[1])))
    return power, kx, ky


def spectrum_limits(log_power: FloatArray, kx: FloatArray, ky: FloatArray, k_max: float) -> tuple[float, float]:
    """Colour limits of a log power spectrum shown out to |kx|, |ky| <= k_max (1/Å).

    From the median of the window shown (the background, not the empty high
    frequencies beyond it) to its brightest spots (99.9th percentile), at
    most :data:`SPECTRUM_DECADES` decades: the step-edge streak at k = 0 and
    the far side lobes of the window are not what a reader should see.
    """
    shown = log_power[np.ix_(np.abs(ky) <= k_max, np.abs(kx) <= k_max)]
    lo, hi = np.percentile(shown if shown.size else log_power, [50.0, 99.9])
    return max(float(lo), float(hi) - SPECTRUM_DECADES), float(hi)


def fourier_pattern(
    pattern: CorrugationPattern,
    mesh_inplane: FloatArray,
    *,
    cell_inplane: FloatArray | None = None,
    domains: int = 1,
    measured: MeasuredMap | None = None,
    measured_direction_deg: float | None = None,
    hkl: tuple[int, int, int] | None = None,
    title: str | None = None,
    hexagonal: bool = False,
    width_in: float = 4.6,
) -> Any:
    """Predicted Fourier spots of a corrugation pattern, alone (like a LEED pattern) or over a measured FFT.

    Parameters
    ----------
    pattern : CorrugationPattern
        From :func:`termination.surface.corrugation.termination_corrugation`
        or a reconstruction's corrugation.
    mesh_inplane : (2, 2) FloatArray
        The 1x1 mesh rows a, b, Å (face frame).
    cell_inplane : (2, 2) FloatArray, optional
        The reconstruction cell, for the apparent lattice of its spots.
    domains : int
        Rotational domains superposed in ``pattern.spots`` (spots with fewer
        are drawn as diamonds).
    measured : MeasuredMap, optional
        A height map whose power spectrum is drawn underneath.
    measured_direction_deg : float, optional
        Direction of the measured lattice vector a in the image, degrees from
        +x towards +y; the prediction is turned to put its a there.  Without
        it, the prediction is turned by :func:`best_turn`.
    hkl : 3 ints, optional
        The face, for the title.
    hexagonal : bool
        Write the face (h k i l).
    title : str, optional
    width_in : float

    Returns
    -------
    matplotlib.figure.Figure
        Predicted spots are the scatters 'integer-order spots',
        'fractional-order spots' and 'domain spots' (offsets: G in 1/Å, in the
        order of ``pattern.spots``); the 1x1 net is 'reciprocal net'; the
        measured power is the image 'measured power'.
    """
    mesh = np.asarray(mesh_inplane, dtype=float)
    rotation = 0.0
    spectrum = None
    if measured is not None:
        power, kx, ky = power_spectrum(measured.levelled.lattice_image, measured.pixel_size)
        log_power = np.log10(power + power.max() * 1e-12)
        spectrum = (log_power, kx, ky)
        vectors = apparent_vectors(pattern.spots, mesh, cell_inplane)
        if measured_direction_deg is not None and len(vectors):
            rotation = float(measured_direction_deg) - math.degrees(math.atan2(vectors[0][1], vectors[0][0]))
        else:
            rotation = best_turn(first_shell(pattern, mesh), log_power, kx, ky)
    g = spot_positions(pattern, mesh, rotation)
    intensity = np.array([s.intensity for s in pattern.spots], dtype=float)
    g_max = (
        float(np.linalg.norm(g, axis=1).max()) if len(g) else float(np.linalg.norm(np.linalg.inv(mesh), axis=0).max())
    )
    lim = 1.15 * g_max
    _, net = reciprocal_points(mesh, lim * 1.5)
    net = _turned(net, rotation)
    fractional = np.array([any(abs(v - round(v)) > 1e-6 for v in s.g) for s in pattern.spots], dtype=bool)
    partial = np.array([getattr(s, "domains", domains) < domains for s in pattern.spots], dtype=bool)
    with style():
        fig = new_figure(width_in, width_in * 0.92)
        ax = fig.add_subplot()
        ax.set_aspect("equal")
        if spectrum is not None:
            log_power, kx, ky = spectrum
            dkx, dky = kx[1] - kx[0], ky[1] - ky[0]
            lo, hi = spectrum_limits(log_power, kx, ky, lim)
            ax.imshow(
                log_power,
                vmin=lo,
                vmax=hi,
                origin="lower",
                extent=(kx[0] - dkx / 2, kx[-1] + dkx / 2, ky[0] - dky / 2, ky[-1] + dky / 2),
                cmap=relief_colormap(),
                gid="measured power",
                zorder=0,
            )
        else:
            ax.set_facecolor("#ffffff")
        ring = "#ffffff" if measured is not None else SLATE
        ax.scatter(
            net[:, 0],
            net[:, 1],
            s=40,
            facecolors="none",
            edgecolors=ring,
            linewidths=0.5,
            zorder=2,
            gid="reciprocal net",
        )
        ax.scatter([0], [0], s=30, marker="+", c=ring, zorder=2, gid="origin")
        area = 12 + 160 * np.sqrt(np.clip(intensity, 0, 1))
        kinds = [
            ("integer-order spots", ~fractional & ~partial, "o", COLOURS[1]),
            ("fractional-order spots", fractional & ~partial, "s", COLOURS[2]),
            ("domain spots", partial, "D", COLOURS[4]),
        ]
        for gid, mask, marker, colour in kinds:
            if not mask.any():
                continue
            # Over a measured spectrum the predicted spots are rings, so the measured peaks show through.
            ax.scatter(
                g[mask, 0],
                g[mask, 1],
                s=area[mask] * (1.6 if measured is not None else 1.0),
                marker=marker,
                c="none" if measured is not None else colour,
                edgecolors=colour if measured is not None else "#000000",
                linewidths=1.4 if measured is not None else 0.6,
                zorder=4,
                gid=gid,
                label=f"{gid.replace(' spots', '')} ({int(mask.sum())})",
            )
        ax.set_xlim(-lim, lim)
        ax.set_ylim(-lim, lim)
        ax.set_xlabel("G along e1 (1/Å)" if rotation == 0.0 else "kx (1/Å)")
        ax.set_ylabel("G along e2 (1/Å)" if rotation == 0.0 else "ky (1/Å)")
        name = (
            (f"{hkl_label(hkl, hexagonal=hexagonal)} " if hkl else "")
            + pattern.label
            + (f" {pattern.cell}" if pattern.cell else "")
        )
        where = "over the measured power spectrum" if measured is not None else "predicted"
        ax.set_title(title or f"Fourier spots of {name}: {where}", fontsize=7.5)
        fig.legend(
            loc="outside lower center",
            ncols=3,
            fontsize=6.5,
            markerscale=0.6,
            title="predicted spots, area ∝ |F(G)|/F(0)",
            title_fontsize=6.5,
        )
    return fig
