"""Predicted corrugation: Fourier spots, apparent lattice, maxima and rows."""

import numpy as np
import pytest

from termination.algebra.lattice2d import cell_notation, gauss_reduce
from termination.errors import StructureError
from termination.surface.corrugation import (
    ApparentLattice,
    Visibility,
    lattice_type,
    structure_factor,
    supercell_corrugation,
    termination_corrugation,
)
from termination.surface.terminations import face_terminations

R2, R3 = np.sqrt(2.0), np.sqrt(3.0)


@pytest.fixture(scope="module")
def faces(proto):
    cache = {}

    def get(spec, hkl, a=None):
        key = (spec, tuple(hkl), a)
        if key not in cache:
            cache[key] = face_terminations(proto(spec, a=a), hkl)
        return cache[key]

    return get


def spot(pattern, g):
    """Intensity of the spot g, or 0 when it is not listed (not visible)."""
    for s in pattern.spots:
        if np.allclose(s.g, g):
            return s.intensity
    return 0.0


def reduced_metric(v1, v2):
    """(|a|, |b|, gamma) of a 2D lattice in the obtuse reduced convention."""
    v1, v2 = gauss_reduce(np.asarray(v1, float), np.asarray(v2, float))
    if v1 @ v2 > 0:
        v2 = -v2
    c = v1 @ v2 / np.linalg.norm(v1) / np.linalg.norm(v2)
    return np.linalg.norm(v1), np.linalg.norm(v2), np.degrees(np.arccos(c))


# Reference faces ---------------------------------------------------------------------


def test_rocksalt_001_one_ion_visible_is_square_of_a_over_root2(faces):
    # Only one ionic sublattice images on NaCl(001): a square net of a/sqrt 2 =
    # 3.99 Å along <110> (Hebenstreit et al., Surf. Sci. 424, L321 (1999), from memory).
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    for el in ("Cl", "Na"):
        p = termination_corrugation(ft, "NaCl", visibility=Visibility(visible=[el]))
        lat = p.apparent_lattice
        assert lat.a == pytest.approx(5.64 / R2) and lat.b == pytest.approx(5.64 / R2)
        assert lat.gamma == pytest.approx(90.0)
        assert lattice_type(lat) == "square"
        assert p.neighbour_distance == pytest.approx(5.64 / R2)
        assert spot(p, (1, 0)) == pytest.approx(1.0)  # single site per cell: every spot full
        # Rows: along <110> spaced a/sqrt 2, along <100> spaced a/2 (geometry of a square net).
        assert p.row_spacings == pytest.approx((5.64 / R2, 5.64 / R2, 5.64 / 2))
        assert p.row_angles == pytest.approx((90.0, 45.0, 45.0))


def test_rocksalt_001_equal_weights_has_period_a_over_2(faces):
    # Issue 5: Na and Cl equally visible give maxima on a square net of a/2,
    # turned by 45° to the mesh; the first-order (1 0) spot cancels exactly.
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    p = termination_corrugation(ft, "NaCl")
    assert p.apparent_lattice.a == pytest.approx(2.82) and p.apparent_lattice.b == pytest.approx(2.82)
    assert p.apparent_lattice.gamma == pytest.approx(90.0)
    assert p.neighbour_distance == pytest.approx(2.82)
    assert spot(p, (1, 0)) == 0.0 and spot(p, (0, 1)) == 0.0
    assert spot(p, (1, 1)) == pytest.approx(1.0) and spot(p, (2, 0)) == pytest.approx(1.0)


def test_rocksalt_001_unequal_weights_restore_the_mesh(faces):
    # F(1 0) = w_Na - w_Cl, F(0) = w_Na + w_Cl for Na at (0 0), Cl at (1/2 1/2)
    # (two-site structure factor, common practice).
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    p = termination_corrugation(ft, "NaCl", visibility=Visibility(weights={"Na": 0.2}))
    assert spot(p, (1, 0)) == pytest.approx(0.8 / 1.2)
    assert spot(p, (1, 1)) == pytest.approx(1.0)
    assert p.apparent_lattice.a == pytest.approx(5.64 / R2)
    # Na (0.2) is below the default maximum fraction 0.5: only the Cl sites are maxima.
    assert p.neighbour_distance == pytest.approx(5.64 / R2)
    # Nearly equal weights: the (1 0) spot falls below the threshold, period a/2 again.
    q = termination_corrugation(ft, "NaCl", visibility=Visibility(weights={"Na": 0.97}))
    assert spot(q, (1, 0)) == 0.0 and q.apparent_lattice.a == pytest.approx(2.82)


