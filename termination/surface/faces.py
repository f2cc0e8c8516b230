"""Candidate faces: symmetry-distinct Miller planes, their spacing, mesh and tilt to the mount.

Miller indices refer to the conventional cell of the
:class:`~termination.bulk.crystal.Crystal`.  A face (hkl) is the set of
lattice planes h.x = const (x fractional); its outward normal is the
reciprocal vector G = h b1 + k b2 + l b3.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, field
from functools import lru_cache
from typing import SupportsFloat, SupportsInt, cast

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.integer import primitive_index, rationalise, unimodular_completion
from termination.algebra.lattice2d import gauss_reduce
from termination.arrays import FloatArray, IntArray
from termination.bulk.crystal import Crystal
from termination.defaults import ANGLE_EPS_DEG, MAX_INDEX, MAX_INDEX_LIMIT
from termination.errors import PlaneError
from termination.surface.miller import HKL, check_hkl, hkl_tuple
from termination.units import ANGSTROM, ANGSTROM2, DEG

__all__ = [
    "Face",
    "FaceVariant",
    "Mesh",
    "distinct_faces",
    "face_geometry",
    "face_index",
    "face_variants",
    "interplanar_angle",
    "tilt_to_mount",
    "tilt_window",
    "variant_tilts",
]


@dataclass(frozen=True)
class Mesh:
    """Reduced primitive 2D surface lattice (Å, degrees, Å²).

    ``a <= b`` are the lengths of the mesh vectors (Å), ``gamma`` the angle
    between them in the obtuse convention (90° <= gamma <= 120°) of surface
    crystallography, ``area`` the area of the cell (Å²).
    """

    a: float = field(metadata=ANGSTROM)
    b: float = field(metadata=ANGSTROM)
    gamma: float = field(metadata=DEG)
    area: float = field(metadata=ANGSTROM2)


@dataclass(frozen=True, eq=False)
class Face:
    """Geometry of one face (hkl).

    Attributes
    ----------
    hkl : tuple of int
        Representative Miller index (conventional cell).
    variants : tuple of tuple of int
        All symmetry-equivalent indices under the crystal's point group.
    d : float
        Spacing of the lattice planes (centring included), Å.
    normal : (3,) FloatArray
        Outward unit normal, Cartesian.
    mesh : Mesh
        Reduced surface mesh.
    mesh_fractional : (2, 3) FloatArray
        Mesh vectors as rows, fractional coordinates of the conventional cell;
        right-handed with ``normal`` and ``|a| <= |b|``.
    stack_fractional : (3,) FloatArray
        Lattice vector from one plane to the next (``stack . normal = d``),
        fractional, shortened by in-plane mesh vectors.
    frame : (3, 3) FloatArray
        Rows e1 (along mesh a), e2, e3 = normal: the surface frame, Cartesian.
    tilt : float or None
        Angle to the mount face, degrees (minimum over the variants).
    tilt_variant : tuple of int or None
        The variant that realises ``tilt``.
    tilt_axis : tuple of int or None
        Direct-lattice direction [uvw] of the rotation axis taking the mount
        normal onto the variant's normal (None when ``tilt`` is 0).
    """

    hkl: HKL
    variants: tuple[HKL, ...]
    d: float = field(metadata=ANGSTROM)
    normal: FloatArray
    mesh: Mesh
    mesh_fractional: FloatArray
    stack_fractional: FloatArray
    frame: FloatArray
    tilt: float | None = field(default=None, metadata=DEG)
    tilt_variant: HKL | None = None
    tilt_axis: HKL | None = None

    @property
    def multiplicity(self) -> int:
        """Number of symmetry-equivalent indices."""
        return len(self.variants)


def _miller_rotations(crystal: Crystal) -> IntArray:
    """(P, 3, 3) matrices acting on row Miller indices: h' = h @ inv(R)."""
    return np.rint(np.linalg.inv(crystal.point_group)).astype(np.int64)


