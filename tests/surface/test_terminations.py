import numpy as np
import pytest

from termination import StructureError, build_crystal
from termination.surface.terminations import face_terminations
from termination.testing import random_rotation


def steps_between(ft, a, b):
    for s in ft.steps:
        if (s.from_label, s.to_label) == (a, b):
            return np.array(s.heights)
    raise KeyError((a, b))


def test_diamond_001_single_and_double_steps(proto):
    c = proto("diamond:Si")  # a = 5.431 Å (from memory)
    ft = face_terminations(c, (0, 0, 1))
    a = c.cell_parameters[0]
    assert len(ft.terminations) == 2
    t1, t2 = ft.terminations
    # The two Si(001) layers are related by the 4_2 screw: equivalent, same label,
    # rotated 90° (dimer rows turn by 90° across a single-layer step; common practice).
    assert t1.label == t2.label == "Si" and t2.equivalent_to == t1.id and "90" in t2.relation
    h = steps_between(ft, "Si", "Si")
    # single-layer steps a/4 = 1.358 Å, double steps a/2 (Chadi, Phys. Rev. Lett. 59, 1691 (1987))
    assert h[0] == pytest.approx(a / 4, abs=1e-4) and h[0] == pytest.approx(1.358, abs=1e-3)
    assert h[1] == pytest.approx(a / 2, abs=1e-4)


def test_si_111_bilayer_step(proto):
    ft = face_terminations(proto("diamond:Si"), (1, 1, 1))
    assert len(ft.terminations) == 1 and ft.terminations[0].composition == {"Si": 2}  # bilayer (common practice)
    assert ft.smallest_step == pytest.approx(5.431 / np.sqrt(3), abs=1e-4)  # 3.135 Å
    assert ft.smallest_step == pytest.approx(3.135, abs=1e-3)


@pytest.mark.parametrize(
    "hkl, step_over_a", [((1, 1, 1), 1 / np.sqrt(3)), ((0, 0, 1), 0.5), ((0, 1, 1), 1 / (2 * np.sqrt(2)))]
)
def test_fcc_monatomic_steps(proto, hkl, step_over_a):
    # monatomic fcc steps: (111) a/sqrt3, (001) a/2, (110) a/(2 sqrt2) (common practice)
    for spec in ("fcc:Cu", "fcc:Pt"):
        c = proto(spec)
        ft = face_terminations(c, hkl)
        assert len(ft.terminations) == 1
        assert ft.smallest_step == pytest.approx(step_over_a * c.cell_parameters[0], rel=1e-9)


def test_rocksalt_001_one_mixed_termination(proto):
    c = proto("rocksalt:Na,Cl")
    ft = face_terminations(c, (0, 0, 1))
    assert [t.composition for t in ft.terminations] == [{"Na": 1, "Cl": 1}]
    assert ft.smallest_step == pytest.approx(5.64 / 2)  # NaCl(001) steps a/2 = 2.82 Å (common practice)


def test_rocksalt_111_has_two_single_species_terminations(proto):
    ft = face_terminations(proto("rocksalt:Mg,O"), (1, 1, 1))
    assert sorted(t.label for t in ft.terminations) == ["Mg", "O"]  # polar MgO(111) (Tasker 1979)


def test_fluorite_111_triple_layer_unit(proto):
    c = proto("fluorite:Ca,F")
    ft = face_terminations(c, (1, 1, 1))
    assert len(ft.terminations) == 1
    t = ft.terminations[0]
    assert t.composition == {"Ca": 1, "F": 2} and len(t.layers) == 3  # F-Ca-F unit (Tasker 1979)
    assert ft.layers[t.layers[0]].composition == {"F": 1}  # F on top
    # CaF2(111) steps a/sqrt3 = 3.15 Å (common practice)
    assert ft.smallest_step == pytest.approx(5.463 / np.sqrt(3), abs=1e-3)
    assert ft.smallest_step == pytest.approx(3.15, abs=0.01)


def test_perovskite_001_half_unit_cell_steps(proto):
    c = proto("perovskite:Sr,Ti,O")
    ft = face_terminations(c, (0, 0, 1))
    assert sorted(t.label for t in ft.terminations) == ["SrO", "TiO2"]
    a = c.cell_parameters[0]
    # SrTiO3(001): half-unit-cell steps a/2 = 1.95 Å between SrO and TiO2 (common practice)
    assert steps_between(ft, "SrO", "TiO2")[0] == pytest.approx(a / 2)
    assert steps_between(ft, "TiO2", "TiO2")[0] == pytest.approx(a)


