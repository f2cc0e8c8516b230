"""2D supercells: Hermite normal forms, symmetry classes, Wood notation, Ewald sums, patterns."""

import numpy as np
import pytest

from termination.algebra.lattice2d import (
    canonical_hnf,
    coset_representatives,
    hnf_matrices,
    supercell_classes,
    translation_permutations,
    wood_notation,
)
from termination.surface.electrostatics import ewald_pair_matrix
from termination.surface.reconstructions import rank_patterns, supercell_sites

SQUARE = 3.0 * np.eye(2)
HEXAGONAL = 3.0 * np.array([[1.0, 0.0], [-0.5, np.sqrt(3) / 2]])
C4V = np.array(
    [
        [[1, 0], [0, 1]],
        [[0, 1], [-1, 0]],
        [[-1, 0], [0, -1]],
        [[0, -1], [1, 0]],
        [[1, 0], [0, -1]],
        [[-1, 0], [0, 1]],
        [[0, 1], [1, 0]],
        [[0, -1], [-1, 0]],
    ]
)


def _sigma(n):
    return sum(d for d in range(1, n + 1) if n % d == 0)


@pytest.mark.parametrize("det", range(1, 13))
def test_number_of_sublattices_is_the_divisor_sum(det):
    # Index-n sublattices of Z^2 number sigma(n): G. L. W. Hart and R. W. Forcade,
    # Phys. Rev. B 77, 224115 (2008)
    mats = hnf_matrices(det)
    assert len(mats) == _sigma(det)
    assert all(round(np.linalg.det(m)) == det for m in mats)
    assert len({tuple(canonical_hnf(m).ravel()) for m in mats}) == len(mats)  # already canonical


def test_canonical_hnf_is_basis_independent():
    rng = np.random.default_rng(1)
    for _ in range(50):
        m = rng.integers(-4, 5, size=(2, 2))
        if round(np.linalg.det(m)) == 0:
            continue
        u = (
            np.array([[1, int(rng.integers(-3, 4))], [0, 1]])
            @ np.array([[0, 1], [1, 0]])
            @ np.array([[1, 0], [int(rng.integers(-3, 4)), 1]])
        )  # unimodular
        assert np.array_equal(canonical_hnf(u @ m), canonical_hnf(m))
        assert np.array_equal(canonical_hnf(canonical_hnf(m)), canonical_hnf(m))  # idempotent


def test_square_index_two_classes_are_2x1_and_c2x2():
    # On a square (4mm) surface the index-2 cells are (2×1) ~ (1×2) and c(2×2)  # Wood 1964; common practice
    classes = [c for c in supercell_classes(2, C4V) if round(np.linalg.det(c[0])) == 2]
    assert sorted(len(c) for c in classes) == [1, 2]
    labels = {frozenset(wood_notation(m, SQUARE).label for m in c) for c in classes}
    assert labels == {frozenset({"(2×1)", "(1×2)"}), frozenset({"c(2×2)"})}


def test_classes_partition_every_index():
    for det in range(1, 9):
        members = [m for c in supercell_classes(det, C4V) for m in c if round(np.linalg.det(m)) == det]
        assert len(members) == _sigma(det)  # orbits partition the sigma(n) sublattices


def test_no_symmetry_keeps_every_sublattice():
    assert len(supercell_classes(4, np.eye(2, dtype=int)[None])) == sum(_sigma(n) for n in range(1, 5))


@pytest.mark.parametrize(
    "mesh, matrix, label",
    [
        (SQUARE, [[2, 0], [0, 1]], "(2×1)"),  # Wood 1964
        (SQUARE, [[1, 1], [-1, 1]], "c(2×2)"),  # Wood 1964: c(2×2) = (√2×√2)R45°
        (SQUARE, [[2, 0], [0, 2]], "(2×2)"),
        (SQUARE, [[2, 1], [-1, 2]], "(√5×√5)R26.6°"),  # arctan(1/2) = 26.57°
        (SQUARE, [[2, 1], [0, 2]], "c(4×2)"),  # centred 4a × 2b cell, 2a + b at its centre  # Wood 1964
        (HEXAGONAL, [[2, 1], [-1, 1]], "(√3×√3)R30°"),  # Wood 1964
        (HEXAGONAL, [[3, 1], [-1, 2]], "(√7×√7)R19.1°"),  # arccos(5/(2√7)) = 19.11°
        (HEXAGONAL, [[2, 0], [0, 2]], "(2×2)"),
        (HEXAGONAL, [[1, 0], [0, 1]], "(1×1)"),
    ],
)
def test_wood_notation(mesh, matrix, label):
    assert wood_notation(matrix, mesh).label == label


