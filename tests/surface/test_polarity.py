"""Polar surfaces: Tasker types, dipoles, compensation and reconstruction cells."""

import warnings

import numpy as np
import pytest

from termination.bulk.charges import assign_charges
from termination.errors import PlaneError
from termination.reports import polarity_report
from termination.serialise import to_jsonable
from termination.surface.polarity import face_is_polar, face_polarity, termination_polarity
from termination.surface.reconstructions import CRITERION, reconstructions
from termination.surface.symmetry import termination_operations
from termination.surface.terminations import face_terminations


def polar_face(crystal, hkl, **options):
    return face_polarity(crystal, face_terminations(crystal, hkl), **options)


@pytest.fixture(scope="module")
def charged():
    """Prototype with its guessed (or given) formal charges attached."""
    from termination.structures import build_prototype

    cache = {}

    def get(spec, charges=None, **kw):
        key = (spec, tuple(sorted((charges or {}).items())), tuple(sorted(kw.items())))
        if key not in cache:
            c = build_prototype(spec, **kw)
            cache[key] = c.with_charges(assign_charges(c, charges).per_atom)
        return cache[key]

    return get


def polarity(crystal, hkl, max_cell=4):
    return {t.label: t for t in polar_face(crystal, hkl, max_cell=max_cell).terminations}


def woods(t):
    return [r.wood for r in t.reconstructions]


# Tasker's three types -------------------------------------------------------------------


def test_rocksalt_001_is_type_I(charged):
    # P. W. Tasker, J. Phys. C 12, 4977 (1979): rock salt (100), neutral layers
    t = polarity(charged("rocksalt:Na,Cl"), (0, 0, 1))["NaCl"]
    assert t.tasker_type == "I" and t.compensation == 0 and t.reconstructions == ()
    assert [L.charge for L in t.layers] == [0.0]


def test_fluorite_111_is_type_II(charged):
    # Tasker 1979: fluorite (111), the F-Ca-F unit is charged layer by layer but has no dipole
    f = polar_face(charged("fluorite:Ca,F"), (1, 1, 1))
    (t,) = f.terminations
    assert t.label == "CaF2" and t.tasker_type == "II" and not f.polar
    assert [round(L.charge, 9) for L in t.layers] == [-1.0, 2.0, -1.0]
    assert abs(t.dipole) < 1e-9


def test_rocksalt_111_is_type_III_half_the_top_layer(charged):
    # Tasker 1979: rock salt (111) is type III; J. Goniakowski, F. Finocchi and
    # C. Noguera, Rep. Prog. Phys. 71, 016501 (2008): the top layer of a +-sigma
    # stack with equal spacings needs sigma/2, i.e. half its ions removed
    c = charged("rocksalt:Na,Cl")
    f = polar_face(c, (1, 1, 1))
    assert f.polar
    by = {t.label: t for t in f.terminations}
    for label, sign in (("Na", 1), ("Cl", -1)):
        t = by[label]
        assert t.tasker_type == "III" and t.site_kind == "top layer" and t.site_label == label
        assert [round(L.charge, 9) for L in t.layers] == [sign, -sign]
        assert t.compensating_charge == pytest.approx(-sign / 2)
        assert t.compensation == pytest.approx(-0.5)
        assert t.dipole == pytest.approx(-sign * f.d / 2)  # mu = sum q z with z the depth
        assert t.dipole_per_area == pytest.approx(t.dipole / f.area)
        assert "(2×1)" in woods(t)


# Perovskites with formal charges -------------------------------------------------------------


def test_perovskite_001_AO_and_BO2_are_type_I(charged):
    # Tasker 1979; Goniakowski et al. 2008: SrO and TiO2 planes are neutral with formal charges
    f = polar_face(charged("perovskite:Sr,Ti,O"), (0, 0, 1))
    assert {t.label: t.tasker_type for t in f.terminations} == {"SrO": "I", "TiO2": "I"}
    assert not f.polar


