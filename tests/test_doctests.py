"""The examples in every module's docstrings run and give what they show."""

import doctest
import importlib
import pkgutil

import pytest

import termination
import termination.structures

# termination.structures is mapped from the repository's top-level structures/
# folder, so an editable install does not show it inside termination/: walk both.
MODULES = sorted(
    {
        m.name
        for package in (termination, termination.structures)
        for m in pkgutil.walk_packages(package.__path__, prefix=package.__name__ + ".")
        if m.name != "termination.cli"
    }
)


def test_every_module_is_found():
    # The walk must see the layers and the mapped structures package, or this file proves nothing.
    for name in ("termination.algebra.lattice2d", "termination.surface.faces", "termination.structures.prototypes"):
        assert name in MODULES


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    flags = doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS
    result = doctest.testmod(module, optionflags=flags, extraglobs={"np": __import__("numpy")})
    assert result.failed == 0, f"{result.failed} of {result.attempted} examples failed in {name}"