def test_hexaboride_001_metal_and_intact_b6(proto):
    ft = face_terminations(proto("hexaboride:La,B"), (0, 0, 1))
    labels = sorted(t.label for t in ft.terminations)
    # LaB6(001): La-terminated or B6-terminated, octahedra intact (common practice)
    assert labels == ["B6", "La"]
    b6 = ft.termination("B6")
    assert len(b6.layers) == 3
    assert all(not c.allowed for c in ft.cuts if c.unit_bonds > min(x.unit_bonds for x in ft.cuts))


def test_half_heusler_111_three_terminations_and_reverse_order(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    up = face_terminations(c, (1, 1, 1))
    down = face_terminations(c, (-1, -1, -1))
    assert sorted(t.label for t in up.terminations) == ["Ni", "Sn", "Ti"]
    d = up.d
    # Layer stacking along [111] Sn(4a) - Ni(4d) at d/4 - Ti(4b) at d/2 (Wyckoff positions, International Tables):
    # steps between different terminations are d/4, d/2 and 3d/4.
    deltas = sorted({round(s.heights[0] / d, 6) for s in up.steps if s.from_label != s.to_label})
    assert deltas == pytest.approx([0.25, 0.5, 0.75])
    seq_up = [l.composition for l in up.layers]
    seq_down = [l.composition for l in down.layers]
    # reading the stack from the other side reverses the order of the layers
    assert [list(c)[0] for c in seq_up] != [list(c)[0] for c in seq_down]
    assert steps_between(up, "Sn", "Ni")[0] == pytest.approx(steps_between(down, "Ni", "Sn")[0])


@pytest.mark.parametrize(
    "spec, hkl",
    [("half-heusler:Ti,Ni,Sn", (1, 1, 3)), ("perovskite:Sr,Ti,O", (0, 1, 2)), ("hexaboride:La,B", (1, 1, 1))],
)
def test_steps_close_the_period(proto, spec, hkl):
    ft = face_terminations(proto(spec), hkl)
    first = {(s.from_label, s.to_label): s.heights[0] for s in ft.steps}
    for (a, b), h in first.items():
        if a != b:
            # up from a to b, then up from b to a again: one period d (invariant)
            assert h + first[(b, a)] == pytest.approx(ft.d, abs=1e-5)
        else:
            assert h == pytest.approx(ft.d, abs=1e-5)


@pytest.mark.parametrize("spec", ["half-heusler:Ti,Ni,Sn", "perovskite:Sr,Ti,O", "hexaboride:La,B"])
def test_layers_hold_one_primitive_cell(proto, spec):
    c = proto(spec)
    ft = face_terminations(c, (1, 1, 0))
    total = {}
    for layer in ft.layers:
        for el, n in layer.composition.items():
            total[el] = total.get(el, 0) + n
    per_prim = {el: c.species.count(el) // len(c.centring) for el in set(c.species)}
    assert total == per_prim


def _signature(ft):
    return (
        round(ft.d, 6),
        tuple((round(l.depth, 4), tuple(sorted(l.composition.items()))) for l in ft.layers),
        tuple((t.label, round(t.broken_bonds_per_nm2, 4)) for t in ft.terminations),
        tuple((s.from_label, s.to_label, tuple(round(h, 4) for h in s.heights)) for s in ft.steps),
    )


def test_symmetry_equivalent_faces_give_identical_results(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    ref = _signature(face_terminations(c, (1, 1, 1)))
    for v in [(1, -1, -1), (-1, 1, -1), (-1, -1, 1)]:  # Td variants of (111)
        assert _signature(face_terminations(c, v)) == ref


def test_rotated_shifted_input_gives_same_terminations(proto):
    c = proto("perovskite:Sr,Ti,O")
    rng = np.random.default_rng(3)
    R = random_rotation(rng)
    moved = build_crystal(c.lattice @ R.T, (c.positions + rng.random(3)) % 1, c.species)
    for hkl in [(0, 0, 1), (1, 1, 0), (1, 1, 1)]:
        assert _signature(face_terminations(moved, hkl)) == _signature(face_terminations(c, hkl))


def test_surface_atoms_start_at_top_layer(proto):
    ft = face_terminations(proto("perovskite:Sr,Ti,O"), (0, 0, 1))
    s = ft.surface_atoms("SrO", 2.5)
    top = s.depth < 1e-6
    assert sorted(np.array(s.species)[top]) == ["O", "Sr"]
    assert np.all(s.unit[top] == 0) and np.all(s.unit[s.depth > 1.0] == 1)
    r = ft.repeat_unit("SrO")
    assert sorted(r.species) == ["O", "O", "O", "Sr", "Ti"]  # one formula unit per period


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"layer_tol_angstrom": -0.1}, "layer tolerance"),
        ({"unit_ratio": 0.5}, "unit ratio"),
        ({"bond_cutoff_angstrom": float("nan")}, "bond cutoff"),
        ({"max_multiple": -1}, "max multiple"),
    ],
)
def test_bad_options_are_rejected(proto, kwargs, message):
    with pytest.raises(StructureError, match=message):
        face_terminations(proto("fcc:Cu"), (1, 1, 1), **kwargs)


