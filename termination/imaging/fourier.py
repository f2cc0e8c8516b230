"""The Fourier lattice of a terrace-levelled height map: peaks, sub-bin positions, per-terrace lattices combined.

The scanner is assumed drift-free and linear (:data:`DRIFT_NOTE`) unless a
drift correction is asked for with the expected lattice type.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from numpy.typing import ArrayLike
from scipy import fft as sp_fft
from scipy import ndimage

from termination.algebra.lattice2d import gauss_reduce
from termination.arrays import AnyArray, BoolArray, FloatArray, IntArray
from termination.imaging.parameters import ImageParameters
from termination.imaging.terraces import TerraceFit
from termination.units import ANGSTROM, DEG

__all__ = ["DRIFT_NOTE", "DriftCorrection", "Lattice", "fourier_lattice", "measure_lattice", "taper_mask"]

DRIFT_NOTE = (
    "lattice assumes a drift-free, linear scanner: drift, creep or a wrong x/y calibration distort a, b and gamma"
)


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
        The angle between them in the obtuse convention, deg in [90, 120]
        (120 for hexagonal, 90 for square and rectangular).
    sigma_a, sigma_b : float
        Standard uncertainties of a and b, Å.
    sigma_gamma : float
        Standard uncertainty of gamma, deg.
    direction : float
        Direction of the vector a, deg in [0, 180) from +x towards +y.
    peaks : int
        Number of Fourier peaks (in one half plane) indexed by the lattice,
        summed over the terraces measured.
    terraces : int
        Number of terraces whose lattices were combined (0: measured on the
        whole image at once).
    """

    a: float = field(metadata=ANGSTROM)
    b: float = field(metadata=ANGSTROM)
    gamma: float = field(metadata=DEG)
    sigma_a: float = field(metadata=ANGSTROM)
    sigma_b: float = field(metadata=ANGSTROM)
    sigma_gamma: float = field(metadata=DEG)
    direction: float = field(metadata=DEG)
    peaks: int
    terraces: int = 0


@dataclass(frozen=True)
class DriftCorrection:
    """A linear drift of the slow scan, estimated from the lattice type the surface is known to have.

    The surface point imaged at pixel (x, y) is taken to be
    :math:`(x + s\\,y,\\ (1 + e)\\,y)`: the fast scan (x) is undistorted and
    the slow scan is sheared by s and stretched by e.

    Parameters
    ----------
    lattice_type : str
        ``"square"``, ``"rectangular"`` or ``"hexagonal"``.
    shear, sigma_shear : float
        s and its standard uncertainty (dimensionless, x shift per unit y).
    y_scale, sigma_y_scale : float
        e and its standard uncertainty (0 for a rectangular lattice, whose
        shape fixes only the shear).
    """

    lattice_type: str
    shear: float
    sigma_shear: float
    y_scale: float
    sigma_y_scale: float


def _hann_amplitude(f: ArrayLike) -> FloatArray:
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


def _refine_axis(
    a_m: FloatArray, a_0: FloatArray, a_p: FloatArray, noise_amp: FloatArray
) -> tuple[FloatArray, FloatArray, FloatArray]:
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


def _radial_background(power: AnyArray, kr: AnyArray, dk: float) -> Any:
    """Mean noise power at each pixel from the median power of its |k| annulus.

    Notes
    -----
    Noise power in one Fourier bin is exponentially distributed, so
    mean = median / ln 2. Annuli are one bin wide (``dk``).
    """
    ring = (kr / dk).astype(np.int64)
    n_ring = int(ring.max()) + 1
    logp = np.log(np.maximum(power.astype(np.float64), 1e-300))
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
_ZOOM_FLOOR = 0.08  # bins: error of the fine-grid refinement of a peak of unknown shape


