"""Cleave planning: every variant of every face inside a tilt window, and cleavage ranks."""

import itertools
import math

import numpy as np
import pytest

from termination.errors import PlaneError
from termination.reports import planes_report
from termination.structures import build_prototype
from termination.surface.cleavage import cleavage_cost, cleavage_ranks
from termination.surface.faces import distinct_faces, tilt_window
from termination.surface.terminations import face_terminations


@pytest.fixture(scope="module")
def nacl():
    return build_prototype("rocksalt:Na,Cl", a=5.64)


def cubic_angle(h1, h2):
    """Angle between (hkl) normals of a cubic crystal: cos = h1.h2 / (|h1| |h2|)."""
    # Cullity, Elements of X-ray Diffraction, interplanar angles of the cubic system.
    c = np.dot(h1, h2) / (np.linalg.norm(h1) * np.linalg.norm(h2))
    return math.degrees(math.acos(max(-1.0, min(1.0, c))))


def test_113_appears_at_25_2_and_72_5_degrees_from_001(nacl):
    # cos = 3/sqrt(11) -> 25.24°, cos = 1/sqrt(11) -> 72.45° (cubic metric, the example).
    rows = tilt_window(nacl, (0, 0, 1), 0.0, 90.0, max_index=3)
    tilts = sorted({round(r.tilt, 2) for r in rows if r.hkl == (1, 1, 3)})
    assert tilts == [25.24, 72.45]  # every variant has l != 0, so none lies at 90°
    assert math.isclose(min(r.tilt for r in rows if r.hkl == (1, 1, 3)), math.degrees(math.acos(3 / math.sqrt(11))))


def test_every_variant_in_the_window_matches_a_brute_force_over_signed_permutations(nacl):
    # Point group m-3m: all permutations and sign changes of (h k l) (International Tables A, the cubic holohedry).
    lo, hi = 30.0, 60.0
    rows = tilt_window(nacl, (0, 0, 1), lo, hi, max_index=2)
    expected = set()
    for face in distinct_faces(nacl, max_index=2):
        for perm in itertools.permutations(face.hkl):
            for signs in itertools.product((1, -1), repeat=3):
                v = tuple(int(s * p) for s, p in zip(signs, perm))
                if lo <= cubic_angle(v, (0, 0, 1)) <= hi:
                    expected.add((face.hkl, v))
    assert {(r.hkl, r.tilt_variant) for r in rows} == expected
    for r in rows:
        assert math.isclose(r.tilt, cubic_angle(r.tilt_variant, (0, 0, 1)), abs_tol=1e-9)
    assert [r.tilt for r in rows] == sorted(r.tilt for r in rows)


def test_variants_equal_pymatgen_equivalent_miller_indices(nacl):
    from pymatgen.core import Lattice, Structure
    from pymatgen.core.surface import get_symmetrically_equivalent_miller_indices

    structure = Structure(Lattice(nacl.lattice), list(nacl.species), nacl.positions)
    rows = tilt_window(nacl, (0, 0, 1), 0.0, 180.0, max_index=2)
    ours = {r.tilt_variant for r in rows if r.hkl == (1, 1, 2)}
    theirs = {tuple(int(v) for v in m) for m in get_symmetrically_equivalent_miller_indices(structure, (1, 1, 2))}
    assert ours == theirs  # pymatgen's structure symmetry; rock salt is centrosymmetric


def test_the_axis_rotates_the_mount_normal_onto_the_variant(nacl):
    for r in tilt_window(nacl, (0, 0, 1), 1.0, 179.0, max_index=2):
        n1 = np.array([0.0, 0.0, 1.0])
        n2 = np.array(r.tilt_variant, dtype=float) / np.linalg.norm(r.tilt_variant)
        k = np.array(r.tilt_axis, dtype=float) / np.linalg.norm(r.tilt_axis)  # cubic: [uvw] is Cartesian
        t = math.radians(r.tilt)
        # Rodrigues' rotation formula (right-handed about k).
        rotated = n1 * math.cos(t) + np.cross(k, n1) * math.sin(t) + k * (k @ n1) * (1 - math.cos(t))
        assert np.allclose(rotated, n2, atol=1e-9), r


