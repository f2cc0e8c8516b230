"""Terraces of a height map: plane fits, segmentation into terrace levels, and the steps between them.

Coordinates: x runs along image columns, y along rows (row index increases
with y), both in Å from the image centre. Heights are in Å.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import ndimage
from scipy.signal import find_peaks

from termination.imaging.reading import check_heights, parse_pixel_size

__all__ = ["Step", "plane_fit", "tilt_azimuth"]


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


def _coordinates(shape, pixel_size):
    ny, nx = shape
    x = (np.arange(nx) - (nx - 1) / 2.0) * pixel_size[0]
    y = (np.arange(ny) - (ny - 1) / 2.0) * pixel_size[1]
    return x, y


def tilt_azimuth(a, b):
    """Tilt and azimuth of steepest ascent (from +x towards +y) of slopes (a, b), degrees."""
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
        mins = np.array([p + int(np.argmin(smooth[p : q + 1])) for p, q in zip(peaks[:-1], peaks[1:])])
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

    Segmentation runs on a binned copy of large images (``p.bin``
    pixels a side; pixel-valued parameters are scaled to it); the final
    fit of the plane and the offsets uses every pixel.
    """
    factor = p.bin
    zc, vc, cc = _bin(z, valid, coords, factor)
    pxc = (px[0] * factor, px[1] * factor)
    xc, yc = cc
    edge_s = max(p.edge_smooth_px / factor, 0.5)
    smooth = _smooth(zc, vc, edge_s)
    gy, gx = np.gradient(smooth, pxc[1], pxc[0])
    # heavier smoothing for the histogram: removes corrugation and noise, while
    # the blur of the step edges only moves a few pixels between levels
    smooth_levels = _smooth(zc, vc, max(p.level_smooth_px / factor, 0.5))
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
    floor = 0.2 * p.min_step_angstrom / (math.sqrt(2 * math.pi) * sigma_s)
    min_count = max(p.min_terrace_fraction * n_valid, 16)
    guard = max(1, int(round(p.edge_guard_px / factor)))
    size = 2 * guard + 1
    result = None
    for iteration in range(1, p.max_iterations + 1):
        g = np.hypot(gx - a, gy - b)
        thr = max(_robust_threshold(g[sub][vsub], p.edge_threshold_sigmas), floor)
        flat = vc & (g <= thr)
        lev = smooth_levels - (a * xc[None, :] + b * yc[:, None])
        bounds = _level_bounds(lev[sub][flat[sub]], p.min_step_angstrom, p.min_level_contrast, min_count / stride**2)
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
        if change < p.slope_tol_deg:
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
    thr = max(_robust_threshold(g[sub][vsub], p.edge_threshold_sigmas), floor)
    use = vc & ~ndimage.binary_dilation(g > thr, iterations=guard)
    if boundary.any():
        band = int(round((p.edge_guard_px + 2.0 * p.edge_smooth_px) / factor))
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
    bad = np.abs(out - med) > p.lattice_clip_sigmas * scale
    guard = int(p.edge_guard_px)
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
    for k, l in _adjacent_pairs(terr.n, dist, near, p.max_step_width_px, p.min_step_length_px):
        i, j = k - 1, l - 1
        if terr.level_of[i] == terr.level_of[j]:
            continue
        dc = terr.offsets[j] - terr.offsets[i]
        d = st["centroid"][j] - st["centroid"][i]
        var = f * st["s2"] * (1.0 / st["n"][i] + 1.0 / st["n"][j])
        if cov_ab is not None:
            var += float(d @ cov_ab @ d)
        h = abs(dc) / norm
        if h < p.min_step_angstrom:  # below the resolved step height: same level
            continue
        sigma = math.sqrt(var) / norm
        sigma = math.hypot(sigma, p.z_calibration_fraction * h)
        steps.append((min(terr.level_of[i], terr.level_of[j]), Step(float(h), float(sigma))))
    steps.sort(key=lambda t: (t[0], t[1].height))
    return tuple(s for _, s in steps), f, cov_ab
