"""Absolute values that relative comparisons cannot catch: bond densities, whole step lists, tolerances, tilts."""

import dataclasses
import itertools
import math

import numpy as np
import pytest

from termination.errors import StructureError
from termination.structures import build_prototype
from termination.surface.corrugation import Visibility
from termination.surface.faces import distinct_faces, face_geometry
from termination.surface.layers import cluster_layers, face_atoms
from termination.surface.steps import allowed_heights, step_offset
from termination.surface.terminations import face_terminations


@pytest.mark.parametrize(
    "spec, hkl, per_atom",
    [
        ("fcc:Cu", (1, 1, 1), 3),  # fcc (111): 3 of 12 nearest neighbours lost per surface atom (common practice)
        ("fcc:Cu", (0, 0, 1), 4),  # fcc (100): 4 (common practice)
        ("bcc:W", (0, 1, 1), 4),  # bcc (110): 2 of 8 first and 2 of 6 second neighbours (common practice)
    ],
)
def test_broken_bonds_per_surface_atom(spec, hkl, per_atom):
    crystal = build_prototype(spec)
    ft = face_terminations(crystal, hkl)
    t = ft.terminations[0]
    area_nm2 = ft.face.mesh.area / 100.0  # one atom per surface cell on these faces
    assert t.broken_bonds_per_nm2 * area_nm2 == pytest.approx(per_atom, rel=1e-9)
    # Cu (111): 3 bonds on (sqrt3/4) a^2 = 5.659 Å² per atom, a = 3.615 Å: 53.0 per nm² (issue 21)
    if spec == "fcc:Cu" and hkl == (1, 1, 1):
        assert t.broken_bonds_per_nm2 == pytest.approx(3 / (math.sqrt(3) / 4 * 3.615**2 / 100), rel=1e-6)
        # weighted by w = (r_i + r_j)/R with Cordero radii 1.32 Å and R = a/sqrt2 (Cordero et al. 2008)
        w = 2 * 1.32 / (3.615 / math.sqrt(2))
        assert t.weighted_bonds_per_nm2 == pytest.approx(t.broken_bonds_per_nm2 * w, rel=1e-6)


def test_half_heusler_111_step_lists_are_whole():
    # TiNiSn (111), d = a/sqrt3 = 3.4237 Å (a = 5.93 Å): layers Sn, Ni, Ti a quarter period apart
    # (C1b stacking; common practice).  The prototype's orientation (Sn 4a, Ti 4b, Ni 4d, the one
    # the polarity convention picks) puts Ni a quarter period above Sn along [111]: Ni to Sn is
    # delta = 3d/4, Sn to Ni d/4 (with Ni on 4c, as often written, the same holds for (-1 -1 -1)).
    crystal = build_prototype("half-heusler:Ti,Ni,Sn")
    ft = face_terminations(crystal, (1, 1, 1))
    d = 5.93 / math.sqrt(3)
    steps = {(s.from_label, s.to_label): s.heights for s in ft.steps}
    assert steps[("Ni", "Sn")] == pytest.approx([3 * d / 4 + n * d for n in range(4)], abs=1e-6)
    assert steps[("Sn", "Ni")] == pytest.approx([d / 4 + n * d for n in range(4)], abs=1e-6)
    assert steps[("Sn", "Sn")] == pytest.approx([d, 2 * d, 3 * d], abs=1e-6)


