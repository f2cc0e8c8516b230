"""Tilt, lattice and step heights from a calibrated height map.

The analysis of one topograph runs in four stages:

1. **Plane fit** of all pixels: the macroscopic inclination of the imaged
   area and its azimuth relative to the scanner plane.
2. **Terrace fit**: step edges are excluded by a gradient threshold, the
   remaining pixels are split into terraces by the height histogram of the
   levelled image, and one common plane with one offset per terrace is
   fitted. Level, histogram, segment, refit are repeated until the plane
   stops changing. The common plane is the terrace plane; its tilt is the
   one that identifies the face.
3. **Lattice**: the terrace-levelled image is Hann-windowed and Fourier
   transformed; significant peaks are located to sub-pixel precision, the
   strongest two independent ones span the reciprocal lattice, and every
   peak it indexes refines it. The real-space lattice is reduced to its two
   shortest vectors, measured in the terrace plane.
4. **Steps**: the height between each pair of adjacent terraces, from the
   terrace offsets of stage 2.

The lattice assumes a **drift-free, linear scanner**: thermal drift, piezo
creep or a wrong x/y calibration distort a, b and gamma, and nothing in one
image can tell.

Coordinates: x runs along image columns, y along rows (row index increases
with y), both in Å from the image centre. Heights are in Å.

Readers and calibration live in :mod:`termination.heightmap_io`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import fft as sp_fft
from scipy import ndimage
from scipy.signal import find_peaks

from .errors import ImageError
from .heightmap_io import check_heights, parse_pixel_size
from .measurement import Measurement, Value

__all__ = [
    "Tilt",
    "Lattice",
    "Step",
    "HeightMapAnalysis",
    "analyse_heightmap",
    "plane_fit",
    "to_measurement",
    "DRIFT_NOTE",
]

DRIFT_NOTE = (
    "lattice assumes a drift-free, linear scanner: drift, creep or a wrong x/y "
    "calibration distort a, b and gamma"
)


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
class Lattice:
    """The visible 2-D lattice: its two shortest real-space vectors.

    Parameters
    ----------
    a, b : float
        Lengths of the two shortest independent lattice vectors, a <= b, Å,
        measured in the terrace plane (the projection onto the scanner plane
        is stretched back by the terrace tilt).
    gamma : float
        The acute angle between them, deg in (0, 90] (60 for hexagonal).
    sigma_a, sigma_b : float
        Standard uncertainties of a and b, Å.
    sigma_gamma : float
        Standard uncertainty of gamma, deg.
    direction : float
        Direction of the vector a, deg in [0, 180) from +x towards +y.
    peaks : int
        Number of Fourier peaks (in one half plane) indexed by the lattice.
    """

    a: float
    b: float
    gamma: float
    sigma_a: float
    sigma_b: float
    sigma_gamma: float
    direction: float
    peaks: int


@dataclass(frozen=True)
class Step:
    """Height of one step between adjacent terraces.

    Parameters
    ----------
    height : float
        Distance between the two terrace planes, measured along their normal, Å.
    sigma : float
        Standard uncertainty, Å.
    """

    height: float
    sigma: float


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


# --------------------------------------------------------------------------- plane fits


def _coordinates(shape, pixel_size):
    ny, nx = shape
    x = (np.arange(nx) - (nx - 1) / 2.0) * pixel_size[0]
    y = (np.arange(ny) - (ny - 1) / 2.0) * pixel_size[1]
    return x, y


def _tilt_azimuth(a, b):
    tilt = math.degrees(math.atan(math.hypot(a, b)))
    azimuth = math.degrees(math.atan2(b, a)) % 360.0 if (a or b) else 0.0
    return tilt, azimuth


def plane_fit(heights, pixel_size):
    """Least-squares plane through all finite pixels.

    Parameters
    ----------
    heights : (ny, nx) array_like
        Heights, Å; NaN pixels are ignored.
    pixel_size : float or (2,) sequence
        Pixel size along x and y, Å.

    Returns
    -------
    slope_x, slope_y : float
        dz/dx and dz/dy, dimensionless (Å per Å).
    offset : float
        Height at the image centre, Å.

    Notes
    -----
    Minimises :math:`\\sum_i (z_i - a x_i - b y_i - c)^2`. With centred
    coordinates the normal equations for (a, b) decouple from c. The tilt
    is :math:`\\arctan\\sqrt{a^2 + b^2}` and the azimuth of steepest ascent
    :math:`\\operatorname{atan2}(b, a)`.

    Examples
    --------
    >>> y, x = np.mgrid[0:16, 0:16] * 0.5
    >>> a, b, c = plane_fit(0.1 * x - 0.2 * y + 3.0, 0.5)
    >>> round(a, 6), round(b, 6)
    (0.1, -0.2)
    """
    z = check_heights(heights)
    px = parse_pixel_size(pixel_size)
    valid = np.isfinite(z)
    labels = valid.astype(np.int32)
    coords = _coordinates(z.shape, px)
    a, b, c, _ = _common_plane(z, labels, 1, coords)
    return a, b, float(c[0])


def _plane_slopes(z, valid, coords):
    """Slopes of the least-squares plane through the finite pixels."""
    if not valid.all():
        a, b, _, _ = _common_plane(z, valid.astype(np.intp), 1, coords)
        return a, b
    # full grid: centred coordinates make x and y orthogonal, so the sums separate
    x, y = coords
    ny, nx = z.shape
    a = float(x @ z.sum(axis=0)) / (ny * float(x @ x))
    b = float(y @ z.sum(axis=1)) / (nx * float(y @ y))
    return a, b


def _label_moments(z, labels, n_labels, coords):
    """Per-label sums of 1, x, y, z, xx, yy, xy, xz, yz, zz (index 0 = unlabelled).

    Notes
    -----
    Labels come in long runs along rows. Sums over each run are taken with
    ``np.add.reduceat``; x and x² sums over a run follow from cumulative
    sums of the column coordinates and y is constant on a run, so only z,
    xz and zz need a pass over the pixels. The runs are then summed per
    label.
    """
    x, y = coords
    ny, nx = z.shape
    mn = n_labels + 1
    change = np.empty((ny, nx), dtype=bool)
    change[:, 0] = True
    np.not_equal(labels[:, 1:], labels[:, :-1], out=change[:, 1:])
    starts = np.flatnonzero(change)
    run_label = labels.ravel()[starts].astype(np.intp)
    row = starts // nx
    c0 = starts - row * nx
    c1 = np.minimum(np.append(starts[1:], ny * nx) - row * nx, nx)
    zf = np.where(labels > 0, z, 0.0)
    s_z = np.add.reduceat(zf.ravel(), starts)
    s_xz = np.add.reduceat((zf * x[None, :]).ravel(), starts)
    s_zz = np.add.reduceat((zf * zf).ravel(), starts)
    cx = np.concatenate([[0.0], np.cumsum(x)])
    cxx = np.concatenate([[0.0], np.cumsum(x * x)])
    n_run = (c1 - c0).astype(np.float64)
    s_x = cx[c1] - cx[c0]
    s_xx = cxx[c1] - cxx[c0]
    yr = y[row]

    def per_label(w):
        return np.bincount(run_label, w, mn)

    return (
        per_label(n_run),
        per_label(s_x),
        per_label(yr * n_run),
        per_label(s_z),
        per_label(s_xx),
        per_label(yr * yr * n_run),
        per_label(yr * s_x),
        per_label(s_xz),
        per_label(yr * s_z),
        per_label(s_zz),
    )


def _common_plane(z, labels, n_labels, coords, residual=False):
    r"""One plane, one offset per label (labels 1..n; 0 excluded).

    Returns slope_x, slope_y, offsets (n,), and a dict of fit statistics
    (with the residual image, zero off the labels, when ``residual``).

    Notes
    -----
    Works on per-label moments (sums of 1, x, y, z and their products, see
    :func:`_label_moments`): with :math:`S_{uv} = \sum_k [\sum_{i\in k}
    u_i v_i - (\sum_{i\in k} u_i)(\sum_{i\in k} v_i)/N_k]` the slopes solve
    :math:`[S_{xx}, S_{xy}; S_{xy}, S_{yy}] (a, b)^T = (S_{xz}, S_{yz})^T`.
    """
    x, y = coords
    n, sx, sy, sz, sxx, syy, sxy, sxz, syz, szz = _label_moments(z, labels, n_labels, coords)
    k = slice(1, None)
    nk = np.where(n[k] > 0, n[k], 1.0)

    def within(uv, u, v):
        return float(np.sum(uv[k] - u[k] * v[k] / nk))

    Sxx, Syy, Sxy = within(sxx, sx, sx), within(syy, sy, sy), within(sxy, sx, sy)
    Sxz, Syz, Szz = within(sxz, sx, sz), within(syz, sy, sz), within(szz, sz, sz)
    m = np.array([[Sxx, Sxy], [Sxy, Syy]])
    try:
        a, b = np.linalg.solve(m, np.array([Sxz, Syz]))
    except np.linalg.LinAlgError:
        a, b = 0.0, 0.0
        m = np.eye(2) * np.inf
    mx, my, mz = sx[k] / nk, sy[k] / nk, sz[k] / nk
    offsets = mz - a * mx - b * my
    rss = Szz - 2 * a * Sxz - 2 * b * Syz + a * a * Sxx + 2 * a * b * Sxy + b * b * Syy
    dof = max(int(n[k].sum()) - 2 - n_labels, 1)
    stats = {
        "n": n[k],
        "centroid": np.stack([mx, my], axis=1),
        "s2": max(rss, 0.0) / dof,
        "normal": m,
    }
    if residual:
        off = np.concatenate([[0.0], offsets])
        r = z - (a * x[None, :] + b * y[:, None]) - off[labels]
        r[labels == 0] = 0.0
        stats["resid_img"] = r
    return float(a), float(b), offsets, stats


def _correlation_factor(shape, labels, stats):
    """Variance inflation for spatially correlated residuals.

    Notes
    -----
    With lag-one correlations :math:`\\rho_x, \\rho_y` of the residual along
    rows and columns (within one terrace), a separable AR(1) model gives
    :math:`f = \\frac{1+\\rho_x}{1-\\rho_x}\\,\\frac{1+\\rho_y}{1-\\rho_y}`
    pixels per independent sample.
    """
    r_img = stats["resid_img"]
    # every other row and column is plenty for two correlation coefficients
    step = 2 if r_img.size > 1_000_000 else 1
    r_img = r_img[::step, ::step]
    labels = labels[::step, ::step]
    denom = float(np.sum(r_img * r_img))
    if denom <= 0:
        return 1.0
    factor = 1.0
    for sl_a, sl_b in (
        ((slice(None), slice(None, -1)), (slice(None), slice(1, None))),
        ((slice(None, -1), slice(None)), (slice(1, None), slice(None))),
    ):
        same = (labels[sl_a] == labels[sl_b]) & (labels[sl_a] > 0)
        rho = float(np.sum(r_img[sl_a] * r_img[sl_b] * same)) / denom
        # lag of `step` pixels: rho_1 = rho_step ** (1 / step) for AR(1)
        rho = min(max(rho, 0.0), 0.99) ** (1.0 / step)
        factor *= (1 + rho) / (1 - rho)
    return factor


# --------------------------------------------------------------------------- terraces


def _smooth(z, valid, sigma_px):
    """Gaussian smoothing that ignores NaN pixels (normalised convolution).

    Computed in single precision (7 digits are plenty for smoothed heights
    used to classify pixels), and returned as float64.
    """
    if valid.all():
        return ndimage.gaussian_filter(z.astype(np.float32), sigma_px, mode="nearest").astype(np.float64)
    w = valid.astype(np.float32)
    num = ndimage.gaussian_filter(np.where(valid, z, 0.0).astype(np.float32), sigma_px, mode="nearest")
    den = ndimage.gaussian_filter(w, sigma_px, mode="nearest")
    with np.errstate(invalid="ignore", divide="ignore"):
        out = num / den
    return np.where(den > 1e-4, out, 0.0).astype(np.float64)


def _robust_threshold(values, k_sigma):
    med = float(np.median(values))
    mad = 1.4826 * float(np.median(np.abs(values - med)))
    return med + k_sigma * mad


def _level_bounds(h, min_step, min_contrast, min_count):
    """Height-histogram levels: return the boundaries between terrace levels.

    A level is a histogram peak that is resolved (its prominence is at least
    ``min_contrast`` of its height), separated from the next by at least
    ``min_step`` and holding at least ``min_count`` pixels.
    """
    lo, hi = np.percentile(h, [0.02, 99.98])
    if not hi > lo:
        return np.empty(0)
    bin_w = min_step / 20.0
    nbins = int(math.ceil((hi - lo) / bin_w))
    if nbins > 100_000:
        nbins = 100_000
        bin_w = (hi - lo) / nbins
    pad = 40
    edges = lo - pad * bin_w + bin_w * np.arange(nbins + 2 * pad + 1)
    counts, _ = np.histogram(h, edges)
    smooth = ndimage.gaussian_filter1d(counts.astype(np.float64), (min_step / 8.0) / bin_w, mode="constant")
    peaks, props = find_peaks(smooth, distance=max(1, int(0.8 * min_step / bin_w)), prominence=0)
    if peaks.size == 0:
        return np.empty(0)
    ok = props["prominences"] >= min_contrast * smooth[peaks]
    peaks = peaks[ok]
    while peaks.size > 1:
        # boundaries at the histogram minimum between neighbouring levels
        mins = np.array([p + int(np.argmin(smooth[p:q + 1])) for p, q in zip(peaks[:-1], peaks[1:])])
        cum = np.concatenate([[0], np.cumsum(counts)])
        cuts = np.concatenate([[0], mins, [counts.size]])
        mass = cum[cuts[1:]] - cum[cuts[:-1]]
        weakest = int(np.argmin(mass))
        if mass[weakest] >= min_count:
            return 0.5 * (edges[mins] + edges[mins + 1])
        peaks = np.delete(peaks, weakest)
    return np.empty(0)


@dataclass
class _Terraces:
    labels: np.ndarray  # 0 = not on a terrace, 1..n
    n: int
    level_of: np.ndarray  # (n,) histogram level index of each terrace
    slope: tuple[float, float]
    offsets: np.ndarray
    stats: dict
    iterations: int
    dist: np.ndarray | None = None  # distance to the nearest terrace, pixels
    near: np.ndarray | None = None  # label of the nearest terrace


def _bin(z, valid, coords, factor):
    """Block-average ``factor`` x ``factor`` pixels (NaN-aware); crop the remainder."""
    if factor == 1:
        return z, valid, coords
    ny, nx = z.shape[0] // factor, z.shape[1] // factor
    zc = np.where(valid, z, 0.0)[: ny * factor, : nx * factor].reshape(ny, factor, nx, factor)
    wc = valid[: ny * factor, : nx * factor].reshape(ny, factor, nx, factor).sum(axis=(1, 3))
    with np.errstate(invalid="ignore", divide="ignore"):
        zc = zc.sum(axis=(1, 3)) / wc
    x, y = coords
    xc = x[: nx * factor].reshape(nx, factor).mean(axis=1)
    yc = y[: ny * factor].reshape(ny, factor).mean(axis=1)
    return zc, wc > 0, (xc, yc)


def _unbin(arr, factor, shape):
    """Nearest-neighbour upsampling of a binned array back to ``shape``."""
    if factor == 1:
        return arr
    ny, nx = arr.shape
    up = np.broadcast_to(arr[:, None, :, None], (ny, factor, nx, factor)).reshape(ny * factor, nx * factor)
    if up.shape == tuple(shape):
        return up
    pad = ((0, shape[0] - up.shape[0]), (0, shape[1] - up.shape[1]))
    return np.pad(up, pad, mode="edge")


def _segment(z, valid, coords, px, p):
    """Iterate level -> histogram -> segment -> refit; return _Terraces.

    Segmentation runs on a binned copy of large images (``p["bin"]``
    pixels a side; pixel-valued parameters are scaled to it); the final
    fit of the plane and the offsets uses every pixel.
    """
    factor = p["bin"]
    zc, vc, cc = _bin(z, valid, coords, factor)
    pxc = (px[0] * factor, px[1] * factor)
    xc, yc = cc
    edge_s = max(p["edge_smooth_px"] / factor, 0.5)
    smooth = _smooth(zc, vc, edge_s)
    gy, gx = np.gradient(smooth, pxc[1], pxc[0])
    # heavier smoothing for the histogram: removes corrugation and noise, while
    # the blur of the step edges only moves a few pixels between levels
    smooth_levels = _smooth(zc, vc, max(p["level_smooth_px"] / factor, 0.5))
    n_valid = int(vc.sum())
    stride = max(1, int(math.sqrt(n_valid / 250_000)))
    sub = (slice(None, None, stride), slice(None, None, stride))
    vsub = vc[sub]
    # first guess of the terrace slope: median gradient of the strongly smoothed
    # image (steps are a minority of pixels; heavy smoothing keeps noise from
    # spreading the gradients, which would let the steps bias the median)
    gly, glx = np.gradient(smooth_levels, pxc[1], pxc[0])
    a = float(np.median(glx[sub][vsub]))
    b = float(np.median(gly[sub][vsub]))
    del gly, glx
    sigma_s = edge_s * float(np.mean(pxc))
    floor = 0.2 * p["min_step"] / (math.sqrt(2 * math.pi) * sigma_s)
    min_count = max(p["min_terrace_fraction"] * n_valid, 16)
    guard = max(1, int(round(p["edge_guard_px"] / factor)))
    size = 2 * guard + 1
    result = None
    for iteration in range(1, p["max_iterations"] + 1):
        g = np.hypot(gx - a, gy - b)
        thr = max(_robust_threshold(g[sub][vsub], p["edge_threshold_sigmas"]), floor)
        flat = vc & (g <= thr)
        lev = smooth_levels - (a * xc[None, :] + b * yc[:, None])
        bounds = _level_bounds(lev[sub][flat[sub]], p["min_step"], p["min_level_contrast"], min_count / stride**2)
        cls = np.digitize(lev, bounds).astype(np.int32)
        cls[~flat] = -1
        # a pixel is kept if its whole guard neighbourhood is flat and of one level
        same = ndimage.minimum_filter(cls, size=size, mode="nearest") == ndimage.maximum_filter(
            cls, size=size, mode="nearest"
        )
        interior = same & (cls >= 0)
        labels, n = ndimage.label(interior)
        sizes = np.bincount(labels.ravel(), minlength=n + 1)
        keep = sizes >= min_count
        keep[0] = False
        if not keep.any():
            # nothing large and flat: fall back to every finite pixel as one terrace
            labels = vc.astype(np.int32)
            n = 1
            level_of = np.zeros(1, dtype=int)
        else:
            remap = np.zeros(n + 1, dtype=np.int32)
            remap[keep] = np.arange(1, int(keep.sum()) + 1)
            first = np.zeros(n + 1, dtype=np.int32)
            first[labels.ravel()] = cls.ravel()  # one level per component (interior pixels)
            level_of = first[keep]
            labels = remap[labels]
            n = int(keep.sum())
        a_new, b_new, offsets, stats = _common_plane(zc, labels, n, cc)
        change = math.degrees(max(abs(math.atan(a_new) - math.atan(a)), abs(math.atan(b_new) - math.atan(b))))
        a, b = a_new, b_new
        current = _Terraces(labels, n, level_of, (a, b), offsets, stats, iteration)
        # keep the segmentation that explains the heights best
        if result is None or stats["s2"] < result.stats["s2"]:
            result = current
        if change < p["slope_tol_deg"]:
            break
    a, b = result.slope
    # Final fit on whole terrace regions: every pixel joins its nearest terrace
    # except near boundaries between levels and at edges. Keeping only pixels
    # whose noisy height fell inside a level's histogram band would bias the
    # offsets apart (a selection effect) and overestimate the steps.
    dist, near = _nearest_terrace(result.labels)
    lvl = np.concatenate([[-1], result.level_of])[near]
    boundary = np.zeros(lvl.shape, dtype=bool)
    dx = lvl[:, 1:] != lvl[:, :-1]
    dy = lvl[1:, :] != lvl[:-1, :]
    boundary[:, 1:] |= dx
    boundary[:, :-1] |= dx
    boundary[1:, :] |= dy
    boundary[:-1, :] |= dy
    g = np.hypot(gx - a, gy - b)
    thr = max(_robust_threshold(g[sub][vsub], p["edge_threshold_sigmas"]), floor)
    use = vc & ~ndimage.binary_dilation(g > thr, iterations=guard)
    if boundary.any():
        band = int(round((p["edge_guard_px"] + 2.0 * p["edge_smooth_px"]) / factor))
        use &= ~ndimage.maximum_filter(boundary, size=2 * max(band, 1) + 1, mode="constant")
    shape = z.shape
    near = _unbin(near, factor, shape)
    dist = _unbin(dist, factor, shape) * factor
    labels = np.where(_unbin(use, factor, shape) & valid, near, 0).astype(np.intp)
    counts = np.bincount(labels.ravel(), minlength=result.n + 1)
    if not np.all(counts[1:] > 0):
        labels = np.where(valid, _unbin(result.labels, factor, shape), 0).astype(np.intp)
    a, b, offsets, stats = _common_plane(z, labels, result.n, coords, residual=True)
    return _Terraces(labels, result.n, result.level_of, (a, b), offsets, stats, result.iterations, dist, near)


def _structure_ratio(shape, terr, sigma_px, factor=1):
    r"""Large-scale variance of the terrace-fit residual relative to white noise.

    Notes
    -----
    With residuals r on the fitted pixels, the white-noise variance is
    estimated from neighbour differences, :math:`\hat\sigma^2 =
    \langle (r_{i,j+1} - r_{i,j})^2 \rangle / 2`. Smoothing white noise with a
    Gaussian of standard deviation :math:`s` pixels leaves
    :math:`\sigma^2 / (4 \pi s^2)`. The ratio of the observed variance of
    the smoothed residual to that is about 1 when the fit explains all
    structure larger than the corrugation, and large when unresolved steps
    or other relief remain. Corrugation inflates :math:`\hat\sigma^2`, which
    makes the test conservative (it flags less).
    """
    labels = terr.labels
    r = terr.stats["resid_img"]
    if factor > 1:
        # block averages of white noise are white: test on the binned residual
        ny, nx = shape[0] // factor, shape[1] // factor
        blk = labels[: ny * factor, : nx * factor].reshape(ny, factor, nx, factor)
        lo, hi = blk.min(axis=(1, 3)), blk.max(axis=(1, 3))
        labels = np.where(lo == hi, lo, 0)
        r = r[: ny * factor, : nx * factor].reshape(ny, factor, nx, factor).mean(axis=(1, 3))
        r = np.where(labels > 0, r, 0.0)
        sigma_px = sigma_px / factor
    on = labels > 0
    d2, n = 0.0, 0
    for u, v, lu, lv in (
        (r[:, 1:], r[:, :-1], labels[:, 1:], labels[:, :-1]),
        (r[1:, :], r[:-1, :], labels[1:, :], labels[:-1, :]),
    ):
        same = (lu == lv) & (lu > 0)
        diff = u[same] - v[same]
        d2 += float(diff @ diff)
        n += diff.size
    if n == 0:
        return 1.0
    noise_var = d2 / n / 2.0
    w = ndimage.gaussian_filter(on.astype(np.float64), sigma_px, mode="constant")
    sm = ndimage.gaussian_filter(r, sigma_px, mode="constant")
    inside = on & (w > 0.9)
    if not inside.any() or noise_var <= 0:
        return 1.0
    observed = float(np.mean((sm[inside] / w[inside]) ** 2))
    return observed / (noise_var / (4 * math.pi * sigma_px**2))


def _nearest_terrace(labels):
    """Label of the nearest terrace for every pixel and the distance to it, pixels."""
    if not (labels == 0).any():
        return np.zeros(labels.shape), labels
    dist, (ir, ic) = ndimage.distance_transform_edt(labels == 0, return_indices=True)
    return dist, labels[ir, ic]


def _adjacent_pairs(n, dist, near, max_gap_px, min_length_px):
    """Pairs of terraces that meet across a strip no wider than ``max_gap_px``.

    Every unlabelled pixel is given to its nearest terrace (within
    ``max_gap_px / 2``); two terraces are adjacent where their regions touch
    along at least ``min_length_px`` pixel edges.
    """
    if n < 2:
        return []
    near = np.where(dist <= max_gap_px / 2.0 + 0.5, near, 0)
    pairs = []
    for u, v in ((near[:, :-1], near[:, 1:]), (near[:-1, :], near[1:, :])):
        d = (u != v) & (u > 0) & (v > 0)
        lo = np.minimum(u[d], v[d]).astype(np.int64)
        hi = np.maximum(u[d], v[d]).astype(np.int64)
        pairs.append(lo * (n + 1) + hi)
    codes, counts = np.unique(np.concatenate(pairs), return_counts=True)
    return [(int(c // (n + 1)), int(c % (n + 1))) for c, k in zip(codes, counts) if k >= min_length_px]


def _flattened(z, valid, terr, near, coords, p):
    """Terrace-levelled image for the Fourier analysis.

    Every pixel is levelled with the plane and the offset of its nearest
    terrace. Where the result stands far out of the terrace corrugation and
    noise (the step edges themselves), pixels are set to zero, and so are
    NaN pixels. Keeping the
    corrugation up to the step edges avoids the side bands that blanking
    whole edge strips would add; removing the edge profiles avoids streaks.
    """
    x, y = coords
    a, b = terr.slope
    off = np.concatenate([[0.0], terr.offsets])
    out = z - (a * x[None, :] + b * y[:, None]) - off[near]
    out[~valid] = 0.0
    step = max(1, int(math.sqrt(z.size / 250_000)))
    on = terr.labels[::step, ::step] > 0
    raw = out[::step, ::step][on]
    med = float(np.median(raw))
    scale = max(1.4826 * float(np.median(np.abs(raw - med))), 1e-12)
    # the step edges: their profile stands out of the terrace corrugation and noise
    bad = np.abs(out - med) > p["lattice_clip_sigmas"] * scale
    guard = int(p["edge_guard_px"])
    bad = ndimage.maximum_filter(bad, size=2 * guard + 1, mode="constant") | ~valid
    out[bad] = 0.0
    out[~bad] -= float(np.mean(out[~bad])) if (~bad).any() else 0.0
    return out


def _steps(terr, coords_shape, dist, near, p):
    a, b = terr.slope
    norm = math.sqrt(1 + a * a + b * b)
    st = terr.stats
    f = _correlation_factor(coords_shape, terr.labels, st)
    cov_ab = f * st["s2"] * np.linalg.inv(st["normal"]) if np.all(np.isfinite(st["normal"])) else None
    steps = []
    for k, l in _adjacent_pairs(terr.n, dist, near, p["max_step_width_px"], p["min_step_length_px"]):
        i, j = k - 1, l - 1
        if terr.level_of[i] == terr.level_of[j]:
            continue
        dc = terr.offsets[j] - terr.offsets[i]
        d = st["centroid"][j] - st["centroid"][i]
        var = f * st["s2"] * (1.0 / st["n"][i] + 1.0 / st["n"][j])
        if cov_ab is not None:
            var += float(d @ cov_ab @ d)
        h = abs(dc) / norm
        if h < p["min_step"]:  # below the resolved step height: same level
            continue
        sigma = math.sqrt(var) / norm
        sigma = math.hypot(sigma, p["z_calibration_fraction"] * h)
        steps.append((min(terr.level_of[i], terr.level_of[j]), Step(float(h), float(sigma))))
    steps.sort(key=lambda t: (t[0], t[1].height))
    return tuple(s for _, s in steps), f, cov_ab


# --------------------------------------------------------------------------- lattice


def _hann_amplitude(f):
    """Magnitude of the (periodic) Hann window's transform at ``f`` bins, W(0) = 1.

    Notes
    -----
    :math:`W(f) = \\operatorname{sinc}(f) / (1 - f^2)`, with the limit 1/2 at |f| = 1.
    """
    f = np.asarray(f, dtype=np.float64)
    den = 1.0 - f * f
    near = np.abs(den) < 1e-9
    out = np.sinc(f) / np.where(near, 1.0, den)
    return np.abs(np.where(near, 0.5, out))


def _refine_axis(a_m, a_0, a_p, noise_amp):
    """Sub-bin offset of a Hann-windowed peak from three amplitudes along one axis.

    Returns offset (bins), its noise standard deviation (bins) and the
    broadening of the peak relative to the window's own shape (>= 1).

    Notes
    -----
    For a Hann window the ratio of the larger neighbour to the centre,
    :math:`\\alpha = |X_{\\pm 1}| / |X_0|`, gives the offset exactly:
    :math:`\\delta = \\pm (2\\alpha - 1)/(\\alpha + 1)` (Grandke 1983). The
    noise error follows from :math:`d\\delta/d\\alpha = 3/(\\alpha+1)^2`.

    References
    ----------
    T. Grandke, IEEE Trans. Instrum. Meas. 32, 350 (1983).
    """
    sign = np.where(a_p >= a_m, 1.0, -1.0)
    a_n = np.maximum(a_p, a_m)
    alpha = a_n / a_0
    delta = sign * np.clip((2 * alpha - 1) / (alpha + 1), 0.0, 0.5)
    sig_alpha = alpha * noise_amp * np.sqrt(1.0 / a_n**2 + 1.0 / a_0**2)
    sig_delta = 3.0 / (alpha + 1) ** 2 * sig_alpha
    # width: log-curvature of the three points against the window's own at this offset
    d = np.abs(delta)
    c_meas = np.log(a_m) + np.log(a_p) - 2 * np.log(a_0)
    c_win = np.log(_hann_amplitude(1 + d)) + np.log(_hann_amplitude(1 - d)) - 2 * np.log(_hann_amplitude(d))
    with np.errstate(divide="ignore", invalid="ignore"):
        broad = np.sqrt(np.where(c_meas < 0, c_win / c_meas, np.inf))
    broad = np.clip(broad, 1.0, 10.0)
    return delta, sig_delta, broad


def _radial_background(power, kr, dk):
    """Mean noise power at each pixel from the median power of its |k| annulus.

    Notes
    -----
    Noise power in one Fourier bin is exponentially distributed, so
    mean = median / ln 2. Annuli are one bin wide (``dk``).
    """
    ring = (kr / dk).astype(np.int64)
    n_ring = int(ring.max()) + 1
    logp = np.log(power + 1e-300)
    lo, hi = float(logp.min()), float(logp.max())
    key = ring.ravel() + 0.999 * (logp.ravel() - lo) / (hi - lo + 1e-12)
    order = np.sort(key)
    counts = np.bincount(ring.ravel(), minlength=n_ring)
    start = np.concatenate([[0], np.cumsum(counts)[:-1]])
    mid = np.minimum(start + counts // 2, order.size - 1)
    frac = order[mid] - np.floor(order[mid])
    med = np.exp(lo + frac / 0.999 * (hi - lo + 1e-12))
    med = np.where(counts > 0, med, np.inf)
    # rings with few pixels near the centre: borrow from neighbours
    med = ndimage.median_filter(med, size=3, mode="nearest")
    return (med / math.log(2.0))[ring]


_MIRROR = 3  # columns of negative kx added to the half spectrum


def _half_power(resid, workers):
    """Power spectrum of the Hann-windowed image, kx >= -3 bins, ky centred.

    Returns power (ny, nx // 2 + 1 + _MIRROR); column ``_MIRROR`` is kx = 0
    and row ``ny // 2`` is ky = 0. The columns of negative kx come from
    the symmetry P(-k) = P(k) of a real image.
    """
    ny, nx = resid.shape
    win = np.outer(np.hanning(ny + 1)[:-1], np.hanning(nx + 1)[:-1])
    spec = sp_fft.rfft2(resid * win, workers=workers)
    power = spec.real**2 + spec.imag**2
    power = sp_fft.fftshift(power, axes=0)
    flip = (2 * (ny // 2) - np.arange(ny)) % ny
    mirror = power[flip][:, _MIRROR:0:-1]
    return np.concatenate([mirror, power], axis=1)


def _lattice(resid, px, slope, p, notes):
    ny, nx = resid.shape
    power = _half_power(resid, p["workers"])
    cy, cx = ny // 2, _MIRROR
    dkx, dky = 1.0 / (nx * px[0]), 1.0 / (ny * px[1])
    kx = (np.arange(power.shape[1]) - cx) * dkx
    ky = (np.arange(ny) - cy) * dky
    kr = np.hypot(kx[None, :], ky[:, None])
    # one half plane: kx > 0, or kx == 0 and ky > 0
    half = np.zeros(power.shape, dtype=bool)
    half[:, cx + 1 :] = True
    half[cy + 1 :, cx] = True
    k_min = p["min_periods"] / min(nx * px[0], ny * px[1])
    usable = half & (kr >= k_min)
    usable[[0, -1], :] = False
    usable[:, -1] = False
    if not usable.any():
        notes.append(
            f"no lattice: the image is too small for a periodicity to repeat {p['min_periods']} times"
        )
        return None
    bg_img = np.full(power.shape, np.inf)
    bg_img[half] = _radial_background(power[half], kr[half], max(dkx, dky))
    n_bins = int(half.sum())
    thr = bg_img * math.log(n_bins / p["lattice_false_alarm"])
    cand = usable & (power > thr)
    if cand.any():
        cand &= power == ndimage.maximum_filter(power, size=3, mode="nearest")
    rows, cols = np.nonzero(cand)
    if rows.size == 0:
        notes.append(
            "no lattice: no Fourier peak above the noise "
            f"(false-alarm probability {p['lattice_false_alarm']:g})"
        )
        return None
    order = np.argsort(power[rows, cols])[::-1]
    rows, cols = rows[order], cols[order]
    streak = _is_streak(power, rows, cols, cx, cy, p["streak_ratio"])
    if streak.any():
        k = int(streak.sum())
        notes.append(f"{k} Fourier {'maximum' if k == 1 else 'maxima'} on radial streaks (step edges) ignored")
    rows, cols = rows[~streak][: p["max_peaks"]], cols[~streak][: p["max_peaks"]]
    if rows.size == 0:
        notes.append("no lattice: only streaks from step edges in the Fourier transform")
        return None
    noise_amp = np.sqrt(bg_img[rows, cols] / 2.0)

    def amp(r, c):
        return np.sqrt(power[r, c])

    dx, sx, bx = _refine_axis(amp(rows, cols - 1), amp(rows, cols), amp(rows, cols + 1), noise_amp)
    dy, sy, by = _refine_axis(amp(rows - 1, cols), amp(rows, cols), amp(rows + 1, cols), noise_amp)
    g = np.stack([(cols - cx + dx) * dkx, (rows - cy + dy) * dky], axis=1)
    # FFT grid resolution (uniform over a bin) with the interpolation noise, times broadening
    sig = np.stack(
        [dkx * np.sqrt(1 / 12 + sx**2) * bx, dky * np.sqrt(1 / 12 + sy**2) * by], axis=1
    )
    basis, hk = _index_peaks(g, p["index_tol"])
    if basis is None:
        glen = np.hypot(g[:, 0], g[:, 1])
        d = 1.0 / glen[0]
        notes.append(f"no lattice: one periodicity only (rows {d:.3f} Å apart), no second direction")
        return None
    ok = np.all(np.abs(hk - np.rint(hk)) <= p["index_tol"], axis=1)
    # one peak per index: the strongest (peaks are sorted by power)
    _, first = np.unique(np.rint(hk[ok]).astype(np.int64), axis=0, return_index=True)
    keep = np.zeros(ok.sum(), dtype=bool)
    keep[first] = True
    ok[np.nonzero(ok)[0][~keep]] = False
    if (~ok).any():
        k = int((~ok).sum())
        notes.append(f"{k} weaker Fourier {'peak' if k == 1 else 'peaks'} not on the lattice ignored")
    h = np.rint(hk[ok])
    gm, sm = g[ok], sig[ok]
    gmat = np.empty((2, 2))
    cov = np.zeros((4, 4))  # parameters: g1x, g2x, g1y, g2y
    for c in (0, 1):
        w = 1.0 / sm[:, c] ** 2
        nmat = (h * w[:, None]).T @ h
        inv = np.linalg.inv(nmat)
        gmat[:, c] = inv @ ((h * w[:, None]).T @ gm[:, c])
        cov[2 * c : 2 * c + 2, 2 * c : 2 * c + 2] = inv
    # scale by the reduced chi-square when the scatter exceeds the stated errors
    pred = h @ gmat
    dof = 2 * len(h) - 4
    if dof > 0:
        chi2 = float(np.sum(((gm - pred) / sm) ** 2)) / dof
        cov *= max(1.0, chi2)
    params = np.array([gmat[0, 0], gmat[1, 0], gmat[0, 1], gmat[1, 1]])
    sl = np.asarray(slope, dtype=np.float64)
    metric = np.eye(2) + np.outer(sl, sl)  # image (x, y) lifted onto the terrace plane
    values, transform = _real_lattice(params, None, metric)
    jac = np.empty((4, 4))
    for i in range(4):
        step = 1e-6 * np.max(np.abs(params))
        dp = np.zeros(4)
        dp[i] = step
        jac[:, i] = (
            _real_lattice(params + dp, transform, metric)[0] - _real_lattice(params - dp, transform, metric)[0]
        ) / (2 * step)
    vcov = jac @ cov @ jac.T
    sd = np.sqrt(np.maximum(np.diag(vcov), 0.0))
    a, b, gamma, direction = values
    notes.append(DRIFT_NOTE)
    return Lattice(
        a=float(a),
        b=float(b),
        gamma=float(gamma),
        sigma_a=float(sd[0]),
        sigma_b=float(sd[1]),
        sigma_gamma=float(sd[2]),
        direction=float(direction),
        peaks=int(ok.sum()),
    )


def _is_streak(power, rows, cols, cx, cy, ratio):
    """True for maxima that lie on a line through the origin rather than on a spot.

    Notes
    -----
    The power 2 bins away along the radial direction is compared with the
    power 2 bins away tangentially. A Bragg spot of a Hann-windowed image
    falls to about 1e-3 of its peak at 2 bins in every direction, or
    broadens in every direction; a streak from straight edges (an edge
    transforms to a line through the origin) stays bright radially only. A
    maximum is a streak when the weaker radial neighbour exceeds ``ratio``
    times the peak power and four times the stronger tangential neighbour.
    """
    kx = (cols - cx).astype(np.float64)
    ky = (rows - cy).astype(np.float64)
    norm = np.hypot(kx, ky)
    ux, uy = kx / norm, ky / norm
    samples = []
    for dr, dt in ((2, 0), (-2, 0), (0, 2), (0, -2)):
        sx = cols + dr * ux - dt * uy
        sy = rows + dr * uy + dt * ux
        samples.append(ndimage.map_coordinates(power, [sy, sx], order=1, mode="nearest"))
    radial = np.minimum(samples[0], samples[1])
    tangential = np.maximum(samples[2], samples[3])
    return (radial > ratio * power[rows, cols]) & (radial > 4.0 * tangential)


def _index_peaks(g, tol):
    """Reciprocal basis from the strongest peaks, and the indices of all peaks.

    ``g`` (m, 2) is sorted by decreasing power. The basis is the strongest
    peak and the strongest one not parallel to it (angle above ~11.5 deg).
    Weaker peaks that it does not index (side bands, superstructure spots)
    are left out and counted in the notes.

    Returns the (2, 2) basis (rows g1, g2, Gauss-reduced) and the fractional
    indices (m, 2) of every peak, or (None, None) without two independent peaks.
    """
    norms = np.hypot(g[:, 0], g[:, 1])
    second = None
    for j in range(1, len(g)):
        sin = abs(g[0, 0] * g[j, 1] - g[0, 1] * g[j, 0]) / (norms[0] * norms[j])
        if sin > 0.2:
            second = j
            break
    if second is None:
        return None, None
    basis = _reduce(np.array([g[0], g[second]]))
    return basis, g @ np.linalg.inv(basis)


def _reduce(basis, metric=None):
    """Gauss (Lagrange) reduction of a 2-D basis (rows) under ``metric``."""
    m = np.eye(2) if metric is None else metric
    u, v = basis[0].copy(), basis[1].copy()
    for _ in range(100):
        if u @ m @ u > v @ m @ v:
            u, v = v, u
        mu = round(float(u @ m @ v) / float(u @ m @ u))
        if mu == 0:
            break
        v = v - mu * u
    return np.array([u, v])


def _real_lattice(params, transform, metric):
    """(a, b, gamma, direction) of the reduced real-space lattice from (g1x, g2x, g1y, g2y).

    Lengths and angles use ``metric`` (that of the terrace plane, so the
    foreshortening of the projected image is undone). ``transform`` fixes
    the integer reduction so that finite differences are smooth.
    """
    gmat = np.array([[params[0], params[2]], [params[1], params[3]]])
    real = np.linalg.inv(gmat).T  # rows: real-space vectors with g_i . a_j = delta_ij
    if transform is None:
        red = _reduce(real, metric)
        if red[0] @ metric @ red[1] < 0:  # make gamma acute
            red[1] = -red[1]
        transform = np.rint(red @ np.linalg.inv(real))
    red = transform @ real
    la = math.sqrt(red[0] @ metric @ red[0])
    lb = math.sqrt(red[1] @ metric @ red[1])
    cosg = float(red[0] @ metric @ red[1]) / (la * lb)
    gamma = math.degrees(math.acos(min(1.0, max(-1.0, cosg))))
    direction = math.degrees(math.atan2(red[0][1], red[0][0])) % 180.0
    return np.array([la, lb, gamma, direction]), transform


# --------------------------------------------------------------------------- entry point


def analyse_heightmap(
    heights,
    pixel_size,
    *,
    min_step_angstrom=0.5,
    edge_smooth_px=2.0,
    edge_threshold_sigmas=5.0,
    edge_guard_px=2,
    level_smooth_px=6.0,
    min_terrace_fraction=0.01,
    min_level_contrast=0.5,
    max_iterations=8,
    slope_tol_deg=1e-3,
    max_step_width_px=24.0,
    min_step_length_px=8,
    z_calibration_fraction=0.0,
    lattice_false_alarm=1e-3,
    min_periods=6,
    max_peaks=12,
    index_tol=0.05,
    lattice_clip_sigmas=4.0,
    streak_ratio=0.05,
    max_structure_ratio=3.0,
    progress=None,
):
    """Tilt, lattice and step heights of one height map.

    Parameters
    ----------
    heights : (ny, nx) array_like
        Heights, Å; NaN marks missing pixels. x along columns, y along rows.
    pixel_size : float or (2,) sequence or str
        Pixel size along x and y, Å (or text with a unit, e.g. ``"0.05nm"``).
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
    min_terrace_fraction : float, default 0.01
        Smallest terrace, as a fraction of the finite pixels.
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
    max_structure_ratio : float, default 3
        After the terrace fit, the residual smoothed over 8 pixels may carry
        at most this many times the variance that white noise would leave;
        above it, relief such as steps hidden by noise remains and the
        terrace tilt and step heights are not reported.
    progress : callable, optional
        Called as ``progress(fraction, stage)`` with fraction in [0, 1].

    Returns
    -------
    HeightMapAnalysis

    Raises
    ------
    ImageError
        For an unusable image (see :func:`termination.heightmap_io.check_heights`),
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
    params = dict(
        workers=-1,
        # segment large images on a binned copy (about 1024 x 1024 pixels)
        bin=max(1, int(round(math.sqrt(z.size / 1024**2)))),
        min_step=min_step_angstrom,
        edge_smooth_px=edge_smooth_px,
        edge_threshold_sigmas=edge_threshold_sigmas,
        edge_guard_px=edge_guard_px,
        level_smooth_px=level_smooth_px,
        structure_smooth_px=8.0,
        max_structure_ratio=max_structure_ratio,
        min_terrace_fraction=min_terrace_fraction,
        min_level_contrast=min_level_contrast,
        max_iterations=max_iterations,
        slope_tol_deg=slope_tol_deg,
        max_step_width_px=max_step_width_px,
        min_step_length_px=min_step_length_px,
        z_calibration_fraction=z_calibration_fraction,
        lattice_false_alarm=lattice_false_alarm,
        min_periods=min_periods,
        max_peaks=max_peaks,
        index_tol=index_tol,
        lattice_clip_sigmas=lattice_clip_sigmas,
        streak_ratio=streak_ratio,
    )
    _check_params(params)
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
    macro_tilt, macro_az = _tilt_azimuth(a0, b0)

    report(0.1, "terraces")
    terr = _segment(z, valid, coords, px, params)
    a, b = terr.slope
    terrace_tilt, terrace_az = _tilt_azimuth(a, b)

    report(0.6, "steps")
    structure = _structure_ratio(z.shape, terr, params["structure_smooth_px"], params["bin"])
    dist, near = terr.dist, terr.near
    steps, f, cov_ab = _steps(terr, z.shape, dist, near, params)
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
    hidden = structure > params["max_structure_ratio"]
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
            + ("" if z_calibration_fraction else "; the scanner's z calibration is not included")
        )
    notes.append("tilts are relative to the scanner plane, taken as parallel to the mount face")

    report(0.7, "lattice")
    resid = _flattened(z, valid, terr, near, coords, params)
    if hidden:
        # keep the unresolved relief out of the Fourier transform
        resid = resid - _smooth(resid, valid, params["structure_smooth_px"])
        resid[~valid] = 0.0
    lattice = _lattice(resid, px, (a, b), params, notes)
    report(1.0, "done")
    tilt = Tilt(
        macroscopic=macro_tilt,
        terrace=terrace_tilt,
        azimuth=macro_az,
        terrace_azimuth=terrace_az,
        terrace_sigma=terrace_sigma,
    )
    return HeightMapAnalysis(tilt=tilt, lattice=lattice, steps=steps, terraces=terr.n, notes=tuple(notes))


