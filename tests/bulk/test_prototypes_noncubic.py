"""Non-cubic prototypes against spglib's Wyckoff analysis, ASE- and pymatgen-built cells, and known bond lengths."""

import numpy as np
import pytest

from termination import StructureError
from termination.bulk.bonds import bond_graph
from termination.structures import PROTOTYPES, TABULATED, build_prototype

# Representative positions of each site (International Tables Vol. A, in spglib's standard
# setting: origin choice 1 for I4_1/amd, hexagonal axes for R groups), as ASE's
# ase.spacegroup.crystal takes them; it generates the orbits from its own tables.
ASE_BASES = {
    "hcp": lambda p: [(1 / 3, 2 / 3, 1 / 4)],
    "wurtzite": lambda p: [(1 / 3, 2 / 3, 0), (1 / 3, 2 / 3, p["u"])],
    "rutile": lambda p: [(0, 0, 0), (p["x"], p["x"], 0)],
    "anatase": lambda p: [(0, 0, 0), (0, 0, p["z"])],
    "corundum": lambda p: [(0, 0, p["z"]), (p["x"], 0, 1 / 4)],
    "graphite": lambda p: [(0, 0, 1 / 4), (1 / 3, 2 / 3, 1 / 4)],
    "2H-MX2": lambda p: [(1 / 3, 2 / 3, 1 / 4), (1 / 3, 2 / 3, p["z"])],
    "1T-MX2": lambda p: [(0, 0, 0), (1 / 3, 2 / 3, p["z"])],
    "tetradymite": lambda p: [(0, 0, p["z_M"]), (0, 0, 0), (0, 0, p["z_X"])],
    "NiAs": lambda p: [(0, 0, 0), (1 / 3, 2 / 3, 1 / 4)],
}
NON_CUBIC = sorted(n for n, p in PROTOTYPES.items() if p.lattice != "cubic")


def test_every_non_cubic_prototype_has_a_reference_basis():
    assert set(ASE_BASES) == set(NON_CUBIC)


def _example(name):
    proto = PROTOTYPES[name]
    elements = proto.example.partition(":")[2].split(",")
    tab = TABULATED[(proto.name, tuple(elements))]
    return proto, elements, tab


@pytest.mark.parametrize("name", NON_CUBIC)
def test_wyckoff_letters_are_those_declared(name):
    import spglib

    proto, _, _ = _example(name)
    c = build_prototype(proto.example)
    numbers = [list(dict.fromkeys(c.species)).index(s) + 1 for s in c.species]
    data = spglib.get_symmetry_dataset((c.lattice, c.positions, numbers))
    assert data.number == proto.number  # spglib
    found = {}
    for sp, w in zip(c.species, data.wyckoffs):
        found.setdefault(sp, set()).add(w)
    declared = {}
    elements = proto.example.partition(":")[2].split(",")
    for role, label, _ in proto.sites:
        declared.setdefault(elements[role], set()).add(label[-1])
    assert found == declared


@pytest.mark.parametrize("name", NON_CUBIC)
def test_matches_the_cell_ase_builds_from_the_same_sites(name):
    from ase.spacegroup import crystal
    from pymatgen.analysis.structure_matcher import StructureMatcher
    from pymatgen.core import Lattice, Structure

    proto, elements, tab = _example(name)
    params = {q.name: q.default for q in proto.parameters} | dict(tab.parameters)
    symbols = [elements[role] for role, _, _ in proto.sites]
    gamma = 120 if proto.lattice == "hexagonal" else 90
    ref = crystal(
        symbols,
        ASE_BASES[name](params),
        spacegroup=proto.number,
        setting=1,
        cellpar=[tab.a, tab.a, tab.c, 90, 90, gamma],
    )  # ASE: orbits from its own space-group tables
    ours = build_prototype(proto.example)
    assert len(ours.species) == len(ref)
    s_ref = Structure(Lattice(ref.cell[:]), ref.get_chemical_symbols(), ref.get_scaled_positions())
    s_ours = Structure(Lattice(ours.lattice), list(ours.species), ours.positions)
    # pymatgen StructureMatcher, tight tolerances, no scaling: the same crystal
    assert StructureMatcher(ltol=1e-3, stol=1e-3, angle_tol=0.01, scale=False).fit(s_ref, s_ours)


