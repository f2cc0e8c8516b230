"""Shared fixtures: built-in prototypes at handbook lattice constants."""

import numpy as np
import pytest

from structures import build_prototype


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


def random_rotation(rng):
    """Uniform random proper rotation (QR of a Gaussian matrix)."""
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q *= np.sign(np.diag(r))
    if np.linalg.det(q) < 0:
        q[:, 0] *= -1
    return q


def pa3_structure(x=0.385, a=5.417):
    """Pyrite-type FeS2 (Pa-3, Th point group) generated from spglib's database.

    Fe at 4a, S at 8c (x, x, x); x = 0.385 and a = 5.417 Å are the usual pyrite
    values (from memory).
    """
    import spglib

    hall = next(h for h in range(1, 531) if spglib.get_spacegroup_type(h).number == 205)
    ops = spglib.get_symmetry_from_database(hall)
    rot, tra = ops["rotations"], ops["translations"]

    def orbit(p):
        pts = (np.einsum("nij,j->ni", rot, p) + tra) % 1.0
        uniq = []
        for q in pts:
            if not any(np.allclose((q - u + 0.5) % 1.0 - 0.5, 0, atol=1e-8) for u in uniq):
                uniq.append(q)
        return np.array(uniq)

    fe, s = orbit(np.zeros(3)), orbit(np.full(3, x))
    return np.eye(3) * a, np.vstack([fe, s]), ["Fe"] * len(fe) + ["S"] * len(s)