def face_index(crystal: Crystal, hkl: Iterable[SupportsFloat], name: str = "plane") -> HKL:
    """A face given with three indices, or four (Miller-Bravais) in a lattice with hexagonal axes, as (h k l).

    See :func:`termination.surface.miller.check_hkl`; four indices are
    refused for a crystal whose standard cell has no hexagonal axes.
    """
    values = list(hkl) if isinstance(hkl, Sequence | np.ndarray) else hkl
    if isinstance(values, list) and len(values) == 4 and not crystal.hexagonal_axes:
        raise PlaneError(
            f"{name} ({' '.join(str(v) for v in values)}): four (Miller-Bravais) indices apply to hexagonal and "
            f"trigonal lattices only, and {crystal.formula} is {crystal.crystal_system}; give three indices (h k l)"
        )
    return check_hkl(values, name, hexagonal=crystal.hexagonal_axes)


def face_variants(crystal: Crystal, hkl: Iterable[SupportsFloat]) -> tuple[HKL, ...]:
    """Symmetry-equivalent Miller indices of ``hkl``, sorted, as tuples."""
    h = np.asarray(face_index(crystal, hkl), dtype=np.int64)
    orbit = np.einsum("i,pij->pj", h, _miller_rotations(crystal))
    return tuple(sorted({hkl_tuple(v) for v in orbit}))


def _choice_key(v: Sequence[int]) -> tuple[int, int, int, int, int]:
    """Preference among variants: fewest negative entries, ascending order, larger l, k, h."""
    negatives = sum(x < 0 for x in v)
    unsorted = sum(abs(v[i]) > abs(v[i + 1]) for i in range(2))
    return (negatives, unsorted, -v[2], -v[1], -v[0])


def _hexagonal_choice_key(v: Sequence[int]) -> tuple[int, int, int, int, int, int]:
    """Preference among variants in hexagonal axes: (h k i l) with h >= k >= 0, then larger l, h, k.

    So the families read (1 0 -1 0), (1 1 -2 0), (1 0 -1 1), (2 -1 -1 0) as
    practitioners write them.
    """
    h, k, l = v[0], v[1], v[2]
    negatives = (h < 0) + (k < 0) + (l < 0)
    return (negatives, 0 if h >= k >= 0 else 1, 0 if h >= 0 and k >= 0 else 1, -l, -h, -k)


def _key_for(crystal: Crystal) -> Callable[[Sequence[int]], tuple[int, ...]]:
    """The preference key of readable variants for the crystal's axes."""
    return _hexagonal_choice_key if crystal.hexagonal_axes else _choice_key


def _representative(
    orbit: set[HKL], laue_orbit: set[HKL], key: Callable[[Sequence[int]], tuple[int, ...]] = _choice_key
) -> HKL:
    """Readable representative: the Laue choice r if in the orbit, else -r, else the best."""
    r = min(laue_orbit, key=key)
    if r in orbit:
        return r
    neg = (-r[0], -r[1], -r[2])
    if neg in orbit:
        return neg
    return min(orbit, key=key)


def face_geometry(crystal: Crystal, hkl: Iterable[SupportsFloat], mount: Iterable[SupportsFloat] | None = None) -> Face:
    """Geometry of the face ``hkl`` of ``crystal``.

    Parameters
    ----------
    crystal : Crystal
    hkl : 3 ints
        Miller index in the conventional cell; (0 0 0) is rejected.
    mount : 3 ints, optional
        Face the crystal was mounted on; sets ``tilt``.

    Returns
    -------
    Face

    Notes
    -----
    The lattice, centring included, is spanned by a primitive basis P
    (``crystal.primitive_fractional``).  In that basis the face index is
    h_p = P h scaled to coprime integers.  A unimodular U with h_p U = (1,0,0)
    gives the in-plane lattice (columns 2, 3; h_p . u = 0) and the stacking
    vector (column 1).  Then d = 1/|h_p B_p| with B_p the reciprocal of P,
    which includes the centring: fcc (001) gives a/2 and fcc (012) a/(2 sqrt 5).
    """
    h = face_index(crystal, hkl)
    variants = face_variants(crystal, h)
    return _geometry(crystal, h, variants, None if mount is None else face_index(crystal, mount, "mount"))


