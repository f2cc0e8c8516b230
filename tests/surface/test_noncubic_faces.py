"""Faces, terminations and steps of hexagonal, trigonal, tetragonal and layered crystals against outside references.

Lengths from the tabulated cells (``termination.structures.TABULATED``, each
with its source) and textbook geometry; plane spacings also from pymatgen's
``Lattice.d_hkl``.
"""

import math

import pytest

from termination.bulk.charges import with_formal_charges
from termination.structures import TABULATED, build_prototype
from termination.surface.faces import face_geometry, interplanar_angle
from termination.surface.polarity import termination_polarity
from termination.surface.terminations import face_terminations

S3 = math.sqrt(3)


def cell(spec):
    name, _, elements = spec.partition(":")
    t = TABULATED[(name, tuple(elements.split(",")))]
    return t.a, t.c


def steps(ft, a, b):
    return next(s.heights for s in ft.steps if (s.from_label, s.to_label) == (a, b))


def pymatgen_d(crystal, hkl):
    from pymatgen.core import Lattice

    return Lattice(crystal.lattice).d_hkl(hkl)  # pymatgen Lattice.d_hkl


# --------------------------------------------------------------------------- prismatic faces


@pytest.mark.parametrize("spec", ["hcp:Zn", "wurtzite:Zn,O"])
def test_first_order_prism_1010_spacing_mesh_and_steps(spec):
    # (1 0 -1 0) of a hexagonal lattice: d = a sqrt3/2, the rectangular mesh a x c (common practice).
    a, c = cell(spec)
    crystal = build_prototype(spec)
    ft = face_terminations(crystal, (1, 0, -1, 0))
    assert ft.face.hkl == (1, 0, 0)
    assert ft.d == pytest.approx(a * S3 / 2) == pytest.approx(pymatgen_d(crystal, (1, 0, 0)))
    m = ft.face.mesh
    assert (m.a, m.b, m.gamma) == pytest.approx((a, c, 90.0))
    first = ft.terminations[0]
    assert steps(ft, first.label, first.label)[0] == pytest.approx(a * S3 / 2)


def test_hcp_1010_has_the_two_terminations_of_its_alternating_layer_gaps():
    # hcp (1 0 -1 0): layers a/(2 sqrt3) and a/sqrt3 apart in turn, so the cut through the wide gap
    # (fewer bonds) and the one through the narrow gap are two terminations, with steps between them of
    # a/(2 sqrt3) and a/sqrt3 (common practice).
    a, _ = cell("hcp:Zn")
    ft = face_terminations(build_prototype("hcp:Zn"), (1, 0, -1, 0))
    wide, narrow = ft.terminations
    assert (wide.label, narrow.label) == ("Zn", "Zn'")
    assert wide.broken_bonds_per_nm2 < narrow.broken_bonds_per_nm2
    between = sorted([steps(ft, "Zn", "Zn'")[0], steps(ft, "Zn'", "Zn")[0]])
    assert between == pytest.approx([a / (2 * S3), a / S3])


@pytest.mark.parametrize("spec", ["hcp:Zn", "wurtzite:Zn,O"])
def test_second_order_prism_1120_spacing_mesh_and_steps(spec):
    # (1 1 -2 0): d = a/2, the mesh a sqrt3 x c (common practice); in ZnO a sqrt3 > c.
    a, c = cell(spec)
    crystal = build_prototype(spec)
    ft = face_terminations(crystal, (1, 1, -2, 0))
    assert ft.d == pytest.approx(a / 2) == pytest.approx(pymatgen_d(crystal, (1, 1, 0)))
    m = ft.face.mesh  # reduced: a <= b
    assert (m.a, m.b, m.gamma) == pytest.approx((*sorted([a * S3, c]), 90.0))
    assert all(h == pytest.approx(a / 2) for s in ft.steps for h in s.heights[:1] if s.from_label == s.to_label)


# --------------------------------------------------------------------------- basal faces


