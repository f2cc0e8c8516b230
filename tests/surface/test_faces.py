import numpy as np
import pytest

from termination import PlaneError, build_crystal, distinct_faces, face_geometry, interplanar_angle
from termination.reports import planes_report
from termination.serialise import to_jsonable
from termination.testing import pa3_structure, random_rotation


@pytest.mark.parametrize(
    "h1, h2, angle",
    [
        (
            (0, 0, 1),
            (1, 1, 1),
            54.74,
        ),  # standard cubic interplanar angle tables (Cullity, Elements of X-ray Diffraction)
        ((0, 0, 1), (0, 1, 2), 26.57),  # same table
        ((0, 0, 1), (3, 1, 0), 90.00),  # same table: (001) is perpendicular to (310)
        ((1, 0, 0), (3, 1, 0), 18.43),  # same table
        ((1, 1, 0), (1, 1, 1), 35.26),  # same table
    ],
)
def test_cubic_interplanar_angles_match_tables(proto, h1, h2, angle):
    assert interplanar_angle(proto("fcc:Cu"), h1, h2) == pytest.approx(angle, abs=0.01)


@pytest.mark.parametrize("hkl, tilt", [((1, 1, 1), 54.74), ((0, 1, 2), 26.57), ((1, 3, 0), 18.43)])
def test_tilt_is_minimum_over_variants(proto, hkl, tilt):
    # (310) seen from a (001) mount: variant (1 3 0) lies 90° away, but (0 1 3) gives 18.43°
    # (standard cubic angle tables).
    f = face_geometry(proto("rocksalt:Na,Cl"), hkl, mount=(0, 0, 1))
    assert f.tilt == pytest.approx(tilt, abs=0.01)
    assert interplanar_angle(proto("rocksalt:Na,Cl"), f.tilt_variant, (0, 0, 1)) == pytest.approx(f.tilt)
    # The rotation axis is perpendicular to both normals (direct-lattice [uvw] . (hkl) = 0).
    assert np.dot(f.tilt_axis, f.tilt_variant) == 0 and np.dot(f.tilt_axis, (0, 0, 1)) == 0


@pytest.mark.parametrize(
    "spec, hkl, d_over_a",
    [
        ("fcc:Cu", (0, 0, 1), 1 / 2),  # fcc (002) reflection: d = a/2 (common practice)
        ("fcc:Cu", (0, 1, 2), 1 / (2 * np.sqrt(5))),  # (024) planes of the F lattice
        ("fcc:Cu", (1, 1, 1), 1 / np.sqrt(3)),
        ("bcc:Fe", (0, 0, 1), 1 / 2),  # bcc (002)
        ("bcc:Fe", (0, 1, 1), 1 / np.sqrt(2)),
        ("sc:Po", (0, 1, 2), 1 / np.sqrt(5)),
    ],
)
def test_d_includes_centring(proto, spec, hkl, d_over_a):
    c = proto(spec)
    assert face_geometry(c, hkl).d == pytest.approx(d_over_a * c.cell_parameters[0], rel=1e-9)


@pytest.mark.parametrize("spec", ["fcc:Cu", "bcc:Fe", "diamond:Si", "half-heusler:Ti,Ni,Sn", "hexaboride:La,B"])
def test_d_matches_pymatgen_on_primitive_cell(proto, spec):
    from pymatgen.core import Lattice

    c = proto(spec)
    P = c.primitive_fractional
    lat = Lattice(P @ c.lattice)
    for f in distinct_faces(c, max_index=3):
        hp = P @ np.array(f.hkl, dtype=float)  # Miller index in the primitive basis
        hp = np.rint(hp * 12).astype(int)
        hp //= np.gcd.reduce(np.abs(hp))
        assert f.d == pytest.approx(lat.d_hkl(hp), rel=1e-9)  # pymatgen Lattice.d_hkl