@lru_cache(maxsize=32)
def _cell_tables(crystal: Crystal) -> tuple[FloatArray, FloatArray, FloatArray]:
    """Per-crystal (3, 3) matrices used for every face (cached; a Crystal is immutable).

    Returns the primitive basis in Cartesian rows (Å), the reciprocal rows
    (1/Å) and the inverse of the lattice matrix.
    """
    inverse = cast(FloatArray, np.linalg.inv(crystal.lattice))
    return crystal.primitive_fractional @ crystal.lattice, crystal.reciprocal, inverse


def _cross(a: FloatArray, b: FloatArray) -> FloatArray:
    """Cross product of two (3,) vectors (np.cross has a large per-call overhead)."""
    return np.array([a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]])


def _geometry(crystal: Crystal, h: HKL, variants: tuple[HKL, ...], mount: HKL | None) -> Face:
    """:class:`Face` of the checked index ``h`` (see :func:`face_geometry`)."""
    P = crystal.primitive_fractional
    prim_cart, reciprocal, frac_basis_inv = _cell_tables(crystal)
    h_p = primitive_index(rationalise(P @ np.asarray(h, dtype=float), 12))
    U = unimodular_completion(h_p)
    u = U.T  # rows: stacking, in-plane 1, in-plane 2 (primitive basis)
    v_cart = u @ prim_cart
    G = np.asarray(h, dtype=float) @ reciprocal
    normal = G / np.linalg.norm(G)
    d = float(v_cart[0] @ normal)
    if d < 0:  # orientation of U's first column is fixed by h_p . u = +1
        raise AssertionError("stacking vector points inward")
    a1, a2 = gauss_reduce(v_cart[1], v_cart[2])
    if _cross(a1, a2) @ normal < 0:
        a2 = -a2
    stack = v_cart[0]
    # Shorten the stacking vector with in-plane translations (nearly normal).
    inplane = np.array([a1, a2])
    coef = np.linalg.lstsq(inplane.T, stack - d * normal, rcond=None)[0]
    stack = stack - np.rint(coef) @ inplane
    la, lb = float(np.linalg.norm(a1)), float(np.linalg.norm(a2))
    cosg = float(a1 @ a2) / (la * lb)
    gamma = float(np.degrees(np.arccos(np.clip(-abs(cosg), -1.0, 1.0))))
    area = float(np.linalg.norm(_cross(a1, a2)))
    e1 = a1 / la
    frame = np.array([e1, _cross(normal, e1), normal])
    tilt: float | None = None
    variant: HKL | None = None
    axis: HKL | None = None
    if mount is not None:
        tilt, variant, axis = tilt_to_mount(crystal, variants, mount)
    return Face(
        hkl=h,
        variants=variants,
        d=d,
        normal=normal,
        mesh=Mesh(a=la, b=lb, gamma=gamma, area=area),
        mesh_fractional=inplane @ frac_basis_inv,
        stack_fractional=stack @ frac_basis_inv,
        frame=frame,
        tilt=tilt,
        tilt_variant=variant,
        tilt_axis=axis,
    )


def interplanar_angle(crystal: Crystal, hkl1: Iterable[SupportsFloat], hkl2: Iterable[SupportsFloat]) -> float:
    """Angle between the normals of two planes, degrees (metric-tensor formula).

    Notes
    -----
    cos phi = h1 G* h2 / (|h1| |h2|) with G* = B B^T the reciprocal metric.
    """
    B = crystal.reciprocal
    g1 = np.asarray(face_index(crystal, hkl1), dtype=float) @ B
    g2 = np.asarray(face_index(crystal, hkl2), dtype=float) @ B
    c = g1 @ g2 / (np.linalg.norm(g1) * np.linalg.norm(g2))
    return float(np.degrees(np.arccos(np.clip(c, -1.0, 1.0))))


def variant_tilts(crystal: Crystal, variants: ArrayLike, mount: ArrayLike) -> FloatArray:
    """Angle between the mount face and each of ``variants``, degrees.

    Parameters
    ----------
    crystal : Crystal
    variants : (V, 3) int array_like
        Miller indices.
    mount : (3,) int array_like

    Returns
    -------
    (V,) FloatArray
        cos phi = G_v . G_m / (|G_v| |G_m|) with G = h B (reciprocal rows B).
    """
    B = crystal.reciprocal
    m = np.asarray(mount, dtype=float) @ B
    m /= np.linalg.norm(m)
    G = np.asarray(variants, dtype=float).reshape(-1, 3) @ B
    G /= np.linalg.norm(G, axis=1)[:, None]
    return cast(FloatArray, np.degrees(np.arccos(np.clip(G @ m, -1.0, 1.0))))