def _check_params(p):
    positive = ("min_step", "edge_smooth_px", "level_smooth_px", "max_step_width_px", "slope_tol_deg", "index_tol")
    for name in positive:
        v = p[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
            raise ImageError(f"{_public(name)} must be a positive number, got {v!r}")
    fractions = ("min_terrace_fraction", "min_level_contrast", "lattice_false_alarm", "streak_ratio")
    for name in fractions:
        v = p[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v < 1:
            raise ImageError(f"{_public(name)} must lie in (0, 1), got {v!r}")
    if not (isinstance(p["max_structure_ratio"], (int, float)) and p["max_structure_ratio"] >= 1):
        raise ImageError(f"max_structure_ratio must be at least 1, got {p['max_structure_ratio']!r}")
    for name in ("edge_threshold_sigmas", "z_calibration_fraction", "lattice_clip_sigmas"):
        v = p[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v < 0:
            raise ImageError(f"{_public(name)} must be a non-negative number, got {v!r}")
    for name in ("edge_guard_px", "max_iterations", "min_step_length_px", "min_periods", "max_peaks"):
        v = p[name]
        if isinstance(v, bool) or not isinstance(v, int) or v < 1:
            raise ImageError(f"{_public(name)} must be a positive integer, got {v!r}")
    if p["index_tol"] >= 0.5:
        raise ImageError(f"index_tol must be below 0.5, got {p['index_tol']!r}")


def _public(name):
    return "min_step_angstrom" if name == "min_step" else name


def _rounded(value, sigma):
    """A Value with the sigma to two significant digits and the value to 1e-4.

    >>> _rounded(1.2497828713, 0.0055775785)
    Value(value=1.2498, sigma=0.0056)
    """
    if sigma is not None and sigma > 0:
        sigma = float(f"{sigma:.2g}")
    return Value(round(float(value), 4), sigma)


def to_measurement(analysis, *, mount=None, max_index=None):
    """The measurement a height map supports, for ``termination match``.

    Parameters
    ----------
    analysis : HeightMapAnalysis
    mount : (3,) sequence of int, optional
        Face the crystal was mounted on.
    max_index : int, optional

    Returns
    -------
    Measurement
        ``tilt`` is the terrace tilt (relative to the scanner plane, taken
        as the mount face); ``spacings`` are the lattice a and b and
        ``row_angle`` its gamma, when a lattice was found; ``steps`` are the
        step heights. Anything not found is left empty. Values are rounded
        to 1e-4 (Å or degrees) and sigmas to two significant digits.
    """
    if not isinstance(analysis, HeightMapAnalysis):
        raise ImageError(f"expected a HeightMapAnalysis, got {type(analysis).__name__}")
    t = analysis.tilt
    tilt = None
    if t.terrace is not None:
        sigma = t.terrace_sigma if t.terrace_sigma is not None and math.isfinite(t.terrace_sigma) else None
        tilt = _rounded(min(max(t.terrace, 0.0), 90.0), sigma)
    lat = analysis.lattice
    spacings, row_angle = (), None
    if lat is not None:
        spacings = (_rounded(lat.a, lat.sigma_a), _rounded(lat.b, lat.sigma_b))
        row_angle = _rounded(lat.gamma, lat.sigma_gamma)
    steps = tuple(_rounded(s.height, s.sigma) for s in analysis.steps)
    return Measurement(
        mount=tuple(mount) if mount is not None else None,
        max_index=max_index,
        tilt=tilt,
        row_angle=row_angle,
        spacings=spacings,
        steps=steps,
    )
