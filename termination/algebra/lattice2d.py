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

import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from functools import lru_cache
from typing import cast

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.integer import row_basis
from termination.arrays import FloatArray, IntArray
from termination.defaults import FRACTIONAL_EPS, MAX_USER_CELL, ZERO_EPS
from termination.errors import PlaneError
from termination.units import DEG

__all__ = [
    "CellSpec",
    "Wood",
    "canonical_hnf",
    "cell_matrix",
    "cell_notation",
    "check_cells",
    "coset_index",
    "coset_representatives",
    "gauss_reduce",
    "hnf_matrices",
    "matrix_text",
    "mesh_kind",
    "parse_cell",
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
    return list(_supercell_classes(int(max_det), ops.tobytes()))


@lru_cache(maxsize=256)
def _supercell_classes(max_det: int, operations: bytes) -> tuple[tuple[IntArray, ...], ...]:
    """:func:`supercell_classes` of int64 operations given as bytes (cached: every termination of a face asks)."""
    ops = np.frombuffer(operations, dtype=np.int64).reshape(-1, 2, 2)
    classes: list[tuple[IntArray, ...]] = []
    for det in range(1, max_det + 1):
        seen: set[tuple[int, ...]] = set()
        for h in hnf_matrices(det):
            key = tuple(int(v) for v in h.ravel())
            if key in seen:
                continue
            orbit = {key}
            for s in ops:
                orbit.add(tuple(int(v) for v in canonical_hnf(h @ s).ravel()))
            seen |= orbit
            members = tuple(np.array(k, dtype=np.int64).reshape(2, 2) for k in sorted(orbit))
            for m in members:
                m.flags.writeable = False
            classes.append(members)
    return tuple(classes)


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
        return _scale_text(int(k2))
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

    Only the standard uses are given (common practice): a rotated cell
    (θ ≠ 0) on square and hexagonal meshes, whose shape a rotation keeps, and
    a centred cell on square and rectangular meshes, where c(m×n) is the
    centred rectangle.  Elsewhere (a centred cell on a hexagonal mesh,
    ``c(√48×√12)R30°``; any rotated cell on a rectangular or oblique mesh)
    the matrix is the clearer name and None is returned.

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
    mesh = np.asarray(mesh_inplane, dtype=float)
    key = tuple(int(v) for v in hnf.ravel())
    return _wood_notation(key, tuple(float(v) for v in mesh.ravel()), float(angle_tol_degrees), float(length_rel_tol))


@lru_cache(maxsize=4096)
def _wood_notation(
    hnf_key: tuple[int, ...], mesh_key: tuple[float, ...], angle_tol_degrees: float, length_rel_tol: float
) -> Wood | None:
    """:func:`wood_notation` of an HNF and a mesh given as flat tuples (cached: cells repeat across faces)."""
    hnf = np.array(hnf_key, dtype=np.int64).reshape(2, 2)
    mesh = np.array(mesh_key, dtype=float).reshape(2, 2)
    det = int(round(abs(np.linalg.det(hnf))))
    rng = np.arange(-(2 * det + 1), 2 * det + 2)
    u = np.array(np.meshgrid(rng, rng, indexing="ij")).reshape(2, -1).T
    frac = u @ np.linalg.inv(hnf)
    u = u[np.all(np.abs(frac - np.rint(frac)) < FRACTIONAL_EPS, axis=1) & np.any(u != 0, axis=1)]
    v = u @ mesh
    la, lb = np.linalg.norm(mesh, axis=1)

    def angle_from(ref: FloatArray) -> FloatArray:
        cross = ref[0] * v[:, 1] - ref[1] * v[:, 0]
        return cast(FloatArray, np.degrees(np.arctan2(cross, v @ ref)))

    kind = mesh_kind(mesh, angle_tol_degrees=angle_tol_degrees, length_rel_tol=length_rel_tol)
    th1, th2 = angle_from(mesh[0]), angle_from(mesh[1])
    lens = np.linalg.norm(v, axis=1)
    cross = u[:, None, 0] * u[None, :, 1] - u[:, None, 1] * u[None, :, 0]
    dth = (th1[:, None] - th2[None, :] + 180.0) % 360.0 - 180.0
    same = np.abs(dth) <= angle_tol_degrees
    best: tuple[tuple[object, ...], Wood] | None = None
    for centred, index in ((False, det), (True, 2 * det)):
        if centred and kind not in ("square", "rectangular"):
            continue  # a centred cell is a rectangular description: standard on square and rectangular meshes only
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
            if rotated and kind not in ("square", "hexagonal"):
                continue  # a rotated Wood cell keeps the mesh's shape only on square and hexagonal meshes
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


def mesh_kind(mesh_inplane: ArrayLike, *, angle_tol_degrees: float = 0.5, length_rel_tol: float = 1e-3) -> str:
    """2D Bravais type of a mesh: 'square', 'hexagonal', 'rectangular', 'centred rectangular' or 'oblique'.

    ``mesh_inplane`` holds the (2, 2) mesh rows (Å); the type is read from its
    reduced obtuse basis (|a| <= |b|, 90° <= gamma <= 120°): a mirror, hence a
    centred rectangular mesh, when two of |a|, |b|, |a + b| are equal.

    >>> mesh_kind([[3.0, 0.0], [-1.5, 3.0 * np.sqrt(3) / 2]]), mesh_kind([[2.0, 0.0], [0.0, 3.0]])
    ('hexagonal', 'rectangular')
    """
    a, b = reduced_obtuse(*np.asarray(mesh_inplane, dtype=float))
    la, lb, lab = (float(np.linalg.norm(v)) for v in (a, b, a + b))
    gamma = float(np.degrees(np.arccos(np.clip(a @ b / (la * lb), -1.0, 1.0))))
    equal = abs(la - lb) <= length_rel_tol * lb
    right = abs(gamma - 90.0) <= angle_tol_degrees
    if equal and right:
        return "square"
    if equal and abs(gamma - 120.0) <= angle_tol_degrees:
        return "hexagonal"
    if right:
        return "rectangular"
    if equal or abs(lab - lb) <= length_rel_tol * lb:
        return "centred rectangular"
    return "oblique"


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


#: One scale of a Wood cell: an integer, a square root or both ('2', '√3', 'sqrt3', 'sqrt(3)', '2√3').
_SCALE = r"(\d+)?(?:(?:√|sqrt)\(?(\d+)\)?)?"
_WOOD = re.compile(
    rf"(?P<prefix>[pc]?)\(?{_SCALE}x{_SCALE}\)?(?:r(?P<angle>\d+(?:\.\d*)?)°?)?",
    re.IGNORECASE,
)
_SEP = r"[\s\[\]\(\),;/]"
_MATRIX = re.compile(rf"{_SEP}*" + rf"{_SEP}+".join([r"(-?\d+)"] * 4) + rf"{_SEP}*")
#: Largest accepted scale squared (m² or n²) of a Wood cell and largest |entry| of a cell matrix.
_MAX_SCALE2 = 10_000


@dataclass(frozen=True)
class CellSpec:
    """A surface cell as written, before it is placed on a mesh: Wood notation or an integer matrix.

    Attributes
    ----------
    text : str
        As given ('2x1', 'c(2x2)', '(sqrt3xsqrt3)R30', '2,1,0,2').
    label : str
        Normal form: '(2×1)', 'c(2×2)', '(√3×√3)R30°', '(2 1 / 0 2)'.
    matrix : tuple of tuple of int, or None
        Rows in mesh units when given as a matrix.
    m2, n2 : int
        Squares of the Wood scales m and n (|A1| = m |a|, |A2| = n |b|); 0 for a matrix.
    angle : float
        Wood rotation θ, degrees; 0 for a matrix.
    centred : bool
        A c(m×n) cell.
    """

    text: str
    label: str
    matrix: tuple[tuple[int, int], tuple[int, int]] | None = None
    m2: int = 0
    n2: int = 0
    angle: float = field(default=0.0, metadata=DEG)
    centred: bool = False


def _scale2(whole: str | None, root: str | None) -> int:
    """k² j for the scale k√j written as (whole, root); 0 when neither is given."""
    if whole is None and root is None:
        return 0
    return int(whole or 1) ** 2 * int(root or 1)


def parse_cell(text: str) -> CellSpec:
    """Read a surface cell: Wood notation or a 2×2 integer matrix.

    Parameters
    ----------
    text : str
        Wood notation with 'x', 'X', '×' or '*' between the scales, an
        optional 'p' or 'c' prefix and parentheses, square roots as '√3',
        'sqrt3' or 'sqrt(3)', a rotation as 'R30' or 'R30°': '2x1',
        'p(2×2)', 'c(2x2)', '(√3×√3)R30°', 'sqrt3xsqrt3R30'; or four
        integers, the rows of the matrix in mesh units: '2,0,0,1',
        '2 1 / 0 2', '[[2, 1], [-1, 1]]'.

    Returns
    -------
    CellSpec

    Raises
    ------
    PlaneError
        For anything else, for a singular matrix, and for the 1×1 mesh
        itself, which is the unreconstructed surface and not a cell.

    Examples
    --------
    >>> parse_cell("sqrt3xsqrt3R30").label, parse_cell("c(2x2)").centred, parse_cell("2 1 / 0 2").matrix
    ('(√3×√3)R30°', True, ((2, 1), (0, 2)))
    """
    raw = str(text)
    compact = "".join(raw.split()).replace("×", "x").replace("X", "x").replace("*", "x")
    m = _MATRIX.fullmatch(raw.strip())
    if m:
        a, b, c, d = (int(v) for v in m.groups())
        if max(abs(a), abs(b), abs(c), abs(d)) > _MAX_SCALE2:
            raise PlaneError(f"cell {raw!r}: matrix entries must be at most {_MAX_SCALE2} in size")
        det = a * d - b * c
        if det == 0:
            raise PlaneError(f"cell {raw!r}: the matrix is singular")
        if abs(det) == 1:
            raise PlaneError(f"cell {raw!r} is the 1×1 mesh, the unreconstructed surface, not a reconstruction cell")
        return CellSpec(raw, matrix_text([[a, b], [c, d]]), ((a, b), (c, d)))
    w = _WOOD.fullmatch(compact)
    m2 = n2 = 0
    if w:
        g = w.groups()
        m2, n2 = _scale2(g[1], g[2]), _scale2(g[3], g[4])
    if not w or not m2 or not n2:
        raise PlaneError(
            f"cell {raw!r} is neither Wood notation (2x1, c(2x2), (sqrt3xsqrt3)R30) nor a 2×2 integer matrix (2,0,0,1)"
        )
    if max(m2, n2) > _MAX_SCALE2:
        raise PlaneError(f"cell {raw!r}: Wood scales must be at most {int(np.sqrt(_MAX_SCALE2))}")
    angle = float(w.group("angle") or 0.0)
    if not 0.0 <= angle < 180.0:
        raise PlaneError(f"cell {raw!r}: the rotation must lie between 0° and 180°, got {angle:g}°")
    centred = w.group("prefix").lower() == "c"
    if centred and m2 * n2 < 4:
        raise PlaneError(f"cell {raw!r}: a centred cell needs m n >= 2")
    if not centred and m2 == n2 == 1 and angle == 0.0:
        raise PlaneError(f"cell {raw!r} is the 1×1 mesh, the unreconstructed surface, not a reconstruction cell")
    label = ("c" if centred else "") + f"({_scale_text(m2)}×{_scale_text(n2)})"
    if angle:
        label += f"R{_angle_text(angle)}°"
    return CellSpec(raw, label, None, m2, n2, angle, centred)


def check_cells(cells: Iterable[str | CellSpec] | None, max_index: int = MAX_USER_CELL) -> tuple[CellSpec, ...]:
    """Cells given as text or :class:`CellSpec`, parsed, bounded and without repeats, before any work.

    A cell of more than ``max_index`` 1×1 cells is refused (PlaneError naming it).

    >>> [c.label for c in check_cells(["2x1", "(2×1)", "c(2x2)"])]
    ['(2×1)', 'c(2×2)']
    """
    out: list[CellSpec] = []
    for c in cells or ():
        spec = c if isinstance(c, CellSpec) else parse_cell(c)
        if spec.matrix is not None:
            (a, b), (p, q) = spec.matrix
            size = abs(a * q - b * p)
        else:
            size = round(float(np.sqrt(spec.m2 * spec.n2)) / (2 if spec.centred else 1))
        if size > max_index:
            raise PlaneError(f"cell {spec.label} spans {size} 1×1 cells; at most {max_index} are accepted")
        if spec.label not in [o.label for o in out]:
            out.append(spec)
    return tuple(out)


def _scale_text(k2: int) -> str:
    """'2' for 4, '√3' for 3, '2√3' for 12: a Wood scale from its square, the root square-free."""
    whole, root = 1, int(k2)
    f = 2
    while f * f <= root:
        while root % (f * f) == 0:
            root //= f * f
            whole *= f
        f += 1
    if root == 1:
        return str(whole)
    return f"√{root}" if whole == 1 else f"{whole}√{root}"


def cell_matrix(
    spec: CellSpec, mesh_inplane: ArrayLike, *, angle_tol_degrees: float = 0.5, length_rel_tol: float = 1e-3
) -> IntArray | None:
    """The supercell matrix of ``spec`` on a mesh, or None when it is no sublattice of that mesh.

    Parameters
    ----------
    spec : CellSpec
        From :func:`parse_cell`.
    mesh_inplane : (2, 2) array_like
        Mesh rows a, b, Cartesian, Å.
    angle_tol_degrees, length_rel_tol : float
        How close a lattice vector must come to the Wood vector (its angle in
        degrees, its length relative), so that a rounded angle such as
        R19.1° finds the vector at 19.107°.

    Returns
    -------
    (2, 2) IntArray or None
        Rows in mesh units, right-handed: the Wood vectors A1 = m R(θ) a,
        A2 = n R(θ) b, or for c(m×n) the primitive basis A1, (A1 + A2)/2.
        θ is tried counter-clockwise first, then clockwise.

    Examples
    --------
    >>> hexagonal = 3.0 * np.array([[1.0, 0.0], [-0.5, np.sqrt(3) / 2]])
    >>> cell_matrix(parse_cell("(sqrt3xsqrt3)R30"), hexagonal).tolist()
    [[2, 1], [-1, 1]]
    >>> cell_matrix(parse_cell("(sqrt3xsqrt3)R30"), 3.0 * np.eye(2)) is None
    True
    """
    if spec.matrix is not None:
        return np.array(spec.matrix, dtype=np.int64)
    mesh = np.asarray(mesh_inplane, dtype=float)
    inv = np.linalg.inv(mesh)
    scales = (np.sqrt(spec.m2), np.sqrt(spec.n2))
    for sign in (1.0, -1.0) if spec.angle else (1.0,):
        t = np.radians(sign * spec.angle)
        rot = np.array([[np.cos(t), np.sin(t)], [-np.sin(t), np.cos(t)]])  # row vectors: v -> v rot
        rows = []
        for k in range(2):
            target = scales[k] * (mesh[k] @ rot)
            u = np.rint(target @ inv)
            v = u @ mesh
            length_ok = abs(np.linalg.norm(v) - np.linalg.norm(target)) <= length_rel_tol * np.linalg.norm(target)
            cos = float(np.clip(v @ target / (np.linalg.norm(v) * np.linalg.norm(target) or 1.0), -1.0, 1.0))
            if not (length_ok and np.degrees(np.arccos(cos)) <= angle_tol_degrees):
                break
            rows.append(u.astype(np.int64))
        else:
            u1, u2 = rows
            if spec.centred:
                mid = u1 + u2
                if np.any(mid % 2):
                    continue
                u2 = mid // 2
            out = np.array([u1, u2], dtype=np.int64)
            det = round(float(np.linalg.det(out)))
            if det == 0:
                continue
            if det < 0:
                out[1] *= -1
            return out
    return None


def coset_representatives(hnf: ArrayLike) -> IntArray:
    """Mesh translations (i, j), 0 <= i < p, 0 <= j < r, one per cell of the supercell [[p, q], [0, r]].

    ``hnf`` is a (2, 2) row Hermite normal form; the result is (p r, 2).

    >>> coset_representatives([[2, 1], [0, 1]]).tolist()
    [[0, 0], [1, 0]]
    """
    h = np.asarray(hnf, dtype=np.int64)
    return _cosets(int(h[0, 0]), int(h[1, 1]))


@lru_cache(maxsize=256)
def _cosets(p: int, r: int) -> IntArray:
    """(p r, 2) translations (i, j), 0 <= i < p, 0 <= j < r (cached, read-only)."""
    i, j = np.meshgrid(np.arange(p, dtype=np.int64), np.arange(r, dtype=np.int64), indexing="ij")
    out = np.stack([i.ravel(), j.ravel()], axis=1)
    out.flags.writeable = False
    return out


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
