"""Terraces of a height map: the joint model of plane, terrace levels, scan lines and background, and the steps.

Coordinates: x runs along image columns (the fast scan direction), y along
rows (the slow scan direction; one row is one scan line), both in Å from the
image centre. Heights are in Å.

The model of a raw topograph (see :func:`fit_terraces`)::

    z(x, y) = a x + b y + c_k + r_i + B(x, y) + corrugation + noise

with one plane (a, b) common to every terrace, one offset c_k per terrace k,
one offset r_i per scan line i, and a smooth low-order background B; pixels
that do not follow it (step edges, adsorbates, pits, missing pixels) are
masked out.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy import ndimage
from scipy.signal import find_peaks

from termination.arrays import AnyArray, BoolArray, FloatArray, IntArray
from termination.imaging.parameters import ImageParameters
from termination.imaging.reading import check_heights, parse_pixel_size
from termination.units import ANGSTROM

#: Pixel-centre coordinates (x of the columns, y of the rows), Å.
Coords = tuple[FloatArray, FloatArray]
#: A pixel size as the readers accept it: text with a unit, a number in Å, or two of them.
PixelSpec = str | float | Sequence[str | float]


class RowSource(Protocol):
    """Heights that can be read block by block of rows (an array, or heights corrected on the fly)."""

    @property
    def shape(self) -> tuple[int, ...]: ...

    def __getitem__(self, rows: slice, /) -> Any: ...


__all__ = ["Step", "TerraceFit", "fit_terraces", "plane_fit", "tilt_azimuth"]

#: Pixels fitted at once in the joint least-squares problem (a subsample of larger images).
_FIT_PIXELS = 200_000
#: Nodes of the background surface along one side, at most.
_MAX_NODES = 48
#: Background surface solves while the segmentation settles (it is kept fixed after that).
_MAX_SURFACE_SOLVES = 2
#: Row blocks of this many pixels bound the temporaries of full-resolution passes.
_BLOCK_PIXELS = 1 << 20


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

    height: float = field(metadata=ANGSTROM)
    sigma: float = field(metadata=ANGSTROM)


def _coordinates(shape: tuple[int, ...], pixel_size: tuple[float, float]) -> Coords:
    ny, nx = shape
    x = (np.arange(nx, dtype=np.float64) - (nx - 1) / 2.0) * float(pixel_size[0])
    y = (np.arange(ny, dtype=np.float64) - (ny - 1) / 2.0) * float(pixel_size[1])
    return x, y


def tilt_azimuth(a: float, b: float) -> tuple[float, float]:
    """Tilt and azimuth of steepest ascent (from +x towards +y) of slopes (a, b), degrees."""
    tilt = math.degrees(math.atan(math.hypot(a, b)))
    azimuth = math.degrees(math.atan2(b, a)) % 360.0 if (a or b) else 0.0
    return tilt, azimuth


def plane_fit(heights: ArrayLike, pixel_size: PixelSpec) -> tuple[float, float, float]:
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


def _plane_slopes(z: FloatArray, valid: BoolArray, coords: Coords) -> tuple[float, float]:
    """Slopes of the least-squares plane through the finite pixels."""
    if not valid.all():
        a, b, _, _ = _common_plane(z, valid.astype(np.int32), 1, coords)
        return a, b
    # full grid: centred coordinates make x and y orthogonal, so the sums separate
    x, y = coords
    ny, nx = z.shape
    a = float(x @ z.sum(axis=0)) / (ny * float(x @ x))
    b = float(y @ z.sum(axis=1)) / (nx * float(y @ y))
    return a, b


def _row_blocks(shape: tuple[int, ...]) -> list[slice]:
    """Slices of consecutive rows holding about ``_BLOCK_PIXELS`` pixels each."""
    ny, nx = shape
    step = max(1, _BLOCK_PIXELS // max(nx, 1))
    return [slice(i, min(i + step, ny)) for i in range(0, ny, step)]


def _label_moments(z: RowSource, labels: AnyArray, n_labels: int, coords: Coords) -> tuple[FloatArray, ...]:
    """Per-label sums of 1, x, y, z, xx, yy, xy, xz, yz, zz (index 0 = unlabelled).

    Notes
    -----
    Labels come in long runs along rows. Sums over each run are taken with
    ``np.add.reduceat``; x and x² sums over a run follow from cumulative
    sums of the column coordinates and y is constant on a run, so only z,
    xz and zz need a pass over the pixels. The runs are then summed per
    label. The pass goes over blocks of rows so that its temporaries stay
    small.
    """
    x, y = coords
    nx = z.shape[1]
    mn = n_labels + 1
    cx = np.concatenate([[0.0], np.cumsum(x)])
    cxx = np.concatenate([[0.0], np.cumsum(x * x)])
    out = np.zeros((10, mn))
    for rows in _row_blocks(z.shape):
        lab = labels[rows]
        zb = z[rows]
        nyb = lab.shape[0]
        change = np.empty(lab.shape, dtype=bool)
        change[:, 0] = True
        np.not_equal(lab[:, 1:], lab[:, :-1], out=change[:, 1:])
        starts = np.flatnonzero(change)
        run_label = lab.ravel()[starts].astype(np.intp)
        row = starts // nx
        c0 = starts - row * nx
        c1 = np.minimum(np.append(starts[1:], nyb * nx) - row * nx, nx)
        zf = np.where(lab > 0, zb, 0.0).astype(np.float64)
        s_z = np.add.reduceat(zf.ravel(), starts)
        s_zz = np.add.reduceat((zf * zf).ravel(), starts)
        zf *= x[None, :]
        s_xz = np.add.reduceat(zf.ravel(), starts)
        del zf
        n_run = (c1 - c0).astype(np.float64)
        s_x = cx[c1] - cx[c0]
        s_xx = cxx[c1] - cxx[c0]
        yr = y[rows][row]
        for i, w in enumerate((n_run, s_x, yr * n_run, s_z, s_xx, yr * yr * n_run, yr * s_x, s_xz, yr * s_z, s_zz)):
            out[i] += np.bincount(run_label, w, mn)
    return tuple(out)


def _common_plane(
    z: RowSource, labels: AnyArray, n_labels: int, coords: Coords
) -> tuple[float, float, FloatArray, dict[str, Any]]:
    r"""One plane, one offset per label (labels 1..n; 0 excluded).

    Returns slope_x, slope_y, offsets (n,), and a dict of fit statistics.

    Notes
    -----
    Works on per-label moments (sums of 1, x, y, z and their products, see
    :func:`_label_moments`): with :math:`S_{uv} = \sum_k [\sum_{i\in k}
    u_i v_i - (\sum_{i\in k} u_i)(\sum_{i\in k} v_i)/N_k]` the slopes solve
    :math:`[S_{xx}, S_{xy}; S_{xy}, S_{yy}] (a, b)^T = (S_{xz}, S_{yz})^T`.
    """
    n, sx, sy, sz, sxx, syy, sxy, sxz, syz, szz = _label_moments(z, labels, n_labels, coords)
    k = slice(1, None)
    nk = np.where(n[k] > 0, n[k], 1.0)

    def within(uv: FloatArray, u: FloatArray, v: FloatArray) -> float:
        return float(np.sum(uv[k] - u[k] * v[k] / nk))

    Sxx, Syy, Sxy = within(sxx, sx, sx), within(syy, sy, sy), within(sxy, sx, sy)
    Sxz, Syz, Szz = within(sxz, sx, sz), within(syz, sy, sz), within(szz, sz, sz)
    m = np.array([[Sxx, Sxy], [Sxy, Syy]])
    try:
        a, b = np.linalg.solve(m, np.array([Sxz, Syz]))
    except np.linalg.LinAlgError:
        a, b = 0.0, 0.0
        m = np.full((2, 2), np.inf)
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
    return float(a), float(b), offsets, stats


# --------------------------------------------------------------------------- background and scan lines


class SmoothBackground:
    """A smooth background height field stored on a coarse grid and interpolated bilinearly.

    Parameters
    ----------
    values : (my, mx) ndarray
        Heights at the coarse nodes, Å.
    x_nodes, y_nodes : (mx,), (my,) ndarray
        Node coordinates, Å (increasing).
    """

    def __init__(self, values: ArrayLike, x_nodes: ArrayLike, y_nodes: ArrayLike) -> None:
        self.values = np.asarray(values, dtype=np.float64)
        self.x_nodes = np.asarray(x_nodes, dtype=np.float64)
        self.y_nodes = np.asarray(y_nodes, dtype=np.float64)
        self._cache: dict[tuple[int, float, float], NDArray[np.float32]] = {}

    @property
    def rms(self) -> float:
        """Root-mean-square height of the background over its nodes, Å."""
        return float(np.sqrt(np.mean(self.values**2)))

    def _along_x(self, x: FloatArray) -> AnyArray:
        key = (x.size, float(x[0]), float(x[-1]))
        if key not in self._cache:
            self._cache = {key: np.stack([np.interp(x, self.x_nodes, row) for row in self.values]).astype(np.float32)}
        return self._cache[key]

    def rows(self, coords: Coords, rows: slice = slice(None)) -> AnyArray:
        """The background on a block of rows of the grid ``coords``, float32."""
        x, y = coords
        cx = self._along_x(x)
        yr = y[rows]
        pos = np.interp(yr, self.y_nodes, np.arange(self.y_nodes.size, dtype=np.float64))
        i0 = np.clip(np.floor(pos).astype(np.intp), 0, max(self.y_nodes.size - 2, 0))
        i1 = np.minimum(i0 + 1, self.y_nodes.size - 1)
        t = (pos - i0).astype(np.float32)[:, None]
        out = cx[i0] * (1 - t)
        out += cx[i1] * t
        return out


def _fit_subsample(shape: tuple[int, ...]) -> int:
    """Row and column stride of the subsample used for the smooth-surface least squares."""
    return max(1, int(math.ceil(math.sqrt(shape[0] * shape[1] / _FIT_PIXELS))))


def _node_spacing(p: ImageParameters, factor: int, shape: tuple[int, ...]) -> float:
    """Node spacing of the background surface on the segmentation grid, pixels (at most 48 nodes a side)."""
    return max(p.background_spacing_px / factor, (max(shape) - 1) / (_MAX_NODES - 1), 2.0)


def _tent_weights(pos: FloatArray, n_nodes: int) -> tuple[IntArray, FloatArray]:
    """Left node index and fractional position of points on a line of nodes (bilinear tents)."""
    i0 = np.clip(np.floor(pos).astype(np.intp), 0, max(n_nodes - 2, 0))
    return i0, pos - i0


def _penalty(my: int, mx: int) -> Any:
    """Sparse second-difference operator of a (my, mx) node grid: along x, along y and mixed."""
    from scipy import sparse

    idx = np.arange(my * mx).reshape(my, mx)
    rows, cols, vals = [], [], []
    r = 0

    def add(nodes: list[IntArray], weights: list[float]) -> None:
        nonlocal r
        k = nodes[0].size
        for node, w in zip(nodes, weights):
            rows.append(np.arange(r, r + k))
            cols.append(node.ravel())
            vals.append(np.full(k, w))
        r += k

    if mx >= 3:
        add([idx[:, :-2].ravel(), idx[:, 1:-1].ravel(), idx[:, 2:].ravel()], [1.0, -2.0, 1.0])
    if my >= 3:
        add([idx[:-2, :].ravel(), idx[1:-1, :].ravel(), idx[2:, :].ravel()], [1.0, -2.0, 1.0])
    if mx >= 2 and my >= 2:
        s2 = math.sqrt(2.0)
        add(
            [idx[:-1, :-1].ravel(), idx[1:, 1:].ravel(), idx[:-1, 1:].ravel(), idx[1:, :-1].ravel()],
            [s2, s2, -s2, -s2],
        )
    if r == 0:
        return sparse.csr_matrix((0, my * mx))
    return sparse.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))), shape=(r, my * mx))


@dataclass
class _Surface:
    """Solution of the smooth-surface model on the (binned) segmentation grid."""

    background: SmoothBackground
    slope: tuple[float, float]
    offsets: FloatArray
    cov_ab: FloatArray | None
    cov_offsets: FloatArray | None


def _solve_surface(
    z: FloatArray,
    labels: AnyArray,
    n: int,
    coords: Coords,
    lines: FloatArray,
    spacing_px: float,
    stiffness: float,
    covariance: bool = True,
) -> _Surface | None:
    """Terrace offsets and a smooth surface (plane plus background) by penalised least squares.

    Notes
    -----
    The surface is bilinear between nodes ``spacing_px`` apart,
    :math:`S(x, y) = \\sum_q \\theta_q \\phi_q(x, y)`, and the model of a
    used pixel is :math:`z - r_i = S + c_k`. The estimate minimises
    :math:`\\|W\\theta + E c - (z - r)\\|^2 + \\lambda \\|D \\theta\\|^2`, with D
    the second differences of the nodes along x, y and the diagonal, whose
    null space is the plane, so that the penalty bends the surface but
    never tilts it; :math:`\\lambda` is ``stiffness`` times the mean number
    of pixels per node. The surface is continuous across step edges, so a
    step height is measured locally at the edge whatever the background
    does further away. The plane is the least-squares plane of S over the
    used pixels; the background is S minus that plane. Covariances follow
    from the inverse of the normal matrix times the residual variance per
    pixel (inflated by the pixel correlation).
    """
    from scipy import sparse
    from scipy.sparse.linalg import splu

    s = _fit_subsample(z.shape)
    lab_s = labels[::s, ::s]
    ii, jj = np.nonzero(lab_s > 0)
    if ii.size < 16:
        return None
    lab = lab_s[ii, jj].astype(np.intp)
    x, y = coords
    ny, nx = z.shape
    my = max(2, int(math.ceil((ny - 1) / spacing_px)) + 1)
    mx = max(2, int(math.ceil((nx - 1) / spacing_px)) + 1)
    m = my * mx
    rows_px, cols_px = ii * s, jj * s
    data = (z[rows_px, cols_px] - lines[rows_px]).astype(np.float64)
    vi, fv = _tent_weights(rows_px * (my - 1) / max(ny - 1, 1), my)
    ui, fu = _tent_weights(cols_px * (mx - 1) / max(nx - 1, 1), mx)
    npx = ii.size
    nodes = np.stack([vi * mx + ui, vi * mx + ui + 1, (vi + 1) * mx + ui, (vi + 1) * mx + ui + 1], axis=1)
    weights = np.stack([(1 - fu) * (1 - fv), fu * (1 - fv), (1 - fu) * fv, fu * fv], axis=1)
    wb = sparse.csr_matrix((weights.ravel(), (np.repeat(np.arange(npx), 4), nodes.ravel())), shape=(npx, m))
    pen = _penalty(my, mx)
    lam = stiffness * npx / m
    # block system [[A, C], [C^T, D]]: A = nodes (sparse, banded), D = terrace offsets 2..n (diagonal);
    # terrace 1 shares its level with the surface, which fixes the common constant
    amat = (wb.T @ wb + lam * (pen.T @ pen)).tocsc()
    counts = np.bincount(lab, minlength=n + 1)[2:].astype(np.float64)
    onehot = sparse.csr_matrix((np.ones(npx), (np.arange(npx), lab - 1)), shape=(npx, n))[:, 1:]
    cmat = (wb.T @ onehot).toarray()  # (m, n - 1)
    try:
        lu = splu(amat, permc_spec="NATURAL")
    except RuntimeError:
        return None
    a_inv_c = lu.solve(cmat) if n > 1 else np.zeros((m, 0))
    schur = np.diag(counts) - cmat.T @ a_inv_c
    if n > 1 and not np.all(np.isfinite(schur)):
        return None

    def solve(f: FloatArray, g: FloatArray) -> tuple[FloatArray, FloatArray]:
        """Solve the block system for right-hand sides f (m, k) and g (n - 1, k)."""
        af = lu.solve(f)
        if n == 1:
            return af, np.zeros((0, f.shape[1]))
        try:
            c = np.linalg.solve(schur, g - cmat.T @ af)
        except np.linalg.LinAlgError:  # a terrace without pixels in the subsample: its offset is free
            c = np.linalg.lstsq(schur, g - cmat.T @ af, rcond=None)[0]
        return af - a_inv_c @ c, c

    f0 = np.asarray(wb.T @ data)[:, None]
    g0 = np.asarray(onehot.T @ data)[:, None]
    theta_b, theta_c = solve(f0, g0)
    theta_b, theta_c = theta_b[:, 0], theta_c[:, 0]
    fitted = wb @ theta_b + onehot @ theta_c
    resid = data - fitted
    dof = max(npx - m - n, 1)
    s2 = float(resid @ resid) / dof
    # correlation of the subsampled residual along rows and columns
    img = np.zeros(lab_s.shape)
    img[ii, jj] = resid
    f = _ar1_factor(img, lab_s)
    v = f * s2
    # plane of the surface over the used pixels: (c0, a, b) = L theta_b
    design = np.stack([np.ones(npx), x[cols_px], y[rows_px]], axis=1)
    proj = np.linalg.pinv(design)  # (3, npx)
    lmat = np.asarray((wb.T @ proj.T).T)  # (3, m)
    c0, a, b = lmat @ theta_b
    offsets = np.concatenate([[0.0], theta_c]) + c0
    cov_ab = cov_c = None
    if covariance:
        cov_ab, cov_c = _surface_covariance(solve, lmat, m, n, v)
    # the background: nodes of S minus the plane, on node coordinates in Å
    x_nodes = np.interp(np.arange(mx) * (nx - 1) / (mx - 1), np.arange(nx), x)
    y_nodes = np.interp(np.arange(my) * (ny - 1) / (my - 1), np.arange(ny), y)
    nodes_val = theta_b.reshape(my, mx) - (c0 + a * x_nodes[None, :] + b * y_nodes[:, None])
    bg = SmoothBackground(nodes_val, x_nodes, y_nodes)
    return _Surface(bg, (float(a), float(b)), offsets, cov_ab, cov_c)


def _surface_covariance(
    solve: Callable[[FloatArray, FloatArray], tuple[FloatArray, FloatArray]],
    lmat: FloatArray,
    m: int,
    n: int,
    v: float,
) -> tuple[FloatArray, FloatArray]:
    """Covariance of the slopes and of the terrace offsets: N^-1 applied to their functionals, times v."""
    k = n - 1
    rhs_f = np.concatenate([lmat[1:].T, np.zeros((m, k))], axis=1)
    rhs_g = np.concatenate([np.zeros((k, 2)), np.eye(k)], axis=1)
    sol_b, sol_c = solve(rhs_f, rhs_g)
    cov_ab = v * (lmat[1:] @ sol_b[:, :2])
    cov_c = np.zeros((n, n))
    cov_c[1:, 1:] = v * sol_c[:, 2:]
    return cov_ab, cov_c


def _aperiodic(r: FloatArray, false_alarm: float = 1e-3) -> AnyArray:
    """Scan-line offsets without their significant periodic part.

    A lattice row running along the scan lines makes every line's mean
    height follow the corrugation, which the line offsets would absorb.
    Random line offsets have a flat spectrum; a spectral bin of the offsets
    whose power exceeds :math:`\\mu \\ln(N/\\alpha)` (:math:`\\mu` the mean power
    from the median / ln 2, N bins, :math:`\\alpha` = ``false_alarm``) is a
    periodicity and is left in the image, with its two neighbours.
    """
    if r.size < 16:
        return r
    spec = np.fft.rfft(r)
    power = spec.real**2 + spec.imag**2
    mu = float(np.median(power[1:])) / math.log(2.0)
    if mu <= 0:
        return r
    strong = np.zeros(power.size, dtype=bool)
    strong[1:] = power[1:] > mu * math.log(power.size / false_alarm)
    if not strong.any():
        return r
    strong = ndimage.binary_dilation(strong, iterations=1)
    strong[0] = False
    spec[strong] = 0.0
    return np.fft.irfft(spec, n=r.size)


def _project_lines(r: AnyArray, y: FloatArray, weight: ArrayLike) -> AnyArray:
    """Remove the weighted least-squares line in y from the scan-line offsets.

    The offsets of the scan lines are defined only up to a constant (the
    terrace offsets) and a linear trend in y (the y slope of the plane); the
    constraint :math:`\\sum_i w_i r_i = \\sum_i w_i r_i y_i = 0` fixes them,
    so that the y tilt survives.
    """
    w = np.asarray(weight, dtype=np.float64)
    if w.sum() <= 0:
        return np.zeros_like(r)
    design = np.stack([np.ones_like(y), y], axis=1)
    wd = design * w[:, None]
    try:
        coef = np.linalg.solve(design.T @ wd, wd.T @ r)
    except np.linalg.LinAlgError:
        return r - float(np.sum(w * r) / w.sum())
    out: AnyArray = r - design @ coef
    out[w <= 0] = 0.0
    return out


def _initial_line_offsets(z: FloatArray, valid: BoolArray, y: FloatArray, half_window: int = 4) -> AnyArray:
    """First estimate of the scan-line offsets: each line against the mean of its neighbours.

    Notes
    -----
    The reference of line i is the mean of lines i - w .. i + w without i
    itself (w = ``half_window``); the median over the line of :math:`z_i -
    \\bar z_{\\text{ref}}` is its offset against its neighbours. Step edges
    and adsorbates cross a line at a minority of its pixels and leave the
    median alone (a step edge running along the scan lines over most of the
    image cannot be told from a line offset). Unlike a cumulative sum of
    line differences, the errors of this estimate do not add up from line
    to line. The least-squares line in y is removed (the y slope and the
    terrace offsets own it); the backfitting refines the rest.
    """
    nx = z.shape[1]
    stride = max(1, nx // 1024)
    zs = np.where(valid, z, 0.0)[:, ::stride]
    vs = valid[:, ::stride].astype(np.float64)
    size = 2 * half_window + 1
    total = ndimage.uniform_filter1d(zs, size, axis=0, mode="constant") * size - zs
    count = ndimage.uniform_filter1d(vs, size, axis=0, mode="constant") * size - vs
    with np.errstate(invalid="ignore", divide="ignore"):
        d = np.where((vs > 0) & (count > 0.5), zs - total / count, np.nan)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # lines without data
        med = np.nanmedian(d, axis=1)
    med = np.where(np.isfinite(med), med, 0.0)
    return _project_lines(_aperiodic(med), y, vs.sum(axis=1))


# --------------------------------------------------------------------------- smoothing and levels


def _smooth(z: AnyArray, valid: BoolArray, sigma_px: float) -> AnyArray:
    """Gaussian smoothing that ignores NaN pixels (normalised convolution), in single precision."""
    if valid.all():
        smooth: AnyArray = ndimage.gaussian_filter(z.astype(np.float32), sigma_px, mode="nearest")
        return smooth
    num: AnyArray = ndimage.gaussian_filter(np.where(valid, z, 0.0).astype(np.float32), sigma_px, mode="nearest")
    den = ndimage.gaussian_filter(valid.astype(np.float32), sigma_px, mode="nearest")
    with np.errstate(invalid="ignore", divide="ignore"):
        num /= den
    num[den <= 1e-4] = 0.0
    return num


def _robust_scale(values: AnyArray) -> tuple[float, float]:
    """Median and normal-consistent median absolute deviation."""
    med = float(np.median(values))
    return med, 1.4826 * float(np.median(np.abs(values - med)))


def _robust_threshold(values: AnyArray, k_sigma: float) -> float:
    med, mad = _robust_scale(values)
    return med + k_sigma * mad


def _level_bounds(h: AnyArray, min_step: float, min_contrast: float, min_count: float) -> AnyArray:
    """Height-histogram levels: return the boundaries between terrace levels.

    A level is a histogram peak that is resolved (its prominence is at least
    ``min_contrast`` of its height), separated from the next by at least
    ``min_step`` and holding at least ``min_count`` pixels.
    """
    if h.size == 0:
        return np.empty(0)
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
    cum = np.concatenate([[0], np.cumsum(counts)])
    while peaks.size > 1:
        # boundaries at the histogram minimum between neighbouring levels
        mins = np.array([p + int(np.argmin(smooth[p : q + 1])) for p, q in zip(peaks[:-1], peaks[1:])])
        cuts = np.concatenate([[0], mins, [counts.size]])
        mass = cum[cuts[1:]] - cum[cuts[:-1]]
        weakest = int(np.argmin(mass))
        if mass[weakest] >= min_count:
            bounds: AnyArray = 0.5 * (edges[mins] + edges[mins + 1])
            return bounds
        peaks = np.delete(peaks, weakest)
    return np.empty(0)


def _bin(z: FloatArray, valid: BoolArray, coords: Coords, factor: int) -> tuple[FloatArray, BoolArray, Coords]:
    """Block-average ``factor`` x ``factor`` pixels (NaN-aware); crop the remainder."""
    if factor == 1:
        return z, valid, coords
    ny, nx = z.shape[0] // factor, z.shape[1] // factor
    zc = np.zeros((ny, nx))
    wc = np.zeros((ny, nx))
    for i in range(factor):
        for j in range(factor):
            part = z[i : ny * factor : factor, j : nx * factor : factor]
            ok = valid[i : ny * factor : factor, j : nx * factor : factor]
            zc += np.where(ok, part, 0.0)
            wc += ok
    with np.errstate(invalid="ignore", divide="ignore"):
        zc /= wc
    x, y = coords
    xc = x[: nx * factor].reshape(nx, factor).mean(axis=1)
    yc = y[: ny * factor].reshape(ny, factor).mean(axis=1)
    return zc, wc > 0, (xc, yc)


def _unbin(arr: AnyArray, factor: int, shape: tuple[int, ...]) -> AnyArray:
    """Nearest-neighbour upsampling of a binned array back to ``shape``."""
    if factor == 1:
        return arr
    up = np.repeat(np.repeat(arr, factor, axis=0), factor, axis=1)
    if up.shape == tuple(shape):
        return up
    pad = ((0, shape[0] - up.shape[0]), (0, shape[1] - up.shape[1]))
    return np.pad(up, pad, mode="edge")


def _unbin_rows(r: AnyArray, factor: int, ny: int) -> AnyArray:
    """Scan-line offsets of the binned rows spread back onto the full rows."""
    if factor == 1:
        return r
    up = np.repeat(r, factor)
    return np.pad(up, (0, ny - up.size), mode="edge")


# --------------------------------------------------------------------------- the joint fit


@dataclass
class TerraceFit:
    """The fitted terrace model of one image (internal record of the analysis).

    Attributes
    ----------
    labels : (ny, nx) int16 or int32 ndarray
        Terrace of each pixel used in the fit, 1..n; 0 for pixels left out
        (step edges, outliers, missing pixels, pieces too small to keep).
    n : int
        Number of terraces.
    level_of : (n,) signed-integer ndarray
        Height level (histogram class) of each terrace.
    slope : (float, float)
        Plane slopes dz/dx, dz/dy.
    offsets : (n,) FloatArray
        Terrace offsets c_k, Å.
    lines : (ny,) FloatArray
        Scan-line offsets r_i, Å (zero when not fitted).
    background : SmoothBackground or None
        The smooth background, when one was needed.
    stats : dict
        Fit statistics of the final plane fit (pixel counts, centroids,
        residual variance ``s2``, normal matrix).
    near_b, dist_b : int32 and float32 ndarray
        Nearest terrace of every pixel of the (binned) segmentation grid
        and the distance to it, binned pixels; :meth:`near` gives the
        nearest terrace of a block of full-resolution rows.
    correlation : float
        Pixels per independent sample of the residual (AR(1) along rows and columns).
    excess_variance : float
        Variance of the residual smoothed over ``structure_smooth_px`` beyond
        what white noise leaves, Å², times the correlation area in pixels:
        the variance that unmodelled smooth relief adds to a one-pixel mean.
    structure : float
        Ratio of the smoothed residual's variance to that of white noise.
    relief : float
        Root-mean-square height of the smoothed residual beyond noise, Å.
    peak_relief : float
        99th percentile of the smoothed residual's magnitude, Å.
    surface_cov_ab, surface_cov_offsets : FloatArray or None
        Covariances of the slopes and of the terrace offsets from the
        smooth-surface solution (:func:`_solve_surface`), when a background
        was fitted.
    bin : int
        Binning factor of the segmentation grid.
    outliers : float
        Fraction of the finite pixels masked as outliers (adsorbates, pits)
        in the final fit (besides those the edge and level masks took).
    fitted : float
        Fraction of the finite pixels used in the final fit.
    line_rms : float
        Root-mean-square scan-line offset, Å.
    """

    labels: NDArray[np.signedinteger[Any]]
    n: int
    level_of: NDArray[np.signedinteger[Any]]
    slope: tuple[float, float]
    offsets: FloatArray
    lines: FloatArray
    background: SmoothBackground | None
    stats: dict[str, Any]
    near_b: NDArray[np.int32]
    dist_b: NDArray[np.float32]
    correlation: float = 1.0
    excess_variance: float = 0.0
    structure: float = 1.0
    relief: float = 0.0
    outliers: float = 0.0
    fitted: float = 1.0
    line_rms: float = 0.0
    peak_relief: float = 0.0
    iterations: int = 0
    surface_cov_ab: FloatArray | None = None
    surface_cov_offsets: FloatArray | None = None
    bin: int = 1

    def near(self, shape: tuple[int, ...], rows: slice = slice(None)) -> AnyArray:
        """Nearest terrace of every pixel of a block of full-resolution rows (int32)."""
        f = self.bin
        r = range(*rows.indices(shape[0]))
        if len(r) == 0:
            return np.zeros((0, shape[1]), dtype=np.int32)
        rb = np.minimum(np.arange(r.start, r.stop, r.step) // f, self.near_b.shape[0] - 1)
        block: AnyArray = self.near_b[rb]
        if f == 1:
            return block
        full = np.repeat(block, f, axis=1)
        if full.shape[1] >= shape[1]:
            return full[:, : shape[1]]
        return np.pad(full, ((0, 0), (0, shape[1] - full.shape[1])), mode="edge")


def _residual(
    z: FloatArray,
    labels: AnyArray | None,
    coords: Coords,
    slope: tuple[float, float],
    offsets: FloatArray,
    lines: FloatArray,
    background: SmoothBackground | None,
    rows: slice = slice(None),
    block_labels: AnyArray | None = None,
) -> AnyArray:
    """Residual of the model on a block of rows (float32; zero off the terraces).

    ``block_labels`` are the labels of the block itself, when ``labels`` is not a full-size array.
    """
    x, y = coords
    a, b = slope
    lab = block_labels if block_labels is not None else labels[rows]  # type: ignore[index]  # one is given
    off = np.concatenate([[0.0], offsets])
    # offsets first, in double precision: the residual is small, the heights need not be
    r = z[rows] - lines[rows, None] - b * y[rows, None]
    r -= a * x[None, :]
    r -= off[lab]
    r = r.astype(np.float32)
    if background is not None:
        r -= background.rows(coords, rows)
    r[lab == 0] = 0.0
    return r


def _row_means(
    z: FloatArray,
    labels: AnyArray,
    coords: Coords,
    slope: tuple[float, float],
    offsets: FloatArray,
    background: SmoothBackground | None,
) -> tuple[AnyArray, AnyArray]:
    """Mean residual of each scan line over its terrace pixels (line offsets not removed), and the pixel counts."""
    ny = z.shape[0]
    sums = np.zeros(ny)
    counts = np.zeros(ny)
    zero = np.zeros(ny)
    for rows in _row_blocks(z.shape):
        r = _residual(z, labels, coords, slope, offsets, zero, background, rows)
        sums[rows] = r.sum(axis=1, dtype=np.float64)
        counts[rows] = (labels[rows] > 0).sum(axis=1)
    means = np.where(counts > 0, sums / np.maximum(counts, 1), 0.0)
    return means, counts


class _Corrected:
    """z minus scan-line offsets and background, computed block by block (duck-types the array access of
    :func:`_label_moments`: ``shape`` and ``[rows]``)."""

    def __init__(self, z: FloatArray, lines: FloatArray, background: SmoothBackground | None, coords: Coords) -> None:
        self.z, self.lines, self.background, self.coords = z, lines, background, coords
        self.shape = z.shape

    def __getitem__(self, rows: slice) -> FloatArray:
        out = self.z[rows] - self.lines[rows, None]
        if self.background is not None:
            out -= self.background.rows(self.coords, rows)
        return out


def _refit(
    z: FloatArray,
    labels: AnyArray,
    n: int,
    coords: Coords,
    lines: FloatArray,
    background: SmoothBackground | None,
    fit_lines: bool,
    rounds: int,
) -> tuple[tuple[float, float], FloatArray, dict[str, Any], FloatArray]:
    """Alternate the plane-and-offsets fit and the scan-line offsets (background fixed).

    Returns slope, offsets, stats, lines.
    """
    y = coords[1]
    a, b, offsets, stats = _common_plane(_Corrected(z, lines, background, coords), labels, n, coords)
    for _ in range(rounds if fit_lines else 0):
        means, counts = _row_means(z, labels, coords, (a, b), offsets, background)
        lines = _project_lines(_aperiodic(means), y, counts)
        a, b, offsets, stats = _common_plane(_Corrected(z, lines, background, coords), labels, n, coords)
    return (a, b), offsets, stats, lines


def _relief(resid: AnyArray, on: BoolArray, sigma_px: float, peak: bool = False) -> tuple[float, ...]:
    """Ratio of the smoothed residual's variance to white noise's, and the rms of the excess (Å).

    Notes
    -----
    With :math:`\\hat\\sigma^2 = \\langle (r_{i,j+1} - r_{i,j})^2 \\rangle / 2`
    the white-noise variance from neighbour differences (within the fitted
    pixels), a Gaussian of s pixels leaves :math:`\\hat\\sigma^2 / (4 \\pi
    s^2)` of it. The observed variance V of the smoothed residual is taken
    where the smoothing window lies at least 90 % on fitted pixels.
    Returns (V / white, sqrt(max(V - white, 0)), white), and with ``peak``
    also the 99th percentile of the smoothed residual's magnitude.
    """
    resid = resid.astype(np.float64, copy=False)
    d2, cnt = 0.0, 0
    for u, v, ou, ov in (
        (resid[:, 1:], resid[:, :-1], on[:, 1:], on[:, :-1]),
        (resid[1:, :], resid[:-1, :], on[1:, :], on[:-1, :]),
    ):
        both = ou & ov
        diff = (u - v)[both]
        d2 += float(diff @ diff)
        cnt += diff.size
    if cnt == 0:
        return (1.0, 0.0, 0.0, 0.0) if peak else (1.0, 0.0, 0.0)
    noise_var = d2 / cnt / 2.0
    w = ndimage.gaussian_filter(on.astype(np.float32), sigma_px, mode="constant")
    sm = ndimage.gaussian_filter(np.where(on, resid, 0.0).astype(np.float32), sigma_px, mode="constant")
    inside = on & (w > 0.9)
    if not inside.any() or noise_var <= 0:
        return (1.0, 0.0, 0.0, 0.0) if peak else (1.0, 0.0, 0.0)
    vals = (sm[inside] / w[inside]).astype(np.float64)
    observed = float(np.mean(vals**2))
    white = noise_var / (4 * math.pi * sigma_px**2)
    out = (observed / white, math.sqrt(max(observed - white, 0.0)), white)
    if peak:
        return (*out, float(np.percentile(np.abs(vals), 99)))
    return out


def _outliers(
    resid: AnyArray, labels: AnyArray, k_sigma: float, guard: int, scale: tuple[float, float] | None = None
) -> tuple[BoolArray, tuple[float, float] | None]:
    """Pixels whose lightly smoothed residual stands out of the terrace noise: adsorbates and pits.

    A 3 x 3 mean keeps the atomic corrugation and the noise from
    triggering the mask, while a bump or pit several pixels wide survives
    it. The mask grows by ``guard`` pixels to take the flanks too.
    ``scale`` is (median, robust deviation) of the smoothed residual; it is
    measured here when not given. Returns the mask, and the scale.
    """
    on = labels > 0
    if not on.any():
        return np.zeros(labels.shape, dtype=bool), scale
    # the residual is zero off the terraces, so near their edges the mean is damped: the mask errs on
    # the side of keeping pixels there, where the edge mask already works
    sm = ndimage.uniform_filter(np.where(on, resid, 0).astype(np.float32), 3, mode="constant")
    if scale is None:
        step = max(1, int(math.sqrt(on.sum() / 250_000)))
        scale = _robust_scale(sm[::step, ::step][on[::step, ::step]])
    med, mad = scale
    if mad <= 0:
        return np.zeros(labels.shape, dtype=bool), scale
    sm -= med
    bad = on & (np.abs(sm) > k_sigma * mad)
    del sm
    if guard > 0 and bad.any():
        bad = ndimage.binary_dilation(bad, iterations=guard)
    return bad, scale


def fit_terraces(
    z: FloatArray, valid: BoolArray, coords: Coords, px: tuple[float, float], p: ImageParameters
) -> TerraceFit:
    """Fit the terrace model of a raw topograph.

    Parameters
    ----------
    z : (ny, nx) ndarray
        Heights, Å (NaN where ``valid`` is False).
    valid : (ny, nx) bool ndarray
        Finite pixels.
    coords : ((nx,), (ny,)) ndarrays
        Pixel centre coordinates x and y, Å, from the image centre.
    px : (float, float)
        Pixel size along x and y, Å.
    p : ImageParameters

    Returns
    -------
    TerraceFit

    Notes
    -----
    *Model.* :math:`z_{ij} = a x_j + b y_i + c_{k(ij)} + r_i + B(x_j, y_i) +
    \\epsilon_{ij}`, with one plane (a, b), one offset :math:`c_k` per
    terrace, one offset :math:`r_i` per scan line, constrained by
    :math:`\\sum_i n_i r_i = \\sum_i n_i r_i y_i = 0` (:math:`n_i` fitted
    pixels of line i; without the constraint a trend of the line offsets
    could absorb the y slope, and a constant the terrace offsets), and a
    smooth background B with no constant or linear part, fitted only where
    it is needed: when the residual of the model without it carries more
    smooth relief than ``max_structure_ratio`` times what white noise would
    leave, and more than ``background_min_relief_angstrom`` rms (less
    changes a step height by less than that, and a background costs
    precision).

    *Estimator.* Backfitting (alternating least squares): with the line
    offsets and the background fixed, (a, b, c) are the least-squares
    solution over the used pixels, from per-terrace moments; with those
    fixed, each line offset is the mean residual of its line, projected
    onto the constraint; and the background is the residual smoothed by a
    bilinear surface with nodes ``background_spacing_px`` apart, solved
    jointly with the terrace offsets by penalised least squares
    (:func:`_solve_surface`), with its least-squares plane removed. Pixels are used when (1) their
    gradient, after removing the plane, stays below
    ``edge_threshold_sigmas`` robust deviations (step edges are excluded,
    with a guard of ``edge_guard_px``), (2) they lie in a connected region
    of one height level of at least ``min_terrace_px`` pixels (levels from
    the histogram of the levelled, smoothed image; smaller pieces are left
    out, never merged with a terrace at another level), and (3) their
    residual, lightly smoothed, stays within ``outlier_sigmas`` robust
    deviations (adsorbates and pits are masked with the same guard).
    Levelling, segmentation and fitting repeat until the plane stops
    changing. The first line offsets come from the median difference of
    neighbouring lines (:func:`_initial_line_offsets`). Large images are
    segmented on a binned copy and fitted at full resolution.

    References
    ----------
    T. Hastie, R. Tibshirani, *Generalized Additive Models* (Chapman & Hall,
    1990), ch. 4 (backfitting).
    """
    factor = p.bin
    zc, vc, cc = _bin(z, valid, coords, factor)
    # segmentation works on heights relative to their median: single precision then loses nothing
    zref = float(np.median(zc[vc][:: max(1, int(vc.sum()) // 65_536)]))
    zc = zc - zref
    pxc = (px[0] * factor, px[1] * factor)
    xc, yc = cc
    edge_s = max(p.edge_smooth_px / factor, 0.5)
    level_s = max(p.level_smooth_px / factor, 0.5)
    n_valid = int(vc.sum())
    stride = max(1, int(math.sqrt(n_valid / 250_000)))
    sub = (slice(None, None, stride), slice(None, None, stride))
    min_count = max(p.min_terrace_px / factor**2, 4.0)
    guard = max(1, int(round(p.edge_guard_px / factor)))
    size = 2 * guard + 1
    sigma_s = edge_s * float(np.mean(pxc))
    floor = 0.2 * p.min_step_angstrom / (math.sqrt(2 * math.pi) * sigma_s)
    structure_s = max(p.structure_smooth_px / factor, 0.5)

    # Missing pixels surrounded by data are segmented from the smoothed (interpolated) heights, so that a
    # NaN line or column never splits a terrace; only finite pixels enter any fit.
    support = vc | (ndimage.gaussian_filter(vc.astype(np.float32), edge_s, mode="nearest") > 0.5)
    lines = _initial_line_offsets(zc, vc, yc) if p.line_offsets else np.zeros(zc.shape[0])
    background = surface = None
    solves = 0
    outlier = np.zeros(zc.shape, dtype=bool)
    a = b = 0.0
    result = None
    for iteration in range(1, p.max_iterations + 1):
        corrected = zc - lines[:, None]
        if background is not None:
            corrected -= background.rows(cc)
        smooth = _smooth(corrected, vc, edge_s)
        gy, gx = np.gradient(smooth, pxc[1], pxc[0])
        del smooth
        smooth_levels = _smooth(corrected, vc & ~outlier, level_s)
        del corrected
        if iteration == 1:
            # first guess of the slope: median gradient of the strongly smoothed image
            gly, glx = np.gradient(smooth_levels, pxc[1], pxc[0])
            a = float(np.median(glx[sub][vc[sub]]))
            b = float(np.median(gly[sub][vc[sub]]))
            del gly, glx
        g = np.hypot(gx - a, gy - b)
        del gx, gy
        thr = max(_robust_threshold(g[sub][vc[sub]], p.edge_threshold_sigmas), floor)
        flat = support & (g <= thr)
        del g
        lev = smooth_levels - (a * xc[None, :] + b * yc[:, None])
        bounds = _level_bounds(
            lev[sub][flat[sub] & ~outlier[sub]], p.min_step_angstrom, p.min_level_contrast, min_count / stride**2
        )
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
            # nothing large and flat: every finite pixel as one terrace
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
        fit_labels = np.where(outlier | ~vc, 0, labels).astype(np.int32)
        slope, offsets, stats, lines = _refit(zc, fit_labels, n, cc, lines, background, p.line_offsets, 2)
        resid = _residual(zc, fit_labels, cc, slope, offsets, lines, background)
        on = fit_labels > 0
        if surface is None:
            ratio, relief, _ = _relief(resid, on, structure_s)
            needed = ratio > p.max_structure_ratio and relief > p.background_min_relief_angstrom
        else:
            needed = True
        if p.background and needed and solves < _MAX_SURFACE_SOLVES:
            solves += 1
            spacing = _node_spacing(p, factor, zc.shape)
            solved = _solve_surface(zc, fit_labels, n, cc, lines, spacing, p.background_stiffness, covariance=False)
            if solved is not None:
                surface, background = solved, solved.background
                slope, offsets = solved.slope, solved.offsets
                if p.line_offsets:
                    means, counts = _row_means(zc, fit_labels, cc, slope, offsets, background)
                    lines = _project_lines(_aperiodic(means), yc, counts)
                slope, offsets, stats, lines = _refit(zc, fit_labels, n, cc, lines, background, p.line_offsets, 1)
                resid = _residual(zc, fit_labels, cc, slope, offsets, lines, background)
        outlier = _outliers(resid, np.where(vc, labels, 0), p.outlier_sigmas, guard)[0] & vc
        del resid
        change = math.degrees(max(abs(math.atan(slope[0]) - math.atan(a)), abs(math.atan(slope[1]) - math.atan(b))))
        a, b = slope
        current = (labels, n, level_of, bounds, slope, offsets, lines, background, stats, iteration, surface)
        # keep the segmentation that explains the heights best
        if result is None or stats["s2"] < result[8]["s2"]:
            result = current
        if change < p.slope_tol_deg and iteration > 1:
            break
    assert result is not None  # max_iterations >= 1 (ImageParameters): the loop ran
    labels_b, n, level_of, bounds, slope, offsets, lines_b, background, stats, iterations, surface = result
    a, b = slope
    if surface is not None:
        spacing = _node_spacing(p, factor, zc.shape)
        fit_labels = np.where(outlier | ~vc, 0, labels_b).astype(np.int32)
        final = _solve_surface(zc, fit_labels, n, cc, lines_b, spacing, p.background_stiffness)
        if final is not None:
            surface, background = final, final.background

    # Final fit at full resolution on whole terrace regions: every pixel joins
    # its nearest terrace when it lies at that terrace's level, away from
    # edges and from boundaries between levels; outliers are masked.
    dist, near = _nearest_terrace(labels_b)
    lvl = np.concatenate([[-1], level_of])[near]
    boundary = np.zeros(lvl.shape, dtype=bool)
    dx = lvl[:, 1:] != lvl[:, :-1]
    dy = lvl[1:, :] != lvl[:-1, :]
    boundary[:, 1:] |= dx
    boundary[:, :-1] |= dx
    boundary[1:, :] |= dy
    boundary[:-1, :] |= dy
    corrected = zc - lines_b[:, None]
    if background is not None:
        corrected -= background.rows(cc)
    smooth = _smooth(corrected, vc, edge_s)
    gy, gx = np.gradient(smooth, pxc[1], pxc[0])
    g = np.hypot(gx - a, gy - b)
    del gx, gy, smooth
    thr = max(_robust_threshold(g[sub][vc[sub]], p.edge_threshold_sigmas), floor)
    use = vc & ~ndimage.binary_dilation(g > thr, iterations=guard)
    del g
    levelled = _smooth(corrected, vc, level_s) - (a * xc[None, :] + b * yc[:, None])
    del corrected
    # the level of each pixel must be its terrace's: pieces dropped as too small are left out
    use &= np.digitize(levelled, bounds) == lvl
    del levelled
    if boundary.any():
        band = int(round((p.edge_guard_px + 2.0 * p.edge_smooth_px) / factor))
        use &= ~ndimage.maximum_filter(boundary, size=2 * max(band, 1) + 1, mode="constant")
    shape = z.shape
    near_b, dist_b = near.astype(np.int32), dist.astype(np.float32)
    label_type = np.int16 if n < np.iinfo(np.int16).max else np.int32
    # in place, block by block: full-size temporaries of a large map cost more than its heights
    labels = _unbin(near_b.astype(label_type), factor, shape)
    labels[~(_unbin(use, factor, shape) & valid)] = 0
    counts = np.bincount(labels.ravel(), minlength=n + 1)
    if not np.all(counts[1:] > 0):
        labels = _unbin(labels_b.astype(label_type), factor, shape)
        labels[~valid] = 0
    lines = _unbin_rows(lines_b, factor, shape[0]) if p.line_offsets else np.zeros(shape[0])
    offsets = offsets + zref  # the segmentation grid's heights were relative to zref
    # robust mask at full resolution (with the segmentation grid's model), then the final fit
    full_guard = int(p.edge_guard_px)
    outlier = np.zeros(shape, dtype=bool)
    margin = 4 + full_guard
    blocks = _row_blocks(shape)
    # one robust scale for the whole image, from the block of rows through its centre
    mid = blocks[len(blocks) // 2]
    scale = _outliers(
        _residual(z, labels, coords, slope, offsets, lines, background, mid), labels[mid], p.outlier_sigmas, 0
    )[1]
    for rows in blocks:
        big = slice(max(rows.start - margin, 0), min(rows.stop + margin, shape[0]))
        r = _residual(z, labels, coords, slope, offsets, lines, background, big)
        o, _ = _outliers(r, labels[big], p.outlier_sigmas, full_guard, scale)
        outlier[rows] = o[rows.start - big.start : rows.stop - big.start]
    n_out = int((outlier & (labels > 0)).sum())
    labels[outlier] = 0
    del outlier
    slope, offsets, stats, lines = _refit(z, labels, n, coords, lines, background, p.line_offsets, 1)
    fit = TerraceFit(
        labels=labels,
        n=n,
        level_of=np.asarray(level_of),
        slope=slope,
        offsets=offsets,
        lines=lines,
        background=background,
        stats=stats,
        near_b=near_b,
        dist_b=dist_b,
        outliers=n_out / max(int(valid.sum()), 1),
        fitted=int(np.count_nonzero(labels)) / max(int(valid.sum()), 1),
        line_rms=float(np.sqrt(np.mean(lines**2))) if p.line_offsets else 0.0,
        iterations=iterations,
        surface_cov_ab=None if surface is None else surface.cov_ab,
        surface_cov_offsets=None if surface is None else surface.cov_offsets,
        bin=factor,
    )
    _residual_statistics(z, coords, fit, p)
    return fit


def _ar1_factor(r_img: AnyArray, labels: AnyArray) -> float:
    """Variance inflation for spatially correlated residuals.

    Notes
    -----
    With lag-one correlations :math:`\\rho_x, \\rho_y` of the residual along
    rows and columns (within one terrace), a separable AR(1) model gives
    :math:`f = \\frac{1+\\rho_x}{1-\\rho_x}\\,\\frac{1+\\rho_y}{1-\\rho_y}`
    pixels per independent sample.
    """
    sums = _lag_sums(r_img, labels)
    return _ar1_from_sums(sums, 1)


def _lag_sums(r: AnyArray, labels: AnyArray) -> FloatArray:
    """Sum of r², and of lag-one products along rows and along columns within one terrace."""
    r = r.astype(np.float64, copy=False)
    on = labels > 0
    rr = float(np.sum(r[on] ** 2))
    same_x = (labels[:, 1:] == labels[:, :-1]) & on[:, 1:]
    same_y = (labels[1:, :] == labels[:-1, :]) & on[1:, :]
    px = float(np.sum((r[:, 1:] * r[:, :-1])[same_x]))
    py = float(np.sum((r[1:, :] * r[:-1, :])[same_y]))
    return np.array([rr, px, py])


def _ar1_from_sums(sums: FloatArray, step: int) -> float:
    rr, px, py = sums
    if rr <= 0:
        return 1.0
    factor = 1.0
    for prod in (px, py):
        # lag of `step` pixels: rho_1 = rho_step ** (1 / step) for AR(1)
        rho = min(max(prod / rr, 0.0), 0.99) ** (1.0 / step)
        factor *= (1 + rho) / (1 - rho)
    return factor


def _residual_statistics(z: FloatArray, coords: Coords, fit: TerraceFit, p: ImageParameters) -> None:
    """Pixel correlation, smooth relief and its excess variance of the final residual (set on ``fit``).

    Notes
    -----
    The pixel correlation is measured on the full-resolution residual (on
    every other pixel of images above a megapixel). The smooth relief is
    examined on the residual binned to about 1024 pixels a side (block
    averages of white noise are white) with :func:`_relief`. Its excess
    variance V beyond white noise, smoothed over s pixels, is counted as
    correlated noise over an area of :math:`4\\pi s^2` pixels: it adds
    :math:`V_e = V\\, 4\\pi s^2` (s in full pixels) to the variance of a
    one-pixel mean.
    """
    shape = z.shape
    factor = max(1, int(round(math.sqrt(shape[0] * shape[1] / 1024**2))))
    step = 2 if z.size > 1_000_000 else 1
    labels = fit.labels
    ny, nx = shape[0] // factor, shape[1] // factor
    rb = np.zeros((ny, nx), dtype=np.float64)
    lb_lo = np.full((ny, nx), np.iinfo(np.int32).max, dtype=np.int32)
    lb_hi = np.zeros((ny, nx), dtype=np.int32)
    sums = np.zeros(3)
    unit = factor * step
    rows_per_block = max(unit, (_BLOCK_PIXELS // max(shape[1], 1)) // unit * unit)
    for i0 in range(0, shape[0], rows_per_block):
        rows = slice(i0, min(i0 + rows_per_block, shape[0]))
        r = _residual(z, labels, coords, fit.slope, fit.offsets, fit.lines, fit.background, rows)
        lab = labels[rows]
        sums += _lag_sums(r[::step, ::step], lab[::step, ::step])
        b0 = i0 // factor
        nb = min((rows.stop - rows.start) // factor, ny - b0)
        if nb <= 0:
            continue
        rr = r[: nb * factor, : nx * factor].reshape(nb, factor, nx, factor)
        rb[b0 : b0 + nb] = rr.mean(axis=(1, 3), dtype=np.float64)
        ll = lab[: nb * factor, : nx * factor].reshape(nb, factor, nx, factor)
        lb_lo[b0 : b0 + nb] = ll.min(axis=(1, 3))
        lb_hi[b0 : b0 + nb] = ll.max(axis=(1, 3))
    fit.correlation = _ar1_from_sums(sums, step)
    on = (lb_lo == lb_hi) & (lb_hi > 0)
    sigma_px = p.structure_smooth_px / factor
    ratio, excess, _white, peak = _relief(rb, on, sigma_px, peak=True)
    fit.structure = ratio
    fit.relief = excess
    fit.peak_relief = peak
    fit.excess_variance = excess**2 * 4 * math.pi * (sigma_px * factor) ** 2


def _nearest_terrace(labels: AnyArray) -> tuple[FloatArray, AnyArray]:
    """Label of the nearest terrace for every pixel and the distance to it, pixels."""
    if not (labels == 0).any():
        return np.zeros(labels.shape), labels
    dist, (ir, ic) = ndimage.distance_transform_edt(labels == 0, return_indices=True)
    return dist, labels[ir, ic]


def _adjacent_pairs(
    n: int, dist: AnyArray, near: AnyArray, max_gap_px: float, min_length_px: float
) -> list[tuple[int, int]]:
    """Pairs of terraces that meet across a strip no wider than ``max_gap_px``.

    Every unlabelled pixel is given to its nearest terrace (within
    ``max_gap_px / 2``); two terraces are adjacent where their regions touch
    along at least ``min_length_px`` pixel edges.
    """
    if n < 2:
        return []
    pairs = []
    limit = max_gap_px / 2.0 + 0.5
    for rows in _row_blocks(near.shape):
        r0 = rows.start
        r1 = min(rows.stop + 1, near.shape[0])
        nb = np.where(dist[r0:r1] <= limit, near[r0:r1], 0).astype(np.int64)
        for u, v in ((nb[:, :-1], nb[:, 1:]), (nb[:-1, :], nb[1:, :])):
            d = (u != v) & (u > 0) & (v > 0)
            lo = np.minimum(u[d], v[d])
            hi = np.maximum(u[d], v[d])
            pairs.append(lo * (n + 1) + hi)
    codes, counts = np.unique(np.concatenate(pairs), return_counts=True)
    return [(int(c // (n + 1)), int(c % (n + 1))) for c, k in zip(codes, counts) if k >= min_length_px]


def levelled_image(
    z: FloatArray, valid: BoolArray, fit: TerraceFit, coords: Coords, p: ImageParameters, *, dtype: Any = np.float32
) -> tuple[AnyArray, BoolArray]:
    """Terrace-levelled image for the Fourier analysis (step edges, outliers and NaN set to zero).

    Every pixel is levelled with the plane, the scan-line offset and the
    offset of its nearest terrace. The smooth background is not removed: a
    background with nodes a few pixels apart can follow part of the atomic
    corrugation, and removing it would put side bands beside the lattice
    spots at the node spacing; a smooth relief transforms to low
    frequencies only. Where the result
    stands far out of the terrace corrugation and noise (step edges,
    adsorbates), pixels are set to zero with a margin of ``edge_guard_px``,
    and so are NaN pixels. Keeping the corrugation up to the step edges
    avoids the side bands that blanking whole edge strips would add.

    Returns the image and the mask of the pixels kept.
    """
    shape = z.shape
    out = np.empty(shape, dtype=dtype)
    for rows in _row_blocks(shape):
        near = fit.near(shape, rows)
        # the fitted background is left in: with nodes a few pixels apart it can follow part of the atomic
        # corrugation, and what it takes leaves side bands of the lattice spots at the node spacing
        out[rows] = _residual(z, None, coords, fit.slope, fit.offsets, fit.lines, None, rows, block_labels=near)
    out[~valid] = 0.0
    step = max(1, int(math.sqrt(out.size / 250_000)))
    on = fit.labels[::step, ::step] > 0
    raw = out[::step, ::step][on]
    if raw.size == 0:
        return out, valid.copy()
    med, scale = _robust_scale(raw)
    scale = max(scale, 1e-12)
    bad = np.abs(out - med) > p.lattice_clip_sigmas * scale
    guard = int(p.edge_guard_px)
    bad = ndimage.maximum_filter(bad, size=2 * guard + 1, mode="constant")
    bad |= ~valid
    out[bad] = 0.0
    keep = ~bad
    del bad
    if not valid.all():
        # isolated missing pixels (lost lines, columns, spikes) are filled from their neighbours, so that
        # no periodic pattern of zeros enters the Fourier transform; larger gaps stay out (zero, tapered)
        den = ndimage.gaussian_filter(keep.astype(np.float32), 1.0, mode="constant")
        num = ndimage.gaussian_filter(out, 1.0, mode="constant")
        fill = ~valid & (den > 0.3)
        out[fill] = num[fill] / den[fill]
        keep |= fill
        del den, num, fill
    if keep.any():
        out[keep] -= float(np.mean(out[keep], dtype=np.float64))
    return out, keep


def terrace_steps(fit: TerraceFit, p: ImageParameters) -> tuple[tuple[Step, ...], FloatArray | None]:
    """Steps between adjacent terraces at different levels, one per pair of levels, and the slope covariance.

    Returns (steps, cov_ab) where steps is a tuple of :class:`Step`, one
    per pair of levels that meet somewhere, ordered by level, and cov_ab
    the (2, 2) covariance of (a, b) or None.

    Notes
    -----
    For adjacent terraces k and l the height is the distance between their
    parallel planes, :math:`h = |c_l - c_k| / \\sqrt{1 + a^2 + b^2}`. With
    :math:`v = f s^2 + V_e` the variance per pixel of a mean (f the
    pixel-correlation factor, :math:`s^2` the residual variance, :math:`V_e`
    the excess variance of unmodelled smooth relief, see
    :func:`_residual_statistics`),
    :math:`\\sigma_h^2 = [v (1/N_k + 1/N_l) + d^T C_{ab} d] / (1 + a^2 + b^2)`
    where :math:`d` joins the terrace centroids and :math:`C_{ab} = v M^{-1}`
    (M the within-terrace scatter matrix of x and y). All pairs of terraces
    between the same two levels are combined into one step by their
    weighted mean, with :math:`\\sigma = (\\sum w)^{-1/2}
    \\max(1, \\sqrt{\\chi^2/\\nu})`; the z calibration term is added in
    quadrature.
    """
    a, b = fit.slope
    norm = math.sqrt(1 + a * a + b * b)
    st = fit.stats
    v = fit.correlation * st["s2"] + fit.excess_variance
    cov_ab = v * np.linalg.inv(st["normal"]) if np.all(np.isfinite(st["normal"])) else None
    cov_c = fit.surface_cov_offsets
    if fit.surface_cov_ab is not None and cov_ab is not None:
        # with a background the slopes and offsets trade against its shape: the surface solution's covariance
        cov_ab = cov_ab + fit.surface_cov_ab
    steps = []
    # on a binned segmentation the strip between terraces is a few binned pixels wide, whatever the image size
    gap = max(p.max_step_width_px, (2 * max(1, round(p.edge_guard_px / fit.bin)) + 6) * fit.bin)
    pairs = _adjacent_pairs(fit.n, fit.dist_b, fit.near_b, gap / fit.bin, p.min_step_length_px)
    neighbours: dict[int, set[int]] = {}
    for k, l in pairs:
        neighbours.setdefault(k, set()).add(l)
        neighbours.setdefault(l, set()).add(k)
    for k, l in pairs:
        i, j = k - 1, l - 1
        lo, hi = sorted((int(fit.level_of[i]), int(fit.level_of[j])))
        if lo == hi or st["n"][i] <= 0 or st["n"][j] <= 0:
            continue
        # two terraces that both border a terrace of a level between theirs are
        # the two sides of a step bunch, not one step
        if hi - lo > 1 and any(lo < fit.level_of[m - 1] < hi for m in neighbours[k] & neighbours[l]):
            continue
        dc = fit.offsets[j] - fit.offsets[i]
        d = st["centroid"][j] - st["centroid"][i]
        var = v * (1.0 / st["n"][i] + 1.0 / st["n"][j])
        if cov_c is not None:
            var += max(float(cov_c[i, i] + cov_c[j, j] - 2 * cov_c[i, j]), 0.0)
        if cov_ab is not None:
            var += float(d @ cov_ab @ d)
        h = abs(dc) / norm
        if h < p.min_step_angstrom:  # below the resolved step height: same level
            continue
        steps.append((lo, hi, h, math.sqrt(var) / norm))
    # every pair of adjacent terraces between the same two levels measures the same step: one value each,
    # the weighted mean, with its sigma scaled up when the pairs scatter more than their sigmas allow
    out = []
    for lo, hi in sorted({(t[0], t[1]) for t in steps}):
        h = np.array([t[2] for t in steps if (t[0], t[1]) == (lo, hi)])
        sig = np.array([t[3] for t in steps if (t[0], t[1]) == (lo, hi)])
        w = 1.0 / np.maximum(sig, 1e-12) ** 2
        mean = float(np.sum(w * h) / np.sum(w))
        sigma = math.sqrt(1.0 / float(np.sum(w)))
        if h.size > 1:
            chi2 = float(np.sum(w * (h - mean) ** 2)) / (h.size - 1)
            sigma *= math.sqrt(max(1.0, chi2))
        out.append(Step(mean, math.hypot(sigma, p.z_calibration_fraction * mean)))
    return tuple(out), cov_ab
