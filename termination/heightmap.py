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
   transformed; significant peaks are located to sub-pixel precision and
   indexed by the sparsest 2-D reciprocal lattice that explains them. The
   real-space lattice is reduced to its two shortest vectors.
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
    terrace : float
        Tilt of the common terrace plane, deg. This identifies the face.
    azimuth : float
        Direction of steepest ascent of the macroscopic plane, deg in
        [0, 360), measured from +x (columns) towards +y (rows).
    terrace_azimuth : float
        The same for the terrace plane, deg.
    terrace_sigma : float
        Statistical standard uncertainty of ``terrace``, deg.
    """

    macroscopic: float
    terrace: float
    azimuth: float
    terrace_azimuth: float
    terrace_sigma: float


@dataclass(frozen=True)
class Lattice:
    """The visible 2-D lattice: its two shortest real-space vectors.

    Parameters
    ----------
    a, b : float
        Lengths of the two shortest independent lattice vectors, a <= b, Å.
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
    a, b, c, _ = _common_plane(z, labels, 1, _coordinates(z.shape, px))
    return a, b, float(c[0])


def _common_plane(z, labels, n_labels, coords):
    """One plane, one offset per label (labels 1..n; 0 excluded).

    Returns slope_x, slope_y, offsets (n,), and a dict of fit statistics.
    """
    x, y = coords
    mask = labels > 0
    rows, cols = np.nonzero(mask)
    lab = labels[rows, cols]
    xs = x[cols]
    ys = y[rows]
    zs = z[rows, cols]
    n = np.bincount(lab, minlength=n_labels + 1).astype(np.float64)
    n_safe = np.where(n > 0, n, 1.0)
    mx = np.bincount(lab, xs, n_labels + 1) / n_safe
    my = np.bincount(lab, ys, n_labels + 1) / n_safe
    mz = np.bincount(lab, zs, n_labels + 1) / n_safe
    xt = xs - mx[lab]
    yt = ys - my[lab]
    zt = zs - mz[lab]
    m = np.array([[xt @ xt, xt @ yt], [xt @ yt, yt @ yt]])
    rhs = np.array([xt @ zt, yt @ zt])
    try:
        a, b = np.linalg.solve(m, rhs)
    except np.linalg.LinAlgError:
        a, b = 0.0, 0.0
        m = np.eye(2) * np.inf
    offsets = mz - a * mx - b * my
    resid = zt - a * xt - b * yt
    dof = max(resid.size - 2 - n_labels, 1)
    s2 = float(resid @ resid) / dof
    stats = {
        "n": n[1:],
        "centroid": np.stack([mx[1:], my[1:]], axis=1),
        "s2": s2,
        "normal": m,
        "rows": rows,
        "cols": cols,
        "resid": resid,
    }
    return float(a), float(b), offsets[1:], stats


def _correlation_factor(shape, labels, stats):
    """Variance inflation for spatially correlated residuals.

    Notes
    -----
    With lag-one correlations :math:`\\rho_x, \\rho_y` of the residual along
    rows and columns (within one terrace), a separable AR(1) model gives
    :math:`f = \\frac{1+\\rho_x}{1-\\rho_x}\\,\\frac{1+\\rho_y}{1-\\rho_y}`
    pixels per independent sample.
    """
    r_img = np.zeros(shape)
    r_img[stats["rows"], stats["cols"]] = stats["resid"]
    denom = float(stats["resid"] @ stats["resid"])
    if denom <= 0:
        return 1.0
    factor = 1.0
    for axis in (0, 1):
        a = r_img.take(np.arange(shape[axis] - 1), axis=axis)
        b = r_img.take(np.arange(1, shape[axis]), axis=axis)
        la = labels.take(np.arange(shape[axis] - 1), axis=axis)
        lb = labels.take(np.arange(1, shape[axis]), axis=axis)
        same = (la == lb) & (la > 0)
        rho = float(np.sum(a[same] * b[same])) / denom
        rho = min(max(rho, 0.0), 0.99)
        factor *= (1 + rho) / (1 - rho)
    return factor


# --------------------------------------------------------------------------- terraces


