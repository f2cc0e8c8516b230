"""VASP POSCAR and CONTCAR files, read in pure Python (no ASE, no scipy) with every line checked.

The format (VASP 5 and later): a comment line; a scale (one factor, a
negative target volume in Å³, or three factors for the axes); three lattice
vectors; the element symbols; the atom count of each element; optionally
``Selective dynamics``; ``Direct`` or ``Cartesian``; one line of three
coordinates per atom (selective-dynamics flags and anything after them
ignored).  A VASP 4 file without the symbols line is read when the comment
line names the elements, as ASE does.  Every defect is an error naming the
file and the line: a counts line shorter or longer than the symbols line,
a count that is not a positive integer, too few coordinate lines, more atoms
than ``MAX_ATOMS``.
"""

from __future__ import annotations

import numpy as np

from termination.arrays import FloatArray
from termination.bulk.elements import check_symbol
from termination.defaults import MAX_ATOMS
from termination.errors import StructureError

__all__ = ["is_poscar_name", "read_poscar"]

#: lattice rows (3, 3) Å, fractional positions (N, 3), species.
PoscarCell = tuple[FloatArray, FloatArray, list[str]]


def is_poscar_name(filename: str) -> bool:
    """True for names ASE reads as POSCAR files: POSCAR or CONTCAR in the name, or *.vasp, *.poscar.

    >>> is_poscar_name("POSCAR"), is_poscar_name("Zn-CONTCAR"), is_poscar_name("Zn.vasp"), is_poscar_name("x.cif")
    (True, True, True, False)
    """
    base = filename.replace("\\", "/").rsplit("/", 1)[-1]
    return "POSCAR" in base.upper() or "CONTCAR" in base.upper() or base.lower().endswith((".vasp", ".poscar"))


def _floats(tokens: list[str], count: int, name: str, line: int, what: str) -> list[float]:
    if len(tokens) < count:
        raise StructureError(f"{name} line {line}: {what} needs {count} numbers, got {len(tokens)}")
    try:
        values = [float(v) for v in tokens[:count]]
    except ValueError:
        raise StructureError(f"{name} line {line}: {what} must be numbers, got {' '.join(tokens[:count])!r}") from None
    if not all(np.isfinite(values)):
        raise StructureError(f"{name} line {line}: {what} must be finite, got {' '.join(tokens[:count])!r}")
    return values


def _symbol(token: str, name: str, line: int) -> str:
    """An element symbol of the symbols line; POTCAR suffixes (Fe_pv, O_s, Ga_d/...) are dropped."""
    bare = token.split("_")[0].split("/")[0]
    try:
        return check_symbol(bare)
    except StructureError:
        raise StructureError(f"{name} line {line}: {token!r} is not an element symbol") from None


def read_poscar(text: str, name: str) -> PoscarCell:
    """Lattice, fractional positions and species of a POSCAR or CONTCAR.

    Parameters
    ----------
    text : str
        The file's text.
    name : str
        File name for messages.

    Returns
    -------
    (3, 3) FloatArray, (N, 3) FloatArray, list of str
        Lattice rows in Å (scale applied), positions fractional.

    Examples
    --------
    >>> text = "Cu\\n3.6\\n0 .5 .5\\n.5 0 .5\\n.5 .5 0\\nCu\\n1\\nDirect\\n0 0 0\\n"
    >>> cell, pos, species = read_poscar(text, "POSCAR")
    >>> species, round(float(np.linalg.det(cell)), 3)
    (['Cu'], 11.664)
    """
    lines = text.splitlines()
    tokens = [ln.split() for ln in lines]
    if len(lines) < 8:
        raise StructureError(f"{name}: a POSCAR has at least 8 lines, this one {len(lines)}")
    scale = _floats(tokens[1], 1 if len(tokens[1]) < 3 else 3, name, 2, "the scale")
    try:
        vectors = np.array([_floats(tokens[i], 3, name, i + 1, "a lattice vector") for i in (2, 3, 4)])
    except IndexError:
        raise StructureError(f"{name}: the lattice vectors (lines 3-5) are missing") from None
    volume = abs(float(np.linalg.det(vectors)))
    if volume <= 0:
        raise StructureError(f"{name} lines 3-5: the lattice vectors span no volume")
    if len(scale) == 3:
        # Three factors scale the Cartesian x, y and z components (VASP 6; as ASE reads them).
        if any(v <= 0 for v in scale):
            raise StructureError(f"{name} line 2: the three scale factors must be positive, got {scale}")
        factors = np.array(scale)
    elif scale[0] < 0:  # a target volume, Å³
        factors = np.full(3, (-scale[0] / volume) ** (1 / 3))
    elif scale[0] > 0:
        factors = np.full(3, scale[0])
    else:
        raise StructureError(f"{name} line 2: the scale factor must not be zero")
    lattice = vectors * factors[None, :]

    row = 5
    if tokens[row] and not tokens[row][0].lstrip("+").isdigit():
        species = [_symbol(t, name, row + 1) for t in tokens[row]]
        row += 1
    else:
        # VASP 4: no symbols line; ASE takes them from the comment line.
        species = []
        for t in tokens[0]:
            try:
                species.append(check_symbol(t.split("_")[0]))
            except StructureError:
                break
    if row >= len(tokens) or not tokens[row]:
        raise StructureError(f"{name} line {row + 1}: the atom counts are missing")
    counts_text = tokens[row]
    counts: list[int] = []
    for t in counts_text:
        if t.lstrip("+-").isdigit() and int(t) > 0:
            counts.append(int(t))
        elif species and len(counts) >= len(species) and not t.lstrip("+-").isdigit():
            break  # a comment after the counts
        else:
            raise StructureError(f"{name} line {row + 1}: atom counts must be positive integers, got {t!r}")
    if not species:
        raise StructureError(
            f"{name}: no element symbols (a VASP 5 POSCAR names them on line 6; a VASP 4 one in its comment line)"
        )
    if len(counts) != len(species):
        raise StructureError(
            f"{name} line {row + 1}: {len(counts)} atom count{'s' if len(counts) != 1 else ''} for "
            f"{len(species)} element{'s' if len(species) != 1 else ''} ({' '.join(species)}) on the line before"
        )
    total = sum(counts)
    if total > MAX_ATOMS:
        raise StructureError(f"{name}: {total} atoms; at most {MAX_ATOMS} are accepted")
    row += 1
    if row < len(tokens) and tokens[row] and tokens[row][0][0] in "sS":
        row += 1
    if row >= len(tokens) or not tokens[row]:
        raise StructureError(f"{name} line {row + 1}: 'Direct' or 'Cartesian' is missing")
    mode = tokens[row][0][0]
    if mode not in "dDcCkK":
        raise StructureError(f"{name} line {row + 1}: expected 'Direct' or 'Cartesian', got {lines[row].strip()!r}")
    row += 1
    if len(tokens) < row + total:
        raise StructureError(f"{name}: {total} atoms declared but only {max(0, len(tokens) - row)} coordinate lines")
    coords = np.array([_floats(tokens[row + i], 3, name, row + i + 1, "a position") for i in range(total)])
    if mode in "cCkK":
        fractional = (coords * factors[None, :]) @ np.linalg.inv(lattice)
    else:
        fractional = coords
    species_per_atom = [el for el, n in zip(species, counts) for _ in range(n)]
    return lattice, fractional, species_per_atom
