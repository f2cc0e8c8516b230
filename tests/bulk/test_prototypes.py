import numpy as np
import pytest

from termination import StructureError
from termination.structures import KNOWN_LATTICE_CONSTANTS, PROTOTYPES, build_prototype, load_structure

# Intended space groups: International Tables for Crystallography Vol. A;
# structure types as in Pearson's Handbook (from memory).
EXPECTED = {
    "fcc": 225,
    "bcc": 229,
    "sc": 221,
    "diamond": 227,
    "rocksalt": 225,
    "cesium-chloride": 221,
    "zincblende": 216,
    "fluorite": 225,
    "antifluorite": 225,
    "perovskite": 221,
    "half-heusler": 216,
    "heusler": 225,
    "inverse-heusler": 216,
    "hexaboride": 221,
    "hcp": 194,
    "wurtzite": 186,
    "rutile": 136,
    "anatase": 141,
    "corundum": 167,
    "graphite": 194,
    "2H-MX2": 194,
    "1T-MX2": 164,
    "tetradymite": 166,
    "NiAs": 194,
}
# Atoms per conventional cell (Z times atoms per formula unit), from the Wyckoff multiplicities.
NATOMS = {
    "fcc": 4,
    "bcc": 2,
    "sc": 1,
    "diamond": 8,
    "rocksalt": 8,
    "cesium-chloride": 2,
    "zincblende": 8,
    "fluorite": 12,
    "antifluorite": 12,
    "perovskite": 5,
    "half-heusler": 12,
    "heusler": 16,
    "inverse-heusler": 16,
    "hexaboride": 7,
    "hcp": 2,
    "wurtzite": 4,
    "rutile": 6,
    "anatase": 12,
    "corundum": 30,  # Z = 6 in hexagonal axes
    "graphite": 4,
    "2H-MX2": 6,
    "1T-MX2": 3,
    "tetradymite": 15,  # Z = 3 in hexagonal axes
    "NiAs": 4,
}


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_spglib_finds_intended_space_group(name):
    proto = PROTOTYPES[name]
    # Cubic prototypes at an arbitrary a; the others at the example's tabulated cell.
    crystal = build_prototype(proto.example, a=5.0) if proto.lattice == "cubic" else build_prototype(proto.example)
    assert crystal.spacegroup_number == EXPECTED[name] == proto.number  # spglib
    assert crystal.natoms == NATOMS[name]
    assert crystal.note is None  # already the standard cell


def test_every_prototype_is_listed_in_expectations():
    assert set(PROTOTYPES) == set(EXPECTED)


def test_hexaboride_free_parameter_moves_boron_only_along_cube_axes():
    c = build_prototype("hexaboride:La,B", a=4.157, x=0.1993)  # LaB6 x, from memory
    b = c.positions[np.array(c.species) == "B"]
    d = np.linalg.norm(((b[:, None] - b[None]) - np.rint(b[:, None] - b[None])) @ c.lattice, axis=-1)
    d = np.unique(np.round(d[d > 1e-6], 6))
    # B-B between octahedra 2xa = 1.66 Å, inside one sqrt(2)(1/2 - x)a = 1.77 Å in LaB6 (from memory)
    assert d[0] == pytest.approx(2 * 0.1993 * 4.157, rel=1e-5)
    assert d[1] == pytest.approx(np.sqrt(2) * (0.5 - 0.1993) * 4.157, rel=1e-5)


def test_known_lattice_constant_used_when_a_missing():
    c = build_prototype("rocksalt:Na,Cl")
    assert c.cell_parameters[0] == pytest.approx(KNOWN_LATTICE_CONSTANTS[("rocksalt", ("Na", "Cl"))])


@pytest.mark.parametrize(
    "spec, a, x, message",
    [
        ("nosuch:Na", 3.0, None, "unknown prototype"),
        ("rocksalt:Na", 3.0, None, "takes 2 elements"),
        ("rocksalt:Na,Qq", 3.0, None, "unknown element 'Qq'"),
        ("rocksalt:Na,Cl", -3.1, None, "must be positive, got -3.1"),
        ("rocksalt:Na,Cl", float("nan"), None, "must be positive, got nan"),
        ("rocksalt:Na,Cl", 3.0, 0.2, "no free parameter"),
        ("hexaboride:La,B", 4.1, 0.7, "x of hexaboride .* must lie between 0 and 0.5"),
        ("rocksalt:Xe,Kr", None, None, "needs a lattice constant"),
        ("rocksalt:Na,Cl", 0.5, None, "impossible structure"),
    ],
)
def test_bad_prototype_input_names_the_value(spec, a, x, message):
    with pytest.raises(StructureError, match=message):
        build_prototype(spec, a=a, x=x)


@pytest.mark.parametrize("spec", ["rocksalt:Na,,Cl", "rocksalt:Na,Cl,", "rocksalt:,Na,Cl", "rocksalt:Na, ,Cl"])
def test_empty_element_in_a_spec_is_rejected_not_skipped(spec):
    # 'rocksalt:Na,,Cl' used to be read as rocksalt:Na,Cl without a word.
    with pytest.raises(StructureError, match="empty element"):
        build_prototype(spec, a=5.64)


def test_unknown_file_or_spec_is_rejected():
    with pytest.raises(StructureError, match="neither a structure file"):
        load_structure("no-such-file.cif")