def tilt_to_mount(
    crystal: Crystal, variants: Sequence[Sequence[SupportsInt]], mount: Iterable[SupportsInt]
) -> tuple[float, HKL, HKL | None]:
    """Smallest angle between the mount face and any of ``variants``.

    Parameters
    ----------
    crystal : Crystal
    variants : (V, 3) int sequence
        Miller indices, e.g. :attr:`Face.variants`.
    mount : (3,) int sequence

    Returns
    -------
    tilt : float
        Degrees.
    variant : tuple of int
        The variant that realises it.
    axis : tuple of int or None
        Rotation axis [uvw] (direct lattice) taking the mount normal onto the
        variant's normal: the cross product of the two reciprocal vectors is
        the direct-lattice vector mount x variant (in index space).
    """
    rows = [hkl_tuple(v) for v in variants]
    m = hkl_tuple(mount)
    angles = variant_tilts(crystal, rows, m)
    # Deterministic tie-break: smallest angle, then the preferred index form.
    rounded = np.round(angles, 6)
    key = _key_for(crystal)
    order = sorted(range(len(rows)), key=lambda i: (float(rounded[i]), key(rows[i])))
    best = order[0]
    tilt = float(angles[best])
    variant = rows[best]
    return tilt, variant, _rotation_axis(m, variant, tilt)


def _rotation_axis(mount: HKL, variant: HKL, tilt: float) -> HKL | None:
    """Direct-lattice axis [uvw] = mount x variant (index space), None for no tilt or an antiparallel pair."""
    if tilt <= ANGLE_EPS_DEG:
        return None
    axis = hkl_tuple(primitive_index(np.cross(np.asarray(mount, dtype=np.int64), np.asarray(variant, dtype=np.int64))))
    return axis if any(axis) else None  # antiparallel: any axis in the plane will do


def distinct_faces(
    crystal: Crystal, max_index: int = MAX_INDEX, mount: Iterable[SupportsFloat] | None = None
) -> tuple[Face, ...]:
    """All symmetry-distinct faces with indices up to ``max_index``.

    Parameters
    ----------
    crystal : Crystal
    max_index : int
        Largest |h|, |k|, |l| (1 to :data:`MAX_INDEX_LIMIT`).
    mount : 3 ints, optional
        Mount face for the tilt.

    Returns
    -------
    tuple of Face
        Sorted by h^2 + k^2 + l^2, then index.  Faces are grouped by the
        crystal's point group, so in a non-centrosymmetric crystal (hkl) and
        (-h-k-l) can be distinct faces.
    """
    try:
        n = int(max_index)
    except (TypeError, ValueError):
        raise PlaneError(f"max index must be an integer, got {max_index!r}") from None
    if n != max_index or not 1 <= n <= MAX_INDEX_LIMIT:
        raise PlaneError(f"max index must be an integer from 1 to {MAX_INDEX_LIMIT}, got {max_index}")
    mount_hkl = None if mount is None else face_index(crystal, mount, "mount")
    r = np.arange(-n, n + 1)
    grid = np.array(np.meshgrid(r, r, r, indexing="ij")).reshape(3, -1).T
    g = np.gcd.reduce(np.abs(grid), axis=1)
    grid = grid[g == 1]
    rots = _miller_rotations(crystal)
    key = _key_for(crystal)
    orbits = np.einsum("hi,pij->hpj", grid, rots)  # (H, P, 3)
    width = 2 * n + 1
    codes = ((orbits[..., 0] + n) * width + (orbits[..., 1] + n)) * width + (orbits[..., 2] + n)
    keys = codes.min(axis=1)
    _, first = np.unique(keys, return_index=True)
    faces = []
    for i in first:
        orbit = {hkl_tuple(v) for v in orbits[i].tolist()}
        laue = orbit | {(-v[0], -v[1], -v[2]) for v in orbit}
        rep = _representative(orbit, laue, key)
        faces.append(_geometry(crystal, rep, tuple(sorted(orbit)), mount_hkl))
    faces.sort(key=lambda f: (sum(x * x for x in f.hkl), key(f.hkl)))
    return tuple(faces)


