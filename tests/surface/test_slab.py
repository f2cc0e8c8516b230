"""Slabs of one termination: layer stacks and compositions against `terminations`, pymatgen and the Tasker picture."""

import math
import warnings
from functools import cache

import numpy as np
import pytest

from termination.bulk.charges import with_formal_charges
from termination.errors import PlaneError, StructureError
from termination.reports import select_reconstruction, slab_report
from termination.structures import build_prototype
from termination.surface.polarity import termination_polarity
from termination.surface.slab import build_slab, describe_slab
from termination.surface.terminations import face_terminations

# Lattice constants (Å), room temperature, from memory: SrTiO3 3.905, NaCl 5.64, LaB6 4.157 (x = 0.1993), Cu 3.615.


@cache
def charged(spec, a, x=None):
    crystal, _ = with_formal_charges(build_prototype(spec, a=a, x=x))
    return crystal


def expected_stack(ft, key, layers, symmetric):
    """Layer compositions of a slab read off the `terminations` period: from the termination's top layer down."""
    t = ft.termination(key)
    n = len(ft.layers)
    count = layers * n + (len(t.layers) if symmetric else 0)
    return [ft.layers[(t.layers[0] + i) % n].composition for i in range(count)]


def reduced(comp):
    g = math.gcd(*comp.values())
    return {el: v // g for el, v in sorted(comp.items())}


@pytest.mark.parametrize("key", ["SrO", "TiO2"])
@pytest.mark.parametrize("symmetric", [False, True])
def test_srtio3_001_slabs_stack_the_layers_of_terminations(key, symmetric):
    c = charged("perovskite:Sr,Ti,O", 3.905)
    ft = face_terminations(c, (0, 0, 1))
    slab = build_slab(c, (0, 0, 1), key, layers=3, vacuum_angstrom=12.0, symmetric=symmetric)
    info = describe_slab(slab, c)
    assert [la.composition for la in info.layers] == expected_stack(ft, key, 3, symmetric)
    # Spacings a/2 between SrO and TiO2 layers (perovskite (001): d/2, common practice).
    z = [la.z for la in info.layers]
    assert np.allclose(-np.diff(z), 3.905 / 2, atol=1e-9)
    if symmetric:
        # SrO/TiO2/.../SrO: one extra top unit, a mirror plane in the middle (Tasker type I both sides).
        assert info.symmetric and not info.stoichiometric
        assert info.excess == reduced(ft.termination(key).composition) | {}
    else:
        assert info.stoichiometric and info.bulk_units == 3 and not info.symmetric
    assert info.charge == pytest.approx(0.0) and info.dipole == pytest.approx(0.0, abs=1e-9)


@pytest.mark.parametrize("key", ["La", "B6"])
def test_lab6_001_slabs_keep_the_b6_octahedra_whole(key):
    from ase.geometry import get_distances

    x, a = 0.1993, 4.157
    c = charged("hexaboride:La,B", a, x)
    ft = face_terminations(c, (0, 0, 1))
    for symmetric in (False, True):
        slab = build_slab(c, (0, 0, 1), key, layers=2, vacuum_angstrom=10.0, symmetric=symmetric)
        info = describe_slab(slab, c)
        assert [la.composition for la in info.layers] == expected_stack(ft, key, 2, symmetric)
        boron = slab[[s == "B" for s in slab.get_chemical_symbols()]]
        assert len(boron) % 6 == 0
        # Within an octahedron every B has 4 B neighbours at (1/2 - x) a sqrt(2) (hexaboride geometry).
        intra = (0.5 - x) * a * math.sqrt(2)
        _, dist = get_distances(boron.positions, cell=slab.cell, pbc=[True, True, False])
        counts = (np.abs(dist - intra) < 0.01).sum(axis=1)
        assert counts.tolist() == [4] * len(boron), (key, symmetric)
    top = ft.termination(key).composition
    assert sum(sum(la.composition.values()) for la in info.layers[: len(ft.termination(key).layers)]) == sum(
        top.values()
    )


def test_rocksalt_111_with_the_compensating_pattern_is_neutral_stoichiometric_and_dipole_free():
    # Rock salt (111) is Tasker type III; removing 1/2 of the top Na (and of the bottom Na of a symmetric slab)
    # cancels the dipole (Tasker 1979; Goniakowski, Finocchi and Noguera 2008).
    c = charged("rocksalt:Na,Cl", 5.64)
    ft = face_terminations(c, (1, 1, 1))
    tp = termination_polarity(c, ft, "Na", max_cell=4)
    assert tp.compensation == pytest.approx(-0.5)
    rec = select_reconstruction(tp.reconstructions, "2x1")
    slab = build_slab(c, (1, 1, 1), "Na", layers=3, vacuum_angstrom=10.0, symmetric=True, reconstruction=rec)
    info = describe_slab(slab, c)
    assert info.composition == {"Na": 6, "Cl": 6} and info.stoichiometric
    assert info.charge == pytest.approx(0.0) and info.dipole == pytest.approx(0.0, abs=1e-9) and info.symmetric
    assert info.layers[0].composition == {"Na": rec.sites - rec.changed}
    assert info.layers[-1].composition == {"Na": rec.sites - rec.changed}
    one_sided = describe_slab(build_slab(c, (1, 1, 1), "Na", layers=3, vacuum_angstrom=10.0, reconstruction=rec), c)
    assert one_sided.charge == pytest.approx(-rec.changed)  # only the top lost its Na+
    assert [la.composition for la in one_sided.layers[1:]] == [
        {el: 2 * n for el, n in comp.items()} for comp in expected_stack(ft, "Na", 3, False)[1:]
    ]


def test_the_1x1_slab_dipole_is_minus_n_mu_and_equals_pymatgen_slab_dipole():
    from pymatgen.core import Lattice
    from pymatgen.core.surface import Slab

    c = charged("rocksalt:Na,Cl", 5.64)
    ft = face_terminations(c, (1, 1, 1))
    mu = termination_polarity(None, ft, "Na", with_reconstructions=False).dipole
    for n in (2, 4):
        slab = build_slab(c, (1, 1, 1), "Na", layers=n, vacuum_angstrom=10.0)
        info = describe_slab(slab, c)
        assert info.dipole == pytest.approx(-n * mu)  # the sign convention of termination.surface.polarity
        charges = slab.get_initial_charges()
        species = [f"{s}{'+' if q > 0 else '-'}" for s, q in zip(slab.get_chemical_symbols(), charges)]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            pmg = Slab(
                Lattice(np.array(slab.cell)),
                species,
                slab.get_scaled_positions(),
                miller_index=(1, 1, 1),
                oriented_unit_cell=None,
                shift=0.0,
                scale_factor=np.eye(3),
                reorient_lattice=False,
            )
        assert pmg.dipole[2] == pytest.approx(info.dipole)  # pymatgen Slab.dipole, same centroid convention


def test_cell_is_right_handed_with_the_normal_along_z():
    c = charged("rocksalt:Na,Cl", 5.64)
    for hkl, key in [((1, 1, 1), "Na"), ((0, 1, 2), "NaCl"), ((1, 1, 0), "NaCl")]:
        slab = build_slab(c, hkl, key, layers=2, vacuum_angstrom=8.0)
        cell = np.array(slab.cell)
        assert np.linalg.det(cell) > 0
        assert cell[0, 1] == pytest.approx(0) and cell[0, 2] == 0 and cell[1, 2] == 0
        assert np.allclose(cell[2, :2], 0) and cell[2, 2] > 0
        z = slab.positions[:, 2]
        assert z.min() == pytest.approx(4.0) and cell[2, 2] - z.max() == pytest.approx(4.0)


def _layers_along(positions, normal, symbols, tol=0.1):
    """Layers (height, reduced composition) of a pymatgen slab along ``normal``, top first."""
    h = positions @ normal
    order = np.argsort(-h)
    out = []
    for i in order:
        if out and out[-1][0] - h[i] <= tol:
            out[-1][1][symbols[i]] = out[-1][1].get(symbols[i], 0) + 1
        else:
            out.append([h[i], {symbols[i]: 1}])
    return [(float(z), reduced(comp)) for z, comp in out]


@pytest.mark.parametrize(
    ("spec", "a", "x", "hkl", "key"),
    [
        ("perovskite:Sr,Ti,O", 3.905, None, (0, 0, 1), "SrO"),
        ("perovskite:Sr,Ti,O", 3.905, None, (0, 1, 1), "O2"),
        ("rocksalt:Na,Cl", 5.64, None, (1, 1, 1), "Cl"),
        ("hexaboride:La,B", 4.157, 0.1993, (0, 0, 1), "B6"),
        ("fcc:Cu", 3.615, None, (1, 1, 0), "Cu"),
    ],
)
def test_layer_spacings_agree_with_pymatgen_slabgenerator(spec, a, x, hkl, key):
    from pymatgen.core import Lattice, Structure
    from pymatgen.core.surface import SlabGenerator

    c = charged(spec, a, x)
    ours = describe_slab(build_slab(c, hkl, key, layers=3, vacuum_angstrom=10.0), c).layers
    ours_seq = [(la.z, reduced(la.composition)) for la in ours]
    structure = Structure(Lattice(c.lattice), list(c.species), c.positions)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        slabs = SlabGenerator(structure, hkl, 12.0, 10.0, center_slab=True).get_slabs(filter_out_sym_slabs=False)
    window = len(ours_seq)
    gaps = np.diff([z for z, _ in ours_seq])
    found = False
    for s in slabs:
        symbols = [str(sp) for sp in s.species]
        for sign in (1.0, -1.0):
            theirs = _layers_along(s.cart_coords, sign * s.normal, symbols)
            for start in range(len(theirs) - window + 1):
                part = theirs[start : start + window]
                if [comp for _, comp in part] != [comp for _, comp in ours_seq]:
                    continue
                if np.allclose(np.diff([z for z, _ in part]), gaps, atol=1e-4):
                    found = True
    assert found, f"no pymatgen slab of {hkl} shows our layer sequence and spacings from {key}"


def test_written_files_read_back_the_same_slab(tmp_path):
    import ase.io

    c = charged("perovskite:Sr,Ti,O", 3.905)
    for name in ("slab.cif", "POSCAR", "slab.extxyz"):
        target = tmp_path / name
        report = slab_report(c, (0, 0, 1), "TiO2", layers=2, vacuum_angstrom=10.0, out=target)
        back = ase.io.read(target)
        assert report.written == (str(target),)
        assert sorted(back.get_chemical_symbols()) == sorted(
            el for el, n in report.slab.composition.items() for _ in range(n)
        )
        assert np.allclose(np.array(back.cell), np.array(report.slab.lattice), atol=1e-4)
        zs = sorted(np.round(back.positions[:, 2], 3))
        assert zs[-1] - zs[0] == pytest.approx(report.slab.thickness, abs=1e-3)
    with pytest.raises(PlaneError, match="exists"):
        slab_report(c, (0, 0, 1), "TiO2", out=tmp_path / "POSCAR")
    source = tmp_path / "bulk.cif"
    source.write_text("data_x\n")
    with pytest.raises(PlaneError, match="input"):
        slab_report(c, (0, 0, 1), "TiO2", out=source, inputs=[source], force=True)


def test_bad_slab_requests_are_errors_naming_the_value():
    c = charged("rocksalt:Na,Cl", 5.64)
    with pytest.raises(PlaneError, match="layers"):
        build_slab(c, (1, 1, 1), "Na", layers=0)
    with pytest.raises(PlaneError, match="vacuum"):
        build_slab(c, (1, 1, 1), "Na", vacuum_angstrom=-1)
    with pytest.raises(StructureError, match="'K'"):
        build_slab(c, (1, 1, 1), "K")
    with pytest.raises(PlaneError, match="no reconstruction cell '3x3'"):
        slab_report(c, (1, 1, 1), "Na", cell="3x3")
    with pytest.raises(PlaneError, match="no reconstruction cell"):
        slab_report(c, (0, 0, 1), "NaCl", cell="2x1")  # a non-polar face has nothing to compensate
    with pytest.raises(PlaneError, match="pattern must be from 1"):
        slab_report(c, (1, 1, 1), "Na", pattern=99)
    with pytest.raises(PlaneError, match="format"):
        slab_report(c, (1, 1, 1), "Na", out="slab.unknownformat")


def test_cells_are_chosen_by_wood_notation_matrix_or_rank():
    c = charged("rocksalt:Na,Cl", 5.64)
    recs = termination_polarity(c, face_terminations(c, (1, 1, 1)), "Na", max_cell=4).reconstructions
    assert select_reconstruction(recs) is recs[0]
    assert select_reconstruction(recs, pattern=2) is recs[1]
    for text in ("(2×1)", "2x1", "(2 x 1)", "2 0 0 1"):
        assert select_reconstruction(recs, text).matrix == ((2, 0), (0, 1))
    # a centred cell on the hexagonal (111) mesh has no standard Wood name: it goes by its matrix
    assert select_reconstruction(recs, "2 0 1 2").matrix == ((2, 0), (1, 2))
    assert select_reconstruction(recs, "(2x2)").wood == "(2×2)"


def test_an_adatom_pattern_adds_the_sites_one_period_up():
    # Hexaboride (1 1 2), termination B2'': compensation +1/2, realised by adding top sites (the bulk continued).
    from collections import Counter

    c = charged("hexaboride:La,B", 4.157, 0.1993)
    ft = face_terminations(c, (1, 1, 2))
    tp = termination_polarity(c, ft, "B2''", max_cell=2)
    assert tp.compensation == pytest.approx(0.5)
    rec = next(r for r in tp.reconstructions if r.mode == "add")
    plain = describe_slab(build_slab(c, (1, 1, 2), "B2''", layers=2, reconstruction=None), c)
    slab = build_slab(c, (1, 1, 2), "B2''", layers=2, reconstruction=rec)
    info = describe_slab(slab, c)
    cells = abs(round(np.linalg.det(np.array(rec.matrix))))
    added = Counter(info.composition) - Counter({el: n * cells for el, n in plain.composition.items()})
    assert dict(added) == dict(Counter(rec.changed_atoms_species))
    # The net charge of the added sites is the compensating charge dq = mu / d per 1x1 cell (Tasker picture).
    assert info.charge - plain.charge * cells == pytest.approx(tp.compensating_charge * cells)
    assert info.layers[0].z > plain.layers[0].z  # the adatoms sit above the old top layer
