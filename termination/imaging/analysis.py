"""One height map from pixels to measurement: plane fit, terrace model, steps and lattice.

The analysis of one topograph runs in four stages:

1. **Plane fit** of all pixels: the macroscopic inclination of the imaged
   area and its azimuth relative to the scanner plane.
2. **Terrace model** (:mod:`termination.imaging.terraces`): one plane, one
   offset per terrace, one offset per scan line and, where needed, a smooth
   background, fitted jointly with step edges, adsorbates, pits and missing
   pixels masked; levelling, segmentation and fitting repeat until the plane
   is stable. The common plane is the terrace plane; its tilt is the one
   that identifies the face.
3. **Steps**: the height between terraces of adjacent levels, one value per
   pair of levels.
4. **Lattice** (:mod:`termination.imaging.fourier`): measured on each of the
   largest terraces and combined, so that lateral shifts between terraces
   cannot bias it; optionally corrected for a linear drift.

Readers and calibration live in :mod:`termination.imaging.reading` and
:mod:`termination.imaging.instruments`.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray
from termination.errors import ImageError
from termination.imaging.fourier import DriftCorrection, Lattice, measure_lattice
from termination.imaging.parameters import ImageParameters
from termination.imaging.reading import MAX_HEIGHT_ANGSTROM, check_heights, parse_pixel_size
from termination.imaging.terraces import (
    Step,
    _coordinates,
    _plane_slopes,
    fit_terraces,
    levelled_image,
    terrace_steps,
    tilt_azimuth,
)
from termination.units import ANGSTROM, DEG

__all__ = ["SEGMENT_PIXELS", "HeightMapAnalysis", "LevelledMaps", "Tilt", "analyse_heightmap", "levelled_maps"]

#: Larger images are segmented on a copy binned to about this many pixels (the fit uses every pixel).
SEGMENT_PIXELS = 512 * 512


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
        Standard uncertainty of ``terrace``, deg.
    """

    macroscopic: float = field(metadata=DEG)
    terrace: float | None = field(metadata=DEG)
    azimuth: float = field(metadata=DEG)
    terrace_azimuth: float | None = field(metadata=DEG)
    terrace_sigma: float | None = field(metadata=DEG)


@dataclass(frozen=True)
class HeightMapAnalysis:
    """What one height map shows.

    Parameters
    ----------
    tilt : Tilt
    lattice : Lattice or None
        None when no lattice was found (the reason is in ``notes``).
    steps : tuple of Step
        One entry per pair of adjacent terraces, empty when none was found.
    terraces : int
        Number of terraces (connected flat regions) used in the fit.
    nan_fraction : float
        Fraction of missing (NaN) pixels.
    outlier_fraction : float
        Fraction of the finite pixels left out of the final fit as adsorbates,
        pits or other outliers by the residual test.
    fitted_fraction : float
        Fraction of the finite pixels used in the terrace fit (the rest are
        step edges, outliers and pieces too small to keep).
    line_offset_rms : float
        Root-mean-square offset of the scan lines, Å (0 when not fitted).
    background : bool
        Whether a smooth background was fitted and removed.
    relief : float
        Root-mean-square height of the smooth relief left after the fit, Å.
    drift : DriftCorrection or None
        The drift correction applied to the lattice, when asked for.
    notes : tuple of str
        Assumptions and the reasons for anything not found.
    """

    tilt: Tilt
    lattice: Lattice | None
    steps: tuple[Step, ...]
    terraces: int
    nan_fraction: float
    outlier_fraction: float
    fitted_fraction: float
    line_offset_rms: float = field(metadata=ANGSTROM)
    background: bool
    relief: float = field(metadata=ANGSTROM)
    drift: DriftCorrection | None
    notes: tuple[str, ...]

    @property
    def undetermined(self) -> tuple[str, ...]:
        """Names of the measured quantities that were not determined."""
        out = []
        if self.tilt.terrace is None:
            out.append("terrace tilt")
        if self.lattice is None:
            out.append("lattice")
        if not self.steps:
            out.append("step heights")
        return tuple(out)


