"""The knobs of the height-map analysis: one validated record with documented defaults."""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

from termination.defaults import MAX_NAN_FRACTION, MIN_STEP_ANGSTROM
from termination.errors import ImageError

__all__ = ["DRIFT_LATTICES", "ImageParameters"]

#: Lattice types from which a linear drift can be estimated.
DRIFT_LATTICES = ("square", "rectangular", "hexagonal")


@dataclass(frozen=True)
class ImageParameters:
    """Settings of :func:`termination.imaging.analysis.analyse_heightmap`.

    Attributes
    ----------
    min_step_angstrom : float, default 0.5
        Smallest step height to resolve, Å. Terrace levels closer than this
        are one level.
    edge_smooth_px : float, default 2.0
        Gaussian smoothing (standard deviation, pixels) before the gradient
        and the histogram.
    edge_threshold_sigmas : float, default 5.0
        A pixel is a step edge when its gradient exceeds the median gradient
        by this many robust standard deviations.
    edge_guard_px : int, default 2
        Pixels within this distance of an edge or another level are left out
        of the terrace fit.
    level_smooth_px : float, default 6.0
        Gaussian smoothing (standard deviation, pixels) of the image whose
        histogram gives the terrace levels; it should exceed the corrugation
        period so that the atomic corrugation does not broaden the levels.
    min_terrace_px : int, default 200
        Smallest terrace, pixels. Smaller pieces (at any level) are left
        out of the fit, never merged with a terrace at another level.
    min_level_contrast : float, default 0.5
        A histogram peak is a level when the dip to its neighbours is at
        least this fraction of its height (resolved peaks only).
    max_iterations : int, default 8
        Level-segment-refit cycles at most.
    slope_tol_deg : float, default 1e-3
        Stop when the terrace plane changes by less than this, degrees.
    max_step_width_px : float, default 24
        Terraces farther apart than this (pixels) are not adjacent.
    min_step_length_px : int, default 8
        Two terraces are adjacent when they meet along at least this many pixels.
    z_calibration_fraction : float, default 0
        Relative uncertainty of the scanner's z calibration, added in
        quadrature to each step's statistical sigma.
    lattice_false_alarm : float, default 1e-3
        Probability that pure noise gives one Fourier peak above the threshold.
    min_periods : int, default 6
        A periodicity must repeat at least this many times across the image.
    max_peaks : int, default 12
        Strongest Fourier peaks (one half plane) used for the lattice.
    min_peak_fraction : float, default 1e-3
        A Fourier peak counts only when its power is at least this fraction
        of the strongest one's: weaker maxima are side lobes of the strong
        spots through the terrace mask (on clean maps they stand far above
        the noise).
    min_lattice_angstrom : float, default 2.0
        Shortest lattice vector that can be reported, Å; no crystal surface
        has a shorter one (the shortest metal-metal distances are about
        2.2 Å), so a shorter lattice is an artifact and is not returned.
        Lattices shorter than 2.5 pixels are not returned either.
    max_lattice_sigma_fraction : float, default 0.015
        A lattice whose a or b has a larger relative standard uncertainty
        is not reported: its spots are too broad or too few (terraces only
        a few periods wide, strong artifacts) for a lattice measured to a
        few percent, and such lattices came out wrong by 2-4 % in the test
        grid (``tests/benchmarks/sweep_image_lattice.py``).
    index_tol : float, default 0.05
        A peak is indexed when its fractional indices lie within this of integers.
    lattice_clip_sigmas : float, default 4
        Before the Fourier transform, pixels of the levelled image further
        than this many robust standard deviations of the terraces from zero
        are set to zero with a margin of ``edge_guard_px``: they are the
        step edges.
    streak_ratio : float, default 0.05
        A Fourier maximum whose power 2 bins away radially exceeds this
        fraction of its own (and four times the tangential one) lies on a
        streak from step edges and is not a lattice spot.
    structure_smooth_px : float, default 8
        Smoothing (pixels) of the residual tested for unresolved relief.
    max_structure_ratio : float, default 3
        After the terrace fit, the residual smoothed over
        ``structure_smooth_px`` may carry at most this many times the
        variance that white noise would leave ...
    max_relief_fraction : float, default 0.25
        ... and at most this fraction of ``min_step_angstrom`` as its rms
        height; when both are exceeded, relief such as steps hidden by noise
        remains and the terrace tilt and step heights are not reported. Below
        either, the smooth relief left is counted in the uncertainties.
    line_offsets : bool, default True
        Fit one height offset per scan line (image row).
    background : bool, default True
        Fit a smooth background where the residual needs one (see
        :func:`termination.imaging.terraces.fit_terraces`).
    background_spacing_px : float, default 8
        Node spacing of the smooth background surface, pixels: relief on
        larger scales is background.
    background_min_relief_angstrom : float, default 0.02
        A background is fitted only when the smooth relief left without one
        exceeds this rms height, Å (and ``max_structure_ratio``).
    background_stiffness : float, default 0.03
        Weight of the bending penalty of the background surface, relative
        to the mean number of pixels per node.
    outlier_sigmas : float, default 4
        Pixels whose lightly smoothed residual lies further than this many
        robust standard deviations from the terraces (adsorbates, pits) are
        left out of the fit.
    max_nan_fraction : float, default 0.5
        Largest fraction of missing (NaN) pixels accepted.
    lattice_terraces : int, default 4
        The lattice is measured on each of up to this many of the largest
        terraces and combined.
    drift_lattice : str or None, default None
        The 2-D lattice type the surface is known to have (``"square"``,
        ``"rectangular"``, ``"hexagonal"``); when given, a linear drift of
        the slow scan is estimated from the measured lattice and removed.
    bin : int, default 1
        Segment on a copy binned by this factor a side (set per image by the
        analysis, about 1024 x 1024 pixels).
    workers : int, default -1
        FFT worker threads (-1: all cores).
    """

    min_step_angstrom: float = MIN_STEP_ANGSTROM
    edge_smooth_px: float = 2.0
    edge_threshold_sigmas: float = 5.0
    edge_guard_px: int = 2
    level_smooth_px: float = 6.0
    min_terrace_px: int = 200
    min_level_contrast: float = 0.5
    max_iterations: int = 8
    slope_tol_deg: float = 1e-3
    max_step_width_px: float = 24.0
    min_step_length_px: int = 8
    z_calibration_fraction: float = 0.0
    lattice_false_alarm: float = 1e-3
    min_periods: int = 6
    max_peaks: int = 12
    min_peak_fraction: float = 1e-3
    min_lattice_angstrom: float = 2.0
    max_lattice_sigma_fraction: float = 0.015
    index_tol: float = 0.05
    lattice_clip_sigmas: float = 4.0
    streak_ratio: float = 0.05
    structure_smooth_px: float = 8.0
    max_structure_ratio: float = 3.0
    max_relief_fraction: float = 0.25
    line_offsets: bool = True
    background: bool = True
    background_spacing_px: float = 8.0
    background_stiffness: float = 0.03
    background_min_relief_angstrom: float = 0.02
    outlier_sigmas: float = 4.0
    max_nan_fraction: float = MAX_NAN_FRACTION
    lattice_terraces: int = 4
    drift_lattice: str | None = None
    bin: int = 1
    workers: int = -1

    def __post_init__(self) -> None:
        positive = (
            "min_step_angstrom",
            "edge_smooth_px",
            "level_smooth_px",
            "max_step_width_px",
            "slope_tol_deg",
            "index_tol",
            "structure_smooth_px",
            "outlier_sigmas",
            "max_relief_fraction",
            "background_spacing_px",
            "background_stiffness",
            "background_min_relief_angstrom",
            "min_lattice_angstrom",
        )
        for name in positive:
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
                raise ImageError(f"{name} must be a positive number, got {v!r}")
        for name in (
            "min_level_contrast",
            "lattice_false_alarm",
            "streak_ratio",
            "max_nan_fraction",
            "min_peak_fraction",
            "max_lattice_sigma_fraction",
        ):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v < 1:
                raise ImageError(f"{name} must lie in (0, 1), got {v!r}")
        v = self.max_structure_ratio
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not v >= 1:
            raise ImageError(f"max_structure_ratio must be at least 1, got {v!r}")
        for name in ("edge_threshold_sigmas", "z_calibration_fraction", "lattice_clip_sigmas"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v < 0:
                raise ImageError(f"{name} must be a non-negative number, got {v!r}")
        for name in (
            "edge_guard_px",
            "max_iterations",
            "min_step_length_px",
            "min_periods",
            "max_peaks",
            "bin",
            "min_terrace_px",
            "lattice_terraces",
        ):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, int) or v < 1:
                raise ImageError(f"{name} must be a positive integer, got {v!r}")
        for name in ("line_offsets", "background"):
            if not isinstance(getattr(self, name), bool):
                raise ImageError(f"{name} must be True or False, got {getattr(self, name)!r}")
        if self.drift_lattice is not None and self.drift_lattice not in DRIFT_LATTICES:
            raise ImageError(f"drift_lattice must be one of {', '.join(DRIFT_LATTICES)}, got {self.drift_lattice!r}")
        if self.index_tol >= 0.5:
            raise ImageError(f"index_tol must be below 0.5, got {self.index_tol!r}")

    @classmethod
    def names(cls) -> tuple[str, ...]:
        """The settable parameter names."""
        return tuple(f.name for f in fields(cls))
