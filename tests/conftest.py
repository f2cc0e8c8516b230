"""Shared fixtures: built-in prototypes at handbook lattice constants."""

import pytest

from termination.structures import build_prototype


@pytest.fixture(scope="session")
def proto():
    """Cached prototype builder: proto("rocksalt:Na,Cl", a=5.64)."""
    cache = {}

    def get(spec, a=None, x=None):
        key = (spec, a, x)
        if key not in cache:
            cache[key] = build_prototype(spec, a=a, x=x)
        return cache[key]

    return get


@pytest.fixture(scope="session")
def from_spacegroup():
    """Cached crystal from a space group and its sites, through pymatgen (structures no prototype covers).

    ``from_spacegroup("P4_2/mnm", lattice, [("Ti", (0, 0, 0)), ...])`` with ``lattice`` a
    pymatgen ``Lattice``; the values and their sources live in the tests that use it.
    """
    cache = {}

    def get(group, lattice, sites):
        key = (group, tuple(map(tuple, lattice.matrix.round(6))), tuple((el, tuple(x)) for el, x in sites))
        if key not in cache:
            from pymatgen.core import Structure

            from termination.bulk.crystal import build_crystal

            s = Structure.from_spacegroup(group, lattice, [el for el, _ in sites], [x for _, x in sites])
            cache[key] = build_crystal(s.lattice.matrix, s.frac_coords, [site.specie.symbol for site in s])
        return cache[key]

    return get
