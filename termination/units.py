"""Units of the fields of result records, and the suffix each gives its JSON key.

A dataclass field that holds a dimensional quantity declares its unit in its
metadata, ``a: float = field(metadata=ANGSTROM)``; the JSON key then carries
the unit (``a_angstrom``), so every dimensional key of every command says its
unit.  Units follow the package convention: lengths in Å, angles in degrees,
charges in units of e.  A field whose name already ends with its suffix
(``layer_tol_angstrom``) keeps its name.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Final

__all__ = [
    "ANGSTROM",
    "ANGSTROM2",
    "DEG",
    "EV",
    "E_ANGSTROM",
    "E_PER_ANGSTROM",
    "PER_ANGSTROM",
    "PER_NM2",
    "SECOND",
    "SUFFIXES",
    "E",
    "json_key",
]


def _unit(name: str) -> Mapping[str, str]:
    return MappingProxyType({"unit": name})


#: Length, Å.
ANGSTROM: Final = _unit("angstrom")
#: Area, Å².
ANGSTROM2: Final = _unit("angstrom2")
#: Angle, degrees.
DEG: Final = _unit("deg")
#: Reciprocal length without the factor 2 pi, 1/Å.
PER_ANGSTROM: Final = _unit("per_angstrom")
#: Charge, units of the elementary charge e.
E: Final = _unit("e")
#: Dipole per surface cell, e Å.
E_ANGSTROM: Final = _unit("e_angstrom")
#: Dipole per area, e/Å.
E_PER_ANGSTROM: Final = _unit("e_per_angstrom")
#: Energy, eV.
EV: Final = _unit("ev")
#: Areal density, 1/nm².
PER_NM2: Final = _unit("per_nm2")
#: Time, seconds.
SECOND: Final = _unit("s")

#: JSON key suffix of each unit, with what it means.
SUFFIXES: Final = MappingProxyType(
    {
        "angstrom": ("_angstrom", "length in Å"),
        "angstrom2": ("_angstrom2", "area in Å²"),
        "deg": ("_deg", "angle in degrees"),
        "per_angstrom": ("_per_angstrom", "reciprocal length in 1/Å, without the factor 2π"),
        "e": ("_e", "charge in units of the elementary charge e"),
        "e_angstrom": ("_e_angstrom", "dipole per surface cell in e·Å"),
        "e_per_angstrom": ("_e_per_angstrom", "dipole per area in e/Å"),
        "ev": ("_ev", "energy in eV"),
        "per_nm2": ("_per_nm2", "areal density in 1/nm²"),
        "s": ("_s", "time in seconds"),
    }
)


def json_key(name: str, metadata: Mapping[str, object]) -> str:
    """The JSON key of a field: an explicit ``json`` name, else the name with its unit suffix.

    >>> json_key("a", ANGSTROM), json_key("layer_tol_angstrom", ANGSTROM), json_key("label", {})
    ('a_angstrom', 'layer_tol_angstrom', 'label')
    """
    explicit = metadata.get("json")
    if isinstance(explicit, str):
        return explicit
    unit = metadata.get("unit")
    if not isinstance(unit, str):
        return name
    suffix = SUFFIXES[unit][0]
    return name if name.endswith(suffix) else name + suffix
