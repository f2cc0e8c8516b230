"""Chemical elements: symbols, radii, electronegativities, handling cautions and compositions."""

from __future__ import annotations

from collections.abc import Iterable, Mapping

from termination.errors import StructureError, TerminationError
from termination.quantities import parse_number

__all__ = [
    "COVALENT_RADII",
    "ELECTRONEGATIVITY",
    "SYMBOLS",
    "TOXIC",
    "UNIT_FORMERS",
    "atomic_number",
    "check_symbol",
    "composition_label",
    "count_species",
    "covalent_radius",
    "electronegativity",
    "handling_caution",
    "parse_element_values",
]

SYMBOLS: list[str] = (
    "X H He Li Be B C N O F Ne Na Mg Al Si P S Cl Ar K Ca Sc Ti V Cr Mn Fe Co Ni Cu "
    "Zn Ga Ge As Se Br Kr Rb Sr Y Zr Nb Mo Tc Ru Rh Pd Ag Cd In Sn Sb Te I Xe Cs Ba "
    "La Ce Pr Nd Pm Sm Eu Gd Tb Dy Ho Er Tm Yb Lu Hf Ta W Re Os Ir Pt Au Hg Tl Pb Bi "
    "Po At Rn Fr Ra Ac Th Pa U Np Pu Am Cm Bk Cf Es Fm Md No Lr Rf Db Sg Bh Hs Mt Ds "
    "Rg Cn Nh Fl Mc Lv Ts Og"
).split()

_NUMBER: dict[str, int] = {s: z for z, s in enumerate(SYMBOLS) if z > 0}

# Elements whose dust, vapour or compounds need special handling when a crystal
# is cleaved, polished or heated (common practice in surface-science labs).
TOXIC: dict[str, str] = {
    "As": "toxic (arsenic)",
    "Be": "toxic dust (beryllium)",
    "Cd": "toxic (cadmium)",
    "Hg": "toxic vapour (mercury)",
    "Pb": "toxic (lead)",
    "Tl": "highly toxic (thallium)",
    "Se": "toxic (selenium)",
    "Te": "toxic (tellurium)",
    "Sb": "toxic (antimony)",
    "Os": "forms volatile toxic OsO4",
    "Ba": "soluble compounds toxic (barium)",
    "Cr": "hexavalent compounds toxic (chromium)",
    "Ni": "sensitising, carcinogenic dust (nickel)",
    "Co": "sensitising, carcinogenic dust (cobalt)",
    "Th": "radioactive (thorium)",
    "U": "radioactive and toxic (uranium)",
    "Pu": "radioactive (plutonium)",
    "Po": "radioactive (polonium)",
    "Ra": "radioactive (radium)",
}


def atomic_number(symbol: str) -> int:
    """Atomic number of an element symbol.

    >>> atomic_number("Sn")
    50
    """
    try:
        return _NUMBER[symbol]
    except KeyError:
        raise StructureError(f"unknown element {symbol!r}") from None


def check_symbol(symbol: object) -> str:
    """Return ``symbol`` normalised ('na' -> 'Na'); raise StructureError if unknown."""
    text = str(symbol).strip()
    norm = text[:1].upper() + text[1:].lower()
    if norm not in _NUMBER:
        raise StructureError(f"unknown element {text!r}")
    return norm


def handling_caution(species: Iterable[str]) -> str | None:
    """One-line handling caution for the hazardous elements among ``species``.

    Returns None when none of the elements is listed in :data:`TOXIC`.

    >>> print(handling_caution(["Ga", "As"]))  # doctest: +ELLIPSIS
    Caution: As toxic (arsenic). Cleave, polish and heat only under the lab's safety rules ...
    """
    found = sorted({s for s in species if s in TOXIC})
    if not found:
        return None
    items = "; ".join(f"{s} {TOXIC[s]}" for s in found)
    return (
        f"Caution: {items}. Cleave, polish and heat only under the lab's safety "
        "rules (fume hood, gloves, sealed waste)."
    )


# Covalent radii (Å) by atomic number 0..103: B. Cordero et al., Dalton Trans. 2832
# (2008), as tabulated in ASE (ase.data.covalent_radii); 2.0 where none is given.
COVALENT_RADII: tuple[float, ...] = (
    0.2,
    0.31,
    0.28,
    1.28,
    0.96,
    0.84,
    0.76,
    0.71,
    0.66,
    0.57,
    0.58,
    1.66,
    1.41,
    1.21,
    1.11,
    1.07,
    1.05,
    1.02,
    1.06,
    2.03,
    1.76,
    1.7,
    1.6,
    1.53,
    1.39,
    1.39,
    1.32,
    1.26,
    1.24,
    1.32,
    1.22,
    1.22,
    1.2,
    1.19,
    1.2,
    1.2,
    1.16,
    2.2,
    1.95,
    1.9,
    1.75,
    1.64,
    1.54,
    1.47,
    1.46,
    1.42,
    1.39,
    1.45,
    1.44,
    1.42,
    1.39,
    1.39,
    1.38,
    1.39,
    1.4,
    2.44,
    2.15,
    2.07,
    2.04,
    2.03,
    2.01,
    1.99,
    1.98,
    1.98,
    1.96,
    1.94,
    1.92,
    1.92,
    1.89,
    1.9,
    1.87,
    1.87,
    1.75,
    1.7,
    1.62,
    1.51,
    1.44,
    1.41,
    1.36,
    1.36,
    1.32,
    1.45,
    1.46,
    1.48,
    1.4,
    1.5,
    1.5,
    2.6,
    2.21,
    2.15,
    2.06,
    2.0,
    1.96,
    1.9,
    1.87,
    1.8,
    1.69,
    2.0,
    2.0,
    2.0,
    2.0,
    2.0,
    2.0,
    2.0,
)

