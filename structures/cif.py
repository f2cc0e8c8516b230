"""CIF files: read through pymatgen, checked field by field before a crystal is built from them.

pymatgen's reader is forgiving: an atom type it cannot read (``11``,
``Uuo``) drops those atoms or reads them as another element, an unknown
space-group symbol falls back to P1 without the symmetry operations, and a
negative cell length or an angle of 200° gives a cell.  Each would be a
silent wrong answer here, so the fields are checked first and every defect
is an error that names the file and the field:

- cell lengths positive and at most ``MAX_LENGTH_ANGSTROM``, angles in
  (0°, 180°) and together a cell of positive volume;
- every atom type an element symbol, optionally with a charge (``Na``,
  ``Fe3+``, ``O2-``), and every element the sites name present in the
  structure read;
- the declared space group (number or Hermann-Mauguin symbol) known and
  consistent, and, after reading, not of higher symmetry than the atoms
  have (:func:`check_declared_symmetry`: a missing or wrong operation list
  turns rock salt into the CsCl structure);
- no partial occupancy.

pymatgen's own warnings are kept and quoted when it reads no structure.
"""

from __future__ import annotations

import re
import warnings
from functools import cache
from typing import Any

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal
from termination.bulk.elements import check_symbol
from termination.defaults import MAX_ATOMS, MAX_LENGTH_ANGSTROM
from termination.errors import StructureError

__all__ = ["check_declared_symmetry", "read_cif", "space_group_number"]

#: lattice rows (3, 3) Å, fractional positions (N, 3), species, charges (N,) e or None, declared space-group number.
CifCell = tuple[FloatArray, FloatArray, list[str], FloatArray | None, int | None]

_NUMBER = re.compile(r"^\s*([-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?)(\(\d+\))?\s*$")
_TYPE = re.compile(r"^([A-Z][a-z]?)(\d*[+-]|[+-]\d*)?$")
_NUMBER_KEYS = ("_space_group_IT_number", "_symmetry_Int_Tables_number")
_SYMBOL_KEYS = ("_space_group_name_H-M_alt", "_symmetry_space_group_name_H-M")
_OPERATION_KEYS = ("_space_group_symop_operation_xyz", "_symmetry_equiv_pos_as_xyz")
# Warnings of pymatgen that say nothing is wrong (the symmetry taken from the symbol) or repeat others.
_BENIGN = ("No _symmetry_equiv_pos_as_xyz type key found. Spacegroup from", "Issues encountered while parsing CIF")


def _field_number(block: dict[str, Any], key: str, name: str) -> float:
    """A CIF number (an esd in brackets allowed: ``5.640(2)``); StructureError naming the field otherwise."""
    raw = block.get(key)
    if raw is None:
        raise StructureError(f"{name}: {key} is missing")
    if isinstance(raw, list):
        raw = raw[0]
    m = _NUMBER.match(str(raw))
    if m is None:
        raise StructureError(f"{name}: {key} = {raw!r} is not a number")
    value = float(m.group(1))
    if not np.isfinite(value):
        raise StructureError(f"{name}: {key} = {raw!r} is not finite")
    return value


@cache
def _space_group_symbols() -> dict[str, int]:
    """Hermann-Mauguin symbols (short and full, spaces and setting suffixes removed) -> number (spglib)."""
    import spglib

    out: dict[str, int] = {}
    for hall in range(1, 531):
        t = spglib.get_spacegroup_type(hall)
        if t is None:
            continue
        for symbol in (t.international_short, t.international_full, t.international):
            out.setdefault(_normalise_symbol(symbol), int(t.number))
    return out


def _normalise_symbol(symbol: str) -> str:
    """'F m -3 m' and 'Fm-3m:1' -> 'fm-3m'; 'P 63/m m c' -> 'p63/mmc' (underscores and spaces dropped)."""
    text = str(symbol).strip().strip("'\"").split(":")[0]
    return re.sub(r"[\s_]", "", text).lower()


