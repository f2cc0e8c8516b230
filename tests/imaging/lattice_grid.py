"""A grid of synthetic topographs for the image lattice: sizes, steps, tilts, pixel sizes, lattices and artifacts.

Used by the fast subset in ``test_lattice_grid.py`` and by the full sweep
``tests/benchmarks/sweep_image_lattice.py``. Every case is a map from
:func:`termination.testing.synthetic_heightmap` with a known lattice; the
analysis must give that lattice back within 2 % and 2° (reduced, obtuse
convention) or report no lattice. A wrong lattice, even flagged, is a failure.
"""

import itertools
import math
from dataclasses import dataclass, field

import numpy as np

from termination.imaging.analysis import analyse_heightmap
from termination.testing import synthetic_heightmap

SPACING_REL, ANGLE_DEG = 0.02, 2.0

#: (a, b, gamma, direction) in the terrace plane, Å and deg (synthetic truths).
LATTICES = {
    "square 4.19": (4.19, 4.19, 90.0, 8.0),
    "hexagonal 2.95": (2.95, 2.95, 60.0, 17.0),
    "rectangular 3.6 x 2.55": (3.6, 2.55, 90.0, 33.0),
}

#: One artifact at a time, and all together (amplitudes of raw topographs).
ARTIFACTS = {
    "clean": {},
    "noise": dict(noise_angstrom=0.05),
    "line offsets": dict(line_offset_angstrom=0.3),
    "adsorbates": dict(adsorbate_fraction=0.05),
    "background": dict(background_angstrom=0.2),
    "lateral shifts": dict(lateral_shifts=True),
}
ARTIFACTS["all"] = {k: v for artifact in ARTIFACTS.values() for k, v in artifact.items()}


@dataclass(frozen=True)
class Case:
    """One synthetic topograph of the grid."""

    size: int
    steps: int
    tilt_deg: float
    pixel_size: float
    lattice: str
    artifact: str
    seed: int
    step_azimuth_deg: float = 0.0
    azimuth_deg: float = 25.0
    extra: dict = field(default_factory=dict, compare=False, hash=False)

    @property
    def name(self):
        return (
            f"{self.size}px-{self.steps}steps-tilt{self.tilt_deg:g}-px{self.pixel_size:g}-"
            f"{self.lattice.replace(' ', '')}-{self.artifact.replace(' ', '')}-az{self.step_azimuth_deg:g}-s{self.seed}"
        )

    def heights(self):
        return synthetic_heightmap(
            (self.size, self.size),
            self.pixel_size,
            tilt_deg=self.tilt_deg,
            azimuth_deg=self.azimuth_deg,
            step_heights=[2.96] * self.steps,
            step_azimuth_deg=self.step_azimuth_deg,
            lattice=LATTICES[self.lattice],
            seed=self.seed,
            **ARTIFACTS[self.artifact],
            **self.extra,
        )


def reduced(a, b, gamma_deg):
    """Two shortest vectors of a 2-D lattice and their angle, obtuse convention (Gauss reduction)."""
    u = np.array([a, 0.0])
    v = b * np.array([math.cos(math.radians(gamma_deg)), math.sin(math.radians(gamma_deg))])
    while True:
        if u @ u > v @ v:
            u, v = v, u
        mu = round(float(u @ v) / float(u @ u))
        if mu == 0:
            break
        v = v - mu * u
    la, lb = np.linalg.norm(u), np.linalg.norm(v)
    return float(la), float(lb), math.degrees(math.acos(-abs(float(u @ v)) / (la * lb)))


def outcome(case):
    """("right" | "not found" | "wrong", analysis) for one case."""
    r = analyse_heightmap(case.heights(), case.pixel_size)
    lat = r.lattice
    if lat is None:
        return "not found", r
    a, b, gamma = reduced(*LATTICES[case.lattice][:3])
    ok = abs(lat.a - a) <= SPACING_REL * a and abs(lat.b - b) <= SPACING_REL * b and abs(lat.gamma - gamma) <= ANGLE_DEG
    return ("right" if ok else "wrong"), r


def full_grid(seeds=(0, 1)):
    """Every combination: 2 sizes x 3 step counts x 2 tilts x 3 pixel sizes x 3 lattices x 7 artifacts x seeds."""
    out = []
    for size, steps, tilt, px, lattice, artifact, seed in itertools.product(
        (128, 256), (0, 1, 2), (1.0, 6.0), (0.2, 0.25, 0.4), LATTICES, ARTIFACTS, seeds
    ):
        # the step direction varies with the seed so that terraces are strips along x, y and diagonals
        out.append(Case(size, steps, tilt, px, lattice, artifact, seed, step_azimuth_deg=(0.0, 90.0, 40.0)[seed % 3]))
    return out


def fast_grid():
    """A spread of the full grid small enough for the default suite.

    Every lattice with every artifact (21 maps); sizes, step counts, tilts,
    pixel sizes and seeds are spread over them in a seeded random order,
    each value at least four times.
    """
    rng = np.random.default_rng(14)
    pairs = list(itertools.product(LATTICES, ARTIFACTS))
    n = len(pairs)

    def spread(values):
        return [values[i] for i in rng.permutation(np.arange(n) % len(values))]

    sizes, steps, tilts = spread((128, 256)), spread((0, 1, 2)), spread((1.0, 6.0))
    pixels, seeds = spread((0.2, 0.25, 0.4)), spread((0, 1, 2))
    chosen = [
        Case(sizes[i], steps[i], tilts[i], pixels[i], lattice, artifact, seeds[i], (0.0, 90.0, 40.0)[seeds[i]])
        for i, (lattice, artifact) in enumerate(pairs)
    ]
    # the reported regressions: two steps on 256², one on 128², square 4.19 Å at 0.25 Å/px, tilt 1°
    chosen += [
        Case(256, 2, 1.0, 0.25, "square 4.19", "clean", 0, azimuth_deg=0.0),
        Case(128, 1, 1.0, 0.25, "square 4.19", "clean", 0, azimuth_deg=0.0),
    ]
    return chosen