def test_subsurface_layers_enter_with_the_decay_length(faces):
    # The second NaCl layer puts Na at (1/2 1/2) under Cl.  Without decay and
    # with only Na visible the two Na layers look equal (period a/2); with the
    # default decay (0.5 Å, exp(-2.82/0.5) = 0.0036) the top layer dominates.
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    flat = termination_corrugation(
        ft, "NaCl", visibility=Visibility(visible=["Na"], max_depth_angstrom=3.0, decay_length_angstrom=float("inf"))
    )
    assert flat.apparent_lattice.a == pytest.approx(2.82)
    decayed = termination_corrugation(ft, "NaCl", visibility=Visibility(visible=["Na"], max_depth_angstrom=3.0))
    assert decayed.apparent_lattice.a == pytest.approx(5.64 / R2)
    w2 = np.exp(-2.82 / 0.5)
    assert spot(decayed, (1, 0)) == pytest.approx((1 - w2) / (1 + w2))


def test_invisible_top_layer_is_flat_until_the_depth_reaches_below(faces):
    # Rock salt (111) is a stack of pure Na and pure Cl layers (Tasker type 3).
    ft = faces("rocksalt:Na,Cl", (1, 1, 1), 5.64)
    flat = termination_corrugation(ft, "Na", visibility=Visibility(visible=["Cl"]))
    assert lattice_type(flat.apparent_lattice) == "flat" and flat.spots == ()
    below = termination_corrugation(ft, "Na", visibility=Visibility(visible=["Cl"], max_depth_angstrom=2.0))
    assert below.apparent_lattice.a == pytest.approx(5.64 / R2)
    assert lattice_type(below.apparent_lattice) == "hexagonal"


def test_fcc_111_is_hexagonal_of_a_over_root2(faces):
    # Cu(111): hexagonal net of nearest-neighbour distance a/sqrt 2 = 2.556 Å (common practice).
    import ase.build

    p = termination_corrugation(faces("fcc:Cu", (1, 1, 1), 3.615), "Cu")
    lat = p.apparent_lattice
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((3.615 / R2, 3.615 / R2, 120.0))
    assert lattice_type(lat) == "hexagonal"
    assert p.row_spacings == pytest.approx((3.615 / R2 * R3 / 2,) * 3)
    assert p.row_angles == pytest.approx((60.0, 60.0, 60.0))
    # ase.build.fcc111: the surface cell of a 1x1 slab (one atom per layer).
    cell = ase.build.fcc111("Cu", size=(1, 1, 3), a=3.615).cell[:2, :2]
    assert (lat.a, lat.b, lat.gamma) == pytest.approx(reduced_metric(*cell))


def test_diamond_001_is_1x1_of_a_over_root2_with_half_order_2x1(faces):
    # Bulk-terminated Si(001): square 1x1 of a/sqrt 2 = 3.840 Å; the (2x1)
    # cell adds half-order spots (Schlier & Farnsworth, J. Chem. Phys. 30, 917 (1959)).
    import ase.build

    ft = faces("diamond:Si", (0, 0, 1), 5.431)
    for t in ft.terminations:  # two terminations related by a 90° rotation
        p = termination_corrugation(ft, t.id)
        assert (p.apparent_lattice.a, p.apparent_lattice.b, p.apparent_lattice.gamma) == pytest.approx(
            (5.431 / R2, 5.431 / R2, 90.0)
        )
        assert p.cell is None and all(float(v).is_integer() for s in p.spots for v in s.g)
    cell = ase.build.diamond100("Si", size=(1, 1, 4), a=5.431).cell[:2, :2]  # ase.build.diamond100
    assert (p.apparent_lattice.a, p.apparent_lattice.b) == pytest.approx(reduced_metric(*cell)[:2])
    top = ft.surface_atoms("T1", 0.1)
    r = supercell_corrugation(ft, "T1", [[2, 0], [0, 1]], top.inplane[:1], [0.0])
    assert r.cell == "(2×1)"
    assert spot(r, (0.5, 0)) > 0.5 and spot(r, (-0.5, 0)) > 0.5 and spot(r, (0, 0.5)) == 0.0
    lat = r.apparent_lattice
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((5.431 / R2, 2 * 5.431 / R2, 90.0))