@pytest.mark.parametrize(
    "spec",
    [
        "half-heusler:Ti,Ni,Sn",
        "perovskite:Sr,Ti,O",
        "hexaboride:La,B",
        "diamond:Si",
        "fluorite:Ca,F",
        "zincblende:Ga,As",
    ],
)
def test_every_step_list_is_delta_plus_n_d_and_up_and_down_agree(spec):
    crystal = build_prototype(spec)
    for face in distinct_faces(crystal, 2):
        ft = face_terminations(crystal, face.hkl, face=face)
        d = ft.d
        table = {(s.from_label, s.to_label): s.heights for s in ft.steps}
        for (a, b), heights in table.items():
            delta = heights[0] % d
            if delta > d - 1e-6:
                delta = 0.0
            assert 0 <= delta < d
            expected = [delta + n * d for n in range(4) if delta + n * d > 1e-6]
            # merged equivalent members may add further offsets: every expected height is present
            assert all(any(abs(h - e) < 1e-6 for h in heights) for e in expected), (face.hkl, a, b)
            back = table[(b, a)]
            # up a to b then up b to a spans whole periods: delta_ab + delta_ba = 0 or d
            total = (heights[0] % d + back[0] % d) % d
            assert min(total, d - total) < 1e-6, (face.hkl, a, b, heights[0], back[0])


def test_offset_within_the_tolerance_of_d_wraps_to_zero():
    # Two tops 3.95 Å apart in a 4 Å period with a 0.1 Å layer tolerance are one plane one period up.
    assert step_offset(0.0, 3.95, 4.0, 0.1) == 0.0
    assert step_offset(0.0, 3.85, 4.0, 0.1) == pytest.approx(3.85)
    assert allowed_heights(0.0, 3.95, 4.0, 2, 0.1) == [(1, 4.0), (2, 8.0)]
    assert step_offset(3.95, 0.0, 4.0, 0.1) == 0.0  # the same plane read the other way
    assert allowed_heights(3.95, 0.0, 4.0, 1, 0.1) == [(1, 4.0)]


def test_layer_tolerance_changes_the_layers():
    # TiNiSn (113): layers 0.36 Å apart merge at a 1.0 Å tolerance, stay apart at 0.1 Å.
    crystal = build_prototype("half-heusler:Ti,Ni,Sn")
    fine = face_terminations(crystal, (1, 1, 3), layer_tol_angstrom=0.1)
    coarse = face_terminations(crystal, (1, 1, 3), layer_tol_angstrom=1.0)
    assert len(fine.layers) == 3 and len(coarse.layers) == 1
    assert fine.layer_tol_angstrom == 0.1 and coarse.layer_tol_angstrom == 1.0


def _min_angle(crystal, hkl, mount):
    """Smallest angle over all 48 signed permutations of hkl (cubic), by the plain dot product."""
    best = 180.0
    m = np.asarray(mount, float) / np.linalg.norm(mount)
    for perm in itertools.permutations(hkl):
        for signs in itertools.product((1, -1), repeat=3):
            v = np.asarray(perm, float) * signs
            best = min(best, math.degrees(math.acos(np.clip(v @ m / np.linalg.norm(v), -1, 1))))
    return best


@pytest.mark.parametrize("mount", [(1, 1, 0), (1, 1, 1)])
# with negative entries the written index is not the closest variant to either mount
@pytest.mark.parametrize(
    "hkl", [(3, 1, 0), (2, 1, 0), (3, 2, 1), (1, 0, 0), (2, 1, 1), (1, -1, 0), (-3, 1, 0), (1, -2, -1)]
)
def test_tilt_is_the_closest_variant_not_the_written_index(hkl, mount):
    # For a centrosymmetric cubic crystal every signed permutation is a variant (m-3m); the tilt
    # is the smallest angle over them (cubic interplanar angles, Cullity App. 15 style).
    crystal = build_prototype("fcc:Cu")
    face = face_geometry(crystal, hkl, mount)
    # 1e-5 degrees: acos near 1 loses half the digits when the tilt is zero
    assert face.tilt == pytest.approx(_min_angle(crystal, hkl, mount), abs=1e-5)


def test_depth_decay_weights_the_top_layer_more_than_the_second():
    # exp(-z/lambda) with lambda = 0.5 Å (Tersoff and Hamann, Phys. Rev. B 31, 805 (1985)): an atom
    # 2.82 Å deeper weighs e^-5.64 as much.
    amp = Visibility().amplitudes(["Na", "Na"], [0.0, 2.82])
    assert amp[0] == pytest.approx(1.0) and amp[1] == pytest.approx(math.exp(-2.82 / 0.5))
    assert amp[0] > amp[1]