def space_group_number(symbol: str) -> int | None:
    """Number of a Hermann-Mauguin symbol in any spacing ('F m -3 m', 'Fm-3m', 'P 63/m m c'), or None.

    >>> space_group_number("F m -3 m"), space_group_number("P 63/m m c"), space_group_number("F m -3 x")
    (225, 194, None)
    """
    return _space_group_symbols().get(_normalise_symbol(symbol))


def _order(number: int) -> int:
    """Operations of space group ``number`` per conventional cell, centring included (spglib database)."""
    import spglib

    for hall in range(1, 531):
        t = spglib.get_spacegroup_type(hall)
        if t is not None and t.number == number:
            ops = spglib.get_symmetry_from_database(hall)
            return 0 if ops is None else len(ops["rotations"])
    raise StructureError(f"space-group number must lie between 1 and 230, got {number}")


def _declared_elements(block: dict[str, Any]) -> set[str]:
    """The elements the atom sites of a (checked) block name."""
    key = "_atom_site_type_symbol" if "_atom_site_type_symbol" in block else "_atom_site_label"
    types = block[key] if isinstance(block[key], list) else [block[key]]
    return {check_symbol(re.match(r"^([A-Z][a-z]?)", str(t).strip()).group(1)) for t in types}  # type: ignore[union-attr]


def _check_block(block: dict[str, Any], name: str) -> int | None:
    """Cell, atom types and declared space group of one CIF block; returns the declared space-group number."""
    lengths = [_field_number(block, f"_cell_length_{x}", name) for x in "abc"]
    for x, v in zip("abc", lengths):
        if not 0 < v <= MAX_LENGTH_ANGSTROM:
            raise StructureError(
                f"{name}: _cell_length_{x} = {v:g} Å: a cell length must be positive and at most "
                f"{MAX_LENGTH_ANGSTROM:g} Å"
            )
    angles = [_field_number(block, f"_cell_angle_{x}", name) for x in ("alpha", "beta", "gamma")]
    for x, v in zip(("alpha", "beta", "gamma"), angles):
        if not 0 < v < 180:
            raise StructureError(f"{name}: _cell_angle_{x} = {v:g}°: a cell angle must lie between 0° and 180°")
    ca, cb, cg = np.cos(np.radians(angles))
    if 1 - ca**2 - cb**2 - cg**2 + 2 * ca * cb * cg <= 1e-9:
        raise StructureError(
            f"{name}: the cell angles {', '.join(f'{v:g}' for v in angles)}° make no cell (zero or negative volume)"
        )
    types = block.get("_atom_site_type_symbol") or block.get("_atom_site_label")
    if types is None:
        raise StructureError(f"{name}: no atom sites (_atom_site_label or _atom_site_type_symbol)")
    types = types if isinstance(types, list) else [types]
    if len(types) > MAX_ATOMS:
        raise StructureError(f"{name}: {len(types)} atom sites; at most {MAX_ATOMS} are accepted")
    key = "_atom_site_type_symbol" if "_atom_site_type_symbol" in block else "_atom_site_label"
    for t in types:
        text = str(t).strip()
        m = _TYPE.match(text) if key == "_atom_site_type_symbol" else re.match(r"^([A-Z][a-z]?)(?![a-z])", text)
        try:
            if m is None:
                raise StructureError(text)
            check_symbol(m.group(1))
        except StructureError:
            raise StructureError(f"{name}: {key} {text!r} is not an element symbol") from None
    declared: int | None = None
    for k in _NUMBER_KEYS:
        if k in block:
            value = _field_number(block, k, name)
            if value != int(value) or not 1 <= value <= 230:
                raise StructureError(f"{name}: {k} = {block[k]!r} is not a space-group number (1 to 230)")
            declared = int(value)
            break
    for k in _SYMBOL_KEYS:
        if k in block:
            symbol = str(block[k] if not isinstance(block[k], list) else block[k][0])
            number = space_group_number(symbol)
            has_operations = any(o in block for o in _OPERATION_KEYS)
            if number is None and not has_operations:
                raise StructureError(
                    f"{name}: unknown space-group symbol {symbol!r} in {k} and no symmetry operations "
                    f"({_OPERATION_KEYS[1]}): the atoms' symmetry cannot be generated"
                )
            if number is not None and declared is not None and number != declared:
                raise StructureError(
                    f"{name}: {k} {symbol!r} is space group {number} but the file also declares {declared}"
                )
            declared = declared if number is None else number
            break
    return declared