def test_bcc_110_is_centred_rectangular(faces):
    # bcc(110): centred rectangular, conventional cell a x a sqrt 2, primitive
    # a sqrt(3)/2 at 109.47° (common practice; Fe a = 2.8665 Å).
    import ase.build

    a = 2.8665
    p = termination_corrugation(faces("bcc:Fe", (1, 1, 0), a), "Fe")
    lat = p.apparent_lattice
    assert lattice_type(lat) == "centred rectangular"
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((a * R3 / 2, a * R3 / 2, 109.4712206))
    g = np.radians(lat.gamma)
    conventional = sorted([2 * lat.a * np.cos(g / 2), 2 * lat.a * np.sin(g / 2)])
    assert conventional == pytest.approx([a, a * R2])
    cell = ase.build.bcc110("Fe", size=(1, 1, 2), a=a).cell[:2, :2]  # ase.build.bcc110
    assert (lat.a, lat.b, lat.gamma) == pytest.approx(reduced_metric(*cell))


def test_half_heusler_111_single_species_layer_is_hexagonal(faces):
    # Half-Heusler (111) with one species on top: each species forms an fcc sublattice, whose
    # (111) layer is a hexagonal net of a/sqrt 2 (fcc (111) geometry, common practice):
    # HfNiSn, a = 6.08 Å (from memory), gives 4.299 Å.
    ft = faces("half-heusler:Hf,Ni,Sn", (1, 1, 1), 6.08)
    assert {t.label for t in ft.terminations} == {"Sn", "Ni", "Hf"}
    for t in ft.terminations:
        p = termination_corrugation(ft, t.id)
        lat = p.apparent_lattice
        assert lat.a == pytest.approx(4.2992, abs=5e-4) and lat.b == pytest.approx(lat.a)
        assert lat.gamma == pytest.approx(120.0) and lattice_type(lat) == "hexagonal"


def test_perovskite_tio2_layer_maxima_and_oxygen_sublattice(faces):
    # SrTiO3 (001) TiO2: Ti at (0 0), O at (1/2 0), (0 1/2): F(1 0) = 1 - 1 + 1
    # (three-site structure factor, common practice): the mesh a = 3.905 Å, and
    # maxima a/2 apart.  The O sublattice alone is a square net of a/sqrt 2.
    ft = faces("perovskite:Sr,Ti,O", (0, 0, 1), 3.905)
    p = termination_corrugation(ft, "TiO2")
    assert spot(p, (1, 0)) == pytest.approx(1 / 3)
    assert p.apparent_lattice.a == pytest.approx(3.905)
    assert p.neighbour_distance == pytest.approx(3.905 / 2)
    o = termination_corrugation(ft, "TiO2", visibility=Visibility(visible=["O"]))
    assert o.apparent_lattice.a == pytest.approx(3.905 / R2) and spot(o, (1, 0)) == 0.0


# Invariants -----------------------------------------------------------------------------