def test_wood_notation_is_basis_independent():
    # (√3×√3)R30° given by another basis of the same superlattice
    assert wood_notation([[2, 1], [1, 2]], HEXAGONAL).label == "(√3×√3)R30°"
    assert wood_notation([[1, 1], [1, -1]], SQUARE).label == "c(2×2)"


def test_wood_notation_absent_for_an_oblique_cell():
    assert wood_notation([[1, 2], [-2, 2]], SQUARE) is None  # |A1| = √5 a, |A2| = √8 a, not a common rotation


def test_coset_representatives_and_permutations():
    hnf = canonical_hnf([[1, 1], [-1, 1]])
    reps = coset_representatives(hnf)
    assert len(reps) == 2
    perms = translation_permutations(hnf, 1)
    assert perms[0].tolist() == [0, 1] and perms[1].tolist() == [1, 0]
    perms = translation_permutations([[2, 0], [0, 3]], 2)
    assert np.array_equal(np.sort(perms, axis=1), np.tile(np.arange(12), (6, 1)))  # each a permutation


@pytest.mark.parametrize(
    "mesh, madelung",
    [
        (SQUARE, -1.100244),  # L. Bonsall and A. A. Maradudin, Phys. Rev. B 15, 1959 (1977), square
        (HEXAGONAL, -1.106103),  # ibid., hexagonal (the 2D Wigner crystal)
    ],
)
def test_ewald_reproduces_2d_wigner_madelung_constants(mesh, madelung):
    # Energy per charge of a 2D lattice of unit charges in a uniform background,
    # in units of e^2/r0 with pi r0^2 n = 1.
    r0 = np.sqrt(abs(np.linalg.det(mesh)) / np.pi)
    for alpha in (None, 0.4, 1.3):  # independent of the splitting parameter
        phi = ewald_pair_matrix(mesh, [[0.2, 0.7]], alpha)
        assert 0.5 * phi[0, 0] * r0 == pytest.approx(madelung, abs=2e-6)


def test_ewald_is_supercell_consistent_and_translation_invariant():
    pos, cell = supercell_sites([[3, 1], [0, 2]], HEXAGONAL, [[0.0, 0.0], [1.5, 0.8]])
    q = np.tile([1.0, -1.0], 6)
    e1 = 0.5 * q @ ewald_pair_matrix(cell, pos) @ q
    e2 = 0.5 * q @ ewald_pair_matrix(cell, pos + [0.37, -1.1]) @ q
    base = ewald_pair_matrix(HEXAGONAL, [[0.0, 0.0], [1.5, 0.8]])
    e_cell = 0.5 * np.array([1.0, -1.0]) @ base @ np.array([1.0, -1.0])
    assert e1 == pytest.approx(e2, rel=1e-10) and e1 == pytest.approx(6 * e_cell, rel=1e-9)


def test_patterns_of_half_a_square_layer():
    # Half of the sites of a square lattice: the checkerboard c(2×2) beats the
    # rows of (2×1) (from the Madelung energies of the two vacancy lattices,
    # Bonsall and Maradudin 1977: the denser-packed lattice is the lower)
    results = {}
    for mat in ([[1, 1], [0, 2]], [[2, 0], [0, 1]]):
        hnf = canonical_hnf(mat)
        pos, cell = supercell_sites(hnf, SQUARE, [[0.0, 0.0]])
        results[wood_notation(hnf, SQUARE).label] = rank_patterns(cell, pos, 1, translation_permutations(hnf, 1))
    assert results["c(2×2)"].energy_ev[0] < results["(2×1)"].energy_ev[0]