def read_cif(text: str, name: str) -> CifCell:
    """Lattice, positions, species, charges (oxidation states, if given) and declared space group of a CIF.

    Parameters
    ----------
    text : str
        The CIF.
    name : str
        File name for messages.

    Returns
    -------
    (3, 3) FloatArray, (N, 3) FloatArray, list of str, (N,) FloatArray or None, int or None
        Of the first data block that holds a structure.

    Raises
    ------
    StructureError
        Naming the file and the field (module notes).
    """
    from pymatgen.io.cif import CifParser

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            parser = CifParser.from_str(text, occupancy_tolerance=1.0)
            blocks = parser.as_dict()
        except Exception as exc:  # pymatgen raises many types for malformed files
            raise StructureError(f"cannot read CIF {name}: {_first_line(exc)}") from None
        declared = {
            b: _check_block(data, name)
            for b, data in blocks.items()
            if "_atom_site_fract_x" in data or "_atom_site_Cartn_x" in data
        }
        if not declared:
            raise StructureError(f"cannot read CIF {name}: no block with atom sites (_atom_site_fract_x)")
        try:
            structures = parser.parse_structures(primitive=False)
        except Exception as exc:
            reason = _warning_text(caught) or _first_line(exc)
            raise StructureError(f"cannot read CIF {name}: {reason}") from None
    if not structures:
        raise StructureError(f"cannot read CIF {name}: {_warning_text(caught) or 'no structure found'}")
    s = structures[0]
    if not s.is_ordered:
        site = next(site for site in s if not site.is_ordered)
        raise StructureError(
            f"{name}: partial occupancy ({site.species_string} at {np.round(site.frac_coords, 4).tolist()}) "
            "is not supported; give an ordered structure"
        )
    first = next(iter(declared))
    missing = _declared_elements(blocks[first]) - {str(site.specie.symbol) for site in s}
    if missing:
        raise StructureError(
            f"{name}: the atom sites of {', '.join(sorted(missing))} were dropped while reading "
            f"({_warning_text(caught) or 'no reason given'})"
        )
    species: list[str] = []
    charges: list[float | None] = []
    for site in s:
        sp = site.specie
        species.append(str(sp.symbol))
        charges.append(getattr(sp, "oxi_state", None))
    has_charges = all(q is not None for q in charges) and any(q for q in charges)
    return (
        np.asarray(s.lattice.matrix, dtype=np.float64),
        np.asarray(s.frac_coords, dtype=np.float64),
        species,
        (np.array(charges, dtype=float) if has_charges else None),
        next(iter(declared.values())),
    )


def check_declared_symmetry(crystal: Crystal, declared: int | None, name: str) -> None:
    """StructureError when the atoms of a file have lower symmetry than its declared space group.

    Notes
    -----
    The symmetry is compared by the number of operations per conventional
    cell (International Tables; spglib's database): Fm-3m has 192, Pm-3m 48.
    Atoms with fewer operations than their declared group mean a missing or
    wrong operation list; more (a structure given in P1) is fine.
    """
    if declared is None or declared == crystal.spacegroup_number:
        return
    if _order(crystal.spacegroup_number) > _order(declared):
        return
    raise StructureError(
        f"{name}: the file declares space group {declared} but its atoms have the symmetry of "
        f"{crystal.spacegroup} ({crystal.spacegroup_number}); check the space-group symbol and the symmetry "
        "operations"
    )


def _first_line(exc: BaseException) -> str:
    text = str(exc).strip()
    return text.splitlines()[0] if text else type(exc).__name__


def _warning_text(caught: list[warnings.WarningMessage]) -> str:
    """The first of pymatgen's warnings that says what is wrong, on one line."""
    for w in caught:
        text = " ".join(str(w.message).split())
        if text and not text.startswith(_BENIGN):
            return text
    return ""
