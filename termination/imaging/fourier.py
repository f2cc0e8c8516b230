"""The Fourier lattice of a terrace-levelled height map: peaks, their sub-bin positions and the reduced 2D lattice.

The scanner is assumed drift-free and linear (:data:`DRIFT_NOTE`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import fft as sp_fft
from scipy import ndimage

from termination.algebra.lattice2d import gauss_reduce

__all__ = ["DRIFT_NOTE", "Lattice", "fourier_lattice"]

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


def fourier_lattice(resid, px, slope, p, notes):
    """The reduced lattice of a levelled image (Å, degrees), or None with the reason appended to ``notes``."""
    ny, nx = resid.shape
    power = _half_power(resid, p.workers)
    cy, cx = ny // 2, _MIRROR
    dkx, dky = 1.0 / (nx * px[0]), 1.0 / (ny * px[1])
    kx = (np.arange(power.shape[1]) - cx) * dkx
    ky = (np.arange(ny) - cy) * dky
    kr = np.hypot(kx[None, :], ky[:, None])
    # one half plane: kx > 0, or kx == 0 and ky > 0
    half = np.zeros(power.shape, dtype=bool)
    half[:, cx + 1 :] = True
    half[cy + 1 :, cx] = True
    k_min = p.min_periods / min(nx * px[0], ny * px[1])
    usable = half & (kr >= k_min)
    usable[[0, -1], :] = False
    usable[:, -1] = False
    if not usable.any():
        notes.append(f"no lattice: the image is too small for a periodicity to repeat {p.min_periods} times")
        return None
    bg_img = np.full(power.shape, np.inf)
    bg_img[half] = _radial_background(power[half], kr[half], max(dkx, dky))
    n_bins = int(half.sum())
    thr = bg_img * math.log(n_bins / p.lattice_false_alarm)
    cand = usable & (power > thr)
    if cand.any():
        cand &= power == ndimage.maximum_filter(power, size=3, mode="nearest")
    rows, cols = np.nonzero(cand)
    if rows.size == 0:
        notes.append(f"no lattice: no Fourier peak above the noise (false-alarm probability {p.lattice_false_alarm:g})")
        return None
    order = np.argsort(power[rows, cols])[::-1]
    rows, cols = rows[order], cols[order]
    streak = _is_streak(power, rows, cols, cx, cy, p.streak_ratio)
    if streak.any():
        k = int(streak.sum())
        notes.append(f"{k} Fourier {'maximum' if k == 1 else 'maxima'} on radial streaks (step edges) ignored")
    rows, cols = rows[~streak][: p.max_peaks], cols[~streak][: p.max_peaks]
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
    sig = np.stack([dkx * np.sqrt(1 / 12 + sx**2) * bx, dky * np.sqrt(1 / 12 + sy**2) * by], axis=1)
    basis, hk = _index_peaks(g, p.index_tol)
    if basis is None:
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
    """Gauss-reduced 2D basis (rows) under ``metric``."""
    return np.array(gauss_reduce(basis[0], basis[1], metric))


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
