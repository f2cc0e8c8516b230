"""Exact integer algebra: gcds, primitive indices, Hermite bases and unimodular completion.

All functions work on small integer matrices (Miller indices, lattice
generators in scaled fractional coordinates) and are exact.  Like the rest of
:mod:`termination.algebra` this module imports nothing else of the package;
bad input raises ``ValueError``.
"""

from math import gcd

import numpy as np

__all__ = [
    "gcd_vector",
    "primitive_index",
    "rationalise",
    "row_basis",
    "unimodular_completion",
]


def gcd_vector(v):
    """Greatest common divisor of the entries of an integer vector (0 for all zeros)."""
    g = 0
    for x in v:
        g = gcd(g, int(x))
    return g


def primitive_index(v):
    """Divide an integer vector by the gcd of its entries.

    >>> primitive_index([0, 2, -4])
    (0, 1, -2)
    """
    g = gcd_vector(v)
    if g == 0:
        return tuple(int(x) for x in v)
    return tuple(int(x) // g for x in v)


def rationalise(values, denominator=12):
    """Round real numbers that are multiples of 1/``denominator`` to integers scaled by it.

    Returns the integer array ``round(values * denominator)``.  Used to turn
    centring translations and primitive vectors (multiples of 1/2, 1/3, 1/4)
    into exact integers.
    """
    scaled = np.asarray(values, dtype=float) * denominator
    out = np.rint(scaled).astype(np.int64)
    if np.max(np.abs(scaled - out), initial=0.0) > 1e-6:
        raise ValueError(f"values are not multiples of 1/{denominator}")
    return out


def row_basis(generators):
    """Basis of the integer lattice spanned by the rows of ``generators``.

    Parameters
    ----------
    generators : (M, n) integer array_like
        Generating vectors as rows; they must span an n-dimensional lattice.

    Returns
    -------
    basis : (n, n) int ndarray
        Rows in Hermite normal form (upper triangular, positive diagonal).

    Examples
    --------
    >>> row_basis([[2, 0, 0], [0, 2, 0], [0, 0, 2], [1, 1, 0], [0, 1, 1]]).tolist()
    [[1, 0, 1], [0, 1, 1], [0, 0, 2]]
    """
    rows = [list(map(int, r)) for r in np.asarray(generators)]
    n = len(rows[0])
    basis = []
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


def unimodular_completion(h):
    """Unimodular integer matrix whose first column pairs with ``h`` to 1.

    Parameters
    ----------
    h : (n,) integer array_like
        Primitive integer vector (gcd of entries 1).

    Returns
    -------
    U : (n, n) int ndarray
        ``det(U) = +1`` and ``h @ U = (1, 0, ..., 0)``.  Columns 1..n-1 of ``U``
        are a basis of the integer lattice orthogonal to ``h`` (``h . u = 0``)
        and column 0 steps across one lattice plane (``h . u = 1``).

    Examples
    --------
    >>> U = unimodular_completion([1, 1, 1])
    >>> (np.array([1, 1, 1]) @ U).tolist(), round(np.linalg.det(U))
    ([1, 0, 0], 1)
    """
    h = [int(x) for x in h]
    n = len(h)
    # Columns of U as Python int lists: exact, and cheaper than numpy on 3x3.
    cols = [[int(i == j) for i in range(n)] for j in range(n)]
    row = list(h)
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
        raise ValueError(f"index {tuple(h)} is not primitive (gcd {row[0]})")
    return np.array(cols, dtype=np.int64).T