@pytest.mark.parametrize(
    "spec,a,visible",
    [
        ("rocksalt:Na,Cl", 5.64, ["Cl"]),
        ("bcc:Fe", 2.8665, None),
        ("half-heusler:Ti,Ni,Sn", 5.93, None),
        ("perovskite:Sr,Ti,O", 3.905, ["O"]),
    ],
)
def test_equivalent_faces_give_the_same_apparent_lattice(proto, spec, a, visible):
    # Symmetry-equivalent faces are the same surface (DEVELOPERS.md invariant).
    crystal = proto(spec, a=a)
    for base in [(0, 0, 1), (1, 1, 0), (1, 1, 1)]:
        ref = None
        variants = face_terminations(crystal, base).face.variants[:4]
        for v in variants:
            ft = face_terminations(crystal, v)
            got = sorted(
                (
                    t.label,
                    round(p.apparent_lattice.a, 6),
                    round(p.apparent_lattice.b, 6),
                    round(p.apparent_lattice.gamma, 4),
                    round(p.neighbour_distance, 6),
                )
                for t in ft.terminations
                for p in [termination_corrugation(ft, t.id, visibility=Visibility(visible=visible))]
            )
            ref = got if ref is None else ref
            assert got == ref, (v, got, ref)


def _real_space_period_area(inplane, amp, mesh, tol=1e-6):
    """Area of the exact translation lattice of a weighted site pattern, by brute force.

    A translation t = r_i - r_0 between sites of equal amplitude is a period
    when every site maps onto a site of the same amplitude (modulo the mesh).
    """
    inv = np.linalg.inv(mesh)
    count = 0
    seen = []
    for i in range(len(inplane)):
        if abs(amp[i] - amp[0]) > tol:
            continue
        t = inplane[i] - inplane[0]
        f = (t @ inv) % 1.0
        f[np.isclose(f, 1.0)] = 0.0
        if any(np.allclose(f, s, atol=1e-6) for s in seen):
            continue
        moved = inplane + t
        d = (moved[:, None, :] - inplane[None, :, :]) @ inv
        d -= np.rint(d)
        same = (np.linalg.norm(d @ mesh, axis=-1) < 1e-6) & (np.abs(amp[:, None] - amp[None, :]) < tol)
        if same.any(axis=1).all():
            seen.append(f)
            count += 1
    return abs(np.linalg.det(mesh)) / count


@pytest.mark.parametrize(
    "spec,hkl",
    [
        ("rocksalt:Na,Cl", (0, 0, 1)),
        ("rocksalt:Na,Cl", (1, 1, 0)),
        ("perovskite:Sr,Ti,O", (0, 0, 1)),
        ("perovskite:Sr,Ti,O", (1, 1, 0)),
        ("fluorite:Ca,F", (0, 0, 1)),
        ("cesium-chloride:Cs,Cl", (1, 1, 0)),
        ("hexaboride:La,B", (0, 0, 1)),
        ("half-heusler:Ti,Ni,Sn", (1, 1, 0)),
    ],
)
def test_apparent_cell_equals_the_real_space_period_at_a_tiny_threshold(faces, spec, hkl):
    # Fourier analysis and a direct real-space symmetry search must agree: the
    # lattice generated by all non-zero spots is dual to the pattern's period
    # lattice (Fourier series of a periodic pattern, common practice).
    rng = np.random.default_rng(5)
    ft = faces(spec, hkl)
    elements = sorted(set(ft.atoms.species))
    for t in ft.terminations:
        for trial in range(3):
            weights = {el: float(rng.choice([0.0, 0.5, 1.0])) for el in elements}
            if trial == 0:
                weights = {el: 1.0 for el in elements}
            top = ft.surface_atoms(t.id, ft.d)
            keep = top.unit == 0
            amp = np.array([weights[s] for s, k in zip(top.species, keep) if k]) * np.exp(-top.depth[keep] / 0.5)
            if amp.sum() == 0:
                continue
            p = termination_corrugation(ft, t.id, visibility=Visibility(weights=weights, threshold=1e-6))
            lat = p.apparent_lattice
            area = lat.a * lat.b * np.sin(np.radians(lat.gamma))
            expected = _real_space_period_area(top.inplane[keep][amp > 0], amp[amp > 0], top.mesh_inplane)
            assert area == pytest.approx(expected, rel=1e-6), (t.label, weights)