def _smooth(z, valid, sigma_px):
    """Gaussian smoothing that ignores NaN pixels (normalised convolution)."""
    w = valid.astype(np.float64)
    num = ndimage.gaussian_filter(np.where(valid, z, 0.0), sigma_px, mode="nearest")
    den = ndimage.gaussian_filter(w, sigma_px, mode="nearest")
    with np.errstate(invalid="ignore", divide="ignore"):
        out = num / den
    return np.where(den > 1e-6, out, 0.0)


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


def _segment(z, valid, coords, px, p):
    """Iterate level -> histogram -> segment -> refit; return _Terraces."""
    x, y = coords
    smooth = _smooth(z, valid, p["edge_smooth_px"])
    gy, gx = np.gradient(smooth, px[1], px[0])
    n_valid = int(valid.sum())
    stride = max(1, int(math.sqrt(n_valid / 250_000)))
    sub = (slice(None, None, stride), slice(None, None, stride))
    vsub = valid[sub]
    a = float(np.median(gx[sub][vsub]))
    b = float(np.median(gy[sub][vsub]))
    sigma_s = p["edge_smooth_px"] * float(np.mean(px))
    floor = 0.2 * p["min_step"] / (math.sqrt(2 * math.pi) * sigma_s)
    min_count = max(p["min_terrace_fraction"] * n_valid, 16)
    guard = max(1, int(p["edge_guard_px"]))
    size = 2 * guard + 1
    result = None
    for iteration in range(1, p["max_iterations"] + 1):
        g = np.hypot(gx - a, gy - b)
        thr = max(_robust_threshold(g[sub][vsub], p["edge_threshold_sigmas"]), floor)
        flat = valid & (g <= thr)
        lev = smooth - (a * x[None, :] + b * y[:, None])
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
            labels = valid.astype(np.int32)
            n = 1
            level_of = np.zeros(1, dtype=int)
        else:
            remap = np.zeros(n + 1, dtype=np.int32)
            remap[keep] = np.arange(1, int(keep.sum()) + 1)
            first = ndimage.labeled_comprehension(cls, labels, np.nonzero(keep)[0], lambda v: v[0], np.int32, -1)
            labels = remap[labels]
            n = int(keep.sum())
            level_of = np.asarray(first)
        a_new, b_new, offsets, stats = _common_plane(z, labels, n, coords)
        change = math.degrees(max(abs(math.atan(a_new) - math.atan(a)), abs(math.atan(b_new) - math.atan(b))))
        a, b = a_new, b_new
        result = _Terraces(labels, n, level_of, (a, b), offsets, stats, iteration)
        if change < p["slope_tol_deg"]:
            break
    return result