def _checked(
    heights: ArrayLike, pixel_size: Any, parameters: dict[str, Any]
) -> tuple[FloatArray, tuple[float, float], ImageParameters]:
    """The heights, pixel size and parameters of one analysis, checked (ImageError naming the bad one)."""
    z = check_heights(heights, max_abs=MAX_HEIGHT_ANGSTROM)
    try:
        px = parse_pixel_size(pixel_size)
    except ImageError as exc:
        raise ImageError(f"pixel_size: {exc}") from None
    unknown = set(parameters) - set(ImageParameters.names()) | ({"bin", "workers"} & set(parameters))
    if unknown:
        raise ImageError(f"unknown image parameter {sorted(unknown)[0]!r}")
    # segment large images on a binned copy (about 512 x 512 pixels)
    params = ImageParameters(**parameters, bin=max(1, int(round(math.sqrt(z.size / SEGMENT_PIXELS)))))
    return z, px, params


@dataclass(frozen=True, eq=False)
class LevelledMaps:
    """The height map as the analysis levels it, for figures that show what was analysed.

    Parameters
    ----------
    terraces : (ny, nx) ndarray
        Heights minus the terrace plane, the scan-line offsets and the smooth
        background of the terrace model, Å: each terrace is a flat level.
        NaN where pixels are missing.
    lattice_image : (ny, nx) ndarray
        The image the lattice is measured on
        (:func:`termination.imaging.terraces.levelled_image`): every terrace
        brought to zero (the smooth background left in), Å; NaN where step
        edges, adsorbates, pits and missing pixels were left out.
    """

    terraces: FloatArray = field(metadata=ANGSTROM)
    lattice_image: FloatArray = field(metadata=ANGSTROM)


def levelled_maps(heights: ArrayLike, pixel_size: Any, **parameters: Any) -> LevelledMaps:
    """The levelled maps of the terrace model that :func:`analyse_heightmap` fits, with the same parameters.

    Parameters
    ----------
    heights : (ny, nx) array_like
        Heights, Å (NaN: missing).
    pixel_size : float or (2,) sequence or str
    **parameters
        As for :func:`analyse_heightmap`; the same values give the same maps
        the analysis measured on.

    Returns
    -------
    LevelledMaps

    Raises
    ------
    ImageError
        As :func:`analyse_heightmap`.
    """
    z, px, params = _checked(heights, pixel_size, parameters)
    valid = np.isfinite(z)
    if 1.0 - float(valid.mean()) > params.max_nan_fraction:
        raise ImageError(
            f"{1.0 - float(valid.mean()):.1%} of the pixels are missing (NaN), more than the limit of "
            f"{params.max_nan_fraction:.0%} (max_nan_fraction)"
        )
    coords = _coordinates(z.shape, px)
    fit = fit_terraces(z, valid, coords, px, params)
    x, y = coords
    a, b = fit.slope
    terraces = z - fit.lines[:, None] - b * y[:, None] - a * x[None, :]
    if fit.background is not None:
        terraces = terraces - fit.background.rows(coords)
    terraces[~valid] = np.nan
    on = valid & (np.asarray(fit.near(z.shape, slice(None))) > 0)
    if on.any():
        terraces -= float(np.median(terraces[on]))
    flat, keep = levelled_image(z, valid, fit, coords, params)
    lattice_image = np.where(keep, flat, np.nan).astype(np.float64)
    return LevelledMaps(terraces=np.asarray(terraces, dtype=np.float64), lattice_image=lattice_image)


