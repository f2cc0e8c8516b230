"""Fixtures shared by the identification tests."""

import numpy as np
import pytest

from structures.prototypes import orbit
from termination.bulk.crystal import build_crystal

#: Hall number of Fd-3m, origin choice 2 (spglib's database).  # International Tables Vol. A
FD3M_ORIGIN_2 = 526


@pytest.fixture(scope="session")
def spinel():
    """MgAl2O4 spinel, Fd-3m (origin choice 2): a = 8.08 Å, Mg 8a, Al 16d, O 32e with x = 0.262 (from memory)."""
    sites = [("Mg", [1 / 8, 1 / 8, 1 / 8]), ("Al", [0.5, 0.5, 0.5]), ("O", [0.262, 0.262, 0.262])]
    positions, species = [], []
    for element, point in sites:
        orb = orbit(FD3M_ORIGIN_2, point)
        positions.append(orb)
        species += [element] * len(orb)
    return build_crystal(np.eye(3) * 8.08, np.vstack(positions), species)