def test_structure_factor_matches_an_fft_of_a_rendered_pattern(faces):
    # numpy.fft of Gaussian blobs rendered on the mesh: the Fourier coefficient
    # at (h k) is F(G) exp(-2 pi^2 sigma^2 |G|^2) / area (convolution theorem).
    ft = faces("perovskite:Sr,Ti,O", (1, 1, 0), 3.905)
    top = ft.surface_atoms(ft.terminations[0].id, 2.0)
    mesh = top.mesh_inplane
    amp = np.linspace(1.0, 0.3, len(top.depth))
    n, sigma = 96, 0.35
    s = (np.arange(n) + 0.0) / n
    grid = np.stack(np.meshgrid(s, s, indexing="ij"), axis=-1) @ mesh  # (n, n, 2) Cartesian
    image = np.zeros((n, n))
    for r, w in zip(top.inplane, amp):
        for i in range(-2, 3):
            for j in range(-2, 3):
                c = r + i * mesh[0] + j * mesh[1]
                image += w * np.exp(-np.sum((grid - c) ** 2, axis=-1) / (2 * sigma**2))
    coeff = np.fft.fft2(image) / n**2
    recip = np.linalg.inv(mesh).T
    for h, k in [(1, 0), (0, 1), (1, 1), (2, -1), (2, 0)]:
        g = np.array([h, k]) @ recip
        F = structure_factor(g[None, :], top.inplane, amp)[0]
        area = abs(np.linalg.det(mesh))
        expected = abs(F) * 2 * np.pi * sigma**2 / area * np.exp(-2 * np.pi**2 * sigma**2 * g @ g)
        # fft2 uses exp(-2 pi i (h i + k j)/n): the (h, k) coefficient of the image.
        assert abs(coeff[h % n, k % n]) == pytest.approx(expected, rel=1e-6, abs=1e-9)


# Reconstruction cells -------------------------------------------------------------------


def test_rocksalt_2x1_vacancy_row_gives_half_order_spots(faces):
    # 2x1 cell with Na at (0 0) removed: left Na (1 0), Cl (1/2 1/2), (3/2 1/2);
    # F(1/2 0) = -1 + i - i, F(0) = 3 (three-site structure factor, common practice).
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    p = supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[0.0, 0.0]], [0.0])
    assert p.cell == "(2×1)"
    assert spot(p, (0.5, 0)) == pytest.approx(1 / 3) and spot(p, (0, 0.5)) == 0.0
    lat = p.apparent_lattice
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((5.64 / R2, 2 * 5.64 / R2, 90.0))
    assert lattice_type(lat) == "rectangular"
    # The vacancy is on Na: with only Cl imaging the half-order spots vanish.
    q = supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[0.0, 0.0]], [0.0], visibility=Visibility(visible=["Cl"]))
    assert spot(q, (0.5, 0)) == 0.0 and q.apparent_lattice.a == pytest.approx(5.64 / R2)
    # The same site given modulo the supercell is the same vacancy.
    shifted = supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[2 * 5.64 / R2, 5.64 / R2]], [0.0])
    assert shifted.spots == p.spots


def test_rocksalt_c2x2_vacancy_gives_half_order_spots(faces):
    # c(2x2) = (sqrt2 x sqrt2)R45° on a square mesh (Wood 1964): spots at (1/2 1/2).
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    p = supercell_corrugation(ft, "NaCl", [[1, 1], [-1, 1]], [[0.0, 0.0]], [0.0], visibility=Visibility(visible=["Na"]))
    assert p.cell == "c(2×2)"
    assert spot(p, (0.5, 0.5)) == pytest.approx(1.0) and spot(p, (0.5, 0)) == 0.0
    assert p.apparent_lattice.a == pytest.approx(5.64) and p.apparent_lattice.gamma == pytest.approx(90.0)


