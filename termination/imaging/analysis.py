"""One height map from pixels to measurement: plane fit, terraces, steps and lattice.

The analysis of one topograph runs in four stages:

1. **Plane fit** of all pixels: the macroscopic inclination of the imaged
   area and its azimuth relative to the scanner plane.
2. **Terrace fit** (:mod:`termination.imaging.terraces`): step edges are
   excluded by a gradient threshold, the remaining pixels are split into
   terraces by the height histogram of the levelled image, and one common
   plane with one offset per terrace is fitted. Level, histogram, segment,
   refit are repeated until the plane stops changing. The common plane is
   the terrace plane; its tilt is the one that identifies the face.
3. **Lattice** (:mod:`termination.imaging.fourier`): the terrace-levelled
   image is Hann-windowed and Fourier transformed; significant peaks are
   located to sub-pixel precision, the strongest two independent ones span
   the reciprocal lattice, and every peak it indexes refines it.
4. **Steps**: the height between each pair of adjacent terraces, from the
   terrace offsets of stage 2.

Readers and calibration live in :mod:`termination.imaging.reading`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from termination.errors import ImageError
from termination.imaging.fourier import Lattice, fourier_lattice
from termination.imaging.parameters import ImageParameters
from termination.imaging.reading import check_heights, parse_pixel_size
from termination.imaging.terraces import (
    Step,
    _coordinates,
    _flattened,
    _plane_slopes,
    _segment,
    _smooth,
    _steps,
    _structure_ratio,
    tilt_azimuth,
)

__all__ = ["HeightMapAnalysis", "Tilt", "analyse_heightmap"]


@dataclass(frozen=True)
class Tilt:
    """Inclinations relative to the scanner plane, degrees.

    Parameters
    ----------
    macroscopic : float
        Tilt of the plane fitted to all pixels (terraces and steps), deg.
    terrace : float or None
        Tilt of the common terrace plane, deg. This identifies the face.
        None when the terraces could not be resolved (see the notes).
    azimuth : float
        Direction of steepest ascent of the macroscopic plane, deg in
        [0, 360), measured from +x (columns) towards +y (rows).
    terrace_azimuth : float or None
        The same for the terrace plane, deg.
    terrace_sigma : float or None
        Statistical standard uncertainty of ``terrace``, deg.
    """

    macroscopic: float
    terrace: float | None
    azimuth: float
    terrace_azimuth: float | None
    terrace_sigma: float | None


@dataclass(frozen=True)
class HeightMapAnalysis:
    """What one height map shows.

    Parameters
    ----------
    tilt : Tilt
    lattice : Lattice or None
        None when no lattice was found (the reason is in ``notes``).
    steps : tuple of Step
        One entry per pair of adjacent terraces, empty for a single terrace.
    terraces : int
        Number of terraces (connected flat regions) used in the fit.
    notes : tuple of str
        Assumptions and the reasons for anything not found.
    """

    tilt: Tilt
    lattice: Lattice | None
    steps: tuple[Step, ...]
    terraces: int
    notes: tuple[str, ...]


def analyse_heightmap(heights, pixel_size, *, progress=None, **parameters):
    """Tilt, lattice and step heights of one height map.

    Parameters
    ----------
    heights : (ny, nx) array_like
        Heights, Å; NaN marks missing pixels. x along columns, y along rows.
    pixel_size : float or (2,) sequence or str
        Pixel size along x and y, Å (or text with a unit, e.g. ``"0.05nm"``).
    progress : callable, optional
        Called as ``progress(fraction, stage)`` with fraction in [0, 1].
    **parameters
        Any field of :class:`~termination.imaging.parameters.ImageParameters`
        (``min_step_angstrom=0.3``, ``edge_guard_px=3``, ...).

    Returns
    -------
    HeightMapAnalysis

    Raises
    ------
    ImageError
        For an unusable image (see :func:`termination.imaging.reading.check_heights`),
        a bad pixel size or a bad parameter.

    Notes
    -----
    *Plane fit.* :math:`z = a x + b y + c` by least squares over finite
    pixels; tilt :math:`\\theta = \\arctan\\sqrt{a^2+b^2}`, azimuth
    :math:`\\operatorname{atan2}(b, a)` (steepest ascent, from +x to +y).

    *Terrace fit.* Minimises :math:`\\sum_k \\sum_{i \\in k} (z_i - a x_i - b
    y_i - c_k)^2` over terrace pixels, one offset :math:`c_k` per terrace.
    The covariance of (a, b) is :math:`f s^2 M^{-1}`, with :math:`M` the
    within-terrace scatter matrix of (x, y), :math:`s^2` the residual
    variance and :math:`f` the pixel-correlation factor (AR(1) along rows
    and columns). The tilt is taken relative to the scanner plane, which is
    assumed parallel to the mount face.

    *Steps.* For adjacent terraces k and l the height is the distance
    between their parallel planes, :math:`h = |c_l - c_k| / \\sqrt{1 + a^2 +
    b^2}`, with :math:`\\sigma_h^2 = [f s^2 (1/N_k + 1/N_l) + d^T C_{ab} d] /
    (1 + a^2 + b^2)`, where :math:`d` joins the terrace centroids. The
    scanner's z calibration is not included unless given.

    *Lattice.* The levelled image (terrace pixels only, others zero) is
    multiplied by a 2-D Hann window and transformed. A peak counts when its
    power exceeds :math:`\\mu \\ln(N/\\alpha)`, where :math:`\\mu` is the mean
    noise power at its \\|k\\| (median of the annulus / ln 2), :math:`N` the
    number of bins in a half plane and :math:`\\alpha` the false-alarm
    probability. Positions are refined per axis with the exact Hann
    three-point formula. Maxima on radial streaks (the transform of
    straight step edges) are dropped. The strongest peak and the strongest
    one not parallel to it span the reciprocal lattice. Each coordinate carries
    :math:`\\sigma_k = \\Delta k \\sqrt{1/12 + \\sigma_\\delta^2}\\, B`: the grid
    resolution (uniform over one bin), the interpolation noise, and the
    broadening B of the peak relative to the window's own shape. The
    reciprocal basis is least-squares fitted to all indexed peaks, scaled by
    the reduced chi-square when larger than one, and propagated to the
    real-space a, b, gamma. The scanner is assumed drift-free and linear.

    References
    ----------
    T. Grandke, IEEE Trans. Instrum. Meas. 32, 350 (1983) (Hann interpolation).
    """
    z = check_heights(heights)
    try:
        px = parse_pixel_size(pixel_size)
    except ImageError as exc:
        raise ImageError(f"pixel_size: {exc}") from None
    unknown = set(parameters) - set(ImageParameters.names()) | ({"bin", "workers"} & set(parameters))
    if unknown:
        raise ImageError(f"unknown image parameter {sorted(unknown)[0]!r}")
    # segment large images on a binned copy (about 1024 x 1024 pixels)
    params = ImageParameters(**parameters, bin=max(1, int(round(math.sqrt(z.size / 1024**2)))))
    if progress is not None and not callable(progress):
        raise ImageError(f"progress must be callable, got {progress!r}")

    def report(fraction, stage):
        if progress is not None:
            progress(fraction, stage)

    notes = []
    valid = np.isfinite(z)
    coords = _coordinates(z.shape, px)
    report(0.0, "plane fit")
    a0, b0 = _plane_slopes(z, valid, coords)
    macro_tilt, macro_az = tilt_azimuth(a0, b0)

    report(0.1, "terraces")
    terr = _segment(z, valid, coords, px, params)
    a, b = terr.slope
    terrace_tilt, terrace_az = tilt_azimuth(a, b)

    report(0.6, "steps")
    structure = _structure_ratio(z.shape, terr, params.structure_smooth_px, params.bin)
    dist, near = terr.dist, terr.near
    steps, _f, cov_ab = _steps(terr, z.shape, dist, near, params)
    n_levels = len(set(terr.level_of.tolist()))
    slope = math.hypot(a, b)
    if cov_ab is not None and slope > 0:
        u = np.array([a, b]) / slope
        sig_slope = math.sqrt(max(float(u @ cov_ab @ u), 0.0))
    elif cov_ab is not None:
        sig_slope = math.sqrt(max(float(np.trace(cov_ab)) / 2, 0.0))
    else:
        sig_slope = float("nan")
    terrace_sigma = math.degrees(sig_slope / (1 + slope * slope))
    hidden = structure > params.max_structure_ratio
    if hidden:
        notes.append(
            f"terrace tilt and steps not determined: relief larger than the corrugation remains after "
            f"the terrace fit ({structure:.1f} times the noise level), e.g. steps hidden by noise"
        )
        terrace_tilt = terrace_az = terrace_sigma = None
        steps = ()
    elif n_levels < 2:
        notes.append("one terrace: no step heights")
    elif not steps:
        notes.append("several levels but no two adjacent terraces: no step heights")
    else:
        notes.append(
            "step sigmas are statistical (fit covariance with pixel correlation)"
            + ("" if params.z_calibration_fraction else "; the scanner's z calibration is not included")
        )
    notes.append("tilts are relative to the scanner plane, taken as parallel to the mount face")

    report(0.7, "lattice")
    resid = _flattened(z, valid, terr, near, coords, params)
    if hidden:
        # keep the unresolved relief out of the Fourier transform
        resid = resid - _smooth(resid, valid, params.structure_smooth_px)
        resid[~valid] = 0.0
    lattice = fourier_lattice(resid, px, (a, b), params, notes)
    report(1.0, "done")
    tilt = Tilt(
        macroscopic=macro_tilt,
        terrace=terrace_tilt,
        azimuth=macro_az,
        terrace_azimuth=terrace_az,
        terrace_sigma=terrace_sigma,
    )
    return HeightMapAnalysis(tilt=tilt, lattice=lattice, steps=steps, terraces=terr.n, notes=tuple(notes))
