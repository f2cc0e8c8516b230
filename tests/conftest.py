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