def test_hexaboride_la_layer_vacancies(faces):
    # LaB6 (001) La termination: one La per 4.157 Å mesh; a 2x1 La vacancy row
    # leaves La 2a apart along one axis: half-order spots (geometry; a from memory).
    ft = faces("hexaboride:La,B", (0, 0, 1), 4.157)
    one = termination_corrugation(ft, "La")
    assert one.apparent_lattice.a == pytest.approx(4.157)
    p = supercell_corrugation(ft, "La", [[2, 0], [0, 1]], [[0.0, 0.0]], [0.0])
    assert spot(p, (0.5, 0)) == pytest.approx(1.0) and spot(p, (0.5, 1)) == pytest.approx(1.0)
    assert (p.apparent_lattice.a, p.apparent_lattice.b) == pytest.approx((4.157, 8.314))
    c = supercell_corrugation(ft, "La", [[1, 1], [-1, 1]], [[0.0, 0.0]], [0.0])
    assert c.cell == "c(2×2)" and spot(c, (0.5, 0.5)) == pytest.approx(1.0)
    assert c.apparent_lattice.a == pytest.approx(4.157 * R2)


def test_adatom_takes_the_bulk_continuation_species(faces):
    # Above Na on NaCl(001) the next bulk layer has Cl (rock-salt stacking).
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    args = ([[1, 1], [-1, 1]], [[0.0, 0.0]], [-2.82])
    seen = supercell_corrugation(ft, "NaCl", *args, mode="add", visibility=Visibility(visible=["Cl"]))
    assert spot(seen, (0.5, 0.5)) > 0.5
    hidden = supercell_corrugation(ft, "NaCl", *args, mode="add", visibility=Visibility(visible=["Na"]))
    assert spot(hidden, (0.5, 0.5)) == 0.0
    with pytest.raises(StructureError, match="no bulk site"):
        supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[1.0, 0.0]], [-1.0], mode="add")
    named = supercell_corrugation(
        ft,
        "NaCl",
        [[2, 0], [0, 1]],
        [[1.0, 0.0]],
        [-1.0],
        mode="add",
        changed_species="Na",
        visibility=Visibility(visible=["Na"]),
    )
    assert spot(named, (0.5, 0)) > 0.05


def test_cell_notation_examples():
    # Wood, J. Appl. Phys. 35, 1306 (1964); Van Hove, Weinberg & Chan, LEED (1986) ch. 2.
    sq = np.eye(2) * 4.0
    hexa = np.array([[2.5, 0.0], [-1.25, 2.5 * R3 / 2]])
    assert cell_notation([[2, 0], [0, 1]], sq) == "(2×1)"
    assert cell_notation([[2, 0], [0, 2]], sq) == "(2×2)"
    assert cell_notation([[1, 1], [-1, 1]], sq) == "c(2×2)"
    assert cell_notation([[2, 1], [-1, 1]], hexa) == "(√3×√3)R30°"
    assert cell_notation([[2, 1], [0, 3]], sq) == "(2 1 / 0 3)"  # no Wood notation: the matrix


# Bad input ---------------------------------------------------------------------------------


def test_bad_options_name_the_bad_value(faces):
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    cases = [
        (dict(visible=["Zz"]), "Zz"),
        (dict(visible=["K"]), "'K'"),
        (dict(weights={"Na": -1.0}), "-1"),
        (dict(weights={"Na": float("nan")}), "nan"),
        (dict(decay_length_angstrom=float("nan")), "nan"),
        (dict(decay_length_angstrom=-0.5), "-0.5"),
        (dict(threshold=0.0), "0.0"),
        (dict(threshold=1.5), "1.5"),
        (dict(max_depth_angstrom=-2.0), "-2.0"),
        (dict(weights={"Na": 0.0, "Cl": 0.0}), "all zero"),
    ]
    for options, text in cases:
        with pytest.raises(StructureError, match=None) as exc:
            termination_corrugation(ft, "NaCl", Visibility(**options))
        assert text in str(exc.value), (options, str(exc.value))
    with pytest.raises(StructureError, match="no termination 'XX'"):
        termination_corrugation(ft, "XX")