# Layer clustering and the atoms of a face: the tolerance boundary, integer input, the wrap, the refusal.
def test_a_gap_equal_to_the_tolerance_joins_the_layer():
    # "Atoms within this height form one layer" (the --layer-tol help): within includes the bound.
    labels, centres = cluster_layers([0.0, 0.5], None, 0.5)
    assert labels.tolist() == [0, 0] and centres.tolist() == [0.25]
    labels, _ = cluster_layers([0.0, 0.5], None, 0.4999)
    assert labels.tolist() == [0, 1]


def test_integer_heights_wrap_across_the_period_like_floats():
    # 9 and 0 lie 0.5 apart across z = 9.5, so they form one layer centred at -0.25 = 9.25 (mod 9.5)
    labels, centres = cluster_layers([0, 4, 9], 9.5, 1.0)
    assert labels.tolist() == [1, 0, 1]
    assert centres.tolist() == pytest.approx([4.0, 9.25], abs=1e-12)
    assert np.array_equal(cluster_layers([0.0, 4.0, 9.0], 9.5, 1.0)[1], centres)


def test_face_atoms_carry_their_face_and_heights_in_the_period():
    crystal = build_prototype("rocksalt:Na,Cl")
    face = face_geometry(crystal, (1, 1, 1))
    atoms = face_atoms(crystal, face)
    assert atoms.face == face and atoms.d == pytest.approx(5.64 / np.sqrt(3))  # d(111) = a/sqrt(3), common practice
    assert np.all((atoms.heights >= 0) & (atoms.heights < atoms.d))
    assert sorted(atoms.species) == ["Cl", "Na"]  # one formula unit per primitive cell of rock salt


def test_atoms_that_do_not_fill_the_primitive_cell_are_refused_with_the_reason():
    # fcc with its centring translations dropped: the face's primitive cell holds 1 atom, not 4 / 1,
    # the mismatch a symmetry tolerance that disagrees with the cell produces.
    crystal = build_prototype("fcc:Cu")
    bad = dataclasses.replace(crystal, centring=crystal.centring[:1])
    with pytest.raises(StructureError) as info:
        face_atoms(bad, face_geometry(crystal, (0, 0, 1)))
    message = str(info.value)
    assert message.startswith("face (0 0 1): found ") and "found 1 atoms per primitive cell, expected 4;" in message
    assert message.endswith("the structure's symmetry tolerance may be too loose")


@pytest.mark.parametrize(
    "heights, labels, centres",
    [
        # period 2 Å throughout; worked by hand: single linkage, then the top cluster joins the bottom one
        # when the gap across z = 2 is within the tolerance, its atoms counted at z - 2.
        (([0.0, 0.05, 1.0, 1.98], 0.1), [0, 0, 1, 0], [0.01, 1.0]),
        (([0.0, 1.95], 0.1), [0, 0], [1.975]),  # two atoms, one layer across the period
        (([0.0, 0.5, 1.95], 0.1), [1, 0, 1], [0.5, 1.975]),  # the wrap joins the first and last, not the middle
        (([0.0, 1.5], 0.5), [0, 0], [1.75]),  # a wrap gap equal to the tolerance joins
        (([0.0, 1.0], 1.0), [0, 0], [0.5]),  # one layer without a wrap: an atom at d/2 is not moved down
        (([0.0, 0.4, 0.8], 0.5), [0, 0, 0], [0.4]),  # nor one between d/3 and d/2
    ],
)
def test_periodic_layers_by_hand(heights, labels, centres):
    z, tol = heights
    got_labels, got_centres = cluster_layers(z, 2.0, tol)
    assert got_labels.tolist() == labels
    assert got_centres.tolist() == pytest.approx(centres, abs=1e-12)