def test_perovskite_110_is_type_III(charged):
    # Goniakowski et al. 2008: SrTiO3 (110) alternates (SrTiO)4+ and (O2)4- planes,
    # each termination needs 2 e per cell: half of the top layer
    f = polar_face(charged("perovskite:Sr,Ti,O"), (1, 1, 0))
    assert f.polar
    by = {t.label: t for t in f.terminations}
    assert [round(L.charge, 9) for L in by["O2"].layers] == [-4.0, 4.0]
    assert by["O2"].compensating_charge == pytest.approx(2.0)
    assert by["SrTiO"].compensating_charge == pytest.approx(-2.0)
    for t in by.values():
        assert t.tasker_type == "III" and t.compensation == pytest.approx(-0.5)
    # One of the two O of a 1×1 cell can go: named for what it is, never a "(1×1)" reconstruction (issue 13)
    names = [r.name for r in by["O2"].reconstructions]
    assert "1×1 with 1 of 2 O removed" in names
    assert "(1×1)" not in names and "(1×1)" not in woods(by["O2"])
    (one,) = [r for r in by["O2"].reconstructions if r.name.startswith("1×1")]
    assert one.wood is None and one.sites == 2 and one.changed == 1


# Hexaborides -----------------------------------------------------------------------------------


@pytest.mark.parametrize("valence", [2, 2.5, 3])
def test_hexaboride_metal_termination_loses_half_whatever_the_valence(charged, valence):
    # The B6 octahedron sits halfway between metal planes, so mu = q_M d/2 and
    # dq = -q_M/2 for any metal charge q_M (Tasker, J. Phys. C 12, 4977 (1979): type III,
    # half of the metal layer to remove); (2×1) and c(2×2) are the index-2 cells that do it.
    c = charged("hexaboride:La,B", {"La": valence})
    by = polarity(c, (0, 0, 1), max_cell=4)
    la = by["La"]
    assert la.tasker_type == "III" and la.site_kind == "top layer"
    assert la.compensating_charge == pytest.approx(-valence / 2)
    assert la.compensation == pytest.approx(-0.5)
    assert {"(2×1)", "c(2×2)"} <= set(woods(la))
    b6 = by["B6"]
    assert b6.site_kind == "top unit" and b6.site_label == "B6" and b6.compensation == pytest.approx(-0.5)


def test_hexaboride_reconstruction_records(charged):
    c = charged("hexaboride:La,B")
    ft = face_terminations(c, (0, 0, 1))
    recs = {r.wood: r for r in termination_polarity(c, ft, "La", max_cell=4).reconstructions}
    r = recs["c(2×2)"]
    assert r.mode == "remove" and r.sites == 2 and r.changed == 1 and r.criterion == CRITERION
    assert round(abs(np.linalg.det(np.array(r.matrix)))) == 2
    assert r.changed_inplane.shape == (1, 2) and r.changed_depth.tolist() == [0.0]
    assert r.changed_species == ("La",)
    assert np.allclose(r.cell_inplane, np.array(r.matrix) @ ft.atoms.mesh_inplane)
    # c(2×2) spreads the vacancies further than (2×1) rows: lower Ewald energy
    assert recs["c(2×2)"].score < recs["(2×1)"].score
    unit = {x.wood: x for x in termination_polarity(c, ft, "B6", max_cell=2).reconstructions}["c(2×2)"]
    assert unit.changed_atoms_species == ("B",) * 6 and unit.changed_atoms_depth.min() == 0.0
    assert unit.changed_species == ("B",) and unit.changed_depth.tolist() == [0.0]  # the apical B stands for it


def test_mixed_valence_hexaboride(charged):
    # EuB6 with Eu +2.2 (a non-integer valence to exercise the fraction path; the count of
    # Tasker, J. Phys. C 12, 4977 (1979) gives half the metal layer for any metal charge)
    by = polarity(charged("hexaboride:Eu,B", {"Eu": 2.2}), (0, 0, 1), max_cell=2)
    assert by["Eu"].compensation == pytest.approx(-0.5)
    assert by["Eu"].compensating_charge == pytest.approx(-1.1)
    assert {"(2×1)", "c(2×2)"} <= set(woods(by["Eu"]))


# Zinc blende ------------------------------------------------------------------------------------


def test_zincblende_110_nonpolar_001_and_111_polar(charged):
    # W. A. Harrison, J. Vac. Sci. Technol. 16, 1492 (1979): (110) of zinc blende
    # is non-polar, (001) and (111) are polar
    c = charged("zincblende:Ga,As")
    assert polar_face(c, (1, 1, 0), max_cell=1).terminations[0].tasker_type == "I"
    for hkl in [(0, 0, 1), (1, 1, 1), (-1, -1, -1)]:
        f = polar_face(c, hkl, max_cell=4)
        assert f.polar, hkl
        assert all(t.tasker_type == "III" for t in f.terminations)