def test_bad_supercells_name_the_bad_value(faces):
    ft = faces("rocksalt:Na,Cl", (0, 0, 1), 5.64)
    with pytest.raises(StructureError, match="singular"):
        supercell_corrugation(ft, "NaCl", [[1, 2], [2, 4]])
    with pytest.raises(StructureError, match="1.5"):
        supercell_corrugation(ft, "NaCl", [[1.5, 0], [0, 1]])
    with pytest.raises(StructureError, match="not an atom"):
        supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[1.0, 0.3]], [0.0])
    with pytest.raises(StructureError, match="'swap'"):
        supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[0.0, 0.0]], [0.0], mode="swap")
    with pytest.raises(StructureError, match="already occupied"):
        supercell_corrugation(ft, "NaCl", [[2, 0], [0, 1]], [[0.0, 0.0]], [0.0], mode="add")


def test_lattice_type_of_degenerate_patterns():
    inf = float("inf")
    assert lattice_type(ApparentLattice(3.0, inf, 90.0)) == "stripes"
    assert lattice_type(ApparentLattice(inf, inf, 90.0)) == "flat"
    assert lattice_type(ApparentLattice(3.0, 4.0, 100.0)) == "oblique"


def test_collinear_spots_give_stripes():
    # Four equal sites a quarter cell apart along b: F(h k) = 0 unless k = 0 mod 4
    # (geometric sum, common practice); inside order 2 only the (h 0) spots are
    # left, so the pattern is stripes along b with the period |a| = 4 Å.
    from termination.surface.corrugation import pattern_from_sites

    cell = np.eye(2) * 4.0
    sites = np.array([[0.0, 0.0], [0.0, 1.0], [0.0, 2.0], [0.0, 3.0]])
    p = pattern_from_sites(sites, np.ones(4), cell, cell, max_order=2.0)
    assert {s.g[1] for s in p.spots} == {0}
    assert lattice_type(p.apparent_lattice) == "stripes"
    assert p.apparent_lattice.a == pytest.approx(4.0) and p.row_spacings == pytest.approx((4.0,))
    # Order 4 reaches (0 4): a square net of 1 Å x 4 Å... a rectangular 4 x 1 lattice.
    q = pattern_from_sites(sites, np.ones(4), cell, cell, max_order=4.0)
    assert (q.apparent_lattice.a, q.apparent_lattice.b) == pytest.approx((1.0, 4.0))


def test_reconstruction_records_of_the_polarity_step(proto):
    # LaB6 (001) B6 termination: removing every second B6 unit in a c(2x2) cell
    # (the polarity step's compensating pattern) puts spots at (1/2 1/2); the
    # whole unit goes, so the ring atoms leave with the apex (geometry).
    pytest.importorskip("termination.surface.polarity")
    from termination.bulk.charges import assign_charges
    from termination.surface.corrugation import reconstruction_corrugation
    from termination.surface.polarity import termination_polarity

    crystal = proto("hexaboride:La,B", a=4.157)
    charged = crystal.with_charges(assign_charges(crystal, use_pymatgen=False).per_atom)
    ft = face_terminations(charged, (0, 0, 1))
    recs = {r.wood: r for r in termination_polarity(charged, ft, "B6", max_cell=2).reconstructions}
    p = reconstruction_corrugation(ft, "B6", recs["c(2×2)"])
    assert p.cell == "c(2×2)" and spot(p, (0.5, 0.5)) > 0.5
    assert p.apparent_lattice.a == pytest.approx(4.157 * R2)
    # Only La imaging (it lies below the B6 unit): the vacancies do not show.
    q = reconstruction_corrugation(
        ft,
        "B6",
        recs["c(2×2)"],
        visibility=Visibility(visible=["La"], max_depth_angstrom=4.0, decay_length_angstrom=float("inf")),
    )
    assert spot(q, (0.5, 0.5)) == 0.0 and q.apparent_lattice.a == pytest.approx(4.157)


# Site weights: one kind of site images (issue 13) ----------------------------------------------------


@pytest.fixture(scope="module")
def rutile(from_spacegroup):
    """Rutile TiO2: P4_2/mnm, a = 4.594 Å, c = 2.959 Å, O at 4f x = 0.305 (from memory)."""
    from pymatgen.core import Lattice

    c = from_spacegroup("P4_2/mnm", Lattice.tetragonal(4.594, 2.959), [("Ti", (0, 0, 0)), ("O", (0.305, 0.305, 0))])
    return c, face_terminations(c, (1, 1, 0))


