"""Exact integer algebra: gcds, primitive indices, Hermite bases and unimodular completion.

All functions work on small integer matrices (Miller indices, lattice
generators in scaled fractional coordinates) and are exact.  Like the rest of
:mod:`termination.algebra` this module imports only the package's bottom
modules (array aliases, numerical constants); bad input raises ``ValueError``.
"""

from __future__ import annotations

from collections.abc import Iterable
from math import gcd
from typing import SupportsInt

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import IntArray
from termination.defaults import RELATIVE_EPS

__all__ = [
    "gcd_vector",
    "primitive_index",
    "rationalise",
    "row_basis",
    "unimodular_completion",
]


def gcd_vector(v: Iterable[SupportsInt]) -> int:
    """Greatest common divisor of the entries of an integer vector (0 for all zeros)."""
    g = 0
    for x in v:
        g = gcd(g, int(x))
    return g


def primitive_index(v: Iterable[SupportsInt]) -> tuple[int, ...]:
    """Divide an integer vector by the gcd of its entries.

    >>> primitive_index([0, 2, -4])
    (0, 1, -2)
    """
    ints = [int(x) for x in v]
    g = gcd_vector(ints)
    if g == 0:
        return tuple(ints)
    return tuple(x // g for x in ints)


def rationalise(values: ArrayLike, denominator: int = 12) -> IntArray:
    """Round real numbers that are multiples of 1/``denominator`` to integers scaled by it.

    Returns the integer array ``round(values * denominator)``, of the shape of
    ``values``.  Used to turn centring translations and primitive vectors
    (multiples of 1/2, 1/3, 1/4) into exact integers; a value farther than
    :data:`~termination.defaults.RELATIVE_EPS` / ``denominator`` from such a
    multiple raises ``ValueError``.
    """
    scaled = np.asarray(values, dtype=np.float64) * float(denominator)
    out = np.rint(scaled).astype(np.int64)
    if np.max(np.abs(scaled - out), initial=0.0) > RELATIVE_EPS:
        raise ValueError(f"values are not multiples of 1/{denominator}")
    return out


def row_basis(generators: ArrayLike) -> IntArray:
    """Basis of the integer lattice spanned by the rows of ``generators``.

    Parameters
    ----------
    generators : (M, n) integer array_like
        Generating vectors as rows; they must span an n-dimensional lattice.

    Returns
    -------
    basis : (n, n) IntArray
        Rows in Hermite normal form (upper triangular, positive diagonal).

    Examples
    --------
    >>> row_basis([[2, 0, 0], [0, 2, 0], [0, 0, 2], [1, 1, 0], [0, 1, 1]]).tolist()
    [[1, 0, 1], [0, 1, 1], [0, 0, 2]]
    """
    rows: list[list[int]] = [[int(x) for x in r] for r in np.asarray(generators)]
    n = len(rows[0])
    basis: list[list[int]] = []
    for col in range(n):
        active = [r for r in rows if r[col] != 0]
        rest = [r for r in rows if r[col] == 0]
        while len(active) > 1:
            active.sort(key=lambda r: abs(r[col]))
            pivot = active[0]
            new_active = [pivot]
            for r in active[1:]:
                q = r[col] // pivot[col]
                r = [a - q * b for a, b in zip(r, pivot)]
                if r[col] != 0:
                    new_active.append(r)
                elif any(r):
                    rest.append(r)
            active = new_active
        if not active:
            raise ValueError("generators do not span the full lattice")
        pivot = active[0]
        if pivot[col] < 0:
            pivot = [-a for a in pivot]
        basis.append(pivot)
        rows = rest
    # Reduce entries above the diagonal into [0, diagonal).
    for j in range(n):
        for i in range(j):
            q = basis[i][j] // basis[j][j]
            basis[i] = [a - q * b for a, b in zip(basis[i], basis[j])]
    return np.array(basis, dtype=np.int64)


def unimodular_completion(h: Iterable[SupportsInt]) -> IntArray:
    """Unimodular integer matrix whose first column pairs with ``h`` to 1.

    Parameters
    ----------
    h : (n,) integer array_like
        Primitive integer vector (gcd of entries 1).

    Returns
    -------
    U : (n, n) IntArray
        ``det(U) = +1`` and ``h @ U = (1, 0, ..., 0)``.  Columns 1..n-1 of ``U``
        are a basis of the integer lattice orthogonal to ``h`` (``h . u = 0``)
        and column 0 steps across one lattice plane (``h . u = 1``).

    Examples
    --------
    >>> U = unimodular_completion([1, 1, 1])
    >>> (np.array([1, 1, 1]) @ U).tolist(), round(np.linalg.det(U))
    ([1, 0, 0], 1)
    """
    hv = [int(x) for x in h]
    n = len(hv)
    # Columns of U as Python int lists: exact, and cheaper than numpy on 3x3.
    cols = [[int(i == j) for i in range(n)] for j in range(n)]
    row = list(hv)
    # Column operations (applied to U as well) reduce row to (g, 0, ..., 0).
    for j in range(1, n):
        while row[j] != 0:
            q = row[0] // row[j]
            row[0] -= q * row[j]
            cols[0] = [a - q * b for a, b in zip(cols[0], cols[j])]
            row[0], row[j] = row[j], row[0]
            cols[0], cols[j] = cols[j], [-a for a in cols[0]]  # negate to keep det = +1 after the swap
            row[j] = -row[j]
    if row[0] < 0:
        row[0] = -row[0]
        cols[0] = [-a for a in cols[0]]
        cols[1] = [-a for a in cols[1]]
    if row[0] != 1:
        raise ValueError(f"index {tuple(hv)} is not primitive (gcd {row[0]})")
    return np.array(cols, dtype=np.int64).T