def test_zincblende_111_two_spacings_and_the_2x2_vacancy_cell(charged):
    # Goniakowski et al. 2008: for +-sigma planes with spacings R_in (top plane to
    # the next) and R_out, the top plane must carry sigma R_out / (R_in + R_out).
    # GaAs (111): R_in = a√3/12, R_out = a√3/4 -> 3/4 sigma, a quarter of the Ga
    # removed; S. Y. Tong, G. Xu and W. N. Mei, Phys. Rev. Lett. 52, 1693 (1984):
    # GaAs(111) (2×2) with one Ga vacancy per cell.
    c = charged("zincblende:Ga,As")
    (t,) = polar_face(c, (1, 1, 1), max_cell=4).terminations
    top, below = t.layers
    r_in = below.depth - top.depth
    r_out = face_terminations(c, (1, 1, 1)).d - r_in
    assert r_in == pytest.approx(5.653 * np.sqrt(3) / 12, abs=1e-3)
    assert top.charge + t.compensating_charge == pytest.approx(top.charge * r_out / (r_in + r_out))
    assert t.compensation == pytest.approx(-0.25) and t.site_label == "Ga"
    best = t.reconstructions[0]
    assert best.wood == "(2×2)" and best.changed == 1 and best.sites == 4


def test_zincblende_001_needs_half_of_the_top_layer(charged):
    # Harrison 1979: the (001) planes are +-3 e per cell at spacing d/2, so half the top layer goes
    by = polarity(charged("zincblende:Ga,As"), (0, 0, 1), max_cell=2)
    for label in ("Ga", "As"):
        assert by[label].compensation == pytest.approx(-0.5)
        # 2mm surface: (2×1) and (1×2) are different cells here
        assert {"(2×1)", "(1×2)", "c(2×2)"} <= set(woods(by[label]))


# Cross-check against pymatgen ---------------------------------------------------------------------


def _pymatgen_slabs(crystal, charges, hkl):
    from pymatgen.core import Lattice, Structure
    from pymatgen.core.surface import SlabGenerator

    s = Structure(Lattice(crystal.lattice), crystal.species, crystal.positions)
    s.add_oxidation_state_by_element(charges)
    gen = SlabGenerator(s, hkl, min_slab_size=10, min_vacuum_size=10, center_slab=True, primitive=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return gen.get_slabs(ftol=0.05, filter_out_sym_slabs=False)


def _top_sequence(species, depth, n):
    order = np.lexsort((np.array(species), np.round(depth, 2)))[:n]
    return sorted((species[i], round(float(depth[i]), 2)) for i in order)


@pytest.mark.parametrize(
    "spec, hkl",
    [
        ("rocksalt:Na,Cl", (1, 1, 1)),
        ("rocksalt:Na,Cl", (0, 0, 1)),
        ("perovskite:Sr,Ti,O", (1, 1, 0)),
        ("perovskite:Sr,Ti,O", (0, 0, 1)),
        ("hexaboride:La,B", (0, 0, 1)),
        ("zincblende:Ga,As", (1, 1, 1)),
        ("zincblende:Ga,As", (0, 0, 1)),
        ("fluorite:Ca,F", (1, 1, 1)),
    ],
)
def test_dipoles_agree_with_pymatgen_slabs(charged, spec, hkl):
    # pymatgen Slab.dipole and Slab.is_polar.  SlabGenerator cuts whole oriented
    # cells, so each of its slabs is N complete repeat units of one termination;
    # we pick the slab whose top repeat unit (species and depths) is ours.  Its
    # outward-normal dipole is then -N mu per surface cell (our z is the depth),
    # scaled by the slab cell's area over the primitive mesh's.
    c = charged(spec)
    charges = assign_charges(c).charges
    ft = face_terminations(c, hkl)
    slabs = _pymatgen_slabs(c, charges, hkl)
    assert slabs
    for t in ft.terminations:
        if t.equivalent_to is not None:
            continue
        ru = ft.repeat_unit(t.id)
        ours = _top_sequence(list(ru.species), ru.depth - ru.depth.min(), len(ru.species))
        mine = termination_polarity(c, ft, t.id, with_reconstructions=False)
        matched = 0
        for slab in slabs:
            z = slab.cart_coords @ slab.normal
            ratio = slab.surface_area / ft.face.mesh.area
            n_top = int(round(len(ru.species) * ratio))
            species = [site.specie.symbol for site in slab]
            theirs = _top_sequence(species, z.max() - z, n_top)
            if ratio > 1.5 or theirs != ours:
                continue
            units = len(slab) / len(ru.species) / ratio
            per_cell = float(slab.dipole @ slab.normal) / (units * ratio)
            assert per_cell == pytest.approx(-mine.dipole, abs=1e-6)
            assert slab.is_polar() == (mine.tasker_type == "III")
            matched += 1
        assert matched, (spec, hkl, t.label)


# Symmetry and invariants ----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "spec, hkl, key, order",
    [
        ("rocksalt:Na,Cl", (0, 0, 1), "NaCl", 8),  # plane group p4mm  # International Tables Vol. A
        ("rocksalt:Na,Cl", (1, 1, 1), "Na", 6),  # p3m1
        ("zincblende:Ga,As", (0, 0, 1), "As", 4),  # p2mm: the -4 axis swaps the terminations
        ("zincblende:Ga,As", (1, 1, 0), "GaAs", 2),  # pm: a mirror perpendicular to the surface
    ],
)
def test_termination_point_groups(charged, spec, hkl, key, order):
    c = charged(spec)
    ops = termination_operations(c, face_terminations(c, hkl).face)
    assert len(ops) == order
    assert np.array_equal(ops[0], np.eye(2, dtype=int))
    assert all(abs(round(np.linalg.det(s))) == 1 for s in ops)