# Pauling electronegativities by atomic number 0..103, as tabulated in pymatgen
# (Element.X); None where no value is defined (noble gases).
ELECTRONEGATIVITY: tuple[float | None, ...] = (
    0.0,
    2.2,
    None,
    0.98,
    1.57,
    2.04,
    2.55,
    3.04,
    3.44,
    3.98,
    None,
    0.93,
    1.31,
    1.61,
    1.9,
    2.19,
    2.58,
    3.16,
    None,
    0.82,
    1.0,
    1.36,
    1.54,
    1.63,
    1.66,
    1.55,
    1.83,
    1.88,
    1.91,
    1.9,
    1.65,
    1.81,
    2.01,
    2.18,
    2.55,
    2.96,
    3.0,
    0.82,
    0.95,
    1.22,
    1.33,
    1.6,
    2.16,
    1.9,
    2.2,
    2.28,
    2.2,
    1.93,
    1.69,
    1.78,
    1.96,
    2.05,
    2.1,
    2.66,
    2.6,
    0.79,
    0.89,
    1.1,
    1.12,
    1.13,
    1.14,
    1.13,
    1.17,
    1.2,
    1.2,
    1.1,
    1.22,
    1.23,
    1.24,
    1.25,
    1.1,
    1.27,
    1.3,
    1.5,
    2.36,
    1.9,
    2.2,
    2.2,
    2.28,
    2.54,
    2.0,
    1.62,
    2.33,
    2.02,
    2.0,
    2.2,
    2.2,
    0.7,
    0.9,
    1.1,
    1.3,
    1.5,
    1.38,
    1.36,
    1.28,
    1.3,
    1.3,
    1.3,
    1.3,
    1.3,
    1.3,
    1.3,
    1.3,
    1.3,
)

# Elements that form covalent polyanions and clusters (B6 octahedra, CO3, SiO4, ...):
# a bond between two of them is an intra-unit bond (common practice in crystal chemistry).
UNIT_FORMERS = frozenset("H B C N O F Si P S Cl As Se Br Te I".split())


def covalent_radius(symbol: str) -> float:
    """Covalent radius in Å (Cordero et al. 2008)."""
    z = atomic_number(symbol)
    return COVALENT_RADII[z] if z < len(COVALENT_RADII) else 2.0


def electronegativity(symbol: str) -> float:
    """Pauling electronegativity (4.0 for noble gases, so they sort last)."""
    z = atomic_number(symbol)
    x = ELECTRONEGATIVITY[z] if z < len(ELECTRONEGATIVITY) else None
    return 4.0 if x is None else x


def count_species(species: Iterable[str]) -> dict[str, int]:
    """Number of atoms per element, in order of first appearance.

    >>> count_species(["Na", "Cl", "Na"])
    {'Na': 2, 'Cl': 1}
    """
    counts: dict[str, int] = {}
    for s in species:
        counts[s] = counts.get(s, 0) + 1
    return counts


def parse_element_values(
    items: Iterable[str] | None, option: str, error: type[TerminationError] = StructureError
) -> dict[str, float]:
    """Values per element from ``EL=VALUE`` strings (``--charge``, ``--weight``).

    Parameters
    ----------
    items : iterable of str
        E.g. ``["La=3", "B=-1/2"]``; values are numbers or fractions.
    option : str
        Name used in messages (``--charge``).
    error : exception type
        Raised, naming the bad item, for a missing ``=``, an unknown element,
        a bad number or an element given twice.

    Returns
    -------
    dict
        Element symbol -> value, in the order given.

    Examples
    --------
    >>> parse_element_values(["La=3", "b=-1/2"], "--charge")
    {'La': 3.0, 'B': -0.5}
    """
    out: dict[str, float] = {}
    for item in items or ():
        text = str(item)
        name, sep, value = text.partition("=")
        if not sep or not name.strip():
            raise error(f"{option} needs ELEMENT=VALUE, got {text!r}")
        try:
            symbol = check_symbol(name)
        except StructureError:
            raise error(f"{option} {text!r}: unknown element {name.strip()!r}") from None
        if symbol in out:
            raise error(f"{option}: {symbol} given twice ({text!r})")
        try:
            out[symbol] = parse_number(value)
        except ValueError:
            raise error(f"{option} {text!r}: {value.strip()!r} is not a number such as 3, -0.5 or -1/3") from None
    return out


def composition_label(composition: Mapping[str, float]) -> str:
    """Label of a composition, electropositive element first: {'O': 2, 'Ti': 1} -> 'TiO2'.

    >>> composition_label({"O": 1, "Sr": 1}), composition_label({"B": 6})
    ('SrO', 'B6')
    """
    items = sorted(composition.items(), key=lambda kv: (electronegativity(kv[0]), kv[0]))
    return "".join(f"{el}{'' if n == 1 else _count(n)}" for el, n in items if n)


def _count(n: float) -> str:
    return str(int(n)) if float(n).is_integer() else f"{n:g}"