# Nearest bond lengths of the tabulated examples, Å, from the structure papers and handbooks
# (from memory): they pin the settings and free parameters, not just the symmetry.
BONDS = [
    ("hcp:Zn", [2.665, 2.913], 0.012),  # in-plane a and interlayer sqrt(a²/3 + c²/4); Wyckoff
    ("wurtzite:Zn,O", [1.974, 1.989], 0.012),  # ZnO three basal and one axial Zn-O; Kisi and Elcombe 1989
    ("rutile:Ti,O", [1.949, 1.980], 0.012),  # TiO2 four equatorial and two apical Ti-O; Burdett et al. 1987
    ("anatase:Ti,O", [1.934, 1.980], 0.012),  # TiO2 anatase; Burdett et al. 1987
    ("corundum:Al,O", [1.855, 1.972], 0.012),  # Al2O3 three short and three long Al-O; Lewis et al. 1982
    ("graphite:C", [1.421], 0.012),  # a/sqrt 3; common practice
    ("2H-MX2:Mo,S", [2.41], 0.012),  # MoS2 Mo-S; Bronsema et al. 1986
    ("1T-MX2:Ti,S", [2.43], 0.012),  # TiS2 Ti-S; handbook value
    # Bi2Se3 Bi-Se(outer) and Bi-Se(inner); Nakajima 1963, quoted as 2.86-2.87 and 3.07 (from memory,
    # hence the wider tolerance): 0.001 in z_Bi moves them by 0.03.
    ("tetradymite:Bi,Se", [2.865, 3.07], 0.02),
    ("NiAs:Ni,As", [2.43, 2.50], 0.012),  # NiAs Ni-As and Ni-Ni across the face-sharing octahedra (c/2); Wyckoff
]


@pytest.mark.parametrize("spec, lengths, tol", BONDS)
def test_tabulated_cells_give_the_known_bond_lengths(spec, lengths, tol):
    g = bond_graph(build_prototype(spec))
    found = sorted({round(float(v), 2) for v in g.length})
    assert found == pytest.approx(lengths, abs=tol)


def test_wurtzite_anion_sits_above_the_cation_along_c():
    # ZnO (0001) is the Zn-polar face: the axial bond points from Zn up to O (common practice).
    c = build_prototype("wurtzite:Zn,O")
    g = bond_graph(c)
    axial = [v for i, v in zip(g.source, g.vector) if c.species[i] == "Zn" and abs(v[0]) < 1e-6 and abs(v[1]) < 1e-6]
    assert len(axial) == 2 and all(v[2] > 0 for v in axial)


def test_free_parameters_by_name_and_range():
    c = build_prototype("wurtzite:Ga,N", parameters={"u": 0.38})
    z = sorted(c.positions[[s == "N" for s in c.species]][:, 2] - c.positions[[s == "Ga" for s in c.species]][:, 2])
    assert (np.array(z) % 0.5) == pytest.approx([0.38, 0.38])
    with pytest.raises(StructureError, match="no free parameter 'w'"):
        build_prototype("wurtzite:Ga,N", parameters={"w": 0.3})
    with pytest.raises(StructureError, match="z_M of tetradymite .* between 0 and 0.5, got 0.7"):
        build_prototype("tetradymite:Bi,Se", parameters={"z_M": 0.7})
    with pytest.raises(StructureError, match="free parameters z_M, z_X; --x 0.3 does not apply"):
        build_prototype("tetradymite:Bi,Se", x=0.3)


@pytest.mark.parametrize(
    "spec, kwargs, message",
    [
        ("hcp:Zn", {"a": 2.66}, "hexagonal: give --c"),
        ("hcp:Os", {}, "needs lattice constants: pass --a and --c"),
        ("hcp:Zn", {"c": 4.9}, "--c needs --a"),
        ("fcc:Cu", {"a": 3.6, "c": 3.6}, "cubic: --c 3.6 does not apply"),
        ("rutile:Ti,O", {"a": 4.59, "c": -2.96}, "lattice constant c must be positive"),
    ],
)
def test_bad_lattice_constants_name_the_value(spec, kwargs, message):
    with pytest.raises(StructureError, match=message):
        build_prototype(spec, **kwargs)


def test_prototype_names_ignore_case():
    assert build_prototype("2h-mx2:Mo,S").spacegroup_number == 194
    assert build_prototype("nias:Ni,As").spacegroup_number == 194