def test_equivalent_faces_give_identical_results(charged):
    c = charged("rocksalt:Na,Cl")

    def summary(hkl):
        return [
            (t.label, t.tasker_type, round(t.compensation, 9), tuple(sorted(map(str, woods(t)))))
            for t in polar_face(c, hkl, max_cell=4).terminations
        ]

    ref = summary((1, 1, 1))
    for hkl in [(-1, 1, 1), (1, -1, -1), (1, 1, -1)]:
        assert summary(hkl) == ref


def test_rotated_and_shifted_input_cell_gives_the_same_polarity():
    from termination.bulk.crystal import build_crystal

    rng = np.random.default_rng(7)
    from termination.testing import random_rotation

    a = 5.64
    pos = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])
    positions = np.vstack([pos, pos + 0.5]) % 1.0
    positions = (positions + rng.random(3)) % 1.0
    lattice = (np.eye(3) * a) @ random_rotation(rng).T
    c = build_crystal(lattice, positions, ["Na"] * 4 + ["Cl"] * 4)
    c = c.with_charges(assign_charges(c).per_atom)
    by = polarity(c, (1, 1, 1))
    assert by["Na"].compensation == pytest.approx(-0.5) and "(2×1)" in woods(by["Na"])


def test_reconstructions_realise_the_fraction_with_whole_sites(charged):
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    recs = reconstructions(c, ft, "Na", -1 / 3, max_cell=6, layers=1)
    assert recs and all(r.changed == round(r.sites / 3) for r in recs)
    assert all(round(abs(np.linalg.det(np.array(r.matrix)))) == r.sites for r in recs)
    # a third of a triangular layer: the √3 vacancy lattice has the lowest energy  # common practice
    assert recs[0].wood == "(√3×√3)R30°"
    scores = [r.score for r in recs]
    assert scores == sorted(scores)


def test_adatom_mode(charged):
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    (r,) = [x for x in reconstructions(c, ft, "Cl", 0.5, max_cell=2) if x.wood == "(2×1)"]
    assert r.mode == "add" and r.changed == 1
    assert r.changed_depth == pytest.approx([-ft.d])  # the Cl site one period up
    assert r.changed_species == ("Cl",)


