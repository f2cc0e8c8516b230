"""The cell-list neighbour search against a brute-force search, and the bond graph's first-shell rule."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from termination.bulk.bonds import bond_graph
from termination.bulk.neighbours import nearest_distances, neighbour_pairs
from termination.structures import build_prototype


def brute_force(lattice, positions, radius):
    """Every pair within radius by trying all images in a box that surely holds them (N^2 x images)."""
    x = np.asarray(positions) % 1.0
    spacing = 1.0 / np.linalg.norm(np.linalg.inv(lattice).T, axis=1)
    reach = np.ceil(radius / spacing).astype(int) + 1
    grid = np.stack(np.meshgrid(*[np.arange(-r, r + 1) for r in reach], indexing="ij"), -1).reshape(-1, 3)
    out = set()
    for i in range(len(x)):
        for j in range(len(x)):
            vec = ((x[j] - x[i]) + grid) @ lattice
            d = np.linalg.norm(vec, axis=1)
            for t, dist in zip(grid, d):
                if 1e-8 <= dist < radius:
                    out.add((i, j, *t.tolist()))
    return out


@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(1, 9),
    seed=st.integers(0, 10**6),
    radius=st.floats(0.5, 9.0),
    skew=st.floats(-0.6, 0.6),
)
def test_cell_lists_find_exactly_the_brute_force_pairs(n, seed, radius, skew):
    rng = np.random.default_rng(seed)
    lattice = np.diag(rng.uniform(2.0, 7.0, 3)) + skew * rng.uniform(-1, 1, (3, 3)) * 2.0
    if abs(np.linalg.det(lattice)) < 1.0:
        return
    positions = rng.random((n, 3))
    nb = neighbour_pairs(lattice, positions, radius)
    found = {(int(i), int(j), *map(int, t)) for i, j, t in zip(nb.source, nb.target, nb.shift)}
    assert found == brute_force(lattice, positions, radius)
    assert np.allclose(np.linalg.norm(nb.vector, axis=1), nb.distance)


def test_nearest_distances_of_simple_lattices():
    # fcc a/sqrt2, bcc a sqrt3/2 (common practice)
    assert nearest_distances(np.eye(3) * 4.0, [[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]) == (
        pytest.approx([4 / np.sqrt(2)] * 4)
    )
    assert nearest_distances(np.eye(3) * 3.0, [[0, 0, 0], [0.5, 0.5, 0.5]]) == pytest.approx([1.5 * np.sqrt(3)] * 2)


def test_a_radius_that_would_pair_too_many_atoms_is_refused():
    from termination.errors import StructureError

    with pytest.raises(StructureError, match="would pair about"):
        neighbour_pairs(np.eye(3) * 3.0, np.random.default_rng(0).random((50, 3)), 500.0)


def _supercell(crystal, reps):
    grid = np.stack(np.meshgrid(*[np.arange(r) for r in reps], indexing="ij"), -1).reshape(-1, 3)
    positions = ((crystal.positions[None, :, :] + grid[:, None, :]) / np.array(reps)).reshape(-1, 3)
    species = list(crystal.species) * len(grid)
    return np.diag(reps) @ crystal.lattice, positions, species


@pytest.mark.parametrize("spec", ["half-heusler:Ti,Ni,Sn", "hcp:Zn", "corundum:Al,O", "hexaboride:La,B"])
def test_bond_lists_of_a_supercell_are_those_of_the_cell(spec):
    # The same bonds whatever the cell: the conventional cell repeated 2 x 3 x 2 as one cell (not
    # standardised back) has every bond of the cell 12 times, with the same lengths and vectors.
    import dataclasses

    c = build_prototype(spec)
    g = bond_graph(c)
    lattice, positions, species = _supercell(c, (2, 3, 2))
    big = bond_graph(dataclasses.replace(c, lattice=lattice, positions=positions, species=tuple(species)))
    assert len(big.length) == 12 * len(g.length)
    small = sorted(map(tuple, np.round(np.column_stack([g.length, g.vector]), 6).tolist()))
    large = sorted(map(tuple, np.round(np.column_stack([big.length, big.vector]), 6).tolist()))
    assert large == sorted(small * 12)


def test_first_shell_by_its_gap_keeps_hcp_interlayer_bonds_and_drops_ionic_second_neighbours(proto):
    # hcp Zn: 6 in-plane at a = 2.665 Å and 6 interlayer at 2.913 Å (Wyckoff), 12 bonds although
    # 2.913 Å exceeds 1.15 x 2 x 1.22 Å (Cordero radii); fluorite keeps Ca 8-fold and F 4-fold, no F-F.
    zn = bond_graph(proto("hcp:Zn"))
    assert sorted(set(zn.coordination.tolist())) == [12]
    assert sorted({round(float(v), 3) for v in zn.length}) == [2.665, 2.913]
    c = proto("fluorite:Ca,F")
    g = bond_graph(c)
    species = np.array(c.species)
    assert set(g.coordination[species == "Ca"].tolist()) == {8} and set(g.coordination[species == "F"].tolist()) == {4}
    assert not np.any((species[g.source] == "F") & (species[g.target] == "F"))