def test_hcp_basal_steps_are_half_the_c_axis():
    # hcp (0 0 0 1): ABAB stacking, the B layer the A layer turned by the 6_3 screw: steps c/2 (common practice).
    _, c = cell("hcp:Zn")
    ft = face_terminations(build_prototype("hcp:Zn"), (0, 0, 0, 1))
    assert ft.d == pytest.approx(c)
    assert {t.label for t in ft.terminations} == {"Zn"} and len(ft.terminations) == 2
    assert ft.terminations[1].equivalent_to == "T1"
    assert steps(ft, "Zn", "Zn")[:2] == pytest.approx([c / 2, c])
    assert not any(t.van_der_waals for t in ft.terminations)  # hcp keeps its interlayer bonds


def test_graphite_basal_van_der_waals_layers_335():
    # Bernal graphite (0 0 0 1): graphene sheets c/2 = 3.354 Å apart (common practice: 3.35 Å steps).
    _, c = cell("graphite:C")
    ft = face_terminations(build_prototype("graphite:C"), (0, 0, 1))
    assert steps(ft, "C2", "C2")[0] == pytest.approx(c / 2) == pytest.approx(3.354, abs=0.002)
    assert all(t.van_der_waals for t in ft.terminations) and all(t.broken_bonds_per_nm2 == 0 for t in ft.terminations)


def test_bi2se3_basal_is_one_quintuple_layer_with_9_5_angstrom_steps():
    # Bi2Se3 (0 0 0 1): quintuple layers Se-Bi-Se-Bi-Se between van der Waals gaps, c/3 = 9.545 Å
    # (Nakajima 1963; STM step heights of about 0.95 nm, common practice).
    _, c = cell("tetradymite:Bi,Se")
    ft = face_terminations(build_prototype("tetradymite:Bi,Se"), (0, 0, 0, 1))
    assert len(ft.terminations) == 1
    ql = ft.terminations[0]
    assert ql.label == "Bi2Se3" and ql.composition == {"Se": 3, "Bi": 2} and ql.van_der_waals
    assert len(ql.layers) == 5 and [list(ft.layers[k].composition) for k in ql.layers] == [
        ["Se"],
        ["Bi"],
        ["Se"],
        ["Bi"],
        ["Se"],
    ]
    assert steps(ft, "Bi2Se3", "Bi2Se3")[0] == pytest.approx(c / 3) == pytest.approx(9.545, abs=0.01)


def test_mos2_basal_sandwiches_6_15_angstrom_apart():
    # 2H-MoS2 (0 0 0 1): S-Mo-S sandwiches c/2 = 6.15 Å apart, the second turned by 60°
    # (Bronsema et al. 1986; common practice).
    _, c = cell("2H-MX2:Mo,S")
    ft = face_terminations(build_prototype("2H-MX2:Mo,S"), (0, 0, 0, 1))
    assert [t.label for t in ft.terminations] == ["MoS2", "MoS2"] and ft.terminations[1].equivalent_to == "T1"
    assert all(t.van_der_waals and len(t.layers) == 3 for t in ft.terminations)
    assert steps(ft, "MoS2", "MoS2")[0] == pytest.approx(c / 2) == pytest.approx(6.15, abs=0.01)


def test_layered_crystals_other_faces_break_bonds():
    # Only the basal plane is a van der Waals gap: prismatic faces cut bonds.
    for spec in ("graphite:C", "2H-MX2:Mo,S", "tetradymite:Bi,Se"):
        ft = face_terminations(build_prototype(spec), (1, 0, -1, 0))
        assert all(t.broken_bonds_per_nm2 > 0 and not t.van_der_waals for t in ft.terminations), spec


# --------------------------------------------------------------------------- oxides


def test_rutile_110_mesh_steps_and_the_type_ii_bridging_oxygen_termination():
    # TiO2 rutile (1 1 0): mesh c x a sqrt2 = 2.96 x 6.50 Å, d = a/sqrt2 = 3.25 Å; the stoichiometric
    # termination with bridging O rows on the Ti2O2 plane is Tasker type II (Diebold, Surf. Sci. Rep. 48,
    # 53 (2003), from memory).
    a, c = cell("rutile:Ti,O")
    crystal, _ = with_formal_charges(build_prototype("rutile:Ti,O"))
    ft = face_terminations(crystal, (1, 1, 0))
    m = ft.face.mesh
    assert (m.a, m.b, m.gamma) == pytest.approx((c, a * math.sqrt(2), 90.0))
    assert ft.d == pytest.approx(a / math.sqrt(2)) == pytest.approx(pymatgen_d(crystal, (1, 1, 0)))
    t1 = ft.terminations[0]
    assert t1.label == "O" and [list(ft.layers[k].composition) for k in (0, 1, 2)] == [["O"], ["Ti", "O"], ["O"]]
    assert termination_polarity(crystal, ft, t1.id).tasker_type == "II"
    assert steps(ft, "O", "O")[0] == pytest.approx(a / math.sqrt(2))