def test_report_json_has_the_documented_fields(charged):
    from termination.structures import build_prototype

    report = polarity_report(build_prototype("rocksalt:Na,Cl"), plane=(1, 1, 1), max_cell=2)
    data = to_jsonable(report)
    (face,) = data["faces"]
    assert face["hkl"] == [1, 1, 1]
    t = face["terminations"][0]
    assert {"label", "tasker_type", "dipole_per_area_e_per_angstrom", "compensation", "reconstructions"} <= set(t)
    rec = t["reconstructions"][0]
    assert {"matrix", "wood", "sites", "changed"} <= set(rec)
    assert rec["matrix"] == [[2, 0], [0, 1]] and rec["wood"] == "(2×1)" and rec["changed"] == 1
    assert data["charges"]["charges_e"] == {"Na": 1.0, "Cl": -1.0}


def test_face_is_polar_needs_charges(proto, charged):
    assert face_is_polar(face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1))) is None
    assert face_is_polar(face_terminations(charged("rocksalt:Na,Cl"), (1, 1, 1))) is True
    assert face_is_polar(face_terminations(charged("rocksalt:Na,Cl"), (0, 0, 1))) is False


@pytest.mark.parametrize("max_cell", [0, 13, 2.5, float("nan")])
def test_bad_max_cell(proto, max_cell):
    with pytest.raises(PlaneError, match="max cell"):
        polarity_report(proto("rocksalt:Na,Cl"), plane=(1, 1, 1), max_cell=max_cell)


@pytest.mark.parametrize("fraction", [0, 1, -1, 1.5, float("nan")])
def test_bad_fraction(charged, fraction):
    c = charged("rocksalt:Na,Cl")
    with pytest.raises(PlaneError, match="fraction"):
        reconstructions(c, face_terminations(c, (1, 1, 1)), "Na", fraction)


def test_plane_and_max_index_together_are_refused(proto):
    with pytest.raises(PlaneError, match="not both"):
        polarity_report(proto("rocksalt:Na,Cl"), plane=(1, 1, 1), max_index=2)


def test_uncharged_terminations_are_refused(proto):
    from termination.errors import ChargeError

    c = proto("rocksalt:Na,Cl")
    with pytest.raises(
        ChargeError, match=r"no charges; build the terminations from a crystal with charges \(Crystal\.with_charges\)"
    ):
        termination_polarity(c, face_terminations(c, (1, 1, 1)), "Na")


# Every option changes the result; the notes say why a compensation is missing ---------------------


def test_nonpolar_termination_has_no_sites_and_no_note(charged):
    # Tasker 1979: rock salt (100) is type I, nothing to compensate
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (0, 0, 1))
    (t,) = polar_face(c, (0, 0, 1)).terminations
    assert t.id == ft.terminations[0].id
    assert t.note is None and t.site_kind is None and t.site_label is None


def test_rocksalt_111_exact_cells_leave_no_note(charged):
    # Goniakowski et al. 2008: half of the top layer, realised by (2×1) within index 4
    t = polarity(charged("rocksalt:Na,Cl"), (1, 1, 1))["Na"]
    assert t.reconstructions and t.reconstructions[0].exact and t.note is None


def test_tolerances_at_the_boundary_count_as_zero(charged):
    # common practice: a value equal to its tolerance counts as zero (|x| <= tol)
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    t = termination_polarity(c, ft, "Na", with_reconstructions=False)
    # the Na and Cl layers carry exactly +-1 e per cell (formal charges, one ion per cell)
    neutral = termination_polarity(c, ft, "Na", charge_tol_e=1.0, with_reconstructions=False)
    assert neutral.tasker_type == "I" and neutral.compensation == 0
    assert neutral.note == "neutral layers, but their rumpling gives the repeat unit a dipole"
    # a dipole equal to its tolerance is no dipole: charged layers without one are type II
    tol = abs(t.dipole_per_area)
    assert (
        termination_polarity(c, ft, "Na", dipole_tol_e_per_angstrom=tol, with_reconstructions=False).tasker_type == "II"
    )
    quiet = termination_polarity(
        c, ft, "Na", charge_tol_e=1.0, dipole_tol_e_per_angstrom=tol, with_reconstructions=False
    )
    assert quiet.tasker_type == "I" and quiet.note is None
    # mu / A, not mu * A: a tolerance between the two leaves the type II unit without a note
    assert ft.face.mesh.area > 2
    between = termination_polarity(
        c, ft, "Na", charge_tol_e=1.0, dipole_tol_e_per_angstrom=2 * tol, with_reconstructions=False
    )
    assert between.note is None


