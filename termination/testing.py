"""Generators of synthetic test data with known answers: height maps and measurements.

For users who want to check the tool on their own synthetic data, and for
the tests and benchmarks.  Nothing here is measured data.

- :func:`synthetic_heightmap` builds a topograph with known terraces, steps,
  lattice, tilt and noise, to check :mod:`termination.imaging` against
  parameters that are known exactly.
- :func:`synthetic_measurement` draws a measurement from the likelihood model
  of one candidate, to check :mod:`termination.identification` for recovery
  and calibration.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray
from termination.errors import ImageError
from termination.identification.measurement import Measurement, Value
from termination.imaging.reading import parse_pixel_size

if TYPE_CHECKING:
    from termination.bulk.crystal import Crystal
    from termination.identification.candidates import CandidateTable
    from termination.surface.corrugation import Visibility

__all__ = [
    "calibration",
    "geometric_measurement",
    "minimal_cif",
    "pa3_structure",
    "random_rotation",
    "reciprocal_shell",
    "synthetic_heightmap",
    "synthetic_measurement",
]


def minimal_cif(
    name: str,
    spacegroup: str,
    lengths_angstrom: Sequence[float],
    angles_deg: Sequence[float],
    sites: Sequence[tuple[str, str, float, float, float] | tuple[str, str, float, float, float, float]],
) -> str:
    """Text of a minimal CIF: a space-group symbol, the cell and one loop of atom sites.

    A base for structure-file tests: edit the text to plant one defect at a
    time (a wrong symbol, a negative length, a missing column).

    Parameters
    ----------
    name : str
        The data block's name.
    spacegroup : str
        Hermann-Mauguin symbol, e.g. ``'F m -3 m'``.
    lengths_angstrom, angles_deg : (3,) sequence of float
        a, b, c in Å and alpha, beta, gamma in degrees.
    sites : sequence of (label, symbol, x, y, z) or (label, symbol, x, y, z, occupancy)
        Fractional coordinates; an occupancy column is written when every site gives one.

    Examples
    --------
    >>> text = minimal_cif("NaCl", "F m -3 m", (5.64,) * 3, (90,) * 3, [("Na1", "Na", 0, 0, 0)])
    >>> text.splitlines()[2], text.splitlines()[-1]
    ('_cell_length_a 5.64', 'Na1 Na 0 0 0')
    """
    occupancy = bool(sites) and all(len(site) == 6 for site in sites)
    lines = [f"data_{name}", f"_symmetry_space_group_name_H-M '{spacegroup}'"]
    lines += [f"_cell_length_{axis} {v:g}" for axis, v in zip("abc", lengths_angstrom, strict=True)]
    lines += [f"_cell_angle_{angle} {v:g}" for angle, v in zip(("alpha", "beta", "gamma"), angles_deg, strict=True)]
    lines += ["loop_", "_atom_site_label", "_atom_site_type_symbol"]
    lines += [f"_atom_site_fract_{axis}" for axis in "xyz"] + (["_atom_site_occupancy"] if occupancy else [])
    for site in sites:
        label, symbol, *values = site
        lines.append(" ".join([label, symbol, *(f"{float(v):g}" for v in values[: 4 if occupancy else 3])]))
    return "\n".join(lines) + "\n"


def reciprocal_shell(a: float, b: float, gamma_deg: float, direction_deg: float = 0.0) -> tuple[FloatArray, FloatArray]:
    """Shortest reciprocal vectors (one per ± pair) of a 2-D lattice.

    Parameters
    ----------
    a, b : float
        Lattice vector lengths, Å.
    gamma_deg : float
        Angle between them, deg.
    direction_deg : float
        Direction of the first vector in the terrace plane, deg.

    Returns
    -------
    real : (2, 2) ndarray
        Real-space vectors (rows), Å, in in-plane Cartesian coordinates.
    g : (m, 2) ndarray
        Reciprocal vectors (1/Å, without 2π) of the first shell that spans
        the plane: b1, b2 and whichever of b1 ± b2 is as short as the longer
        of them (three vectors for a hexagonal lattice, two for a square one).

    Examples
    --------
    >>> _, g = reciprocal_shell(3.0, 3.0, 60.0)
    >>> len(g), round(float(np.linalg.norm(g[0])), 4)
    (3, 0.3849)
    """
    t = math.radians(direction_deg)
    gm = math.radians(gamma_deg)
    a1 = a * np.array([math.cos(t), math.sin(t)])
    a2 = b * np.array([math.cos(t + gm), math.sin(t + gm)])
    real = np.array([a1, a2])
    recip = np.linalg.inv(real).T
    b1, b2 = recip
    longest = max(np.linalg.norm(b1), np.linalg.norm(b2)) * (1 + 1e-9)
    shell = [b1, b2] + [c for c in (b1 + b2, b1 - b2) if np.linalg.norm(c) <= longest]
    return real, np.array(shell)


def synthetic_heightmap(
    shape: tuple[int, int] = (256, 256),
    pixel_size: float | Sequence[float] = 0.5,
    *,
    tilt_deg: float = 0.0,
    azimuth_deg: float = 0.0,
    step_heights: Sequence[float] = (),
    step_azimuth_deg: float = 0.0,
    step_positions: Sequence[float] | None = None,
    step_wave_angstrom: float = 0.0,
    meander_angstrom: float = 0.0,
    step_width_px: float = 1.0,
    corner_pieces: Sequence[tuple[int, float, float]] = (),
    lattice: tuple[float, float, float, float] | None = None,
    corrugation_angstrom: float = 0.1,
    lateral_shifts: bool = False,
    line_offset_angstrom: float = 0.0,
    adsorbate_fraction: float = 0.0,
    adsorbate_height_angstrom: float = 0.8,
    adsorbate_radius_px: float = 3.0,
    background_angstrom: float = 0.0,
    background_exponent: float = 2.0,
    background_scale_px: float = 64.0,
    noise_angstrom: float = 0.0,
    drift: tuple[float, float] | None = None,
    seed: int = 0,
) -> FloatArray:
    """A topograph with known geometry and the artifacts of a raw image, heights in Å.

    Every artifact has its own parameter and is off by default, so a test can
    switch on one at a time or all together.

    Parameters
    ----------
    shape : (ny, nx)
        Image size, pixels. Rows are scan lines (fast scan along x).
    pixel_size : float or (2,)
        Pixel size along x and y, Å.
    tilt_deg, azimuth_deg : float
        Tilt of the terrace plane and the azimuth of its steepest ascent
        (from +x towards +y), deg.
    step_heights : sequence of float
        Heights of the steps, Å, measured along the terrace normal, each one
        up (positive) or down (negative) in the direction ``step_azimuth_deg``.
    step_azimuth_deg : float
        Direction in which the step edges advance (normal to the edges), deg.
    step_positions : sequence of float, optional
        Position of each step across the image along ``step_azimuth_deg``, as
        a fraction in (0, 1); steps closer than their terraces are wide make
        a step bunch. Default: evenly spaced.
    step_wave_angstrom : float
        Amplitude of a sinusoidal meander of the step edges, Å.
    meander_angstrom : float
        Standard deviation of a random meander of each step edge (a smooth
        random function along the edge, correlation length about 1/8 of the
        image), Å.
    step_width_px : float
        Width of the step edge (a tanh profile), pixels.
    corner_pieces : sequence of (corner, pixels, height)
        Terrace pieces cut off in an image corner by a circular edge:
        ``corner`` 0..3 (row 0 / col 0, row 0 / last col, last row / col 0,
        last row / last col), their area in pixels and their height above
        the terrace they sit on, Å (negative: below).
    lattice : (a, b, gamma_deg, direction_deg) or None
        Corrugation lattice in the terrace plane: lengths Å, angles deg.
    corrugation_angstrom : float
        Amplitude of each cosine of the corrugation, Å.
    lateral_shifts : bool
        Shift the corrugation of every terrace (and corner piece) by a random
        in-plane vector, as the atomic lattice of one terrace is shifted
        against the next across a step.
    line_offset_angstrom : float
        Standard deviation of a random height offset of each scan line
        (row), Å.
    adsorbate_fraction : float
        Fraction of the image area covered by adsorbates (bumps) and
        vacancy islands (pits), half each, in [0, 0.5].
    adsorbate_height_angstrom : float
        Height of the bumps and depth of the pits, Å.
    adsorbate_radius_px : float
        Radius of each bump or pit (a cosine profile), pixels.
    background_angstrom : float
        Standard deviation of a low-frequency random background, Å: power
        spectral density proportional to ``|k|**-background_exponent``, cut off
        smoothly at wavelengths below ``background_scale_px`` pixels.
    background_exponent : float
        Exponent of the background's power spectrum (2: 1/f in amplitude).
    background_scale_px : float
        Shortest wavelength of the background, pixels.
    noise_angstrom : float
        Standard deviation of white Gaussian noise, Å.
    drift : (shear, y_scale) or None
        Linear drift during the slow scan: the surface point imaged at pixel
        (x, y) is (x + shear * y, (1 + y_scale) * y).
    seed : int
        Seed of every random part.

    Returns
    -------
    (ny, nx) ndarray of float64

    Notes
    -----
    The terrace plane is :math:`z = \\tan\\theta\\,(x\\cos\\phi + y\\sin\\phi)`.
    A step of height h shifts z by :math:`h / \\cos\\theta` so that the
    distance between terrace planes is h. The corrugation
    :math:`A \\sum_g \\cos 2\\pi\\, g \\cdot (r_\\parallel - s_k)` uses in-plane
    coordinates :math:`r_\\parallel` of the 3-D surface point, so the image
    shows the lattice foreshortened by the tilt, as a real topograph does;
    :math:`s_k` is the lateral shift of terrace k (zero without
    ``lateral_shifts``). Drift maps the image grid onto the surface before
    anything is evaluated; line offsets, adsorbates, background and noise
    are added in image coordinates.
    """
    ny, nx = (int(s) for s in shape)
    px = parse_pixel_size(pixel_size)
    if ny < 2 or nx < 2:
        raise ImageError(f"shape must be at least 2 x 2, got {shape!r}")
    if not 0.0 <= adsorbate_fraction <= 0.5:
        raise ImageError(f"adsorbate_fraction must lie in [0, 0.5], got {adsorbate_fraction!r}")
    rng = np.random.default_rng(seed)
    x = (np.arange(nx) - (nx - 1) / 2.0) * px[0]
    y = (np.arange(ny) - (ny - 1) / 2.0) * px[1]
    X, Y = np.meshgrid(x, y)
    if drift is not None:
        shear, y_scale = (float(v) for v in drift)
        X = X + shear * Y
        Y = (1.0 + y_scale) * Y
    th, ph = math.radians(tilt_deg), math.radians(azimuth_deg)
    slope = math.tan(th)
    plane = slope * (X * math.cos(ph) + Y * math.sin(ph))
    Z: FloatArray = plane.copy()
    terrace = np.zeros((ny, nx), dtype=np.int64)  # terrace index of each pixel, for the lateral shifts
    steps = np.asarray(step_heights, dtype=np.float64)
    if steps.size:
        ps = math.radians(step_azimuth_deg)
        u = X * math.cos(ps) + Y * math.sin(ps)
        v = -X * math.sin(ps) + Y * math.cos(ps)
        umin, umax = float(u.min()), float(u.max())
        if step_positions is None:
            fractions = np.arange(1, steps.size + 1) / (steps.size + 1)
        else:
            fractions = np.asarray(step_positions, dtype=np.float64)
            if fractions.shape != steps.shape or not np.all((fractions > 0) & (fractions < 1)):
                raise ImageError(f"step_positions must give one fraction in (0, 1) per step, got {step_positions!r}")
        positions = umin + (umax - umin) * fractions
        vmin, vspan = float(v.min()), float(v.max() - v.min())
        phases = rng.uniform(0, 2 * math.pi, steps.size)
        width = step_width_px * float(np.mean(px))
        for i, (h, u0, phase) in enumerate(zip(steps, positions, phases)):
            edge = u0 + step_wave_angstrom * np.sin(2 * math.pi * v / vspan + phase)
            if meander_angstrom:
                edge = edge + meander_angstrom * _random_curve((v - vmin) / vspan, rng, seed + i)
            Z += (h / math.cos(th)) * 0.5 * (1 + np.tanh((u - edge) / width))
            terrace += u > edge
    for k, (corner, pixels, h) in enumerate(corner_pieces):
        if corner not in (0, 1, 2, 3) or not pixels > 0:
            raise ImageError(f"corner_pieces entries are (corner 0..3, pixels > 0, height), got {corner_pieces!r}")
        r = math.sqrt(4.0 * float(pixels) / math.pi)
        ri = np.arange(ny)[:, None] - (0 if corner in (0, 1) else ny - 1)
        ci = np.arange(nx)[None, :] - (0 if corner in (0, 2) else nx - 1)
        inside = np.hypot(ri, ci) < r
        Z[inside] += float(h) / math.cos(th)
        terrace[inside] = steps.size + 1 + k
    if lattice is not None:
        a, b, gamma, direction = lattice
        real, g = reciprocal_shell(a, b, gamma, direction)
        # orthonormal in-plane basis of the tilted terrace plane
        n = np.array([-slope * math.cos(ph), -slope * math.sin(ph), 1.0])
        n /= np.linalg.norm(n)
        e1 = np.array([1.0, 0.0, 0.0]) - n[0] * n
        e1 /= np.linalg.norm(e1)
        e2 = np.cross(n, e1)
        s1 = X * e1[0] + Y * e1[1] + plane * e1[2]
        s2 = X * e2[0] + Y * e2[1] + plane * e2[2]
        n_terraces = int(terrace.max()) + 1
        shifts = np.zeros((n_terraces, 2))
        if lateral_shifts:
            shifts = rng.uniform(0, 1, (n_terraces, 2)) @ real
        for gv in g:
            phase = 2 * math.pi * (shifts @ gv)
            Z += corrugation_angstrom * np.cos(2 * math.pi * (gv[0] * s1 + gv[1] * s2) - phase[terrace])
    del X, Y, plane
    if adsorbate_fraction:
        Z += _adsorbates((ny, nx), adsorbate_fraction, adsorbate_height_angstrom, adsorbate_radius_px, rng)
    if background_angstrom:
        Z += _background((ny, nx), background_angstrom, background_exponent, background_scale_px, rng)
    if line_offset_angstrom:
        Z += rng.normal(0.0, line_offset_angstrom, ny)[:, None]
    if noise_angstrom:
        Z += rng.normal(0.0, noise_angstrom, Z.shape)
    return Z


def _random_curve(t: FloatArray, rng: np.random.Generator, seed: int) -> FloatArray:
    """A smooth random function of t in [0, 1] with unit standard deviation (sum of 16 random sinusoids)."""
    local = np.random.default_rng([seed, 7])
    k = np.arange(1, 17)
    amp = local.normal(0.0, 1.0, k.size) / k  # correlation length ~ 1/8 of the span
    amp /= math.sqrt(float(np.sum(amp**2)) / 2.0)
    phase = local.uniform(0, 2 * math.pi, k.size)
    out = np.zeros_like(t)
    for kk, aa, pp in zip(k, amp, phase):
        out += aa * np.sin(2 * math.pi * kk * t + pp)
    return out


def _adsorbates(
    shape: tuple[int, int], fraction: float, height: float, radius_px: float, rng: np.random.Generator
) -> FloatArray:
    """Bumps (+height) and pits (-height) with a cosine profile covering ``fraction`` of the area."""
    ny, nx = shape
    area = math.pi * radius_px**2 / 2.0  # effective area of a cosine bump above half height, pixels
    count = int(round(fraction * ny * nx / area))
    out = np.zeros(shape)
    r = int(math.ceil(radius_px))
    dy, dx = np.mgrid[-r : r + 1, -r : r + 1]
    profile = 0.5 * (1 + np.cos(np.pi * np.minimum(np.hypot(dy, dx) / radius_px, 1.0)))
    rows = rng.integers(0, ny, count)
    cols = rng.integers(0, nx, count)
    signs = np.where(rng.random(count) < 0.5, 1.0, -1.0)
    padded = np.zeros((ny + 2 * r, nx + 2 * r))
    for i, j, s in zip(rows, cols, signs):
        window = padded[i : i + 2 * r + 1, j : j + 2 * r + 1]
        # overlapping bumps do not pile up: keep the larger magnitude
        np.copyto(window, s * height * profile, where=np.abs(s * height * profile) > np.abs(window))
    out += padded[r : r + ny, r : r + nx]
    return out


def _background(
    shape: tuple[int, int], rms: float, exponent: float, scale_px: float, rng: np.random.Generator
) -> FloatArray:
    """A random field with power spectrum ``|k|**-exponent`` below wavelength ``scale_px``, scaled to ``rms``."""
    ny, nx = shape
    ky = np.fft.fftfreq(ny)[:, None]
    kx = np.fft.rfftfreq(nx)[None, :]
    k = np.hypot(kx, ky)
    k[0, 0] = 1.0
    amp = k ** (-exponent / 2.0) * np.exp(-((k * scale_px) ** 2))
    amp[0, 0] = 0.0
    spec = amp * (rng.normal(size=amp.shape) + 1j * rng.normal(size=amp.shape))
    field = np.fft.irfft2(spec, s=(ny, nx))
    field -= field.mean()
    return field * (rms / float(np.std(field)))


def synthetic_measurement(
    table: CandidateTable,
    index: int,
    rng: np.random.Generator,
    *,
    tilt_sigma: float = 1.5,
    spacing_sigma: float = 0.1,
    row_angle_sigma: float = 3.0,
    step_sigma: float = 0.08,
    n_spacings: int = 2,
    n_steps: int = 5,
) -> Measurement:
    """Draw a measurement from the likelihood model of candidate ``index``.

    Used to test recovery and calibration against the model itself: class
    fractions of a mixed surface from the uniform prior; the tilt from a random
    upward variant with the measurement and mount sigmas; two spacings and a
    row angle from a random reading of a lattice of a class drawn by its
    fraction (one spacing: a random period); steps from the weighted allowed
    steps, with the outlier fraction of the model.  Gaussian noise of the
    stated sigmas plus the model's relative uncertainty.

    Parameters
    ----------
    table : CandidateTable
    index : int
        Candidate to simulate.
    rng : numpy.random.Generator

    Returns
    -------
    Measurement
    """
    from termination.identification.lattices import lattice_readings

    model = table.model
    c = table.candidates[index]

    def noisy(mu: float, s: float, rel: float = 0.0) -> float:
        return float(mu + rng.normal() * np.hypot(s, rel * mu))

    k = len(c.classes)
    fractions = rng.dirichlet(np.ones(k)) if k > 1 else np.ones(1)
    tilt = None
    if table.mount is not None and c.tilts:
        sigma = math.hypot(tilt_sigma, model.mount_sigma_deg)
        tilt = Value(min(max(noisy(rng.choice(c.tilts), sigma), 0.0), 90.0), tilt_sigma)
    cls = int(rng.choice(k, p=fractions))
    lattice = c.lattices[cls][int(rng.integers(len(c.lattices[cls])))]
    readings = lattice_readings(lattice.a, lattice.b, lattice.gamma)
    p1, p2, gamma = readings[int(rng.integers(len(readings)))]
    spacings: list[Value] = []
    row_angle = None
    if n_spacings >= 2 and np.isfinite(p2):
        pair = [p1, p2] if rng.random() < 0.5 else [p2, p1]
        spacings = [Value(abs(noisy(p, spacing_sigma, model.model_rel)), spacing_sigma) for p in pair]
        g = gamma if rng.random() < 0.5 else 180.0 - gamma
        row_angle = Value(min(max(noisy(g, row_angle_sigma), 1.0), 179.0), row_angle_sigma)
    elif n_spacings >= 1:
        periods = [p for p in c.periods[cls] if np.isfinite(p)]
        if periods:
            spacings = [Value(abs(noisy(float(rng.choice(periods)), spacing_sigma, model.model_rel)), spacing_sigma)]
    steps: list[Value] = []
    if c.step_heights:
        lower = np.asarray(c.step_lower)
        upper = np.asarray(c.step_upper)
        w = fractions[lower] * fractions[upper] * np.asarray(c.step_factors)
        w /= w.sum()
        for _ in range(n_steps):
            if rng.random() < model.step_outlier_fraction:
                steps.append(Value(float(rng.uniform(0.05, model.step_range_angstrom)), step_sigma))
            else:
                j = int(rng.choice(len(w), p=w))
                steps.append(Value(abs(noisy(c.step_heights[j], step_sigma, model.model_rel)) or 0.01, step_sigma))
    return Measurement(mount=table.mount, tilt=tilt, row_angle=row_angle, spacings=tuple(spacings), steps=tuple(steps))


def geometric_measurement(
    crystal: Crystal,
    hkl: Sequence[int],
    mount: Sequence[int],
    rng: np.random.Generator,
    *,
    tilt_sigma_deg: float = 2.0,
    step_rel: float = 0.05,
    n_steps: int = 3,
    lattice: bool = True,
    spacing_rel: float = 0.02,
    row_angle_sigma_deg: float = 2.0,
    termination: str | None = None,
    visibility: Visibility | None = None,
) -> Measurement:
    """A measurement of the face ``hkl`` made from plain geometry, not from the identification model.

    For calibration checks that do not share the model's assumptions: the tilt
    of a random upward-facing variant of the face plus Gaussian noise; steps at
    whole multiples of the plane spacing d (n = 1 twice as often as 2 or 3)
    with relative noise ``step_rel``; with ``lattice``, the two reduced
    lengths and the angle of the apparent lattice of one termination (default:
    a random one; :func:`termination.surface.corrugation.termination_corrugation`)
    with relative and angular noise.  The stated sigmas are the true ones.

    Parameters
    ----------
    crystal : Crystal
    hkl : 3 ints
    mount : 3 ints
    rng : numpy.random.Generator

    Returns
    -------
    Measurement
    """
    from termination.surface.corrugation import termination_corrugation
    from termination.surface.faces import face_geometry, variant_tilts
    from termination.surface.terminations import face_terminations

    face = face_geometry(crystal, hkl)
    angles = variant_tilts(crystal, face.variants, mount)
    up = angles[angles <= 90.0 + 1e-6]
    tilt = float(np.clip(rng.choice(up) + rng.normal() * tilt_sigma_deg, 0.0, 90.0))
    multiples = rng.choice([1, 1, 2, 3], size=n_steps)
    steps = tuple(Value(float(n * face.d * (1 + step_rel * rng.normal())), step_rel * n * face.d) for n in multiples)
    spacings: tuple[Value, ...] = ()
    row_angle: Value | None = None
    if lattice:
        ft = face_terminations(crystal, hkl, face=face)
        keys = [t.id for t in ft.terminations if t.equivalent_to is None]
        key = termination if termination is not None else str(rng.choice(keys))
        lat = termination_corrugation(ft, key, visibility).apparent_lattice
        if np.isfinite(lat.a) and np.isfinite(lat.b):
            spacings = tuple(
                Value(float(x * (1 + spacing_rel * rng.normal())), spacing_rel * x) for x in (lat.a, lat.b)
            )
            row_angle = Value(float(lat.gamma + row_angle_sigma_deg * rng.normal()), row_angle_sigma_deg)
    return Measurement(
        mount=tuple(mount), tilt=Value(tilt, tilt_sigma_deg), spacings=spacings, row_angle=row_angle, steps=steps
    )


def calibration(
    probabilities: ArrayLike, hits: ArrayLike, bins: int = 10
) -> tuple[float, list[tuple[float, float, int]]]:
    """Expected calibration error and the (confidence, hit rate, count) of each probability bin.

    ECE = sum_b (n_b / N) |hit rate_b - mean probability_b| over equal-width bins of the
    top probability (common practice in the assessment of probabilistic classifiers).

    >>> round(calibration([0.9, 0.9, 0.6, 0.6], [True, True, True, False])[0], 3)
    0.1
    """
    p = np.asarray(probabilities, float)
    h = np.asarray(hits, float)
    edges = np.linspace(0.0, 1.0, bins + 1)
    which = np.clip(np.digitize(p, edges[1:-1]), 0, bins - 1)
    table: list[tuple[float, float, int]] = []
    ece = 0.0
    for b in range(bins):
        sel = which == b
        if sel.any():
            conf, rate = float(p[sel].mean()), float(h[sel].mean())
            table.append((conf, rate, int(sel.sum())))
            ece += sel.mean() * abs(rate - conf)
    return float(ece), table


# --------------------------------------------------------------------------- structures


def random_rotation(rng: np.random.Generator) -> FloatArray:
    """Uniform random proper rotation (QR of a Gaussian matrix)."""
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q *= np.sign(np.diag(r))
    if np.linalg.det(q) < 0:
        q[:, 0] *= -1
    return q


def pa3_structure(x: float = 0.385, a: float = 5.417) -> tuple[FloatArray, FloatArray, list[str]]:
    """Pyrite-type FeS2 (Pa-3, Th point group) generated from spglib's database: (lattice, positions, species).

    Fe at 4a, S at 8c (x, x, x); x = 0.385 and a = 5.417 Å are the usual pyrite
    values (from memory).
    """
    import spglib

    hall = next(h for h in range(1, 531) if (t := spglib.get_spacegroup_type(h)) is not None and t.number == 205)
    ops = spglib.get_symmetry_from_database(hall)
    assert ops is not None  # every Hall number 1..530 is in the database
    rot, tra = ops["rotations"], ops["translations"]

    def orbit(p: FloatArray) -> FloatArray:
        pts = (np.einsum("nij,j->ni", rot, p) + tra) % 1.0
        uniq: list[FloatArray] = []
        for q in pts:
            if not any(np.allclose((q - u + 0.5) % 1.0 - 0.5, 0, atol=1e-8) for u in uniq):
                uniq.append(q)
        return np.array(uniq)

    fe, s = orbit(np.zeros(3)), orbit(np.full(3, x))
    return np.eye(3) * a, np.vstack([fe, s]), ["Fe"] * len(fe) + ["S"] * len(s)
