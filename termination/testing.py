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

import numpy as np

from termination.errors import ImageError
from termination.identification.measurement import Measurement, Value
from termination.imaging.reading import parse_pixel_size

__all__ = [
    "calibration",
    "geometric_measurement",
    "pa3_structure",
    "random_rotation",
    "reciprocal_shell",
    "synthetic_heightmap",
    "synthetic_measurement",
]


def reciprocal_shell(a, b, gamma_deg, direction_deg=0.0):
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
    shape=(256, 256),
    pixel_size=0.5,
    *,
    tilt_deg=0.0,
    azimuth_deg=0.0,
    step_heights=(),
    step_azimuth_deg=0.0,
    step_wave_angstrom=0.0,
    step_width_px=1.0,
    lattice=None,
    corrugation_angstrom=0.1,
    noise_angstrom=0.0,
    seed=0,
):
    """A topograph with known geometry, heights in Å.

    Parameters
    ----------
    shape : (ny, nx)
        Image size, pixels.
    pixel_size : float or (2,)
        Pixel size along x and y, Å.
    tilt_deg, azimuth_deg : float
        Tilt of the terrace plane and the azimuth of its steepest ascent
        (from +x towards +y), deg.
    step_heights : sequence of float
        Heights of the steps, Å, measured along the terrace normal; the
        steps are evenly spaced across the image, each one up (positive) or
        down (negative).
    step_azimuth_deg : float
        Direction in which the step edges advance (normal to the edges), deg.
    step_wave_angstrom : float
        Amplitude of a sinusoidal meander of the step edges, Å.
    step_width_px : float
        Width of the step edge (a tanh profile), pixels.
    lattice : (a, b, gamma_deg, direction_deg) or None
        Corrugation lattice in the terrace plane: lengths Å, angles deg.
    corrugation_angstrom : float
        Amplitude of each cosine of the corrugation, Å.
    noise_angstrom : float
        Standard deviation of white Gaussian noise, Å.
    seed : int
        Seed of the noise and of the step meander phases.

    Returns
    -------
    (ny, nx) ndarray of float64

    Notes
    -----
    The terrace plane is :math:`z = \\tan\\theta\\,(x\\cos\\phi + y\\sin\\phi)`.
    A step of height h shifts z by :math:`h / \\cos\\theta` so that the
    distance between terrace planes is h. The corrugation
    :math:`A \\sum_g \\cos 2\\pi\\, g \\cdot r_\\parallel` uses in-plane
    coordinates :math:`r_\\parallel` of the 3-D surface point, so the image
    shows the lattice foreshortened by the tilt, as a real topograph does.
    """
    ny, nx = (int(s) for s in shape)
    px = parse_pixel_size(pixel_size)
    if ny < 2 or nx < 2:
        raise ImageError(f"shape must be at least 2 x 2, got {shape!r}")
    rng = np.random.default_rng(seed)
    x = (np.arange(nx) - (nx - 1) / 2.0) * px[0]
    y = (np.arange(ny) - (ny - 1) / 2.0) * px[1]
    X, Y = np.meshgrid(x, y)
    th, ph = math.radians(tilt_deg), math.radians(azimuth_deg)
    slope = math.tan(th)
    Z = slope * (X * math.cos(ph) + Y * math.sin(ph))
    steps = np.asarray(step_heights, dtype=np.float64)
    if steps.size:
        ps = math.radians(step_azimuth_deg)
        u = X * math.cos(ps) + Y * math.sin(ps)
        v = -X * math.sin(ps) + Y * math.cos(ps)
        umin, umax = float(u.min()), float(u.max())
        positions = umin + (umax - umin) * np.arange(1, steps.size + 1) / (steps.size + 1)
        vspan = float(v.max() - v.min())
        phases = rng.uniform(0, 2 * math.pi, steps.size)
        width = step_width_px * float(np.mean(px))
        for h, u0, phase in zip(steps, positions, phases):
            edge = u0 + step_wave_angstrom * np.sin(2 * math.pi * v / vspan + phase)
            Z += (h / math.cos(th)) * 0.5 * (1 + np.tanh((u - edge) / width))
    if lattice is not None:
        a, b, gamma, direction = lattice
        _, g = reciprocal_shell(a, b, gamma, direction)
        # orthonormal in-plane basis of the tilted terrace plane
        n = np.array([-slope * math.cos(ph), -slope * math.sin(ph), 1.0])
        n /= np.linalg.norm(n)
        e1 = np.array([1.0, 0.0, 0.0]) - n[0] * n
        e1 /= np.linalg.norm(e1)
        e2 = np.cross(n, e1)
        Zp = slope * (X * math.cos(ph) + Y * math.sin(ph))
        s1 = X * e1[0] + Y * e1[1] + Zp * e1[2]
        s2 = X * e2[0] + Y * e2[1] + Zp * e2[2]
        for gv in g:
            Z += corrugation_angstrom * np.cos(2 * math.pi * (gv[0] * s1 + gv[1] * s2))
    if noise_angstrom:
        Z += rng.normal(0.0, noise_angstrom, Z.shape)
    return Z


def synthetic_measurement(
    table,
    index,
    rng,
    *,
    tilt_sigma=1.5,
    spacing_sigma=0.1,
    row_angle_sigma=3.0,
    step_sigma=0.08,
    n_spacings=2,
    n_steps=5,
):
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

    def noisy(mu, s, rel=0.0):
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
    spacings = []
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
    steps = []
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
    crystal,
    hkl,
    mount,
    rng,
    *,
    tilt_sigma_deg=2.0,
    step_rel=0.05,
    n_steps=3,
    lattice=True,
    spacing_rel=0.02,
    row_angle_sigma_deg=2.0,
    termination=None,
    visibility=None,
):
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
    spacings, row_angle = (), None
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


def calibration(probabilities, hits, bins=10):
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
    table = []
    ece = 0.0
    for b in range(bins):
        sel = which == b
        if sel.any():
            conf, rate = float(p[sel].mean()), float(h[sel].mean())
            table.append((conf, rate, int(sel.sum())))
            ece += sel.mean() * abs(rate - conf)
    return float(ece), table


# --------------------------------------------------------------------------- structures


def random_rotation(rng):
    """Uniform random proper rotation (QR of a Gaussian matrix)."""
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q *= np.sign(np.diag(r))
    if np.linalg.det(q) < 0:
        q[:, 0] *= -1
    return q


def pa3_structure(x=0.385, a=5.417):
    """Pyrite-type FeS2 (Pa-3, Th point group) generated from spglib's database: (lattice, positions, species).

    Fe at 4a, S at 8c (x, x, x); x = 0.385 and a = 5.417 Å are the usual pyrite
    values (from memory).
    """
    import spglib

    hall = next(h for h in range(1, 531) if spglib.get_spacegroup_type(h).number == 205)
    ops = spglib.get_symmetry_from_database(hall)
    rot, tra = ops["rotations"], ops["translations"]

    def orbit(p):
        pts = (np.einsum("nij,j->ni", rot, p) + tra) % 1.0
        uniq = []
        for q in pts:
            if not any(np.allclose((q - u + 0.5) % 1.0 - 0.5, 0, atol=1e-8) for u in uniq):
                uniq.append(q)
        return np.array(uniq)

    fe, s = orbit(np.zeros(3)), orbit(np.full(3, x))
    return np.eye(3) * a, np.vstack([fe, s]), ["Fe"] * len(fe) + ["S"] * len(s)