def test_compensation_beyond_the_fraction_tolerance_is_flagged(charged):
    # Goniakowski et al. 2008: rock salt (111) needs 1/2 of the top layer; with a fraction tolerance
    # of 1/2 that is "all the sites", which the model cannot support: flagged, no cells offered
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    t = termination_polarity(c, ft, "Na", fraction_tol=0.5)
    assert t.compensation == -0.5 and t.reconstructions == ()
    assert t.note == "compensation needs 1/2 of the top layer: more than these sites can give"


def test_no_reconstruction_search_when_switched_off(charged):
    # Goniakowski et al. 2008: rock salt (111) needs half of the top layer, whether or not cells are searched
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    t = termination_polarity(c, ft, "Na", with_reconstructions=False)
    assert t.compensation == -0.5 and t.reconstructions == () and t.note is None
    f = face_polarity(c, ft, with_reconstructions=False)
    assert all(r.reconstructions == () for r in f.terminations)
    with pytest.raises(TypeError, match="^termination_polarity needs the crystal to search reconstructions$"):
        termination_polarity(None, ft, "Na")


def test_tolerances_reach_every_termination(charged):
    # Tasker 1979: rock salt (111) is type III; with a dipole tolerance above its dipole (0.12 e/Å) the
    # charged layers are read as type II, and the face is no longer polar
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    assert face_is_polar(ft) is True
    assert face_is_polar(ft, dipole_tol_e_per_angstrom=1.0) is False
    f = face_polarity(c, ft, dipole_tol_e_per_angstrom=1.0)
    assert not f.polar and {t.tasker_type for t in f.terminations} == {"II"}


def test_compensation_layers_option(charged):
    # compensation_layers: with one layer only the top Na layer gives the charge; with two the Cl
    # layer below may too (Goniakowski et al. 2008: rock salt (111), half of the top layer)
    c = charged("rocksalt:Na,Cl")
    ft = face_terminations(c, (1, 1, 1))
    one = termination_polarity(c, ft, "Na", layers=1)
    two = termination_polarity(c, ft, "Na", layers=2)
    assert {r.layer_labels for r in one.reconstructions} == {("Na",)}
    assert ("Na", "Cl") in {r.layer_labels for r in two.reconstructions}


def test_nearest_cells_when_none_is_exact(charged):
    # Goniakowski et al. 2008: the Zn-terminated zinc-blende (111) bilayer needs dq = -1/2 e per cell,
    # a quarter of its Zn2+ (the 2×2 vacancy cell, index 4).  Up to index 2 the nearest is (2×1), one
    # Zn of two: 1 e per cell, 0.5 e too many; up to index 3 (√3×√3)R30° and (3×1), one of three:
    # 2/3 e per cell, 1/6 e too many.  Up to index 1 no cell changes any site.
    z = charged("zincblende:Zn,S")
    ft = face_terminations(z, (1, 1, 1))
    t = termination_polarity(z, ft, "ZnS", max_cell=2)
    assert t.compensation == -0.25
    assert [(r.name, r.exact) for r in t.reconstructions] == [("(2×1)", False)]
    assert t.note == (
        "no cell up to index 2 realises 1/4 of the top layer exactly; nearest: (2×1) (+0.500 e per cell left); "
        "the remainder is left to electronic compensation or adsorbates"
    )
    t3 = termination_polarity(z, ft, "ZnS", max_cell=3)
    assert t3.note is not None and t3.note.startswith("no cell up to index 3 realises 1/4")
    assert "(√3×√3)R30° (+0.167 e per cell left), (3×1) (+0.167 e per cell left);" in t3.note
    t1 = termination_polarity(z, ft, "ZnS", max_cell=1)
    assert t1.reconstructions == () and t1.note == "no supercell up to index 1 realises 1/4 of the sites"


def test_layer_charges_follow_the_layer_tolerance(charged):
    # zinc-blende (111): Zn and S planes a quarter of the (111) spacing apart, a sqrt(3)/12 = 0.78 Å
    # (common practice); a tolerance above that merges the bilayer into one neutral layer
    from termination.surface.polarity import layer_charges

    z = charged("zincblende:Zn,S")
    ft = face_terminations(z, (1, 1, 1))
    ru = ft.repeat_unit("ZnS")
    split = layer_charges(ru, 0.1)
    assert [(L.composition, round(L.charge, 9)) for L in split] == [({"Zn": 1}, 2.0), ({"S": 1}, -2.0)]
    assert split[1].depth == pytest.approx(ft.d / 4)
    (merged,) = layer_charges(ru, 1.2)
    assert merged.composition == {"Zn": 1, "S": 1} and merged.charge == 0.0
    assert merged.depth == pytest.approx(ft.d / 8)