def test_unknown_termination_names_the_choices(proto):
    ft = face_terminations(proto("perovskite:Sr,Ti,O"), (0, 0, 1))
    with pytest.raises(StructureError, match="SrO"):
        ft.termination("LaO")


def test_max_multiple_has_a_ceiling(proto):
    with pytest.raises(StructureError, match="0 to 50"):
        face_terminations(proto("fcc:Cu"), (1, 1, 1), max_multiple=100000)


def test_unknown_termination_message_prints_miller_index_plainly(proto):
    ft = face_terminations(proto("fcc:Cu"), (1, 1, 1))
    with pytest.raises(StructureError, match=r"face \(1 1 1\) has no termination"):
        ft.termination("Xx")


# Surface atoms and repeat units: the images below the top layer, their order, the depth bounds.


def _lattice_offsets(ft, atoms):
    """Offsets of every atom from the first, in the basis (mesh a, mesh b, stacking vector) of the face."""
    basis = np.zeros((3, 3))
    basis[:2, :2] = ft.atoms.mesh_inplane
    basis[2, :2] = ft.atoms.stack_inplane
    basis[2, 2] = ft.d
    xyz = np.column_stack([atoms.inplane, -atoms.depth])
    return (xyz - xyz[0]) @ np.linalg.inv(basis)


def test_images_below_the_top_layer_sit_on_the_bulk_lattice(proto):
    # fcc has one atom per primitive cell, so every atom of the surface down to any depth is a
    # lattice translation of the first: ABC stacking of (1 1 1) (common practice).
    ft = face_terminations(proto("fcc:Cu"), (1, 1, 1))
    atoms = ft.surface_atoms("T1", 3 * ft.d)
    assert len(atoms.depth) == 4 and np.unique(np.round(atoms.depth, 6)).size == 4
    frac = _lattice_offsets(ft, atoms)
    assert np.allclose(frac, np.round(frac), atol=1e-9)


def test_surface_atoms_are_sorted_by_depth_then_position_with_integer_units(proto):
    ft = face_terminations(proto("perovskite:Sr,Ti,O"), (0, 0, 1))
    atoms = ft.surface_atoms("TiO2", 2.5)
    keys = [(round(z, 9), round(x, 9), round(y, 9)) for z, (x, y) in zip(atoms.depth, atoms.inplane)]
    assert keys == sorted(keys) and len(keys) == 5  # TiO2 over SrO, a/2 = 1.95 Å apart
    assert atoms.unit.dtype.kind == "i" and atoms.unit.tolist() == [0, 0, 0, 1, 1]


def test_an_atom_exactly_at_the_depth_limit_is_included(proto):
    ft = face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1))
    deep = ft.surface_atoms("Cl", 5.0)
    second = float(np.unique(deep.depth)[1])  # the Na layer, d/2 = 1.628 Å down
    assert sorted(ft.surface_atoms("Cl", second).species) == ["Cl", "Na"]


@pytest.mark.parametrize("hkl", [(4, 2, 1), (1, 1, 1), (3, 3, 1)])
def test_every_repeat_unit_holds_one_formula_unit_per_cell(proto, hkl):
    # Rock salt has one NaCl per primitive cell; (4 2 1) has d = a / (2 sqrt 21) = 0.615 Å < 1 Å
    # (fcc reflection rule, common practice), so a cut depth taken as a fraction of d would show.
    ft = face_terminations(proto("rocksalt:Na,Cl"), hkl)
    for t in ft.terminations:
        unit = ft.repeat_unit(t.id)
        assert sorted(unit.species) == ["Cl", "Na"], (hkl, t.id)
        assert np.all(unit.depth < ft.d) and np.ptp(unit.depth) < ft.d


def test_an_unknown_termination_names_the_ones_the_face_has(proto):
    ft = face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1))
    with pytest.raises(StructureError) as info:
        ft.termination("Xe")
    assert str(info.value) == "face (1 1 1) has no termination 'Xe'; it has T1 (Cl), T2 (Na)"


def test_a_layer_that_straddles_the_cell_boundary_is_one_layer():
    # Two atoms 0.01 Å apart across z = 0 (fractional 0.001 and 0.999 of c = 5 Å): one layer at the
    # default tolerance of 0.1 Å, however the cell's origin cuts it.
    crystal = build_crystal(np.diag([3.0, 3.0, 5.0]), [[0, 0, 0.001], [0.5, 0.5, 0.999]], ["Cu", "Cu"])
    ft = face_terminations(crystal, (0, 0, 1))
    assert len(ft.layers) == 1 and ft.layers[0].composition == {"Cu": 2}