def _half_power(resid: AnyArray, workers: int, keep_window: bool = False) -> Any:
    """Power spectrum of the Hann-windowed image, kx >= -3 bins, ky centred (single precision).

    Returns power (ny, nx // 2 + 1 + _MIRROR); column ``_MIRROR`` is kx = 0
    and row ``ny // 2`` is ky = 0. The columns of negative kx come from
    the symmetry P(-k) = P(k) of a real image.
    """
    ny, nx = resid.shape
    win = resid.astype(np.float32, copy=True)
    win *= np.hanning(ny + 1)[:-1, None].astype(np.float32)
    win *= np.hanning(nx + 1)[None, :-1].astype(np.float32)
    spec = sp_fft.rfft2(win, workers=workers)
    if not keep_window:
        del win
    power = np.empty((ny, spec.shape[1] + _MIRROR), dtype=np.float32)
    shift = ny // 2
    # fftshift along y while writing into the output, then the mirrored columns
    body = power[:, _MIRROR:]
    sq = spec.real**2
    sq += spec.imag**2
    del spec
    body[shift:] = sq[: ny - shift]
    body[:shift] = sq[ny - shift :]
    del sq
    flip = (2 * (ny // 2) - np.arange(ny)) % ny
    power[:, :_MIRROR] = body[flip][:, _MIRROR:0:-1]
    return (power, win) if keep_window else power


def _zoom_refine(
    win: AnyArray, kx_bins: FloatArray, ky_bins: FloatArray, step: float = 0.25, half: int = 3
) -> tuple[FloatArray, FloatArray]:
    """Sub-bin peak positions from the transform evaluated on a fine grid around each peak.

    Parameters
    ----------
    win : (ny, nx) float32 ndarray
        The windowed image that was transformed.
    kx_bins, ky_bins : (m,) ndarray
        Peak positions on the FFT grid, bins (ky centred).

    Returns
    -------
    dx, dy : (m,) ndarray
        Offsets from the grid positions, bins, in [-1, 1].

    Notes
    -----
    :math:`F(k) = \\sum_{x,y} w(x, y)\\, e^{-2\\pi i (k_x x / n_x + k_y y / n_y)}` is
    evaluated directly (two matrix products, the first in single
    precision) on a grid of ``step`` bins, ±``half`` steps around the
    peak; the maximum of :math:`|F|^2` on that grid is refined by a
    parabola through its neighbours along each axis. Unlike an
    interpolation formula for a known window, this does not assume the
    peak's shape, which a terrace mask changes.
    """
    ny, nx = win.shape
    offs = np.arange(-half, half + 1) * step
    x = np.arange(nx)
    y = np.arange(ny)
    m = len(kx_bins)
    dx = np.zeros(m)
    dy = np.zeros(m)
    if m == 0:
        return dx, dy
    # the sums along x for every peak and fine offset at once: one single-precision matrix product each
    phx = (2 * np.pi / nx) * np.outer(x, (np.asarray(kx_bins)[:, None] + offs[None, :]).ravel())
    a_all = win @ np.cos(phx).astype(np.float32) - 1j * (win @ np.sin(phx).astype(np.float32))
    del phx
    k = offs.size
    for i, ky0 in enumerate(ky_bins):
        a = a_all[:, i * k : (i + 1) * k]
        phy = (2 * np.pi / ny) * np.outer(ky0 + offs, y)
        f = np.exp(-1j * phy) @ a.astype(np.complex128)
        power = f.real**2 + f.imag**2
        iy, ix = np.unravel_index(int(np.argmax(power)), power.shape)
        for axis, idx, out in ((1, ix, dx), (0, iy, dy)):
            line = power[iy, :] if axis == 1 else power[:, ix]
            delta = 0.0
            if 0 < idx < line.size - 1:
                lm, l0, lp = np.log(line[idx - 1 : idx + 2] + 1e-300)
                den = lm - 2 * l0 + lp
                if den < 0:
                    delta = 0.5 * (lm - lp) / den
            out[i] = float(np.clip(offs[idx] + delta * step, -1.0, 1.0))
    return dx, dy


def _fringes(support: BoolArray | None, shape: tuple[int, int], px: tuple[float, float], g: FloatArray) -> Any:
    """How many periods of each wave ``g`` (m, 2), 1/Å, fit across the data of a region, along the wave's direction.

    The extent of the pixels of ``support`` (all of ``shape`` when None)
    projected on the direction of g, times |g|. A terrace that is a narrow
    strip holds many periods of a wave along the strip and few across it,
    so a single isotropic floor would either drop the lattice spots of the
    strip or keep spots no terrace can resolve.
    """
    ny, nx = shape
    if support is None:
        # a full box: the extent along (ux, uy) is W |ux| + H |uy|
        return np.abs(g[:, 0]) * (nx - 1) * px[0] + np.abs(g[:, 1]) * (ny - 1) * px[1]
    stride = max(1, int(math.ceil(math.sqrt(support.sum() / 4096.0))))
    rows, cols = np.nonzero(support[::stride, ::stride])
    if rows.size == 0:
        return np.zeros(len(g))
    pts = np.stack([cols * stride * px[0], rows * stride * px[1]], axis=1)
    proj = pts @ g.T  # already in periods: projection on u times |g|
    return np.ptp(proj, axis=0) + stride * (np.abs(g[:, 0]) * px[0] + np.abs(g[:, 1]) * px[1])


def _spectrum_peaks(
    resid: AnyArray,
    px: tuple[float, float],
    p: ImageParameters,
    notes: list[str],
    support: BoolArray | None = None,
) -> tuple[FloatArray, FloatArray] | None:
    """Significant Fourier peaks of a levelled image: positions g (m, 2), 1/Å, and their sigmas, strongest first.

    ``support`` marks the pixels that carry data (default: all). A peak
    counts only when its wave repeats ``min_periods`` times across them along
    its own direction (:func:`_fringes`).

    Returns (g, sig) or None, with the reason appended to ``notes``.
    """
    ny, nx = resid.shape
    power, win = _half_power(resid, p.workers, keep_window=True)
    cy, cx = ny // 2, _MIRROR
    dkx, dky = 1.0 / (nx * px[0]), 1.0 / (ny * px[1])
    kx = ((np.arange(power.shape[1]) - cx) * dkx).astype(np.float32)
    ky = ((np.arange(ny) - cy) * dky).astype(np.float32)
    kr = np.hypot(kx[None, :], ky[:, None])
    # one half plane: kx > 0, or kx == 0 and ky > 0
    half = np.zeros(power.shape, dtype=bool)
    half[:, cx + 1 :] = True
    half[cy + 1 :, cx] = True
    # periods across the whole box along each wave's direction (|i| + |j| bins); the support is tested below
    across = np.abs(np.arange(power.shape[1]) - cx)[None, :] + np.abs(np.arange(ny) - cy)[:, None]
    usable = half & (across >= p.min_periods)
    del across
    usable[[0, -1], :] = False
    usable[:, -1] = False
    if not usable.any():
        notes.append(f"no lattice: the image is too small for a periodicity to repeat {p.min_periods} times")
        return None
    bg_img = np.full(power.shape, np.inf, dtype=np.float32)
    bg_img[half] = _radial_background(power[half], kr[half], max(dkx, dky))
    del kr
    n_bins = int(half.sum())
    del half
    cand = usable & (power > bg_img * np.float32(math.log(n_bins / p.lattice_false_alarm)))
    del usable
    if cand.any():
        cand &= power == ndimage.maximum_filter(power, size=3, mode="nearest")
    rows, cols = np.nonzero(cand)
    del cand
    if rows.size == 0:
        notes.append(f"no lattice: no Fourier peak above the noise (false-alarm probability {p.lattice_false_alarm:g})")
        return None
    if support is not None:
        k_cand = np.stack([(cols - cx) * dkx, (rows - cy) * dky], axis=1)
        wide = _fringes(support, (ny, nx), px, k_cand) >= p.min_periods
        rows, cols = rows[wide], cols[wide]
        if rows.size == 0:
            notes.append(f"no lattice: no Fourier peak above the noise repeats {p.min_periods} times across the data")
            return None
    power64 = power  # peaks are read from the single-precision spectrum
    order = np.argsort(power64[rows, cols])[::-1]
    rows, cols = rows[order], cols[order]
    streak = _is_streak(power64, rows, cols, cx, cy, p.streak_ratio)
    if streak.any():
        k = int(streak.sum())
        notes.append(f"{k} Fourier {'maximum' if k == 1 else 'maxima'} on radial streaks (step edges) ignored")
    rows, cols = rows[~streak], cols[~streak]
    if rows.size == 0:
        notes.append("no lattice: only streaks from step edges in the Fourier transform")
        return None
    # side lobes of the strong spots through the (pixel-jagged) terrace mask stand far below them; on a
    # clean map they also stand far above the numerical noise floor
    strong = power64[rows, cols] >= p.min_peak_fraction * power64[rows[0], cols[0]]
    rows, cols = rows[strong][: p.max_peaks], cols[strong][: p.max_peaks]
    noise_amp = np.sqrt(bg_img[rows, cols].astype(np.float64) / 2.0)

    def amp(r: IntArray, c: IntArray) -> Any:
        return np.sqrt(power64[r, c].astype(np.float64))

    _, sx, bx = _refine_axis(amp(rows, cols - 1), amp(rows, cols), amp(rows, cols + 1), noise_amp)
    _, sy, by = _refine_axis(amp(rows - 1, cols), amp(rows, cols), amp(rows + 1, cols), noise_amp)
    del power
    dx, dy = _zoom_refine(win, (cols - cx).astype(np.float64), (rows - cy).astype(np.float64))
    del win
    g = np.stack([(cols - cx + dx) * dkx, (rows - cy + dy) * dky], axis=1)
    # position noise (from the three-point amplitudes) with a floor for the refinement's own error,
    # times the broadening of the peak against the window's own width
    sig = np.stack([dkx * np.sqrt(_ZOOM_FLOOR**2 + sx**2) * bx, dky * np.sqrt(_ZOOM_FLOOR**2 + sy**2) * by], axis=1)
    return g, sig


def _fit_basis(
    g: FloatArray, sig: FloatArray, p: ImageParameters, notes: list[str]
) -> tuple[FloatArray, FloatArray, int] | None:
    """Reciprocal basis (2, 2) (rows g1, g2) least-squares fitted to every indexed peak, its (4, 4) covariance
    (parameters g1x, g2x, g1y, g2y) and the number of peaks used; or None with the reason in ``notes``."""
    basis, hk = _index_peaks(g, p.index_tol)
    if basis is None or hk is None:
        glen = np.hypot(g[:, 0], g[:, 1])
        d = 1.0 / glen[0]
        notes.append(f"no lattice: one periodicity only (rows {d:.3f} Å apart), no second direction")
        return None
    ok = np.all(np.abs(hk - np.rint(hk)) <= p.index_tol, axis=1)
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
    cov = np.zeros((4, 4))
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
    return gmat, cov, int(ok.sum())


def _params(gmat: FloatArray) -> FloatArray:
    return np.array([gmat[0, 0], gmat[1, 0], gmat[0, 1], gmat[1, 1]])


def _lattice_values(
    params: FloatArray,
    cov: FloatArray,
    metric: FloatArray,
    p_count: int,
    terraces: int,
    drift: DriftCorrection | None = None,
) -> Lattice:
    """The Lattice record from reciprocal parameters and their covariance (propagated by central differences)."""
    values, transform = _real_lattice(params, None, metric, drift)
    jac = np.empty((4, 4))
    for i in range(4):
        step = 1e-6 * np.max(np.abs(params))
        dp = np.zeros(4)
        dp[i] = step
        jac[:, i] = (
            _real_lattice(params + dp, transform, metric, drift)[0]
            - _real_lattice(params - dp, transform, metric, drift)[0]
        ) / (2 * step)
    vcov = jac @ cov @ jac.T
    sd = np.sqrt(np.maximum(np.diag(vcov), 0.0))
    a, b, gamma, direction = values
    return Lattice(
        a=float(a),
        b=float(b),
        gamma=float(gamma),
        sigma_a=float(sd[0]),
        sigma_b=float(sd[1]),
        sigma_gamma=float(sd[2]),
        direction=float(direction),
        peaks=int(p_count),
        terraces=int(terraces),
    )


def fourier_lattice(
    resid: AnyArray, px: tuple[float, float], slope: tuple[float, float], p: ImageParameters, notes: list[str]
) -> Lattice | None:
    """The reduced lattice of one levelled image (Å, degrees), or None with the reason appended to ``notes``.

    Parameters
    ----------
    resid : (ny, nx) ndarray
        Levelled heights, Å, zero where nothing is known.
    px : (float, float)
        Pixel size along x and y, Å.
    slope : (float, float)
        Terrace-plane slopes dz/dx, dz/dy (the lattice is measured in that plane).
    p : ImageParameters
    notes : list of str
        Reasons and remarks are appended.

    Returns
    -------
    Lattice or None
    """
    peaks = _spectrum_peaks(resid, px, p, notes)
    if peaks is None:
        return None
    fitted = _fit_basis(*peaks, p, notes)
    if fitted is None:
        return None
    gmat, cov, count = fitted
    notes.append(DRIFT_NOTE)
    return _lattice_values(_params(gmat), cov, _metric(slope), count, 0)


def _metric(slope: tuple[float, float]) -> FloatArray:
    sl = np.asarray(slope, dtype=np.float64)
    return np.eye(2) + np.outer(sl, sl)  # image (x, y) lifted onto the terrace plane


def _terrace_regions(
    fit: TerraceFit, shape: tuple[int, ...], p: ImageParameters, min_side: int
) -> list[tuple[int, tuple[slice, slice]]]:
    """Bounding boxes (full-resolution slices) of the largest terraces whose lattices are measured separately.

    Terrace areas and boxes come from the segmentation grid (binned by ``fit.bin``).
    """
    near = fit.near_b
    f = fit.bin
    counts = np.bincount(near.ravel(), minlength=fit.n + 1)[1:]
    order = np.argsort(counts)[::-1]
    if counts.size == 0 or counts[order[0]] == 0:
        return []
    boxes = ndimage.find_objects(near, max_label=fit.n)
    regions = []
    for k in order[: p.lattice_terraces]:
        if counts[k] < 0.2 * counts[order[0]] or boxes[k] is None:
            break
        rb, cb = boxes[k]
        rows = slice(rb.start * f, min(rb.stop * f, shape[0]) if rb.stop < near.shape[0] else shape[0])
        cols = slice(cb.start * f, min(cb.stop * f, shape[1]) if cb.stop < near.shape[1] else shape[1])
        if rows.stop - rows.start < min_side or cols.stop - cols.start < min_side:
            continue
        regions.append((int(k + 1), (rows, cols)))
    return regions


def taper_mask(mask: BoolArray, sigma_px: float = 3.0) -> Any:
    """Weights that fall smoothly from 1 inside ``mask`` to 0 at its edge (over about 2 sigma_px).

    The edges of a terrace mask would otherwise transform into bright
    streaks through the origin that hide or mimic lattice spots.
    """
    # a box mean (cheaper than a Gaussian on large crops) gives a linear ramp over about 2 sigma_px
    w = ndimage.uniform_filter(mask.astype(np.float32), 2 * int(round(sigma_px)) + 1, mode="constant")
    w *= 2.0
    w -= 1.0
    np.clip(w, 0.0, 1.0, out=w)
    w *= mask
    return w


def _align(gmat: FloatArray, cov: FloatArray, ref: FloatArray) -> tuple[FloatArray, FloatArray] | None:
    """Express a reciprocal basis in the integer frame of ``ref`` (the same lattice); None if it is not."""
    t = gmat @ np.linalg.inv(ref)
    ti = np.rint(t)
    if np.max(np.abs(t - ti)) > 0.2 or abs(round(np.linalg.det(ti))) != 1:
        return None
    inv = np.linalg.inv(ti)
    new = inv @ gmat
    big = np.zeros((4, 4))
    big[:2, :2] = inv
    big[2:, 2:] = inv
    return new, big @ cov @ big.T


@dataclass(frozen=True)
class _TerraceLattice:
    """The reciprocal basis fitted on one terrace, with the terrace's area (pixels) and the sharpness of its spots."""

    gmat: FloatArray
    cov: FloatArray
    count: int
    area: int
    quality: float


def _sharpness(gmat: FloatArray, cov: FloatArray) -> float:
    """Inverse relative uncertainty of a reciprocal basis: large for strong, sharp spots.

    The position sigmas of the spots grow with the noise under them and with
    their broadening (:func:`_spectrum_peaks`), so this ranks terraces by the
    strength and sharpness of the spots that carry their lattice.
    """
    scale = float(np.sum(gmat**2))
    return math.sqrt(scale / max(float(np.trace(cov)), 1e-300))


def _below_floor(gmat: FloatArray, px: tuple[float, float], metric: FloatArray, p: ImageParameters) -> str | None:
    """Why the lattice of a reciprocal basis is too short to be real, or None.

    A lattice vector shorter than ``min_lattice_angstrom`` exists on no
    crystal surface, and one shorter than 2.5 pixels cannot be told from
    aliasing of finer structure (the sampling limit is 2 pixels).
    """
    real = _reduce(np.asarray(np.linalg.inv(gmat).T, dtype=np.float64), metric)
    lengths = np.sqrt(np.einsum("ij,jk,ik->i", real, metric, real))
    in_px = np.hypot(real[:, 0] / px[0], real[:, 1] / px[1])
    if lengths.min() < p.min_lattice_angstrom:
        return f"lattice vector of {lengths.min():.2f} Å, below the floor of {p.min_lattice_angstrom:g} Å"
    if in_px.min() < _MIN_PERIOD_PX:
        return f"lattice vector of {in_px.min():.1f} pixels, below the sampling floor of {_MIN_PERIOD_PX:g} pixels"
    return None


_MIN_PERIOD_PX = 2.5  # shortest lattice vector that the pixel grid resolves (2 pixels is the sampling limit)


_CLEAR_MAJORITY = 0.6  # of the area that shows a lattice: two of three equal terraces, not a near tie


def _vote(results: list[_TerraceLattice], examined: int, n_regions: int, notes: list[str]) -> list[_TerraceLattice]:
    """The terrace lattices that agree with the one most of the terrace area supports, in one frame; [] for none.

    Terraces whose lattices are the same (one integer basis change apart,
    :func:`_align`) form a group. The group holding a clear majority
    (:data:`_CLEAR_MAJORITY`) of the area of the terraces that show a
    lattice is taken when it also holds more than half of the ``examined``
    area (terraces that show no lattice support none); a lattice that a
    minority of the terrace area shows is not reported. Without a clear
    majority the terraces disagree: the group whose best terrace has the
    strongest, sharpest spots (:func:`_sharpness`) is reported, and the
    notes say so.
    """
    groups: list[list[_TerraceLattice]] = []
    for t in sorted(results, key=lambda r: (-r.area, -r.quality)):
        for group in groups:
            al = _align(t.gmat, t.cov, group[0].gmat)
            if al is not None:
                group.append(_TerraceLattice(al[0], al[1], t.count, t.area, t.quality))
                break
        else:
            groups.append([t])
    shown = sum(t.area for t in results)
    by_area = max(groups, key=lambda g: sum(t.area for t in g))
    support = sum(t.area for t in by_area)
    if support >= _CLEAR_MAJORITY * shown:
        if 2 * support <= examined:
            notes.append(
                f"no lattice: the one found shows on {len(by_area)} of the {n_regions} largest terraces, "
                f"{support / examined:.0%} of their area, not most of it"
            )
            return []
        chosen = by_area
    else:
        chosen = max(groups, key=lambda g: max(t.quality for t in g))
        notes.append(
            f"terraces disagree on the lattice: none of the {len(groups)} lattices found is supported by most of "
            "the terrace area; the one with the strongest, sharpest Fourier spots is reported"
        )
    skipped = len(results) - len(chosen)
    if skipped:
        notes.append(
            f"{skipped} terrace lattice{'s' if skipped > 1 else ''} not commensurate with the "
            f"{'majority' if chosen is by_area else 'one reported'} ignored"
        )
    return chosen


def measure_lattice(
    flat: AnyArray,
    keep: BoolArray,
    fit: TerraceFit,
    px: tuple[float, float],
    slope: tuple[float, float],
    p: ImageParameters,
    notes: list[str],
) -> tuple[Lattice | None, DriftCorrection | None]:
    """The lattice measured on each of the largest terraces and combined; optionally drift-corrected.

    Parameters
    ----------
    flat : (ny, nx) ndarray
        Terrace-levelled image (:func:`termination.imaging.terraces.levelled_image`), Å.
    keep : (ny, nx) bool ndarray
        Pixels of ``flat`` that carry data.
    fit : TerraceFit
    px : (float, float)
        Pixel size, Å.
    slope : (float, float)
        Terrace-plane slopes.
    p : ImageParameters
    notes : list of str

    Returns
    -------
    (Lattice or None, DriftCorrection or None)

    Notes
    -----
    Across a step the atomic lattice of one terrace is shifted laterally
    against the next, so a transform over several terraces sums spots of
    different phase, which distorts and shifts them. Each of the
    ``lattice_terraces`` largest terraces (at least a fifth of the largest
    one) is therefore transformed on its own bounding box, its pixels alone
    (the rest zero), and its reciprocal basis fitted as in
    :func:`fourier_lattice`. The bases are brought to one integer frame and
    combined as the covariance-weighted mean of their parameters
    :math:`\\bar p = (\\sum_k C_k^{-1})^{-1} \\sum_k C_k^{-1} p_k`; when they
    scatter more than their covariances allow (:math:`\\chi^2/\\nu > 1`,
    :math:`\\nu = 4(K-1)`) the covariance of the mean is scaled by
    :math:`\\chi^2/\\nu`, so that sigma covers the spread between
    terraces. Without a terrace large enough, the whole image is used and
    the notes say so.

    *Drift correction* (only with ``drift_lattice``): the real-space vectors
    :math:`A` measured in image coordinates are mapped by
    :math:`C = [[1, s], [0, 1 + e]]` (the surface point of pixel (x, y) is
    :math:`(x + s y, (1 + e) y)`), and (s, e) are solved so that the reduced
    lattice of :math:`A C^T` has the stated shape: a = b and
    :math:`\\gamma = 90°` (square), :math:`\\gamma = 90°` with e = 0
    (rectangular), a = b and :math:`\\gamma = 120°` (hexagonal). The
    uncertainties are propagated through the solution.
    """
    regions = _terrace_regions(fit, flat.shape, p, min_side=32)
    metric = _metric(slope)
    results: list[_TerraceLattice] = []
    short: list[str] = []
    examined = 0
    for k, (rows, cols) in regions:
        on = keep[rows, cols] & (fit.near(flat.shape, rows)[:, cols] == k)
        area = int(on.sum())
        examined += area
        sub = np.where(on, flat[rows, cols], 0.0).astype(np.float32)
        if area:
            sub[on] -= float(np.mean(sub[on], dtype=np.float64))
        sub *= taper_mask(on)
        trial: list[str] = []
        peaks = _spectrum_peaks(sub, px, p, trial, support=on)
        del sub, on
        fitted = _fit_basis(*peaks, p, trial) if peaks is not None else None
        if fitted is None:
            continue
        reason = _below_floor(fitted[0], px, metric, p)
        if reason is not None:
            short.append(reason)
            continue
        results.append(_TerraceLattice(*fitted, area=area, quality=_sharpness(*fitted[:2])))
    if short:
        notes.append(f"{len(short)} terrace lattice{'s' if len(short) > 1 else ''} rejected: {short[0]}")
    if results and len(results) < len(regions):
        missed = len(regions) - len(results)
        notes.append(f"no lattice found on {missed} of the {len(regions)} largest terraces on their own")
    aligned = _vote(results, examined, len(regions), notes) if results else []
    if aligned:
        weights = [np.linalg.pinv(t.cov) for t in aligned]
        total = np.linalg.pinv(sum(weights))
        mean = total @ sum(w @ _params(t.gmat) for w, t in zip(weights, aligned))
        if len(aligned) > 1:
            chi2 = sum(float((_params(t.gmat) - mean) @ w @ (_params(t.gmat) - mean)) for w, t in zip(weights, aligned))
            total = total * max(1.0, chi2 / (4 * (len(aligned) - 1)))
        params, cov, count, terraces = mean, total, sum(t.count for t in aligned), len(aligned)
        notes.append(
            f"lattice measured on {terraces} terrace{'s' if terraces > 1 else ''} separately and combined"
            + ("; sigma covers the spread between them" if terraces > 1 else "")
        )
    elif results:
        return None, None
    elif len(set(np.asarray(fit.level_of).tolist())) > 1:
        # the atomic lattice of one terrace is shifted laterally against the next: a transform across the
        # steps adds spots of different phase, which shifts and distorts them (by 5 % and 2° in the tests)
        notes.append(
            "no lattice: no single terrace shows one, and a transform across terraces would be biased by the "
            "lateral shifts of the lattice between them"
        )
        return None, None
    else:
        # one level, but no terrace large enough on its own: the whole image
        peaks = _spectrum_peaks(flat * taper_mask(keep), px, p, notes, support=keep)
        fitted = _fit_basis(*peaks, p, notes) if peaks is not None else None
        if fitted is None:
            return None, None
        gmat, cov, count = fitted
        reason = _below_floor(gmat, px, metric, p)
        if reason is not None:
            notes.append(f"no lattice: {reason}")
            return None, None
        if regions:
            notes.append("lattice from the whole image: no single terrace shows it on its own")
        params, terraces = _params(gmat), 0
    drift = None
    if p.drift_lattice is not None:
        solved = _solve_drift(params, metric, p.drift_lattice)
        if solved is None:
            notes.append(
                f"drift correction for a {p.drift_lattice} lattice failed: the measured lattice is too far "
                "from that shape; lattice reported uncorrected"
            )
        else:
            drift = _drift_record(params, cov, metric, p.drift_lattice, solved)
            notes.append(
                f"drift corrected for a {p.drift_lattice} lattice: shear {drift.shear:+.4f} ± {drift.sigma_shear:.4f}, "
                f"slow-scan stretch {drift.y_scale:+.4f} ± {drift.sigma_y_scale:.4f}; gamma is then fixed by "
                "the stated lattice type, not measured"
            )
    lattice = _lattice_values(params, cov, metric, count, terraces, None if drift is None else drift)
    rel = max(lattice.sigma_a / lattice.a, lattice.sigma_b / lattice.b)
    if not rel <= p.max_lattice_sigma_fraction:
        notes.append(
            f"no lattice: the one found ({lattice.a:.2f} × {lattice.b:.2f} Å, {lattice.gamma:.1f}°) is uncertain "
            f"by {rel:.1%}, more than {p.max_lattice_sigma_fraction:.1%} (max_lattice_sigma_fraction): its spots "
            "are too broad or too few"
        )
        return None, None
    if drift is None:
        notes.append(DRIFT_NOTE)
    return lattice, drift


def _corrected_params(params: FloatArray, drift_se: Sequence[float] | FloatArray) -> FloatArray:
    """Reciprocal parameters after the drift map C = [[1, s], [0, 1 + e]]: G' = G C^-1."""
    s, e = drift_se
    gmat = np.array([[params[0], params[2]], [params[1], params[3]]])
    c = np.array([[1.0, s], [0.0, 1.0 + e]])
    return _params(gmat @ np.linalg.inv(c))


def _shape_residuals(params: FloatArray, metric: FloatArray, kind: str, transform: FloatArray) -> FloatArray:
    values, _ = _real_lattice(params, transform, metric)
    a, b, gamma = values[:3]
    mean = 0.5 * (a + b)
    if kind == "square":
        return np.array([(a - b) / mean, math.cos(math.radians(gamma))])
    if kind == "hexagonal":
        return np.array([(a - b) / mean, math.cos(math.radians(gamma)) + 0.5])
    return np.array([math.cos(math.radians(gamma))])


def _solve_drift(
    params: FloatArray, metric: FloatArray, kind: str, transform: FloatArray | None = None
) -> tuple[tuple[float, float], FloatArray] | None:
    """(s, e) that give the measured lattice the shape of ``kind``; None if no solution near zero drift."""
    from scipy.optimize import least_squares

    if transform is None:
        transform = _real_lattice(params, None, metric)[1]
    if kind == "rectangular":

        def fun(v: FloatArray) -> FloatArray:
            return _shape_residuals(_corrected_params(params, (v[0], 0.0)), metric, kind, transform)

        sol = least_squares(fun, [0.0], xtol=1e-14, ftol=1e-14, gtol=1e-14)
        se = (float(sol.x[0]), 0.0)
    else:

        def fun(v: FloatArray) -> FloatArray:
            return _shape_residuals(_corrected_params(params, v), metric, kind, transform)

        sol = least_squares(fun, [0.0, 0.0], xtol=1e-14, ftol=1e-14, gtol=1e-14)
        se = (float(sol.x[0]), float(sol.x[1]))
    if not sol.success or np.max(np.abs(sol.fun)) > 1e-6 or max(abs(se[0]), abs(se[1])) > 0.5:
        return None
    return se, transform


def _drift_record(
    params: FloatArray,
    cov: FloatArray,
    metric: FloatArray,
    kind: str,
    solved: tuple[tuple[float, float], FloatArray],
) -> DriftCorrection:
    (s, e), transform = solved
    jac = np.zeros((2, 4))
    for i in range(4):
        step = 1e-6 * np.max(np.abs(params))
        dp = np.zeros(4)
        dp[i] = step
        plus = _solve_drift(params + dp, metric, kind, transform)
        minus = _solve_drift(params - dp, metric, kind, transform)
        if plus is None or minus is None:
            continue
        jac[:, i] = (np.array(plus[0]) - np.array(minus[0])) / (2 * step)
    c = jac @ cov @ jac.T
    sd = np.sqrt(np.maximum(np.diag(c), 0.0))
    return DriftCorrection(lattice_type=kind, shear=s, sigma_shear=float(sd[0]), y_scale=e, sigma_y_scale=float(sd[1]))


def _is_streak(power: AnyArray, rows: IntArray, cols: IntArray, cx: int, cy: int, ratio: float) -> Any:
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


def _index_peaks(g: FloatArray, tol: float) -> tuple[FloatArray | None, FloatArray | None]:
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


def _reduce(basis: FloatArray, metric: FloatArray | None = None) -> FloatArray:
    """Gauss-reduced 2D basis (rows) under ``metric``."""
    return np.array(gauss_reduce(basis[0], basis[1], metric))


def _real_lattice(
    params: FloatArray, transform: FloatArray | None, metric: FloatArray, drift: DriftCorrection | None = None
) -> tuple[FloatArray, FloatArray]:
    """(a, b, gamma, direction) of the reduced real-space lattice from (g1x, g2x, g1y, g2y).

    Lengths and angles use ``metric`` (that of the terrace plane, so the
    foreshortening of the projected image is undone); gamma follows the
    obtuse convention (90° <= gamma <= 120°). ``transform`` fixes the
    integer reduction so that finite differences are smooth. With ``drift``
    (a DriftCorrection), the drift is solved for and removed first, so that
    the uncertainty of the correction is propagated too.
    """
    if drift is not None:
        solved = _solve_drift(params, metric, drift.lattice_type)
        if solved is not None:
            params = _corrected_params(params, solved[0])
    gmat = np.array([[params[0], params[2]], [params[1], params[3]]])
    real = np.linalg.inv(gmat).T  # rows: real-space vectors with g_i . a_j = delta_ij
    if transform is None:
        red = _reduce(real, metric)
        if red[0] @ metric @ red[1] > 0:  # make gamma obtuse
            red[1] = -red[1]
        transform = np.rint(red @ np.linalg.inv(real))
    red = transform @ real
    la = math.sqrt(red[0] @ metric @ red[0])
    lb = math.sqrt(red[1] @ metric @ red[1])
    cosg = float(red[0] @ metric @ red[1]) / (la * lb)
    gamma = math.degrees(math.acos(min(1.0, max(-1.0, cosg))))
    direction = math.degrees(math.atan2(red[0][1], red[0][0])) % 180.0
    return np.array([la, lb, gamma, direction]), transform