def test_patterns_with_a_smaller_period_are_dropped():
    hnf = canonical_hnf([[2, 0], [0, 2]])
    pos, cell = supercell_sites(hnf, SQUARE, [[0.0, 0.0]])
    assert rank_patterns(cell, pos, 2, translation_permutations(hnf, 1)) is None  # every 2-of-4 is (2×1) or c(2×2)
    r = rank_patterns(cell, pos, 1, translation_permutations(hnf, 1))
    assert r.distinct == 1 and r.total == 4 and len(r.patterns) == 1


def test_pattern_ranking_is_deterministic_and_sorted():
    hnf = canonical_hnf([[3, 0], [0, 2]])
    pos, cell = supercell_sites(hnf, HEXAGONAL, [[0.0, 0.0]])
    perms = translation_permutations(hnf, 1)
    a = rank_patterns(cell, pos, 3, perms)
    b = rank_patterns(cell, pos, 3, perms)
    assert np.array_equal(a.patterns, b.patterns) and np.all(np.diff(a.energy_ev) >= -1e-12)
    assert rank_patterns(cell, pos, 3, perms, max_patterns=5) is None


@pytest.mark.parametrize(
    "mesh, matrix, base, k",
    [
        (HEXAGONAL, [[3, 0], [0, 2]], [[0.0, 0.0]], 3),
        (SQUARE, [[2, 1], [0, 3]], [[0.0, 0.0], [1.5, 1.5]], 6),
        (SQUARE, [[4, 0], [0, 1]], [[0.0, 0.0], [1.5, 0.0]], 3),
    ],
)
def test_translation_classes_match_brute_force(mesh, matrix, base, k):
    # Independent check: enumerate every k-subset, keep those with the full
    # period, group them by translation, and take the lowest energy directly.
    from itertools import combinations

    hnf = canonical_hnf(matrix)
    pos, cell = supercell_sites(hnf, mesh, base)
    perms = translation_permutations(hnf, len(base))
    r = rank_patterns(cell, pos, k, perms)
    phi = ewald_pair_matrix(cell, pos)
    orbits = {}
    for c in combinations(range(len(pos)), k):
        images = [tuple(sorted(perm[list(c)])) for perm in perms]
        if any(img == c for img in images[1:]):
            continue
        orbits.setdefault(min(images), c)
    assert r.distinct == len(orbits)
    best = min(0.5 * phi[np.ix_(c, c)].sum() * 14.399645 / k for c in orbits.values())
    assert r.energy_ev[0] == pytest.approx(best, abs=1e-9)


# Standard Wood notation only ------------------------------------------------------------------

RECTANGULAR = np.array([[2.88, 0.0], [0.0, 4.08]])  # fcc (110) of Au, a = 4.08 Å (from memory)


def test_wood_notation_is_standard_only():
    # Wood 1964; common practice: a centred cell is the centred rectangle (square and rectangular
    # meshes only); a rotated cell keeps the mesh's shape only on square and hexagonal meshes.
    # "c(2×2)" on a hexagonal mesh (2a, a + b) is a rotated (2×1) domain: (1×2)R60°, not a centred cell
    assert wood_notation([[2, 0], [1, 1]], HEXAGONAL).label == "(1×2)R60°"
    assert wood_notation([[1, 1], [-1, 1]], RECTANGULAR).label == "c(2×2)"
    assert wood_notation([[1, 0], [0, 2]], RECTANGULAR).label == "(1×2)"  # the missing-row cell of Au, Pt (110)
    assert wood_notation([[1, 1], [-2, 2]], SQUARE).label == "(√2×2√2)R45°"  # O on Cu(100) (common practice)