def _adjacent_pairs(labels, n, max_gap_px, min_length_px):
    """Pairs of terraces that meet across a strip no wider than ``max_gap_px``.

    Every unlabelled pixel is given to its nearest terrace (within
    ``max_gap_px / 2``); two terraces are adjacent where their regions touch
    along at least ``min_length_px`` pixel edges.
    """
    if n < 2:
        return []
    dist, (ir, ic) = ndimage.distance_transform_edt(labels == 0, return_indices=True)
    near = labels[ir, ic]
    near = np.where(dist <= max_gap_px / 2.0 + 0.5, near, 0)
    pairs = []
    for u, v in ((near[:, :-1], near[:, 1:]), (near[:-1, :], near[1:, :])):
        d = (u != v) & (u > 0) & (v > 0)
        lo = np.minimum(u[d], v[d]).astype(np.int64)
        hi = np.maximum(u[d], v[d]).astype(np.int64)
        pairs.append(lo * (n + 1) + hi)
    codes, counts = np.unique(np.concatenate(pairs), return_counts=True)
    out = [(int(c // (n + 1)), int(c % (n + 1))) for c, k in zip(codes, counts) if k >= min_length_px]
    return out


def _steps(terr, coords_shape, p):
    a, b = terr.slope
    norm = math.sqrt(1 + a * a + b * b)
    st = terr.stats
    f = _correlation_factor(coords_shape, terr.labels, st)
    cov_ab = f * st["s2"] * np.linalg.inv(st["normal"]) if np.all(np.isfinite(st["normal"])) else None
    steps = []
    for k, l in _adjacent_pairs(terr.labels, terr.n, p["max_step_width_px"], p["min_step_length_px"]):
        i, j = k - 1, l - 1
        if terr.level_of[i] == terr.level_of[j]:
            continue
        dc = terr.offsets[j] - terr.offsets[i]
        d = st["centroid"][j] - st["centroid"][i]
        var = f * st["s2"] * (1.0 / st["n"][i] + 1.0 / st["n"][j])
        if cov_ab is not None:
            var += float(d @ cov_ab @ d)
        h = abs(dc) / norm
        if h < 0.5 * p["min_step"]:
            continue
        sigma = math.sqrt(var) / norm
        sigma = math.hypot(sigma, p["z_calibration_fraction"] * h)
        steps.append((min(terr.level_of[i], terr.level_of[j]), Step(h, sigma)))
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
    # width: compare the far neighbour with what the window alone would give
    a_f = np.minimum(a_p, a_m)
    expected = _hann_amplitude(1.0 + np.abs(delta)) / _hann_amplitude(delta)
    broad = np.where(expected > 1e-3, (a_f / a_0 + 1e-12) / np.maximum(expected, 1e-3), 1.0)
    broad = np.maximum(1.0, np.sqrt(np.maximum(broad, 1.0)))
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


def _lattice(resid, px, p, notes):
    ny, nx = resid.shape
    win = np.outer(np.hanning(ny + 1)[:-1], np.hanning(nx + 1)[:-1])
    spec = sp_fft.fftshift(sp_fft.fft2(resid * win, workers=p["workers"]))
    power = spec.real**2 + spec.imag**2
    amp = np.sqrt(power)
    dkx, dky = 1.0 / (nx * px[0]), 1.0 / (ny * px[1])
    kx = (np.arange(nx) - nx // 2) * dkx
    ky = (np.arange(ny) - ny // 2) * dky
    kr = np.hypot(kx[None, :], ky[:, None])
    # one half plane: ky > 0, or ky == 0 and kx > 0
    half = np.zeros((ny, nx), dtype=bool)
    half[ny // 2 + 1 :, :] = True
    half[ny // 2, nx // 2 + 1 :] = True
    k_min = p["min_periods"] / min(nx * px[0], ny * px[1])
    usable = half & (kr >= k_min)
    usable[[0, -1], :] = False
    usable[:, [0, -1]] = False
    if not usable.any():
        notes.append("no lattice: the image is too small for a periodicity to repeat "
                     f"{p['min_periods']} times")
        return None
    bg = _radial_background(power[half], kr[half], max(dkx, dky))
    bg_img = np.full((ny, nx), np.inf)
    bg_img[half] = bg
    n_bins = int(half.sum())
    thr = bg_img * math.log(n_bins / p["lattice_false_alarm"])
    is_max = power == ndimage.maximum_filter(power, size=3, mode="wrap")
    cand = usable & is_max & (power > thr)
    rows, cols = np.nonzero(cand)
    if rows.size == 0:
        notes.append(
            "no lattice: no Fourier peak above the noise "
            f"(false-alarm probability {p['lattice_false_alarm']:g})"
        )
        return None
    order = np.argsort(power[rows, cols])[::-1][: p["max_peaks"]]
    rows, cols = rows[order], cols[order]
    noise_amp = np.sqrt(bg_img[rows, cols] / 2.0)
    dx, sx, bx = _refine_axis(amp[rows, cols - 1], amp[rows, cols], amp[rows, cols + 1], noise_amp)
    dy, sy, by = _refine_axis(amp[rows - 1, cols], amp[rows, cols], amp[rows + 1, cols], noise_amp)
    g = np.stack([(cols - nx // 2 + dx) * dkx, (rows - ny // 2 + dy) * dky], axis=1)
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
    values, transform = _real_lattice(params, None)
    jac = np.empty((4, 4))
    for i in range(4):
        step = 1e-6 * np.max(np.abs(params))
        dp = np.zeros(4)
        dp[i] = step
        jac[:, i] = (_real_lattice(params + dp, transform)[0] - _real_lattice(params - dp, transform)[0]) / (2 * step)
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


def _index_peaks(g, tol):
    """The sparsest reciprocal basis (from pairs of peaks) indexing the most peaks.

    Returns the (2, 2) basis (rows g1, g2) and the fractional indices (m, 2)
    of every peak, or (None, None) without two independent peaks.
    """
    m = len(g)
    best = None
    for i in range(m):
        for j in range(i + 1, m):
            basis = np.array([g[i], g[j]])
            det = abs(np.linalg.det(basis))
            sin = det / (np.linalg.norm(g[i]) * np.linalg.norm(g[j]))
            if sin < 0.2:
                continue
            hk = g @ np.linalg.inv(basis)
            n_ok = int(np.sum(np.all(np.abs(hk - np.rint(hk)) <= tol, axis=1)))
            score = (n_ok, det)
            if best is None or score > best[0]:
                best = (score, basis, hk)
    if best is None:
        return None, None
    basis = best[1]
    # Gauss-reduce so that indices stay small
    basis = _reduce(basis)
    return basis, g @ np.linalg.inv(basis)


def _reduce(basis):
    u, v = basis[0].copy(), basis[1].copy()
    for _ in range(100):
        if u @ u > v @ v:
            u, v = v, u
        mu = round(float(u @ v) / float(u @ u))
        if mu == 0:
            break
        v = v - mu * u
    return np.array([u, v])


def _real_lattice(params, transform):
    """(a, b, gamma, direction) of the reduced real-space lattice from (g1x, g2x, g1y, g2y).

    ``transform`` fixes the integer reduction so that finite differences are smooth.
    """
    gmat = np.array([[params[0], params[2]], [params[1], params[3]]])
    real = np.linalg.inv(gmat).T  # rows: real-space vectors with g_i . a_j = delta_ij
    if transform is None:
        red = _reduce(real)
        # make gamma acute
        if red[0] @ red[1] < 0:
            red[1] = -red[1]
        transform = np.rint(red @ np.linalg.inv(real))
    red = transform @ real
    la, lb = np.linalg.norm(red[0]), np.linalg.norm(red[1])
    cosg = float(red[0] @ red[1]) / (la * lb)
    gamma = math.degrees(math.acos(min(1.0, max(-1.0, cosg))))
    direction = math.degrees(math.atan2(red[0][1], red[0][0])) % 180.0
    return np.array([la, lb, gamma, direction]), transform


# --------------------------------------------------------------------------- entry point


_DEFAULTS = dict(
    min_step=0.5,
    edge_smooth_px=2.0,
    edge_threshold_sigmas=5.0,
    edge_guard_px=2,
    min_terrace_fraction=0.01,
    min_level_contrast=0.5,
    max_iterations=8,
    slope_tol_deg=1e-3,
    max_step_width_px=12.0,
    min_step_length_px=8,
    z_calibration_fraction=0.0,
    lattice_false_alarm=1e-3,
    min_periods=4,
    max_peaks=12,
    index_tol=0.15,
    workers=-1,
)


def analyse_heightmap(
    heights,
    pixel_size,
    *,
    min_step_angstrom=0.5,
    edge_smooth_px=2.0,
    edge_threshold_sigmas=5.0,
    edge_guard_px=2,
    min_terrace_fraction=0.01,
    min_level_contrast=0.5,
    max_iterations=8,
    slope_tol_deg=1e-3,
    max_step_width_px=12.0,
    min_step_length_px=8,
    z_calibration_fraction=0.0,
    lattice_false_alarm=1e-3,
    min_periods=4,
    max_peaks=12,
    index_tol=0.15,
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
    min_terrace_fraction : float, default 0.01
        Smallest terrace, as a fraction of the finite pixels.
    min_level_contrast : float, default 0.5
        A histogram peak is a level when the dip to its neighbours is at
        least this fraction of its height (resolved peaks only).
    max_iterations : int, default 8
        Level-segment-refit cycles at most.
    slope_tol_deg : float, default 1e-3
        Stop when the terrace plane changes by less than this, degrees.
    max_step_width_px : float, default 12
        Terraces farther apart than this (pixels) are not adjacent.
    min_step_length_px : int, default 8
        Two terraces are adjacent when they meet along at least this many pixels.
    z_calibration_fraction : float, default 0
        Relative uncertainty of the scanner's z calibration, added in
        quadrature to each step's statistical sigma.
    lattice_false_alarm : float, default 1e-3
        Probability that pure noise gives one Fourier peak above the threshold.
    min_periods : int, default 4
        A periodicity must repeat at least this many times across the image.
    max_peaks : int, default 12
        Strongest Fourier peaks (one half plane) used for the lattice.
    index_tol : float, default 0.15
        A peak is indexed when its fractional indices lie within this of integers.
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
    three-point formula. Each coordinate carries
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
    params = dict(_DEFAULTS)
    params.update(
        min_step=min_step_angstrom,
        edge_smooth_px=edge_smooth_px,
        edge_threshold_sigmas=edge_threshold_sigmas,
        edge_guard_px=edge_guard_px,
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
    a0, b0, _, _ = _common_plane(z, valid.astype(np.int32), 1, coords)
    macro_tilt, macro_az = _tilt_azimuth(a0, b0)

    report(0.1, "terraces")
    terr = _segment(z, valid, coords, px, params)
    a, b = terr.slope
    terrace_tilt, terrace_az = _tilt_azimuth(a, b)

    report(0.6, "steps")
    steps, f, cov_ab = _steps(terr, z.shape, params)
    n_levels = len(set(terr.level_of.tolist()))
    if n_levels < 2:
        notes.append(
            "one height level resolved: a single terrace, or steps hidden by noise; no step heights"
        )
    elif not steps:
        notes.append("several levels but no two adjacent terraces: no step heights")
    else:
        notes.append("step sigmas are statistical (fit covariance with pixel correlation)"
                     + ("" if z_calibration_fraction else "; the scanner's z calibration is not included"))
    slope = math.hypot(a, b)
    if cov_ab is not None and slope > 0:
        u = np.array([a, b]) / slope
        sig_slope = math.sqrt(max(float(u @ cov_ab @ u), 0.0))
    elif cov_ab is not None:
        sig_slope = math.sqrt(max(float(np.trace(cov_ab)) / 2, 0.0))
    else:
        sig_slope = float("nan")
    terrace_sigma = math.degrees(sig_slope / (1 + slope * slope))
    notes.append("tilts are relative to the scanner plane, taken as parallel to the mount face")

    report(0.7, "lattice")
    resid = np.zeros_like(z)
    on = terr.labels > 0
    rows, cols = np.nonzero(on)
    resid[rows, cols] = terr.stats["resid"]
    lattice = _lattice(resid, px, params, notes)
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
    positive = ("min_step", "edge_smooth_px", "max_step_width_px", "slope_tol_deg", "index_tol")
    for name in positive:
        v = p[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
            raise ImageError(f"{_public(name)} must be a positive number, got {v!r}")
    fractions = ("min_terrace_fraction", "min_level_contrast", "lattice_false_alarm")
    for name in fractions:
        v = p[name]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not 0 < v < 1:
            raise ImageError(f"{_public(name)} must lie in (0, 1), got {v!r}")
    for name in ("edge_threshold_sigmas", "z_calibration_fraction"):
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
        step heights. Anything not found is left empty.
    """
    if not isinstance(analysis, HeightMapAnalysis):
        raise ImageError(f"expected a HeightMapAnalysis, got {type(analysis).__name__}")
    t = analysis.tilt
    tilt = Value(min(max(t.terrace, 0.0), 90.0), t.terrace_sigma if math.isfinite(t.terrace_sigma) else None)
    lat = analysis.lattice
    spacings, row_angle = (), None
    if lat is not None:
        spacings = (Value(lat.a, lat.sigma_a), Value(lat.b, lat.sigma_b))
        row_angle = Value(lat.gamma, lat.sigma_gamma)
    steps = tuple(Value(s.height, s.sigma) for s in analysis.steps)
    return Measurement(
        mount=tuple(mount) if mount is not None else None,
        max_index=max_index,
        tilt=tilt,
        row_angle=row_angle,
        spacings=spacings,
        steps=steps,
    )
