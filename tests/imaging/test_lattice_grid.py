"""The image lattice is right or not found, never wrong: a spread of the grid, and the rules that keep it so.

The grid (``lattice_grid.py``) spans sizes 128² and 256², 0-2 steps, tilts
1° and 6°, pixels 0.2-0.4 Å, square 4.19 Å, hexagonal 2.95 Å and
rectangular 3.6 x 2.55 Å lattices (synthetic truths) with each artifact of
:func:`termination.testing.synthetic_heightmap` alone and all together. The
full grid runs in ``tests/benchmarks/sweep_image_lattice.py``.
"""

import numpy as np
import pytest

from termination.imaging.analysis import analyse_heightmap
from termination.testing import synthetic_heightmap
from tests.imaging.lattice_grid import LATTICES, Case, fast_grid, outcome, reduced


@pytest.mark.parametrize("case", fast_grid(), ids=lambda c: c.name)
def test_lattice_is_right_or_not_found(case):
    kind, r = outcome(case)
    assert kind != "wrong", (r.lattice, r.notes)


def test_narrow_terraces_keep_their_lattice():
    # two steps on 256² at 0.25 Å/px: terraces 21 Å wide, five periods of 4.19 Å across (the reported bug:
    # 0.83 x 1.94 Å, gamma 100.75°, from side lobes once the isotropic period floor dropped the true spots)
    kind, r = outcome(Case(256, 2, 1.0, 0.25, "square 4.19", "clean", 0, azimuth_deg=0.0))
    assert kind == "right", (r.lattice, r.notes)
    assert r.lattice.terraces >= 2


def _two_lattices(left_lattice, right_lattice, left_fraction, seed=0):
    """A map whose lower terrace (left) and upper terrace (right, 2 Å higher) show different lattices."""
    shape, px = (192, 256), 0.25
    cut = int(round(left_fraction * shape[1]))
    left = synthetic_heightmap(shape, px, lattice=left_lattice, noise_angstrom=0.02, seed=seed)
    right = synthetic_heightmap(shape, px, lattice=right_lattice, noise_angstrom=0.02, seed=seed + 1) + 2.0
    z = left.copy()
    z[:, cut:] = right[:, cut:]
    return z, px


def test_the_lattice_most_of_the_terrace_area_shows_wins():
    # 70 % of the area shows hexagonal 3.0 Å, 30 % square 4.19 Å (synthetic truths)
    z, px = _two_lattices((3.0, 3.0, 60.0, 5.0), (4.19, 4.19, 90.0, 20.0), 0.7)
    r = analyse_heightmap(z, px)
    a, _, gamma = reduced(3.0, 3.0, 60.0)
    assert r.lattice is not None, r.notes
    assert abs(r.lattice.a - a) < 0.02 * a and abs(r.lattice.gamma - gamma) < 2.0
    assert any("not commensurate with the majority" in n for n in r.notes), r.notes


def test_disagreeing_terraces_are_flagged():
    # half and half: no majority; the report says the terraces disagree, whichever lattice it gives
    z, px = _two_lattices((3.0, 3.0, 60.0, 5.0), (4.19, 4.19, 90.0, 20.0), 0.5)
    r = analyse_heightmap(z, px)
    assert any(n.startswith("terraces disagree") for n in r.notes), r.notes
    if r.lattice is not None:
        found = (round(r.lattice.a, 1), round(r.lattice.gamma))
        assert found in {(3.0, 120), (4.2, 90)}


def test_a_lattice_below_the_floor_is_not_returned():
    # 1.6 Å: shorter than any surface lattice (metal-metal distances are above about 2.2 Å, from memory)
    z = synthetic_heightmap((128, 128), 0.2, lattice=(1.6, 1.6, 90.0, 10.0), noise_angstrom=0.02, seed=0)
    r = analyse_heightmap(z, 0.2)
    assert r.lattice is None
    assert any("below the floor of 2 Å" in n for n in r.notes), r.notes
    # the floor is a parameter: lowered, the same map gives its lattice back
    low = analyse_heightmap(z, 0.2, min_lattice_angstrom=1.0)
    assert low.lattice is not None and abs(low.lattice.a - 1.6) < 0.02 * 1.6


def test_no_transform_across_steps_when_no_terrace_shows_the_lattice():
    # 128² at 0.2 Å/px with two steps: three strips 8.5 Å wide, two periods of 4.19 Å across each; the
    # lattice shifts laterally between them, so the whole-image transform would be biased (3.8 for 4.19 Å)
    z = Case(128, 2, 1.0, 0.2, "square 4.19", "lateral shifts", 0).heights()
    r = analyse_heightmap(z, 0.2)
    if r.lattice is not None:
        a, b, _ = reduced(*LATTICES["square 4.19"][:3])
        assert abs(r.lattice.a - a) <= 0.02 * a and abs(r.lattice.b - b) <= 0.02 * b, r.notes
    else:
        assert any(n.startswith("no lattice") for n in r.notes), r.notes
        assert not any("whole image" in n for n in r.notes)


def test_new_lattice_parameters_are_checked():
    from termination.errors import ImageError

    z = np.random.default_rng(0).normal(size=(32, 32))
    with pytest.raises(ImageError, match="min_peak_fraction"):
        analyse_heightmap(z, 0.5, min_peak_fraction=1.5)
    with pytest.raises(ImageError, match="min_lattice_angstrom"):
        analyse_heightmap(z, 0.5, min_lattice_angstrom=-1.0)