def test_rutile_100_mesh_and_half_cell_steps():
    # TiO2 rutile (1 0 0): mesh c x a; the 4_2 screw relates terminations a/2 apart, so steps a/2
    # (common practice); the O-terminated one is Tasker type II.
    a, c = cell("rutile:Ti,O")
    crystal, _ = with_formal_charges(build_prototype("rutile:Ti,O"))
    ft = face_terminations(crystal, (1, 0, 0))
    m = ft.face.mesh
    assert (m.a, m.b, m.gamma) == pytest.approx((c, a, 90.0))
    t1 = ft.terminations[0]
    assert ft.terminations[1].equivalent_to == t1.id
    assert steps(ft, t1.label, t1.label)[0] == pytest.approx(a / 2)
    assert termination_polarity(crystal, ft, t1.id).tasker_type == "II"


def test_corundum_basal_single_aluminium_termination_type_ii_and_c6_steps():
    # alpha-Al2O3 (0 0 0 1): the single-Al termination (half the Al double layer on the O3 layer) is the
    # non-polar Tasker type II one, and equivalent terminations are c/6 = 2.165 Å apart (common practice).
    _, c = cell("corundum:Al,O")
    crystal, _ = with_formal_charges(build_prototype("corundum:Al,O"))
    ft = face_terminations(crystal, (0, 0, 0, 1))
    t1 = ft.terminations[0]
    below = ft.layers[(t1.layers[-1] + 1) % len(ft.layers)]
    assert t1.label == "Al" and below.composition == {"O": 3}
    assert termination_polarity(crystal, ft, t1.id).tasker_type == "II"
    assert steps(ft, "Al", "Al")[0] == pytest.approx(c / 6) == pytest.approx(2.165, abs=0.001)


def test_anatase_101_is_68_3_degrees_from_001():
    # anatase (1 0 1) against (0 0 1): tan(phi) = c/a, 68.3° (Diebold 2003, from memory).
    a, c = cell("anatase:Ti,O")
    crystal = build_prototype("anatase:Ti,O")
    phi = interplanar_angle(crystal, (1, 0, 1), (0, 0, 1))
    assert phi == pytest.approx(math.degrees(math.atan(c / a))) == pytest.approx(68.3, abs=0.05)
    assert face_geometry(crystal, (1, 0, 1), mount=(0, 0, 1)).tilt == pytest.approx(phi)


def test_wurtzite_0001_and_000_1_are_told_apart():
    # ZnO (0 0 0 1) is the Zn-polar face, (0 0 0 -1) the O-polar one (common practice): the cheapest cut
    # leaves the Zn-O bilayer with Zn on top on (0 0 0 1) and O on top on (0 0 0 -1).
    crystal = build_prototype("wurtzite:Zn,O")
    up = face_terminations(crystal, (0, 0, 0, 1))
    down = face_terminations(crystal, (0, 0, 0, -1))
    top_up = up.layers[up.terminations[0].layers[0]].composition
    top_down = down.layers[down.terminations[0].layers[0]].composition
    assert top_up == {"Zn": 1} and top_down == {"O": 1}
    assert up.terminations[0].label == down.terminations[0].label == "ZnO"  # one bilayer either way
    _, c = cell("wurtzite:Zn,O")
    assert steps(up, "ZnO", "ZnO")[0] == pytest.approx(c / 2)


def test_miller_bravais_and_three_index_name_the_same_face():
    crystal = build_prototype("hcp:Zn")
    for four, three in [((1, 0, -1, 0), (1, 0, 0)), ((1, 1, -2, 0), (1, 1, 0)), ((1, 0, -1, 1), (1, 0, 1))]:
        assert face_geometry(crystal, four).d == pytest.approx(face_geometry(crystal, three).d)
