"""Cells without an atom pattern and their rotational domains: spots, single- and multi-domain lattices."""

import numpy as np
import pytest

from termination.algebra.lattice2d import canonical_hnf
from termination.errors import StructureError
from termination.surface.corrugation import cell_corrugation, spot_lattice, superpose_domains, termination_corrugation
from termination.surface.domains import cell_domains, face_point_group, operation_text
from termination.surface.terminations import face_terminations

SI_A = 5.431  # Å (common practice)
R2 = np.sqrt(2.0)


def spot(pattern, g):
    for s in pattern.spots:
        if np.allclose(s.g, g):
            return s
    return None


@pytest.fixture(scope="module")
def si001(proto):
    c = proto("diamond:Si", a=SI_A)
    return c, face_terminations(c, (0, 0, 1))


def test_si001_2x1_with_both_domains(si001):
    # Si(001)-(2×1): dimer rows 2 a/√2 = 7.68 Å apart, 3.84 Å along them (Schlier and Farnsworth,
    # J. Chem. Phys. 30, 917 (1959)); the (1×2) domain lives on the terraces one single step
    # (a/4) away, turned by the 4₂ screw, and a LEED pattern or FFT over both shows half-order
    # spots along both axes (common practice).
    c, ft = si001
    rotations = face_point_group(c, ft.face)
    one = cell_corrugation(ft, "T1", [[2, 0], [0, 1]])
    assert (one.apparent_lattice.a, one.apparent_lattice.b, one.apparent_lattice.gamma) == pytest.approx(
        (SI_A / R2, 2 * SI_A / R2, 90.0)
    )
    both = superpose_domains(one, [[2, 0], [0, 1]], rotations, ft.atoms.mesh_inplane)
    assert both.domains == ("(2×1)", "(1×2)")
    half_a, half_b, first = spot(both, (0.5, 0)), spot(both, (0, 0.5)), spot(both, (1, 0))
    assert half_a.domains == 1 and half_b.domains == 1 and first.domains == 2
    assert spot(both, (0.5, 0.5)) is None  # no domain shows the (½ ½) spot
    lat = both.domain_lattice
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((2 * SI_A / R2, 2 * SI_A / R2, 90.0))
    assert both.apparent_lattice == one.apparent_lattice  # the single-domain lattice is kept


def test_three_domains_of_a_2x1_on_a_hexagonal_surface_look_like_a_2x2(proto):
    # A (2×1) on a 3-fold surface comes in three domains whose superposed half-order spots are
    # those of a (2×2) (common practice in LEED: a three-domain (2×1) cannot be told from p(2×2)).
    c = proto("fcc:Cu", a=3.615)
    ft = face_terminations(c, (1, 1, 1))
    p = superpose_domains(
        cell_corrugation(ft, "Cu", [[2, 0], [0, 1]]),
        [[2, 0], [0, 1]],
        face_point_group(c, ft.face),
        ft.atoms.mesh_inplane,
    )
    assert len(p.domains) == 3
    lat = p.domain_lattice
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((2 * 3.615 / R2, 2 * 3.615 / R2, 120.0))


def test_a_cell_that_is_its_own_domain_has_one():
    square = 3.84 * np.eye(2)
    c4v = [[[1, 0], [0, 1]], [[0, 1], [-1, 0]], [[-1, 0], [0, -1]], [[0, -1], [1, 0]], [[1, 0], [0, -1]]]
    assert [d.name for d in cell_domains([[1, 1], [-1, 1]], c4v, square)] == ["c(2×2)"]
    assert [d.name for d in cell_domains([[2, 0], [0, 1]], c4v, square)] == ["(2×1)", "(1×2)"]
    (a, b) = cell_domains([[2, 1], [-1, 2]], c4v, square)  # (√5×√5)R26.6° and its mirror image
    assert a.name == "(√5×√5)R26.6°" and b.name.endswith("mirror at 0°")
    assert not np.array_equal(canonical_hnf(a.matrix), canonical_hnf(b.matrix))


def test_default_modulation_gives_the_documented_spot_intensities(si001):
    # One brighter 1×1 cell per cell: |F(G)|/F(0) = m |F1(G)| / ((D + m) F1(0)) at every fractional
    # order; with one atom per 1×1 cell F1 = 1 (structure factor of a Bravais net).
    _, ft = si001
    for matrix, det in (([[2, 0], [0, 1]], 2), ([[2, 0], [0, 2]], 4), ([[3, 0], [0, 1]], 3)):
        for m in (1.0, 0.5):
            p = cell_corrugation(ft, "T1", matrix, modulation=m)
            fractional = [s for s in p.spots if not float(s.g[0]).is_integer() or not float(s.g[1]).is_integer()]
            assert fractional and all(s.intensity == pytest.approx(m / (det + m)) for s in fractional)
            assert spot(p, (1, 0)).intensity == pytest.approx(1.0)


def test_cell_corrugation_refuses_bad_input(si001):
    _, ft = si001
    with pytest.raises(StructureError, match="modulation"):
        cell_corrugation(ft, "T1", [[2, 0], [0, 1]], modulation=0)
    with pytest.raises(StructureError, match="singular"):
        cell_corrugation(ft, "T1", [[2, 0], [4, 0]])


def test_face_point_group_keeps_the_operations_that_shift_the_height(si001):
    # Diamond (001): the terminations T1 and T2 are related by the 4₂ screw (a quarter turn and
    # a/4 up); the face's point group is 4mm (8 operations), a termination's own is 2mm (4).
    from termination.surface.symmetry import termination_operations

    c, ft = si001
    assert len(face_point_group(c, ft.face)) == 8
    assert len(termination_operations(c, ft.face)) == 4
    texts = [operation_text(s, ft.atoms.mesh_inplane) for s in face_point_group(c, ft.face)]
    assert texts[0] == "identity" and "rotated 90°" in texts


def test_spot_lattice_matches_the_apparent_lattice_of_one_domain(si001):
    # The lattice generated by a pattern's own spots is its apparent lattice.
    _, ft = si001
    p = cell_corrugation(ft, "T1", [[2, 1], [0, 2]])
    lat = spot_lattice([s.g for s in p.spots], ft.atoms.mesh_inplane)
    assert (lat.a, lat.b, lat.gamma) == pytest.approx(
        (p.apparent_lattice.a, p.apparent_lattice.b, p.apparent_lattice.gamma)
    )


def test_hermite_form_of_spot_indices_matches_the_general_one():
    from termination.algebra.integer import row_basis
    from termination.surface.corrugation import _hermite_2d

    rng = np.random.default_rng(11)
    checked = 0
    for _ in range(500):
        rows = rng.integers(-12, 13, size=(int(rng.integers(2, 9)), 2))
        if np.linalg.matrix_rank(rows) < 2:
            continue
        assert np.array_equal(_hermite_2d(rows), row_basis(rows)), rows
        checked += 1
    assert checked > 400


def test_unreconstructed_surface_has_no_domains(si001):
    _, ft = si001
    p = termination_corrugation(ft, "T1")
    assert p.domains == () and p.domain_lattice is None and all(s.domains == 1 for s in p.spots)