def test_rutile_110_coordination_tells_five_fold_from_six_fold_ti(rutile):
    # TiO2(110) with its bridging-O rows: the top O bridges two Ti (O2c), the in-plane O keep
    # three bonds (O3c), and the Ti rows alternate between five-fold (Ti5c, one apical bond cut)
    # and six-fold (Ti6c, under the bridging O) (U. Diebold, Surf. Sci. Rep. 48, 53 (2003)).
    from termination.surface.coordination import surface_coordination

    c, ft = rutile
    bridging = next(t for t in ft.terminations if t.label == "O")
    atoms = ft.surface_atoms(bridging.id, 1.5)
    n = surface_coordination(c, ft, bridging.id, atoms)
    kinds = sorted(f"{el}{k}c" for el, k in zip(atoms.species, n))
    assert kinds == ["O2c", "O3c", "O3c", "Ti5c", "Ti6c"]
    # Deep atoms keep the bulk coordination: 6 for Ti, 3 for O (rutile, common practice).
    deep = ft.surface_atoms(bridging.id, 8.0)
    n = surface_coordination(c, ft, bridging.id, deep)
    far = deep.depth > 4.0
    assert set(zip(np.array(deep.species)[far], n[far])) == {("Ti", 6), ("O", 3)}


def test_rutile_110_five_fold_ti_rows_are_6_5_angstrom_apart(rutile):
    # Empty-state STM of TiO2(110) shows the Ti5c rows along [001], a√2 = 6.50 Å apart, 2.96 Å
    # along the rows (U. Diebold et al., Phys. Rev. Lett. 77, 1322 (1996)).  The Ti lie 1.3 Å
    # below the bridging O, below the top unit: flat with the top unit only, the Ti5c and Ti6c
    # together (3.25 Å rows) with --depth, the Ti5c rows alone with the six-fold Ti weighted 0.
    c, ft = rutile
    key = next(t.id for t in ft.terminations if t.label == "O")
    flat = termination_corrugation(ft, key, Visibility(visible=["Ti"]), crystal=c)
    assert lattice_type(flat.apparent_lattice) == "flat"
    both = termination_corrugation(ft, key, Visibility(visible=["Ti"], max_depth_angstrom=2.0), crystal=c)
    assert both.row_spacings[0] == pytest.approx(4.594 * R2 / 2)
    five = termination_corrugation(
        ft, key, Visibility(visible=["Ti"], max_depth_angstrom=2.0, site_weights={"Ti6c": 0}), crystal=c
    )
    lat = five.apparent_lattice
    assert (lat.a, lat.b, lat.gamma) == pytest.approx((2.959, 4.594 * R2, 90.0))
    assert five.row_spacings[0] == pytest.approx(4.594 * R2)
    # the same with the five-fold Ti switched on alone
    only5 = termination_corrugation(
        ft, key, Visibility(visible=["O"], max_depth_angstrom=2.0, weights={"O": 0}, site_weights={"Ti5": 1}), crystal=c
    )
    assert only5.apparent_lattice == lat


def test_site_weights_are_checked(rutile):
    _, ft = rutile
    from termination.surface.corrugation import parse_site, parse_site_weights

    assert parse_site("Ti5c") == ("Ti", 5) and parse_site("o2") == ("O", 2)
    assert Visibility(site_weights={"Ti6": 0}).site_weights == (("Ti6c", 0.0),)
    for bad in ("Ti", "5c", "Tix5", "Zz5c"):
        with pytest.raises(StructureError):
            parse_site(bad)
    with pytest.raises(StructureError, match="non-negative"):
        Visibility(site_weights={"Ti5c": -1})
    with pytest.raises(StructureError, match="twice"):
        parse_site_weights(["Ti5c=1", "Ti5=0"])
    with pytest.raises(StructureError, match="need the crystal"):
        termination_corrugation(ft, "T1", Visibility(site_weights={"Ti5c": 1}))
    with pytest.raises(StructureError, match="'Sr'"):
        Visibility(site_weights={"Sr5c": 1}).check(ft.atoms.species)
