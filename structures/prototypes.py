"""Built-in cubic prototypes, written ``NAME:EL1,EL2,...``.

Each prototype lists its Wyckoff sites (International Tables for
Crystallography Vol. A, origin choice 1 for Fd-3m) and builds the conventional
cell.  ``--a`` sets the lattice constant; ``--x`` the free positional
parameter where the prototype has one.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal, build_crystal
from termination.bulk.elements import check_symbol
from termination.defaults import MAX_LENGTH_ANGSTROM, SYMPREC_ANGSTROM
from termination.errors import StructureError

__all__ = ["KNOWN_LATTICE_CONSTANTS", "PROTOTYPES", "Prototype", "SiteGenerator", "build_prototype", "parse_spec"]

#: Fractional positions of a Wyckoff site, (3,) or (k, 3), from the free parameter x (None: none).
SiteGenerator = Callable[[float | None], ArrayLike]

_F = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])
_I = np.array([[0, 0, 0], [0.5, 0.5, 0.5]])
_P = np.array([[0.0, 0.0, 0.0]])


def _sites_6f(x: float | None) -> list[list[float]]:
    """Site 6f (x, 1/2, 1/2) of Pm-3m, the boron octahedra of a hexaboride."""
    if x is None:  # the hexaboride prototype always passes its default x
        raise StructureError("site 6f needs the free parameter x")
    return [[x, 0.5, 0.5], [-x, 0.5, 0.5], [0.5, x, 0.5], [0.5, -x, 0.5], [0.5, 0.5, x], [0.5, 0.5, -x]]


@dataclass(frozen=True)
class Prototype:
    """A structure type.

    Attributes
    ----------
    name : str
        Name used in the spec, e.g. ``half-heusler``.
    roles : tuple of str
        What each element of the spec stands for, in order.
    sites : tuple of (role index, Wyckoff label, SiteGenerator)
        ``generator(x)`` returns the fractional positions of the site before
        centring translations are added.
    centring : (K, 3) FloatArray
        Lattice centring translations, fractional.
    spacegroup : str, number : int
        Intended space group.
    example : str
        A spec that builds a well-known compound.
    description : str
        The structure type in words.
    default_x : float or None
        Default free parameter, fractional (None: no free parameter).
    """

    name: str
    roles: tuple[str, ...]
    sites: tuple[tuple[int, str, SiteGenerator], ...]
    centring: FloatArray
    spacegroup: str
    number: int
    example: str
    description: str
    default_x: float | None = None

    @property
    def wyckoff(self) -> str:
        """Human-readable site list, e.g. 'Na 4a, Cl 4b'."""
        return ", ".join(f"{self.roles[r]} {w}" for r, w, _ in self.sites)

    def build(self, elements: Iterable[object], a: float, x: float | None = None, name: str | None = None) -> Crystal:
        """Conventional cell of this prototype (a :class:`~termination.bulk.crystal.Crystal`).

        ``a`` is the cubic lattice constant in Å; ``x`` the free parameter
        (fractional), default :attr:`default_x`.
        """
        symbols = [check_symbol(e) for e in elements]
        if len(symbols) != len(self.roles):
            raise StructureError(
                f"prototype {self.name} takes {len(self.roles)} elements ({','.join(self.roles)}), "
                f"got {len(symbols)}: {','.join(symbols)}"
            )
        try:
            length = float(a)
        except (TypeError, ValueError):
            raise StructureError(f"lattice constant must be a number in Å, got {a!r}") from None
        if not np.isfinite(length) or length <= 0:
            raise StructureError(f"lattice constant must be positive, got {length} Å")
        if length > MAX_LENGTH_ANGSTROM:
            raise StructureError(f"lattice constant must be at most {MAX_LENGTH_ANGSTROM:g} Å, got {length:g} Å")
        if x is not None and self.default_x is None:
            raise StructureError(f"prototype {self.name} has no free parameter; --x {x} does not apply")
        free = self.default_x if x is None else float(x)
        if free is not None and not (np.isfinite(free) and 0 < free < 0.5):
            raise StructureError(f"free parameter x must lie between 0 and 0.5, got {free}")
        blocks: list[FloatArray] = []
        species: list[str] = []
        for role, _, gen in self.sites:
            base = np.atleast_2d(np.asarray(gen(free), dtype=np.float64))
            pts = (base[:, None, :] + self.centring[None, :, :]).reshape(-1, 3) % 1.0
            blocks.append(pts)
            species += [symbols[role]] * len(pts)
        positions = np.vstack(blocks)
        spec = f"{self.name}:{','.join(symbols)}"
        return build_crystal(np.eye(3) * length, positions, species, name=name, origin=spec)


def _p(
    name: str,
    roles: Sequence[str],
    sites: Sequence[tuple[int, str, SiteGenerator]],
    centring: FloatArray,
    sg: str,
    number: int,
    example: str,
    description: str,
    default_x: float | None = None,
) -> Prototype:
    """Shorthand constructor of the table below."""
    return Prototype(name, tuple(roles), tuple(sites), centring, sg, number, example, description, default_x)


_Q = 0.25
PROTOTYPES: dict[str, Prototype] = {
    p.name: p
    for p in [
        _p("fcc", ["A"], [(0, "4a", lambda x: [0, 0, 0])], _F, "Fm-3m", 225, "fcc:Cu", "face-centred cubic metal"),
        _p("bcc", ["A"], [(0, "2a", lambda x: [0, 0, 0])], _I, "Im-3m", 229, "bcc:Fe", "body-centred cubic metal"),
        _p("sc", ["A"], [(0, "1a", lambda x: [0, 0, 0])], _P, "Pm-3m", 221, "sc:Po", "simple cubic"),
        _p(
            "diamond",
            ["A"],
            [(0, "8a", lambda x: [[0.0, 0.0, 0.0], [_Q, _Q, _Q]])],
            _F,
            "Fd-3m",
            227,
            "diamond:Si",
            "diamond (origin choice 1)",
        ),
        _p(
            "rocksalt",
            ["A", "B"],
            [(0, "4a", lambda x: [0, 0, 0]), (1, "4b", lambda x: [0.5, 0.5, 0.5])],
            _F,
            "Fm-3m",
            225,
            "rocksalt:Na,Cl",
            "rock salt (B1)",
        ),
        _p(
            "cesium-chloride",
            ["A", "B"],
            [(0, "1a", lambda x: [0, 0, 0]), (1, "1b", lambda x: [0.5, 0.5, 0.5])],
            _P,
            "Pm-3m",
            221,
            "cesium-chloride:Cs,Cl",
            "CsCl (B2)",
        ),
        _p(
            "zincblende",
            ["cation", "anion"],
            [(0, "4a", lambda x: [0, 0, 0]), (1, "4c", lambda x: [_Q, _Q, _Q])],
            _F,
            "F-43m",
            216,
            "zincblende:Ga,As",
            "zinc blende (B3)",
        ),
        _p(
            "fluorite",
            ["cation", "anion"],
            [(0, "4a", lambda x: [0, 0, 0]), (1, "8c", lambda x: [[_Q, _Q, _Q], [0.75, 0.75, 0.75]])],
            _F,
            "Fm-3m",
            225,
            "fluorite:Ca,F",
            "fluorite (C1), cation at 4a, anion at 8c",
        ),
        _p(
            "antifluorite",
            ["cation", "anion"],
            [(0, "8c", lambda x: [[_Q, _Q, _Q], [0.75, 0.75, 0.75]]), (1, "4a", lambda x: [0, 0, 0])],
            _F,
            "Fm-3m",
            225,
            "antifluorite:Li,O",
            "antifluorite, cation at 8c, anion at 4a",
        ),
        _p(
            "perovskite",
            ["A", "B", "X"],
            [
                (0, "1a", lambda x: [0, 0, 0]),
                (1, "1b", lambda x: [0.5, 0.5, 0.5]),
                (2, "3c", lambda x: [[0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]]),
            ],
            _P,
            "Pm-3m",
            221,
            "perovskite:Sr,Ti,O",
            "cubic perovskite ABX3",
        ),
        _p(
            "half-heusler",
            ["X", "Y", "Z"],
            [(0, "4b", lambda x: [0.5, 0.5, 0.5]), (1, "4c", lambda x: [_Q, _Q, _Q]), (2, "4a", lambda x: [0, 0, 0])],
            _F,
            "F-43m",
            216,
            "half-heusler:Ti,Ni,Sn",
            "half-Heusler XYZ (C1b)",
        ),
        _p(
            "heusler",
            ["X", "Y", "Z"],
            [
                (0, "8c", lambda x: [[_Q, _Q, _Q], [0.75, 0.75, 0.75]]),
                (1, "4a", lambda x: [0, 0, 0]),
                (2, "4b", lambda x: [0.5, 0.5, 0.5]),
            ],
            _F,
            "Fm-3m",
            225,
            "heusler:Cu,Mn,Al",
            "full Heusler X2YZ (L2_1)",
        ),
        # Inverse Heusler (Hg2CuTi type, XA): X on 4a and 4c, Y on 4b, Z on 4d (from memory).
        _p(
            "inverse-heusler",
            ["X", "Y", "Z"],
            [
                (0, "4a+4c", lambda x: [[0.0, 0.0, 0.0], [_Q, _Q, _Q]]),
                (1, "4b", lambda x: [0.5, 0.5, 0.5]),
                (2, "4d", lambda x: [0.75, 0.75, 0.75]),
            ],
            _F,
            "F-43m",
            216,
            "inverse-heusler:Mn,Co,Ga",
            "inverse Heusler X2YZ (XA, Hg2CuTi type)",
        ),
        _p(
            "hexaboride",
            ["M", "B"],
            [(0, "1a", lambda x: [0, 0, 0]), (1, "6f", _sites_6f)],
            _P,
            "Pm-3m",
            221,
            "hexaboride:La,B",
            "metal hexaboride MB6, B at 6f (x,1/2,1/2)",
            default_x=0.2,
        ),
    ]
}

# Room-temperature lattice constants (Å) used when --a is not given (from memory,
# handbook values rounded to 3 decimals).
KNOWN_LATTICE_CONSTANTS: dict[tuple[str, tuple[str, ...]], float] = {
    ("fcc", ("Cu",)): 3.615,
    ("fcc", ("Al",)): 4.050,
    ("fcc", ("Ni",)): 3.524,
    ("fcc", ("Ag",)): 4.086,
    ("fcc", ("Au",)): 4.078,
    ("fcc", ("Pt",)): 3.924,
    ("fcc", ("Pd",)): 3.891,
    ("fcc", ("Ir",)): 3.839,
    ("bcc", ("Fe",)): 2.866,
    ("bcc", ("W",)): 3.165,
    ("bcc", ("Mo",)): 3.147,
    ("bcc", ("Cr",)): 2.885,
    ("bcc", ("Nb",)): 3.301,
    ("bcc", ("Ta",)): 3.303,
    ("sc", ("Po",)): 3.352,
    ("diamond", ("Si",)): 5.431,
    ("diamond", ("Ge",)): 5.658,
    ("diamond", ("C",)): 3.567,
    ("rocksalt", ("Na", "Cl")): 5.640,
    ("rocksalt", ("K", "Cl")): 6.293,
    ("rocksalt", ("Mg", "O")): 4.212,
    ("rocksalt", ("Li", "F")): 4.026,
    ("rocksalt", ("Ni", "O")): 4.177,
    ("rocksalt", ("Pb", "Te")): 6.462,
    ("rocksalt", ("K", "Br")): 6.600,
    ("cesium-chloride", ("Cs", "Cl")): 4.123,
    ("cesium-chloride", ("Ni", "Al")): 2.887,
    ("cesium-chloride", ("Fe", "Al")): 2.909,
    ("zincblende", ("Ga", "As")): 5.653,
    ("zincblende", ("In", "As")): 6.058,
    ("zincblende", ("Zn", "S")): 5.409,
    ("zincblende", ("In", "Sb")): 6.479,
    ("zincblende", ("Ga", "P")): 5.451,
    ("zincblende", ("In", "P")): 5.869,
    ("zincblende", ("Cd", "Te")): 6.481,
    ("fluorite", ("Ca", "F")): 5.463,
    ("fluorite", ("Ba", "F")): 6.200,
    ("fluorite", ("Ce", "O")): 5.411,
    ("fluorite", ("Sr", "F")): 5.800,
    ("antifluorite", ("Li", "O")): 4.610,
    ("perovskite", ("Sr", "Ti", "O")): 3.905,
    ("perovskite", ("K", "Ta", "O")): 3.989,
    ("perovskite", ("Ba", "Ti", "O")): 4.000,
    ("half-heusler", ("Ti", "Ni", "Sn")): 5.930,
    ("half-heusler", ("Zr", "Ni", "Sn")): 6.110,
    ("half-heusler", ("Hf", "Ni", "Sn")): 6.080,
    ("half-heusler", ("Ti", "Co", "Sb")): 5.880,
    ("half-heusler", ("Lu", "Pt", "Bi")): 6.577,
    ("heusler", ("Cu", "Mn", "Al")): 5.950,
    ("heusler", ("Co", "Mn", "Si")): 5.654,
    ("heusler", ("Fe", "V", "Al")): 5.761,
    ("heusler", ("Co", "Mn", "Ge")): 5.743,
    ("inverse-heusler", ("Mn", "Co", "Ga")): 5.860,
    ("hexaboride", ("La", "B")): 4.157,
    ("hexaboride", ("Ce", "B")): 4.141,
    ("hexaboride", ("Ca", "B")): 4.145,
    ("hexaboride", ("Eu", "B")): 4.185,
}


def parse_spec(spec: str) -> tuple[Prototype, list[str]]:
    """Split ``NAME:EL1,EL2`` into the prototype and the element list.

    >>> parse_spec("rocksalt:Na,Cl")[0].name, parse_spec("rocksalt:Na,Cl")[1]
    ('rocksalt', ['Na', 'Cl'])
    """
    name, _, rest = str(spec).partition(":")
    name = name.strip().lower()
    if name not in PROTOTYPES:
        raise StructureError(
            f"unknown prototype {name!r}; known: {', '.join(PROTOTYPES)} (see `termination structures`)"
        )
    if not rest.strip():
        raise StructureError(f"prototype {name} needs its elements, e.g. {PROTOTYPES[name].example}")
    if any(not e.strip() for e in rest.split(",")):
        raise StructureError(f"empty element in {spec!r}; write e.g. {PROTOTYPES[name].example}")
    elements = [check_symbol(e) for e in rest.split(",")]
    if len(elements) != len(PROTOTYPES[name].roles):
        proto = PROTOTYPES[name]
        raise StructureError(
            f"prototype {name} takes {len(proto.roles)} elements ({','.join(proto.roles)}), "
            f"got {len(elements)} in {spec!r}"
        )
    return PROTOTYPES[name], elements


def build_prototype(
    spec: str, a: float | None = None, x: float | None = None, symprec: float = SYMPREC_ANGSTROM
) -> Crystal:
    """Crystal from a spec such as ``half-heusler:Ti,Ni,Sn``.

    ``a`` (Å) defaults to :data:`KNOWN_LATTICE_CONSTANTS` for tabulated
    compounds; ``symprec`` is the symmetry tolerance, Å.
    """
    proto, elements = parse_spec(spec)
    if a is None:
        a = KNOWN_LATTICE_CONSTANTS.get((proto.name, tuple(elements)))
        if a is None:
            raise StructureError(f"{spec} needs a lattice constant: pass --a (Å)")
    crystal = proto.build(elements, a, x=x)
    if symprec != crystal.symprec:
        crystal = build_crystal(
            crystal.lattice, crystal.positions, crystal.species, symprec=symprec, origin=crystal.origin
        )
    return crystal
