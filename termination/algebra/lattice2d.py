"""Two-dimensional lattices: Gauss reduction, sublattices, their classes and Wood notation.

Pure 2D lattice math on small integer matrices and Cartesian in-plane
vectors; like the rest of :mod:`termination.algebra` it imports only the
package's bottom modules (array aliases, numerical constants).

Conventions: a supercell is an integer (2, 2) matrix N whose rows are the
supercell vectors in units of the mesh vectors a, b
(``A_super = N @ mesh_inplane``).  The sublattice it spans is identified by
its row Hermite normal form [[p, q], [0, r]] with p r = det N and 0 <= q < r.
A point operation acts on mesh coordinates (row vectors) as u -> u S, so a
supercell N becomes N S.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import cast

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.integer import row_basis
from termination.arrays import FloatArray, IntArray
from termination.defaults import FRACTIONAL_EPS, ZERO_EPS
from termination.units import DEG

__all__ = [
    "Wood",
    "canonical_hnf",
    "cell_notation",
    "coset_index",
    "coset_representatives",
    "gauss_reduce",
    "hnf_matrices",
    "matrix_text",
    "reduced_obtuse",
    "supercell_classes",
    "translation_permutations",
    "wood_notation",
]


def gauss_reduce(v1: ArrayLike, v2: ArrayLike, metric: ArrayLike | None = None) -> tuple[FloatArray, FloatArray]:
    """Lagrange-Gauss reduction of a 2D lattice basis.

    Parameters
    ----------
    v1, v2 : (n,) array_like
        Basis vectors (2D or 3D Cartesian rows, or any coordinates with
        ``metric``).
    metric : (n, n) array_like, optional
        Metric tensor of the coordinates (identity by default).

    Returns
    -------
    v1, v2 : (n,) FloatArray
        ``|v1| <= |v2|`` and ``|v1 . v2| <= |v1|^2 / 2``, spanning the same
        lattice with the same orientation (sign of v1 x v2).

    Examples
    --------
    >>> a, b = gauss_reduce([1.0, 0.0], [5.2, 1.0])
    >>> b.tolist()
    [0.20000000000000018, 1.0]
    """
    a = np.asarray(v1, dtype=np.float64)
    b = np.asarray(v2, dtype=np.float64)
    m = np.eye(len(a)) if metric is None else np.asarray(metric, dtype=np.float64)
    for _ in range(1000):
        if a @ m @ a > b @ m @ b + ZERO_EPS:
            a, b = -b, a  # a quarter-turn relabelling keeps the orientation
        mu = np.rint((a @ m @ b) / (a @ m @ a))
        if mu == 0:
            break
        b = b - mu * a
    return a, b


def reduced_obtuse(v1: ArrayLike, v2: ArrayLike) -> tuple[FloatArray, FloatArray]:
    """Gauss-reduced basis with the obtuse angle (90° <= gamma <= 120°) of surface crystallography.

    ``v1, v2`` are (n,) Cartesian vectors; so are the two returned ones.
    """
    a, b = gauss_reduce(v1, v2)
    if a @ b > 0:
        b = -b
    return a, b


def hnf_matrices(det: int) -> IntArray:
    """All row Hermite normal forms of determinant ``det``.

    Each index-``det`` sublattice of Z^2 appears exactly once; there are
    sigma(det) of them (the sum of the divisors).

    Parameters
    ----------
    det : int
        Index of the sublattice, >= 1.

    Returns
    -------
    (M, 2, 2) IntArray
        Matrices [[p, q], [0, r]], p r = det, 0 <= q < r.

    Examples
    --------
    >>> [m.tolist() for m in hnf_matrices(2)]
    [[[1, 0], [0, 2]], [[1, 1], [0, 2]], [[2, 0], [0, 1]]]
    """
    det = int(det)
    out: list[list[list[int]]] = []
    for p in range(1, det + 1):
        if det % p:
            continue
        r = det // p
        for q in range(r):
            out.append([[p, q], [0, r]])
    return np.array(out, dtype=np.int64).reshape(-1, 2, 2)


def canonical_hnf(matrix: ArrayLike) -> IntArray:
    """Row Hermite normal form of a non-singular integer (2, 2) matrix, as a (2, 2) IntArray.

    >>> canonical_hnf([[1, 1], [-1, 1]]).tolist()
    [[1, 1], [0, 2]]
    """
    return row_basis(np.asarray(matrix, dtype=np.int64))


def supercell_classes(max_det: int, operations: ArrayLike) -> list[tuple[IntArray, ...]]:
    """Supercells up to index ``max_det``, grouped into classes equivalent under ``operations``.

    Parameters
    ----------
    max_det : int
        Largest index (number of mesh cells in the supercell).
    operations : (K, 2, 2) int array_like
        Point operations of the surface in mesh coordinates (u -> u S).

    Returns
    -------
    list of tuple of (2, 2) IntArray
        One tuple per class, holding the HNFs of all its members, in order of
        increasing index and then of the HNF entries.

    Notes
    -----
    Two sublattices are equivalent when an operation of the surface's point
    group maps one onto the other: HNF(N S) = HNF(N').  Each class is an
    orbit of the group acting on the sigma(det) HNFs of each index.
    """
    ops = np.asarray(operations, dtype=np.int64).reshape(-1, 2, 2)
    classes: list[tuple[IntArray, ...]] = []
    for det in range(1, int(max_det) + 1):
        seen: set[tuple[int, ...]] = set()
        for h in hnf_matrices(det):
            key = tuple(int(v) for v in h.ravel())
            if key in seen:
                continue
            orbit = {key}
            for s in ops:
                orbit.add(tuple(int(v) for v in canonical_hnf(h @ s).ravel()))
            seen |= orbit
            classes.append(tuple(np.array(k, dtype=np.int64).reshape(2, 2) for k in sorted(orbit)))
    return classes


@dataclass(frozen=True)
class Wood:
    """Wood notation of a supercell.

    ``label`` e.g. '(2×1)', 'c(2×2)', '(√3×√3)R30°'; ``centred`` says whether it
    is a c(m×n) cell; ``angle`` is the rotation in degrees (0 unrotated);
    ``m`` and ``n`` are the lengths of the Wood cell's vectors in units of |a|
    and |b|; ``matrix`` holds the Wood cell's vectors (rows, mesh units): a
    basis of the supercell for a primitive cell, the doubled conventional cell
    for c(m×n).
    """

    label: str
    centred: bool
    angle: float = field(metadata=DEG)
    m: float
    n: float
    matrix: tuple[tuple[int, int], tuple[int, int]]


def _ratio_text(x: float, tol: float) -> str | None:
    k = round(x)
    if k >= 1 and abs(x - k) <= tol * max(1.0, x):
        return str(int(k))
    k2 = round(x * x)
    if k2 >= 2 and abs(x * x - k2) <= tol * max(1.0, x * x):
        return f"√{int(k2)}"
    return None


def _angle_text(theta: float) -> str:
    if abs(theta - round(theta)) < 0.05:
        return f"{int(round(theta))}"
    return f"{theta:.1f}"


def wood_notation(
    matrix: ArrayLike, mesh_inplane: ArrayLike, *, angle_tol_degrees: float = 0.5, length_rel_tol: float = 1e-3
) -> Wood | None:
    """Wood notation of the supercell ``matrix`` on a mesh, or None where it does not apply.

    Parameters
    ----------
    matrix : (2, 2) int array_like
        Supercell rows in mesh units.
    mesh_inplane : (2, 2) array_like
        Mesh vectors a, b as Cartesian rows, Å.
    angle_tol_degrees : float
        Tolerance on the common rotation angle of both vectors, degrees.
    length_rel_tol : float
        Relative tolerance for recognising integer and square-root ratios.

    Returns
    -------
    Wood or None

    Notes
    -----
    E. A. Wood's notation (m×n)Rθ applies when the superlattice has a basis
    A1, A2 with |A1| = m |a|, |A2| = n |b|, both rotated by the same
    angle θ from a and b (so the superlattice has the mesh's angle).  c(m×n)
    names a centred cell: the superlattice is generated by m a', n b' and
    (m a' + n b')/2 with a', b' rotated by θ.  Preference, when several
    descriptions exist: unrotated primitive, unrotated centred, rotated
    primitive, rotated centred; then the smallest angle and cell.  m and n
    are written as integers or square roots; a cell needing any other ratio
    has no Wood notation.  On a square mesh c(2×2) is preferred to the
    equivalent (√2×√2)R45°, as is usual.

    References
    ----------
    E. A. Wood, J. Appl. Phys. 35, 1306 (1964).

    Examples
    --------
    >>> square = np.eye(2) * 3.0
    >>> wood_notation([[1, 1], [0, 2]], square).label
    'c(2×2)'
    >>> hexagonal = 3.0 * np.array([[1.0, 0.0], [-0.5, np.sqrt(3) / 2]])
    >>> wood_notation([[2, 1], [-1, 1]], hexagonal).label
    '(√3×√3)R30°'
    """
    hnf = canonical_hnf(matrix)
    det = int(round(abs(np.linalg.det(hnf))))
    mesh = np.asarray(mesh_inplane, dtype=float)
    rng = np.arange(-(2 * det + 1), 2 * det + 2)
    u = np.array(np.meshgrid(rng, rng, indexing="ij")).reshape(2, -1).T
    frac = u @ np.linalg.inv(hnf)
    u = u[np.all(np.abs(frac - np.rint(frac)) < FRACTIONAL_EPS, axis=1) & np.any(u != 0, axis=1)]
    v = u @ mesh
    la, lb = np.linalg.norm(mesh, axis=1)

    def angle_from(ref: FloatArray) -> FloatArray:
        cross = ref[0] * v[:, 1] - ref[1] * v[:, 0]
        return cast(FloatArray, np.degrees(np.arctan2(cross, v @ ref)))

    th1, th2 = angle_from(mesh[0]), angle_from(mesh[1])
    lens = np.linalg.norm(v, axis=1)
    cross = u[:, None, 0] * u[None, :, 1] - u[:, None, 1] * u[None, :, 0]
    dth = (th1[:, None] - th2[None, :] + 180.0) % 360.0 - 180.0
    same = np.abs(dth) <= angle_tol_degrees
    best: tuple[tuple[object, ...], Wood] | None = None
    for centred, index in ((False, det), (True, 2 * det)):
        ii, jj = np.nonzero(same & (cross == index))
        for i, j in zip(ii, jj):
            if centred:
                mid = (u[i] + u[j]) / 2.0
                f = mid @ np.linalg.inv(hnf)
                off_mesh = np.abs(mid - np.rint(mid)) > FRACTIONAL_EPS
                off_cell = np.abs(f - np.rint(f)) > FRACTIONAL_EPS
                if np.any(off_mesh) or np.any(off_cell):
                    continue
            m, n = lens[i] / la, lens[j] / lb
            mt, nt = _ratio_text(m, length_rel_tol), _ratio_text(n, length_rel_tol)
            if mt is None or nt is None:
                continue
            theta = float(th1[i])
            rotated = abs(theta) > angle_tol_degrees
            key = (
                rotated,
                centred,
                round(abs(theta), 3),
                theta < 0,
                round(m * n, 6),
                -round(m, 6),
                tuple(u[i]),
                tuple(u[j]),
            )
            if best is None or key < best[0]:
                label = ("c" if centred else "") + f"({mt}×{nt})"
                if rotated:
                    label += f"R{_angle_text(abs(theta))}°"
                mat = ((int(u[i][0]), int(u[i][1])), (int(u[j][0]), int(u[j][1])))
                best = (key, Wood(label, centred, 0.0 if not rotated else abs(theta), float(m), float(n), mat))
    return None if best is None else best[1]


def matrix_text(matrix: ArrayLike) -> str:
    """'(2 0 / 0 1)' for a supercell matrix (rows in mesh units).

    >>> matrix_text([[2, 1], [0, 3]])
    '(2 1 / 0 3)'
    """
    m = np.asarray(matrix, dtype=np.int64)
    return f"({m[0, 0]} {m[0, 1]} / {m[1, 0]} {m[1, 1]})"


def cell_notation(matrix: ArrayLike, mesh_inplane: ArrayLike) -> str:
    """Wood notation of a supercell where it applies, else its matrix.

    Parameters
    ----------
    matrix : (2, 2) int array_like
        Rows: supercell vectors in units of the mesh vectors a, b.
    mesh_inplane : (2, 2) array_like
        Mesh vectors as rows, Cartesian, Å.

    Returns
    -------
    str
        '(2×1)', 'c(2×2)', '(√3×√3)R30°', or '(2 1 / 0 3)' where no Wood notation applies.

    References
    ----------
    E. A. Wood, J. Appl. Phys. 35, 1306 (1964).

    Examples
    --------
    >>> sq = np.eye(2) * 3.0
    >>> cell_notation([[2, 0], [0, 1]], sq), cell_notation([[1, 1], [-1, 1]], sq), cell_notation([[2, 1], [0, 3]], sq)
    ('(2×1)', 'c(2×2)', '(2 1 / 0 3)')
    """
    wood = wood_notation(matrix, mesh_inplane)
    return wood.label if wood is not None else matrix_text(matrix)


def coset_representatives(hnf: ArrayLike) -> IntArray:
    """Mesh translations (i, j), 0 <= i < p, 0 <= j < r, one per cell of the supercell [[p, q], [0, r]].

    ``hnf`` is a (2, 2) row Hermite normal form; the result is (p r, 2).

    >>> coset_representatives([[2, 1], [0, 1]]).tolist()
    [[0, 0], [1, 0]]
    """
    h = np.asarray(hnf, dtype=np.int64)
    p, r = int(h[0, 0]), int(h[1, 1])
    i, j = np.meshgrid(np.arange(p, dtype=np.int64), np.arange(r, dtype=np.int64), indexing="ij")
    return np.stack([i.ravel(), j.ravel()], axis=1)


def coset_index(hnf: ArrayLike, u: ArrayLike) -> IntArray:
    """(M,) index of the coset of integer vectors ``u`` (M, 2) modulo the (2, 2) HNF sublattice."""
    h = np.asarray(hnf, dtype=np.int64)
    p, q, r = int(h[0, 0]), int(h[0, 1]), int(h[1, 1])
    w = np.array(u, dtype=np.int64, copy=True)
    k = np.floor_divide(w[:, 0], p)
    w[:, 0] -= k * p
    w[:, 1] -= k * q
    w[:, 1] %= r
    return w[:, 0] * r + w[:, 1]


def translation_permutations(hnf: ArrayLike, n_base: int) -> IntArray:
    """How each mesh translation of the supercell permutes its sites.

    Sites are numbered ``coset * n_base + base`` (see :func:`supercell_sites`).

    Returns
    -------
    (D, D * n_base) IntArray
        Row t: image site of every site under the translation by the t-th coset
        representative (row 0 is the identity).
    """
    h = np.asarray(hnf, dtype=np.int64)
    reps = coset_representatives(h)
    det = len(reps)
    perms = np.empty((det, det * n_base), dtype=np.int64)
    for t in range(det):
        image = coset_index(h, reps + reps[t])
        perms[t] = (image[:, None] * n_base + np.arange(n_base)[None, :]).ravel()
    return perms
