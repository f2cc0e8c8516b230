"""The best occupation pattern and the class count without listing the classes, against brute force.

The reference is an independent enumeration of every subset (no first-cell
restriction, no bit masks): keep those no translation but the identity maps
onto themselves, group them into translation classes, count the classes and
take the lowest energy.  The translation groups cover the cyclic (Z_4, Z_6)
and non-cyclic (Z_2 x Z_2, Z_2 x Z_4) cases, where the Möbius function of
the subgroup lattice is not that of a chain.
"""

from itertools import combinations, product

import numpy as np
import pytest

from termination.algebra.lattice2d import canonical_hnf, translation_permutations
from termination.surface.electrostatics import COULOMB_EV_ANGSTROM, ewald_pair_matrix
from termination.surface.reconstructions import best_occupation, rank_occupations, supercell_sites

SQUARE = np.array([[3.0, 0.0], [0.0, 3.0]])
HEXAGONAL = np.array([[3.0, 0.0], [-1.5, 1.5 * np.sqrt(3.0)]])


def brute_force(phi, sizes, counts, perms, delta, site_energy):
    """(number of classes with the full period, lowest energy in eV) by enumerating every subset."""
    offsets = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    per_group = [combinations(range(o, o + s), k) for o, s, k in zip(offsets, sizes, counts)]
    w = 0.5 * np.outer(delta, delta) * phi
    classes, lowest = set(), np.inf
    for parts in product(*per_group):
        c = tuple(sorted(sum(parts, ())))
        images = [tuple(sorted(perm[list(c)])) for perm in perms]
        if any(img == c for img in images[1:]):
            continue
        classes.add(min(images))
        energy = (w[np.ix_(c, c)].sum() + site_energy[list(c)].sum()) * COULOMB_EV_ANGSTROM
        lowest = min(lowest, energy)
    return len(classes), lowest


CASES = [
    # (mesh, supercell, 1×1 sites per group, changed per group)
    (SQUARE, [[2, 0], [0, 2]], (1, 1), (1, 1)),  # Z2 x Z2
    (SQUARE, [[2, 0], [0, 2]], (2,), (2,)),
    (SQUARE, [[4, 0], [0, 1]], (2,), (4,)),  # Z4
    (SQUARE, [[2, 0], [0, 4]], (1,), (4,)),  # Z2 x Z4
    (HEXAGONAL, [[3, 0], [0, 2]], (1, 1), (2, 3)),  # Z6 (Z2 x Z3)
    (HEXAGONAL, [[2, 1], [-1, 1]], (2,), (3,)),  # sqrt3 x sqrt3: Z3
    (SQUARE, [[1, 0], [0, 3]], (2, 2), (2, 0)),  # a group that does not change
]


@pytest.mark.parametrize("mesh, matrix, g, counts", CASES)
@pytest.mark.parametrize("seed", [0, 1])
def test_best_occupation_matches_brute_force_and_the_full_ranking(mesh, matrix, g, counts, seed):
    rng = np.random.default_rng(seed)
    hnf = canonical_hnf(matrix)
    det = int(round(abs(np.linalg.det(hnf))))
    bases = [rng.uniform(0, 1, (gi, 2)) @ mesh for gi in g]
    xy = [supercell_sites(hnf, mesh, b)[0] for b in bases]
    cell = supercell_sites(hnf, mesh, bases[0])[1]
    offsets = np.concatenate([[0], np.cumsum(g)[:-1]])
    perms = np.hstack([translation_permutations(hnf, gi) + det * off for gi, off in zip(g, offsets)])
    positions = np.vstack(xy)
    phi = ewald_pair_matrix(cell, positions)
    sizes = tuple(det * gi for gi in g)
    # Site terms and charges the same on equivalent sites of every 1×1 cell (translation invariant).
    delta = np.concatenate([np.tile(rng.uniform(-2.0, -0.5, gi), det) for gi in g])
    site_energy = np.concatenate([np.tile(rng.normal(0.0, 0.2, gi), det) for gi in g])

    fast = best_occupation(phi, sizes, counts, perms, delta, site_energy)
    full = rank_occupations(phi, sizes, counts, perms, delta, site_energy)
    classes, lowest = brute_force(phi, sizes, counts, perms, delta, site_energy)
    if classes == 0:
        assert fast is None and full is None
        return
    assert fast is not None and full is not None
    assert fast.distinct == full.distinct == classes
    assert fast.total == full.total
    assert fast.energy_ev[0] == pytest.approx(lowest, abs=1e-9)
    assert np.array_equal(fast.patterns[0], full.patterns[0])


def test_best_occupation_refuses_what_the_full_ranking_refuses():
    hnf = canonical_hnf([[3, 0], [0, 2]])
    pos, cell = supercell_sites(hnf, HEXAGONAL, [[0.0, 0.0]])
    perms = translation_permutations(hnf, 1)
    phi = ewald_pair_matrix(cell, pos)
    ones = np.ones(len(pos))
    assert best_occupation(phi, (6,), (3,), perms, ones, max_patterns=5) is None
    assert rank_occupations(phi, (6,), (3,), perms, ones, max_patterns=5) is None
    # Every 2-of-4 subset of a 2×2 cell repeats with a smaller cell: no pattern has its period.
    hnf = canonical_hnf([[2, 0], [0, 2]])
    pos, cell = supercell_sites(hnf, SQUARE, [[0.0, 0.0]])
    perms = translation_permutations(hnf, 1)
    phi = ewald_pair_matrix(cell, pos)
    assert best_occupation(phi, (4,), (2,), perms, np.ones(4)) is None


@pytest.mark.parametrize(
    "spec, hkl",
    [
        ("rocksalt:Na,Cl", (1, 1, 1)),  # octopolar (111): Wolf, Phys. Rev. Lett. 68, 3315 (1992)
        ("perovskite:Sr,Ti,O", (1, 1, 0)),  # SrTiO3 (110): alternating +4/-4 layers (common practice)
        ("zincblende:Ga,As", (1, 1, 1)),
    ],
)
@pytest.mark.parametrize("keep", [1, 4])
def test_keeping_the_best_cells_gives_the_head_of_each_kind(spec, hkl, keep):
    # match asks for the best few cells of each kind only; they must be exactly those the full list starts with.
    from termination.bulk.charges import with_formal_charges
    from termination.structures import build_prototype
    from termination.surface.polarity import termination_polarity
    from termination.surface.terminations import face_terminations

    crystal, _ = with_formal_charges(build_prototype(spec), None)
    ft = face_terminations(crystal, hkl)
    polar = 0
    for t in ft.terminations:
        full = termination_polarity(crystal, ft, t.id).reconstructions
        kept = termination_polarity(crystal, ft, t.id, keep_best=keep).reconstructions
        polar += bool(full)
        for several in (False, True):
            head = [r for r in full if (sum(1 for k in r.layer_changed if k) > 1) == several][:keep]
            got = [r for r in kept if (sum(1 for k in r.layer_changed if k) > 1) == several]
            assert [(r.name, r.layer_changed, r.score, r.changed_inplane.tolist()) for r in got] == [
                (r.name, r.layer_changed, r.score, r.changed_inplane.tolist()) for r in head
            ]
        assert len(kept) <= 2 * keep
    assert polar  # the face is polar: some termination has cells to keep