def test_window_edges_are_inclusive_and_bad_windows_are_errors(nacl):
    rows = tilt_window(nacl, (0, 0, 1), 45.0, 45.0, max_index=1)
    assert {r.tilt_variant for r in rows} == {(0, 1, 1), (1, 0, 1), (0, -1, 1), (-1, 0, 1)}
    for lo, hi in [(50, 40), (-1, 10), (0, 181), (float("nan"), 10)]:
        with pytest.raises(PlaneError, match="tilt window"):
            tilt_window(nacl, (0, 0, 1), lo, hi)


def test_hexagonal_window_uses_the_metric():
    # Hexagonal close packing: the angle between (0 0 1) and (1 0 1) is atan(2c / (sqrt(3) a)) (common practice,
    # from the hexagonal interplanar-angle formula); built as a CIF-like cell through the general builder.
    from termination.bulk.crystal import build_crystal

    a, c = 2.665, 4.947  # Zn, Å (from memory)
    lattice = [[a, 0, 0], [-a / 2, a * math.sqrt(3) / 2, 0], [0, 0, c]]
    crystal = build_crystal(lattice, [[1 / 3, 2 / 3, 0.25], [2 / 3, 1 / 3, 0.75]], ["Zn", "Zn"])
    expected = math.degrees(math.atan(2 * c / (math.sqrt(3) * a)))
    rows = tilt_window(crystal, (0, 0, 1), expected - 0.01, expected + 0.01, max_index=1)
    assert rows and all(math.isclose(r.tilt, expected, abs_tol=1e-9) for r in rows)
    assert len(rows) == 6  # the six {1 0 1} variants with l > 0


@pytest.mark.parametrize(
    ("spec", "face"),
    [
        ("rocksalt:Na,Cl", (0, 0, 1)),  # rock salts cleave on {100} (common practice)
        ("rocksalt:Mg,O", (0, 0, 1)),
        ("diamond:Si", (1, 1, 1)),  # silicon cleaves on {111} (common practice)
        ("fluorite:Ca,F", (1, 1, 1)),  # fluorite cleaves on {111} (common practice)
        ("fcc:Cu", (1, 1, 1)),  # close-packed faces break the fewest bonds (common practice)
        ("bcc:Fe", (0, 1, 1)),
    ],
)
def test_the_known_cleavage_face_ranks_first(spec, face):
    crystal = build_prototype(spec)
    faces = distinct_faces(crystal, max_index=2)
    costs = [cleavage_cost(face_terminations(crystal, f.hkl, face=f)) for f in faces]
    ranks = cleavage_ranks(costs)
    best = [f.hkl for f, r in zip(faces, ranks) if r == 1]
    assert best == [face]


def test_cleavage_ranks_share_ties_and_a_broken_bond_free_face_ranks_first():
    assert cleavage_ranks([3.0, 3.0, 1.0, 7.0]).tolist() == [2, 2, 1, 4]
    assert cleavage_ranks([12.0, 0.0]).tolist() == [2, 1]


def test_planes_window_rows_carry_rank_and_polarity_of_their_face(nacl):
    report = planes_report(nacl, max_index=3, mount=(0, 0, 1), tilt_window=(20.0, 80.0))
    by_face = {f.hkl: f for f in report.faces}
    assert report.window and report.tilt_window == (20.0, 80.0)
    for w in report.window:
        assert w.polar == by_face[w.hkl].polar and w.d == by_face[w.hkl].d
    assert {w.cleavage_rank for w in report.window if w.hkl == (1, 1, 3)} == {
        w.cleavage_rank for w in report.window if w.tilt_variant == (3, 1, 1)
    }
    with pytest.raises(PlaneError, match="mount"):
        planes_report(nacl, max_index=1, tilt_window=(0.0, 10.0))