def test_mesh_area_times_d_is_primitive_volume(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    vp = abs(np.linalg.det(c.primitive_fractional @ c.lattice))
    for f in distinct_faces(c, max_index=4):
        assert f.mesh.area * f.d == pytest.approx(vp, rel=1e-9)  # common practice: area x d = V_prim
        assert f.mesh.a <= f.mesh.b + 1e-9 and 90 - 1e-9 <= f.mesh.gamma <= 120 + 1e-9


@pytest.mark.parametrize(
    "spec, hkl, a, b, gamma",
    [
        ("fcc:Cu", (1, 1, 1), 1 / np.sqrt(2), 1 / np.sqrt(2), 120),  # hexagonal (111) net, common practice
        ("fcc:Cu", (0, 0, 1), 1 / np.sqrt(2), 1 / np.sqrt(2), 90),
        ("fcc:Cu", (0, 1, 1), 1 / np.sqrt(2), 1.0, 90),  # rectangular (110) mesh a/sqrt2 x a
        ("bcc:Fe", (0, 1, 1), np.sqrt(3) / 2, np.sqrt(3) / 2, 109.47),  # centred-rectangular (110), primitive rhombic
    ],
)
def test_reduced_mesh_of_low_index_faces(proto, spec, hkl, a, b, gamma):
    c = proto(spec)
    m = face_geometry(c, hkl).mesh
    lc = c.cell_parameters[0]
    assert (m.a, m.b, m.gamma) == pytest.approx((a * lc, b * lc, gamma), abs=0.01)


def test_friedel_pair_distinct_in_zincblende_merged_in_rocksalt(proto):
    zb = {f.hkl for f in distinct_faces(proto("zincblende:Ga,As"), 1)}
    rs = {f.hkl for f in distinct_faces(proto("rocksalt:Na,Cl"), 1)}
    # Td has no inversion: (111) and (-1-1-1) are different faces (common practice, GaAs A/B faces)
    assert {(1, 1, 1), (-1, -1, -1)} <= zb
    assert (1, 1, 1) in rs and (-1, -1, -1) not in rs
    assert len(rs) == 3 and len(zb) == 4


def test_th_group_separates_210_and_120():
    lattice, positions, species = pa3_structure()
    c = build_crystal(lattice, positions, species)
    assert c.spacegroup_number == 205  # spglib: pyrite Pa-3
    faces = {f.hkl: f for f in distinct_faces(c, 2)}
    forms = [f for f in faces.values() if sorted(map(abs, f.hkl)) == [0, 1, 2]]
    # In m-3 the {210} and {120} forms are distinct, 12 faces each (International Tables Vol. A, Table 10.1.2.2)
    assert len(forms) == 2 and all(f.multiplicity == 12 for f in forms)


def test_face_counts_up_to_index_3_in_oh(proto):
    # Forms {hkl} with max index <= 3 in m-3m: 001 011 111 012 112 122 013 113 023 123 223 133 233 (common practice)
    assert len(distinct_faces(proto("fcc:Cu"), 3)) == 13


def _table(report):
    return [
        (
            p.hkl,
            round(p.d, 6),
            p.multiplicity,
            None if p.tilt is None else round(p.tilt, 5),
            round(p.mesh.a, 6),
            round(p.mesh.b, 6),
            round(p.mesh.gamma, 4),
            round(p.mesh.area, 5),
        )
        for p in report.faces
    ]


@pytest.mark.parametrize("spec", ["zincblende:Ga,As", "half-heusler:Ti,Ni,Sn", "perovskite:Sr,Ti,O"])
def test_rotated_shifted_primitive_input_gives_same_table(proto, spec):
    c = proto(spec)
    rng = np.random.default_rng(7)
    ref = _table(planes_report(c, 3, mount=(0, 0, 1)))
    P = c.primitive_fractional
    prim_lattice = P @ c.lattice
    # atoms of the primitive cell: fractional coordinates in the primitive basis, deduplicated
    frac = (c.positions @ np.linalg.inv(P)) % 1.0
    keep = []
    for i, f in enumerate(frac):
        if not any(np.allclose((f - frac[j] + 0.5) % 1 - 0.5, 0, atol=1e-6) for j in keep):
            keep.append(i)
    shift = rng.random(3)
    R = random_rotation(rng)
    moved = build_crystal(prim_lattice @ R.T, (frac[keep] + shift) % 1, [c.species[i] for i in keep])
    assert moved.note is not None
    assert _table(planes_report(moved, 3, mount=(0, 0, 1))) == ref


def test_cif_written_by_pymatgen_gives_same_table(proto, tmp_path):
    from pymatgen.core import Lattice, Structure
    from pymatgen.io.cif import CifWriter

    from termination.structures import load_structure

    c = proto("half-heusler:Ti,Ni,Sn")
    path = tmp_path / "TiNiSn.cif"
    CifWriter(Structure(Lattice(c.lattice), list(c.species), c.positions), symprec=0.01).write_file(path)
    before = path.read_bytes()
    loaded = load_structure(str(path))
    assert path.read_bytes() == before  # input files are never modified
    assert loaded.spacegroup_number == 216
    assert _table(planes_report(loaded, 3, mount=(0, 0, 1))) == _table(planes_report(c, 3, mount=(0, 0, 1)))


@pytest.mark.parametrize(
    "bad, message", [((0, 0, 0), r"\(0 0 0\)"), ((1, 0), "three integers"), ((1.5, 0, 0), "three integers")]
)
def test_bad_miller_index_is_rejected(proto, bad, message):
    with pytest.raises(PlaneError, match=message):
        face_geometry(proto("fcc:Cu"), bad)


@pytest.mark.parametrize("n", [0, 13, 2.5])
def test_max_index_range(proto, n):
    with pytest.raises(PlaneError, match="max index"):
        distinct_faces(proto("fcc:Cu"), n)


def test_json_form_is_plain(proto):
    data = to_jsonable(planes_report(proto("fcc:Cu"), 1, mount=(0, 0, 1)))
    assert data["faces"][0]["hkl"] == [0, 0, 1] and data["mount"] == [0, 0, 1]
    assert set(data["faces"][0]["mesh"]) == {"a_angstrom", "b_angstrom", "gamma_deg", "area_angstrom2"}


def test_hexagonal_lattice_is_handled_generally():
    # Mg (hcp, P6_3/mmc, a = 3.209, c = 5.211 Å, from memory): d(0001) spacing of lattice planes is c
    a, cc = 3.209, 5.211
    lattice = np.array([[a, 0, 0], [-a / 2, a * np.sqrt(3) / 2, 0], [0, 0, cc]])
    c = build_crystal(lattice, [[1 / 3, 2 / 3, 0.25], [2 / 3, 1 / 3, 0.75]], ["Mg", "Mg"])
    assert c.spacegroup_number == 194  # spglib
    f = face_geometry(c, (0, 0, 1))
    assert f.d == pytest.approx(cc)
    assert (f.mesh.a, f.mesh.gamma) == pytest.approx((a, 120.0))
    # angle between (0001) and (10-11) prism-pyramidal plane: tan phi = 2c/(sqrt3 a) (common practice)
    assert interplanar_angle(c, (0, 0, 1), (1, 0, 1)) == pytest.approx(np.degrees(np.arctan(2 * cc / (np.sqrt(3) * a))))