def test_the_cut_of_a_one_layer_face_lies_half_a_period_above_the_layer(proto):
    # fcc (1 1 1): one layer per period d = a / sqrt(3); the cut plane lies midway between layers.
    ft = face_terminations(proto("fcc:Cu"), (1, 1, 1))
    (t,) = ft.terminations
    assert (t.cut_height - ft.layers[0].height) % ft.d == pytest.approx(ft.d / 2, abs=1e-9)


def test_only_van_der_waals_gaps_end_a_layered_crystal_and_only_they_are_flagged(proto):
    # 2H-MoS2 (0 0 0 1): S-Mo-S sheets held by van der Waals forces; the cleave runs between the
    # sheets, never through one (common practice).  Two sheets per cell, so two such cuts.
    ft = face_terminations(proto("2H-MX2:Mo,S"), (0, 0, 1))
    assert [(t.label, t.van_der_waals, t.broken_bonds_per_nm2) for t in ft.terminations] == [
        ("MoS2", True, 0.0),
        ("MoS2", True, 0.0),
    ]
    ionic = face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1))
    assert [t.van_der_waals for t in ionic.terminations] == [False, False]
    # without any bond there is no van der Waals gap either: nothing to tell a gap from
    unbonded = face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1), bond_cutoff_angstrom=2.0)
    assert [t.van_der_waals for t in unbonded.terminations] == [False, False]


def test_a_unit_ratio_of_one_keeps_the_cheapest_cuts(proto):
    # Na- and Cl-ended (1 1 1) cuts of rock salt break the same bonds, so both stay at ratio 1.
    ft = face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1), unit_ratio=1.0)
    assert [t.label for t in ft.terminations] == ["Cl", "Na"]


def test_layers_are_listed_from_the_top_of_t1_down_with_their_depths(proto):
    # Perovskite (0 0 1): SrO and TiO2 layers a/2 = 1.9525 Å apart (a = 3.905 Å, from memory);
    # layer 0 is the top layer of T1 and the depths run down from it.
    ft = face_terminations(proto("perovskite:Sr,Ti,O"), (0, 0, 1))
    t1 = ft.terminations[0]
    assert t1.layers[0] == 0
    assert [layer.depth for layer in ft.layers] == pytest.approx([0.0, 3.905 / 2], abs=1e-9)
    assert ft.layers[0].composition == t1.composition


def test_the_bounds_of_the_settings_are_accepted(proto):
    # --max-multiple 0 to 50 and --layer-tol 0 are valid (the CLI help).  A list holds delta + n d for
    # n = 0..N, without the zero height of a termination to itself: N + 1 heights, or N.
    crystal = proto("rocksalt:Na,Cl")
    for n in (0, 50):
        steps = face_terminations(crystal, (1, 1, 1), max_multiple=n).steps
        assert [len(s.heights) for s in steps] == [n + (s.from_label != s.to_label) for s in steps]
    assert len(face_terminations(crystal, (1, 1, 1), layer_tol_angstrom=0.0).layers) == 2


def test_rocksalt_111_cuts_layers_and_depths_by_value(proto):
    # Rock salt (1 1 1): Cl and Na layers d/2 = a / (2 sqrt 3) = 1.628 Å apart; each cut breaks the 3 bonds
    # per cell that join a layer to the next (3 of 6 neighbours above, common practice).
    ft = face_terminations(proto("rocksalt:Na,Cl"), (1, 1, 1), unit_ratio=1.5)
    half = 5.64 / (2 * np.sqrt(3))
    assert ft.unit_ratio == 1.5
    assert [(c.below, c.above, c.broken_bonds) for c in sorted(ft.cuts, key=lambda c: c.below)] == [
        (0, 1, 3.0),
        (1, 0, 3.0),
    ]
    assert all(c.weighted_bonds > 0 for c in ft.cuts)
    assert [len(layer.atoms) for layer in ft.layers] == [1, 1]
    assert [(t.label, t.depth) for t in ft.terminations] == [("Cl", 0.0), ("Na", pytest.approx(half, abs=1e-9))]


def test_look_alike_terminations_are_primed_once_each(proto):
    # Fluorite (1 1 3): two F-ended terminations that no symmetry relates; the second is F'.
    ft = face_terminations(proto("fluorite:Ca,F"), (1, 1, 3))
    assert [t.label for t in ft.terminations] == ["Ca", "F", "F'"]
