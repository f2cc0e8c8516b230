import numpy as np
import pytest

from termination import StructureError, build_crystal
from termination.bulk.elements import handling_caution


def test_primitive_fcc_input_is_standardised_and_says_so():
    a = 3.615  # Cu, from memory
    prim = 0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]])
    c = build_crystal(prim, [[0, 0, 0]], ["Cu"])
    assert c.natoms == 4 and c.spacegroup_number == 225  # spglib
    assert "standardised to the conventional" in c.note
    assert len(c.point_group) == 48 and c.centrosymmetric  # Oh, International Tables Vol. A
    assert len(c.centring) == 4  # F centring


def test_zincblende_point_group_is_td_without_inversion():
    a = 5.653
    prim = 0.5 * a * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]])
    c = build_crystal(prim, [[0, 0, 0], [0.25, 0.25, 0.25]], ["Ga", "As"], charges={"Ga": 3, "As": -3})
    assert len(c.point_group) == 24 and not c.centrosymmetric  # Td, International Tables Vol. A
    assert sorted(set(zip(c.species, c.charges))) == [("As", -3.0), ("Ga", 3.0)]


def test_primitive_basis_volume_matches_centring():
    a = 4.0
    c = build_crystal(np.eye(3) * a, [[0, 0, 0], [0.5, 0.5, 0.5]], ["Fe", "Fe"])  # bcc
    assert abs(np.linalg.det(c.primitive_fractional)) == pytest.approx(0.5)


@pytest.mark.parametrize(
    "lattice, positions, species, message",
    [
        (np.eye(3) * 3, [[0, 0, 0]], ["Zz"], "unknown element 'Zz'"),
        ([[1, 0, 0], [0, 1, 0], [1, 1, 0]], [[0, 0, 0]], ["Na"], "coplanar"),
        (np.eye(2), [[0, 0, 0]], ["Na"], "3x3"),
        (np.eye(3) * 3, [[0, 0, np.nan]], ["Na"], "NaN"),
        (np.eye(3) * 3, [[0, 0, 0], [0.01, 0, 0]], ["Na", "Cl"], "apart"),
        (np.eye(3) * 3, [[0, 0, 0]], ["Na", "Cl"], "2 species given for 1 positions"),
    ],
)
def test_impossible_cells_are_rejected(lattice, positions, species, message):
    with pytest.raises(StructureError, match=message):
        build_crystal(lattice, positions, species)


def test_handling_caution_names_toxic_elements_only():
    assert "As" in handling_caution(["Ga", "As"])  # common practice: arsenic is toxic
    assert "Tl" in handling_caution(["Tl", "Br"])
    assert handling_caution(["Na", "Cl"]) is None