def analyse_heightmap(
    heights: ArrayLike,
    pixel_size: Any,
    *,
    progress: Callable[[float, str], object] | None = None,
    **parameters: Any,
) -> HeightMapAnalysis:
    """Tilt, lattice and step heights of one height map.

    Parameters
    ----------
    heights : (ny, nx) array_like
        Heights, Å; NaN marks missing pixels. x along columns (the fast scan
        direction), y along rows (one row per scan line).
    pixel_size : float or (2,) sequence or str
        Pixel size along x and y, Å (or text with a unit, e.g. ``"0.05nm"``).
    progress : callable, optional
        Called as ``progress(fraction, stage)`` with fraction in [0, 1].
    **parameters
        Any field of :class:`~termination.imaging.parameters.ImageParameters`
        (``min_step_angstrom=0.3``, ``drift_lattice="hexagonal"``, ...).

    Returns
    -------
    HeightMapAnalysis

    Raises
    ------
    ImageError
        For an unusable image (see :func:`termination.imaging.reading.check_heights`),
        more missing pixels than ``max_nan_fraction``, a bad pixel size or a
        bad parameter.

    Notes
    -----
    *Plane fit.* :math:`z = a x + b y + c` by least squares over finite
    pixels; tilt :math:`\\theta = \\arctan\\sqrt{a^2+b^2}`, azimuth
    :math:`\\operatorname{atan2}(b, a)` (steepest ascent, from +x to +y).

    *Terrace model* (:func:`termination.imaging.terraces.fit_terraces`): one
    plane, one offset per terrace, one offset per scan line (constrained so
    that the y tilt survives) and a smooth background, with step edges,
    adsorbates, pits and missing pixels masked. The covariance of (a, b) is
    :math:`v M^{-1}`, with M the within-terrace scatter matrix of (x, y) and
    v the variance per pixel of a mean (residual variance times the pixel
    correlation factor, plus the smooth relief left). The y slope also
    carries the trend that the scan-line offsets may hide,
    :math:`\\sigma_r^2 / \\sum_i (y_i - \\bar y)^2` with :math:`\\sigma_r` their rms,
    and, when a background was fitted, each slope carries its unknowable
    linear part, :math:`12 \\sigma_B^2 / L^2` (:math:`\\sigma_B` the background's
    rms height, L the image side). The tilt is taken relative to the scanner
    plane, which is assumed parallel to the mount face.

    *Steps* (:func:`termination.imaging.terraces.terrace_steps`): the
    distance between the parallel planes of adjacent terraces.

    *Lattice* (:func:`termination.imaging.fourier.measure_lattice`):
    measured on each of the largest terraces and combined.
    """
    z, px, params = _checked(heights, pixel_size, parameters)
    if progress is not None and not callable(progress):
        raise ImageError(f"progress must be callable, got {progress!r}")

    def report(fraction: float, stage: str) -> None:
        if progress is not None:
            progress(fraction, stage)

    valid = np.isfinite(z)
    nan_fraction = 1.0 - float(valid.mean())
    if nan_fraction > params.max_nan_fraction:
        raise ImageError(
            f"{nan_fraction:.1%} of the pixels are missing (NaN), more than the limit of "
            f"{params.max_nan_fraction:.0%} (max_nan_fraction)"
        )
    notes = []
    if nan_fraction > 0:
        notes.append(f"{nan_fraction:.1%} of the pixels are missing (NaN) and were left out")
    coords = _coordinates(z.shape, px)
    report(0.0, "plane fit")
    a0, b0 = _plane_slopes(z, valid, coords)
    macro_tilt, macro_az = tilt_azimuth(a0, b0)

    report(0.1, "terraces")
    fit = fit_terraces(z, valid, coords, px, params)
    a, b = fit.slope
    terrace_tilt: float | None
    terrace_az: float | None
    terrace_tilt, terrace_az = tilt_azimuth(a, b)

    report(0.6, "steps")
    steps, cov_ab = terrace_steps(fit, params)
    n_levels = len(set(np.asarray(fit.level_of).tolist()))
    slope = math.hypot(a, b)
    if cov_ab is not None:
        cov_ab = cov_ab.copy()
        x, y = coords
        if fit.line_rms > 0:
            # the linear trend of the true line offsets is indistinguishable from the y slope
            cov_ab[1, 1] += fit.line_rms**2 / float(np.sum((y - y.mean()) ** 2))
        if fit.background is not None:
            # so is the linear part of a background: taken as large as the fitted background's rms height
            # over the image, a slope of rms sqrt(12) / L along each side L
            rms2 = fit.background.rms**2
            cov_ab[0, 0] += 12.0 * rms2 / float(np.ptp(x) + px[0]) ** 2
            cov_ab[1, 1] += 12.0 * rms2 / float(np.ptp(y) + px[1]) ** 2
    if cov_ab is not None and slope > 0:
        u = np.array([a, b]) / slope
        sig_slope = math.sqrt(max(float(u @ cov_ab @ u), 0.0))
    elif cov_ab is not None:
        sig_slope = math.sqrt(max(float(np.trace(cov_ab)) / 2, 0.0))
    else:
        sig_slope = float("nan")
    terrace_sigma: float | None = math.degrees(sig_slope / (1 + slope * slope))
    relief_limit = params.max_relief_fraction * params.min_step_angstrom
    hidden = fit.structure > params.max_structure_ratio and fit.peak_relief > relief_limit
    # with one level only, a background with relief of a step's size may hide the staircase
    background_rms = 0.0 if fit.background is None else fit.background.rms
    bent = n_levels < 2 and fit.background is not None and background_rms > relief_limit
    if bent and not hidden:
        notes.append(
            f"terrace tilt not determined: one level only, and the fitted background ({background_rms:.2f} Å "
            "rms) could hide steps the segmentation did not resolve"
        )
        terrace_tilt = terrace_az = terrace_sigma = None
        steps = ()
    elif hidden:
        notes.append(
            f"terrace tilt and steps not determined: smooth relief up to {fit.peak_relief:.2f} Å remains after "
            f"the terrace fit ({fit.structure:.1f} times what noise leaves), e.g. steps the segmentation "
            "did not resolve"
        )
        terrace_tilt = terrace_az = terrace_sigma = None
        steps = ()
    elif n_levels < 2:
        notes.append("one terrace level: no step heights")
    elif not steps:
        notes.append("several levels but no two adjacent terraces: no step heights")
    else:
        notes.append(
            "step sigmas are statistical (fit covariance with pixel correlation and the smooth relief left)"
            + ("" if params.z_calibration_fraction else "; the scanner's z calibration is not included")
        )
    notes.append(
        f"{fit.fitted:.0%} of the finite pixels used in the terrace fit (the rest: step edges, adsorbates, pits, "
        "pieces too small to keep)"
    )
    if fit.background is not None:
        notes.append(f"a smooth background (nodes {params.background_spacing_px:g} px apart) was fitted and removed")
    notes.append("tilts are relative to the scanner plane, taken as parallel to the mount face")

    report(0.7, "lattice")
    flat, keep = levelled_image(z, valid, fit, coords, params)
    lattice, drift = measure_lattice(flat, keep, fit, px, (a, b), params, notes)
    del flat, keep
    report(1.0, "done")
    tilt = Tilt(
        macroscopic=macro_tilt,
        terrace=terrace_tilt,
        azimuth=macro_az,
        terrace_azimuth=terrace_az,
        terrace_sigma=terrace_sigma,
    )
    return HeightMapAnalysis(
        tilt=tilt,
        lattice=lattice,
        steps=steps,
        terraces=fit.n,
        nan_fraction=nan_fraction,
        outlier_fraction=fit.outliers,
        fitted_fraction=fit.fitted,
        line_offset_rms=fit.line_rms,
        background=fit.background is not None,
        relief=fit.relief,
        drift=drift,
        notes=tuple(notes),
    )