@dataclass(frozen=True)
class FaceVariant:
    """One symmetry variant of a face at its tilt to the mount face.

    ``hkl`` is the face (its representative, as :func:`distinct_faces` gives
    it), ``tilt_variant`` the equivalent index (hkl)' whose plane is inclined
    by ``tilt`` to the mount face, ``tilt_axis`` the direct-lattice direction
    [uvw] of the rotation taking the mount normal onto the variant's normal
    (None when the two are parallel or antiparallel).
    """

    hkl: HKL
    tilt_variant: HKL
    tilt: float = field(metadata=DEG)
    tilt_axis: HKL | None


def tilt_window(
    crystal: Crystal,
    mount: Iterable[SupportsFloat],
    min_tilt_deg: float,
    max_tilt_deg: float,
    *,
    max_index: int = MAX_INDEX,
    faces: Sequence[Face] | None = None,
) -> tuple[FaceVariant, ...]:
    """Every variant of every face whose tilt to the mount face lies in [min, max], sorted by tilt.

    Parameters
    ----------
    crystal : Crystal
    mount : 3 ints
        Face the crystal is mounted on.
    min_tilt_deg, max_tilt_deg : float
        The window, degrees, 0 <= min <= max <= 180.
    max_index : int
        Faces up to this index (ignored when ``faces`` is given).
    faces : sequence of Face, optional
        Faces to take the variants from (default :func:`distinct_faces`).

    Returns
    -------
    tuple of FaceVariant
        Sorted by tilt, then by the face's order in ``faces``, then by the
        preferred index form.  A face appears once per variant in the
        window, so one face may appear at several tilts: from (0 0 1) the
        (1 1 3) of a cubic crystal lies at 25.2° ((1 1 3), (-1 1 3), ...)
        and at 72.5° ((3 1 1), (1 3 1), ...).

    Notes
    -----
    cos phi = G_v . G_m / (|G_v| |G_m|) with G = h B, B the reciprocal rows
    (:func:`variant_tilts`); the axis is mount x variant in index space,
    which is a direct-lattice vector because b_i x b_j = (a_k / V) for the
    reciprocal basis.

    Examples
    --------
    >>> from termination.structures import build_prototype
    >>> c = build_prototype("rocksalt:Na,Cl", a=5.64)
    >>> rows = tilt_window(c, (0, 0, 1), 72.0, 73.0, max_index=3)
    >>> sorted({r.hkl for r in rows}), round(rows[0].tilt, 1), len(rows)
    ([(1, 1, 3)], 72.5, 8)
    """
    m = face_index(crystal, mount, "mount")
    lo, hi = float(min_tilt_deg), float(max_tilt_deg)
    if not (np.isfinite(lo) and np.isfinite(hi) and 0.0 <= lo <= hi <= 180.0):
        raise PlaneError(
            f"tilt window must satisfy 0 <= MIN <= MAX <= 180 degrees, got {min_tilt_deg} to {max_tilt_deg}"
        )
    chosen = distinct_faces(crystal, max_index=max_index) if faces is None else tuple(faces)
    found: list[tuple[float, int, tuple[int, int, int, int, int], FaceVariant]] = []
    for position, face in enumerate(chosen):
        angles = variant_tilts(crystal, face.variants, m)
        inside = (angles >= lo - ANGLE_EPS_DEG) & (angles <= hi + ANGLE_EPS_DEG)
        for i in np.flatnonzero(inside):
            v = face.variants[int(i)]
            tilt = float(angles[i])
            row = FaceVariant(hkl=face.hkl, tilt_variant=v, tilt=tilt, tilt_axis=_rotation_axis(m, v, tilt))
            found.append((round(tilt, 6), position, _choice_key(v), row))
    found.sort(key=lambda item: item[:3])
    return tuple(item[3] for item in found)