def test_the_issue_name_c_root48_is_replaced_by_the_matrix():
    # Issue 13: a hexagonal cell used to be named c(√48×√12)R30°; its conventional cell is
    # 4√3 a × 2√3 a turned by 30°, the centring (A1 + A2)/2.
    from termination.algebra.lattice2d import cell_notation

    a1 = np.array([8, 4])  # 4√3 a at 30° on the 120° mesh: (8, 4) -> |.| = √48 a
    a2 = np.array([-2, 2])  # 2√3 a at 120°
    m = np.array([a1, (a1 + a2) // 2])
    assert abs(round(np.linalg.det(m))) == 12
    assert cell_notation(m, HEXAGONAL) == "(8 4 / 3 3)"  # the matrix, no Wood name


@pytest.mark.parametrize(
    "mesh, kind",
    [(SQUARE, "square"), (HEXAGONAL, "hexagonal"), (RECTANGULAR, "rectangular"), ([[2.0, 0.0], [0.7, 3.1]], "oblique")],
)
def test_mesh_kind(mesh, kind):
    from termination.algebra.lattice2d import mesh_kind

    assert mesh_kind(mesh) == kind


# Parsing cells ----------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "text, mesh, label, lattice",
    [
        ("2x1", SQUARE, "(2×1)", [[2, 0], [0, 1]]),  # Wood 1964
        ("p(2×2)", SQUARE, "(2×2)", [[2, 0], [0, 2]]),
        ("c(2x2)", SQUARE, "c(2×2)", [[1, 1], [-1, 1]]),  # Wood 1964: c(2×2) = (√2×√2)R45°
        ("c(4x2)", SQUARE, "c(4×2)", [[2, 1], [0, 2]]),
        ("(√3×√3)R30°", HEXAGONAL, "(√3×√3)R30°", [[2, 1], [-1, 1]]),  # Wood 1964
        ("sqrt3xsqrt3R30", HEXAGONAL, "(√3×√3)R30°", [[2, 1], [-1, 1]]),
        ("(sqrt(7) x sqrt(7))R19.1", HEXAGONAL, "(√7×√7)R19.1°", [[3, 1], [-1, 2]]),  # arccos(5/(2√7)) = 19.11°
        ("(√2×2√2)R45°", SQUARE, "(√2×2√2)R45°", [[1, 1], [-2, 2]]),
        ("1x2", RECTANGULAR, "(1×2)", [[1, 0], [0, 2]]),
        ("2,1,0,2", SQUARE, "(2 1 / 0 2)", [[2, 1], [0, 2]]),
        ("[[2, 1], [-1, 1]]", HEXAGONAL, "(2 1 / -1 1)", [[2, 1], [-1, 1]]),
    ],
)
def test_parse_cell_and_place_it_on_a_mesh(text, mesh, label, lattice):
    from termination.algebra.lattice2d import cell_matrix, parse_cell

    spec = parse_cell(text)
    assert spec.label == label
    m = cell_matrix(spec, mesh)
    assert m is not None and round(np.linalg.det(m)) > 0
    # the same sublattice, whatever basis: compare Hermite forms (basis-independent)
    assert np.array_equal(canonical_hnf(m), canonical_hnf(lattice))
    if spec.matrix is None and not spec.centred:
        # Wood's definition: |A1| = m|a|, |A2| = n|b|, both turned by the same angle
        v = m @ np.asarray(mesh)
        assert np.linalg.norm(v[0]) ** 2 == pytest.approx(spec.m2 * np.linalg.norm(mesh[0]) ** 2)
        assert np.linalg.norm(v[1]) ** 2 == pytest.approx(spec.n2 * np.linalg.norm(mesh[1]) ** 2)


def test_a_wood_cell_that_does_not_fit_the_mesh_gives_none():
    from termination.algebra.lattice2d import cell_matrix, parse_cell

    assert cell_matrix(parse_cell("(sqrt3xsqrt3)R30"), SQUARE) is None  # no √3 R30° vector on a square net
    assert cell_matrix(parse_cell("(√2×√2)R45°"), HEXAGONAL) is None


@pytest.mark.parametrize(
    "text, message",
    [
        ("1x1", "unreconstructed"),
        ("(1×1)", "unreconstructed"),
        ("1,0,0,1", "unreconstructed"),
        ("2,4,1,2", "singular"),
        ("2y1", "neither Wood"),
        ("2x", "neither Wood"),
        ("c(1x1)", "centred"),
        ("(2x2)R200", "between 0° and 180°"),
        ("1000x1", "at most"),
    ],
)
def test_bad_cells_are_refused_with_their_text(text, message):
    from termination.algebra.lattice2d import parse_cell
    from termination.errors import PlaneError

    with pytest.raises(PlaneError, match=message) as info:
        parse_cell(text)
    assert repr(text) in str(info.value) or text in str(info.value)
