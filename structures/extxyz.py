"""Extended XYZ files with a periodic cell, read in pure Python (no ASE, no scipy) with every frame checked.

A frame is a line with the atom count, a comment line of ``key=value``
pairs, and one line per atom.  The comment line must give the cell as
``Lattice="ax ay az bx by bz cx cy cz"`` (rows, Å); ``pbc``, when given,
must be periodic in all three directions; ``Properties`` says which columns
hold the element (``species:S:1``) and the Cartesian position
(``pos:R:3``), the default being those two.  The last frame of a file is
the structure (as ASE reads it).  Every defect is an error naming the file
and the line.
"""

from __future__ import annotations

import re

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.elements import SYMBOLS, check_symbol
from termination.defaults import MAX_ATOMS
from termination.errors import StructureError

__all__ = ["read_extxyz"]

#: lattice rows (3, 3) Å, fractional positions (N, 3), species.
XyzCell = tuple[FloatArray, FloatArray, list[str]]

_PAIR = re.compile(r"""([A-Za-z_][\w-]*)\s*=\s*("[^"]*"|'[^']*'|\{[^}]*\}|\S+)""")
_WIDTH = {"S": str, "R": float, "I": int, "L": str}


def _pairs(comment: str) -> dict[str, str]:
    """key=value pairs of an extended XYZ comment line (keys lower case, quotes removed).

    >>> _pairs('Lattice="1 0 0 0 1 0 0 0 1" pbc="T T T" energy=-3.2')["pbc"]
    'T T T'
    """
    out: dict[str, str] = {}
    for m in _PAIR.finditer(comment):
        value = m.group(2)
        if value[:1] in ("'", '"', "{") and len(value) >= 2:
            value = value[1:-1]
        out[m.group(1).lower()] = value
    return out


def _columns(properties: str, name: str, line: int) -> tuple[int, int, int, bool]:
    """Total columns, the species (or Z) column and the first position column of a Properties string."""
    parts = properties.split(":")
    if len(parts) % 3:
        raise StructureError(f"{name} line {line}: Properties={properties!r} is not name:type:count triples")
    column = 0
    species = position = -1
    by_number = False
    for k in range(0, len(parts), 3):
        label, kind, count = parts[k], parts[k + 1], parts[k + 2]
        if kind not in _WIDTH or not count.isdigit() or int(count) < 1:
            raise StructureError(f"{name} line {line}: Properties entry {label}:{kind}:{count} is not understood")
        if label == "species" and kind == "S" and count == "1":
            species = column
        elif label == "Z" and kind == "I" and count == "1" and species < 0:
            species, by_number = column, True
        elif label == "pos" and kind == "R" and count == "3":
            position = column
        column += int(count)
    if species < 0 or position < 0:
        raise StructureError(f"{name} line {line}: Properties={properties!r} has no species:S:1 or no pos:R:3")
    return column, species, position, by_number


def read_extxyz(text: str, name: str) -> XyzCell:
    """Lattice, fractional positions and species of the last frame of an extended XYZ file.

    Parameters
    ----------
    text : str
        The file's text.
    name : str
        File name for messages.

    Returns
    -------
    (3, 3) FloatArray, (N, 3) FloatArray, list of str

    Examples
    --------
    >>> t = '1\\nLattice="3 0 0 0 3 0 0 0 3" Properties=species:S:1:pos:R:3\\nPo 1.5 0 0\\n'
    >>> cell, pos, species = read_extxyz(t, "Po.xyz")
    >>> species, pos.tolist()
    (['Po'], [[0.5, 0.0, 0.0]])
    """
    lines = text.splitlines()
    row = 0
    last: XyzCell | None = None
    while row < len(lines):
        if not lines[row].strip():
            row += 1
            continue
        head = lines[row].split()
        if len(head) != 1 or not head[0].isdigit():
            raise StructureError(f"{name} line {row + 1}: expected the number of atoms, got {lines[row].strip()!r}")
        n = int(head[0])
        if not 0 < n <= MAX_ATOMS:
            raise StructureError(f"{name} line {row + 1}: {n} atoms; a frame holds 1 to {MAX_ATOMS}")
        if row + 1 >= len(lines):
            raise StructureError(f"{name} line {row + 1}: {n} atoms declared but the comment line is missing")
        pairs = _pairs(lines[row + 1])
        if "lattice" not in pairs:
            raise StructureError(
                f'{name} line {row + 2}: no Lattice="..." in the comment line: a file without a cell is not a crystal'
            )
        try:
            values = [float(v) for v in pairs["lattice"].split()]
        except ValueError:
            raise StructureError(f"{name} line {row + 2}: Lattice must be nine numbers") from None
        if len(values) != 9 or not all(np.isfinite(values)):
            raise StructureError(f"{name} line {row + 2}: Lattice must be nine finite numbers, got {len(values)}")
        lattice = np.array(values).reshape(3, 3)
        pbc = pairs.get("pbc")
        if pbc is not None and [v.upper()[:1] for v in pbc.split()] != ["T", "T", "T"]:
            raise StructureError(f"{name} line {row + 2}: pbc={pbc!r}: the structure must be periodic in 3D")
        if abs(float(np.linalg.det(lattice))) <= 1e-9:
            raise StructureError(f"{name} line {row + 2}: the Lattice vectors span no volume")
        width, species_col, pos_col, by_number = _columns(pairs.get("properties", "species:S:1:pos:R:3"), name, row + 2)
        species: list[str] = []
        cart = np.empty((n, 3))
        for i in range(n):
            k = row + 2 + i
            if k >= len(lines):
                raise StructureError(f"{name}: {n} atoms declared but only {i} atom lines")
            tokens = lines[k].split()
            if len(tokens) < width:
                raise StructureError(f"{name} line {k + 1}: {width} columns expected, got {len(tokens)}")
            token = tokens[species_col]
            try:
                if by_number:
                    z = int(token)
                    if not 0 < z < len(SYMBOLS):
                        raise ValueError(token)
                    species.append(SYMBOLS[z])
                else:
                    species.append(check_symbol(token))
            except (ValueError, StructureError):
                raise StructureError(f"{name} line {k + 1}: {token!r} is not an element") from None
            try:
                xyz = [float(v) for v in tokens[pos_col : pos_col + 3]]
            except ValueError:
                raise StructureError(f"{name} line {k + 1}: the position must be three numbers") from None
            if not all(np.isfinite(xyz)):
                raise StructureError(f"{name} line {k + 1}: the position must be finite")
            cart[i] = xyz
        last = (lattice, cart @ np.linalg.inv(lattice), species)
        row += 2 + n
    if last is None:
        raise StructureError(f"{name}: no frame (an atom count, a comment line and the atoms)")
    return last
