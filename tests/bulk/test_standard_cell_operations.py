"""A crystal given in spglib's standard cell keeps the operations spglib finds for that cell."""

import numpy as np
import pytest
import spglib

from termination.bulk.crystal import build_crystal
from termination.bulk.elements import atomic_number


@pytest.mark.parametrize(
    "spec", ["perovskite:Sr,Ti,O", "half-heusler:Ti,Ni,Sn", "wurtzite:Zn,O", "hexaboride:La,B", "rutile:Ti,O"]
)
def test_operations_of_a_standard_cell_input_are_spglibs(proto, spec):
    c = proto(spec)
    again = build_crystal(c.lattice, c.positions, c.species)  # already spglib's standard cell
    numbers = [atomic_number(s) for s in again.species]
    # spglib.get_symmetry on the standard cell, the reference
    ref = spglib.get_symmetry((again.lattice, again.positions, numbers), symprec=again.symprec)
    translations = np.array(ref["translations"], dtype=float) % 1.0
    translations[np.isclose(translations, 1.0, atol=1e-8)] = 0.0
    assert np.array_equal(again.rotations, ref["rotations"])
    assert np.allclose(again.translations, translations, atol=1e-12)