@pytest.mark.parametrize(
    ("f", "text"),
    [(-0.25, "1/4"), (0.5, "1/2"), (2 / 3, "2/3"), (1 / 24, "1/24"), (0.04, "0.04"), (0.123456, "0.1235")],
)
def test_fraction_text(f, text):
    # the notes write a compensation as a fraction with denominator up to 24, else with 4 significant
    # digits (common practice); 1/25 = 0.04 is beyond the denominator limit
    from termination.surface.polarity import _fraction_text

    assert _fraction_text(f) == text


def test_nearest_note_lists_three_cells_and_counts_the_rest(charged):
    # the note names the first three distinct cells and counts the others
    from termination.surface.polarity import _nearest_note

    z = charged("zincblende:Zn,S")
    three = termination_polarity(z, face_terminations(z, (1, 1, 1)), "ZnS", max_cell=4).reconstructions
    assert [r.name for r in three] == ["(2×2)", "(2 0 / 1 2)", "(4×1)"]
    cells = "(2×2) (+0.000 e per cell left), (2 0 / 1 2) (+0.000 e per cell left), (4×1) (+0.000 e per cell left)"
    assert _nearest_note(three, -0.25, 4, "top layer") == (
        f"no cell up to index 4 realises 1/4 of the top layer exactly; nearest: {cells}; "
        "the remainder is left to electronic compensation or adsorbates"
    )
    c = charged("rocksalt:Na,Cl")
    six = termination_polarity(c, face_terminations(c, (1, 1, 1)), "Na", max_cell=4).reconstructions
    assert len(six) == 6 and len({r.name for r in six}) == 4  # two cells appear twice
    note = _nearest_note(six, -0.5, 4, "top layer")
    assert note.count("e per cell left") == 3 and " and 1 more;" in note


def test_antifluorite_111_single_cation_layer_needs_all_of_it(charged):
    # Tasker 1979: fluorite-type (111) is type II only for the full X-M-X unit; cut inside it
    # (a single Li layer on top of Li2O, layers +1, +1, -2 e per cell) the unit is polar and needs
    # the whole top layer removed, which leaves the type II unit: flagged, not offered as a cell
    c = charged("antifluorite:Li,O")
    ft = face_terminations(c, (1, 1, 1))
    t = termination_polarity(c, ft, "Li'", max_cell=2)
    assert [round(L.charge, 9) for L in t.layers] == [1.0, 1.0, -2.0]
    assert t.tasker_type == "III" and t.compensation == -1.0 and t.reconstructions == ()
    assert t.note == "compensation needs 1/1 of the top layer: more than these sites can give"
    # a charge tolerance equal to the top layer's charge makes it neutral (common practice: |x| <= tol
    # is zero) while the O layer stays charged: the compensation must come from deeper
    deep = termination_polarity(c, ft, "Li'", max_cell=2, charge_tol_e=1.0)
    assert deep.tasker_type == "III" and deep.compensation is None and deep.reconstructions == ()
    assert deep.note == "the top unit and top layer are neutral: the compensation must come from deeper layers"


def test_positive_compensation_adds_top_layer_sites_only(charged):
    # corundum (1 1 -2 0) with an O2 top layer: dq / Q > 0, sites to add (Goniakowski et al. 2008,
    # the layer-stack condition sigma_top' = sigma_top + dq); an added site belongs to the top layer,
    # never to the Al layer below (common practice: adatoms continue the bulk stacking)
    c = charged("corundum:Al,O")
    ft = face_terminations(c, (1, 1, 0))
    t = termination_polarity(c, ft, "O2", max_cell=2)
    assert t.tasker_type == "III" and t.site_label == "O"
    assert t.compensation == pytest.approx(t.compensating_charge / -4.0) and t.compensation > 0
    assert t.reconstructions and t.note is None
    assert {(r.mode, r.layer_labels) for r in t.reconstructions} == {("add", ("O",))}
