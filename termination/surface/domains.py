"""Rotational domains of a surface cell: its symmetry-related orientations and the spot pattern they superpose.

A reconstruction cell, or any pattern on a surface, has as many orientations
as the surface's point group has cosets of the pattern's own symmetry: a
(2×1) on a square mesh comes with its (1×2) domain, a (2×1) on a hexagonal
mesh with three.  Domains grow side by side on one terrace, or on terraces
one step apart when the operation that relates them shifts the height (the
4₂ screw of diamond (001) turns the (2×1) of one terrace into the (1×2) of
the next).  An image, or its Fourier transform, over several domains shows
the union of their spots.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike

from termination.algebra.lattice2d import canonical_hnf, cell_notation, wood_notation
from termination.arrays import IntArray
from termination.bulk.crystal import Crystal
from termination.defaults import ANGLE_EPS_DEG
from termination.surface.faces import Face
from termination.surface.symmetry import face_operations, mesh_actions

__all__ = ["Domain", "cell_domains", "domain_name", "face_point_group", "operation_text"]


@dataclass(frozen=True)
class Domain:
    """One rotational domain: its cell's name, its cell (rows in mesh units) and the operation that makes it."""

    name: str
    matrix: tuple[tuple[int, int], tuple[int, int]]
    operation: str


def face_point_group(crystal: Crystal, face: Face) -> IntArray:
    """In-plane action of every space-group operation that keeps the face, on mesh coordinates.

    Returns
    -------
    (K, 2, 2) IntArray
        Distinct S with u -> u S (u a row of mesh coordinates): the
        identity, the rotations by increasing angle, the mirrors.  Unlike
        :func:`termination.surface.symmetry.termination_operations` it
        keeps the operations that shift the height: they relate a
        termination to its symmetry-equivalent copies one step away, whose
        terraces carry the rotated domains.
    """
    rots, _ = face_operations(crystal, face)
    out = mesh_actions(face, rots)
    # Identity, then rotations by increasing angle (trace 2 cos θ), then mirrors: so that a domain is
    # named by the smallest rotation that makes it.
    ident = np.eye(2, dtype=np.int64)
    out.sort(key=lambda s: (not np.array_equal(s, ident), round(np.linalg.det(s)) < 0, -int(np.trace(s))))
    return np.array(out, dtype=np.int64).reshape(-1, 2, 2)


def operation_text(operation: ArrayLike, mesh_inplane: ArrayLike) -> str:
    """'identity', 'rotated 90°' or 'mirror at 30°' (angles from mesh vector a) for S acting as u -> u S.

    >>> operation_text([[0, 1], [-1, 0]], np.eye(2)), operation_text([[1, 0], [0, -1]], np.eye(2))
    ('rotated 90°', 'mirror at 0°')
    """
    S = np.asarray(operation, dtype=np.int64)
    mesh = np.asarray(mesh_inplane, dtype=float)
    return _operation_text(tuple(int(v) for v in S.ravel()), tuple(float(v) for v in mesh.ravel()))


@lru_cache(maxsize=1024)
def _operation_text(op_key: tuple[int, ...], mesh_key: tuple[float, ...]) -> str:
    """:func:`operation_text` of flat tuples (cached: a face's few operations are described again and again)."""
    S = np.array(op_key, dtype=float).reshape(2, 2)
    mesh = np.array(mesh_key, dtype=float).reshape(2, 2)
    cart = np.linalg.inv(mesh) @ S @ mesh  # row vectors r -> r cart
    a = mesh[0] / np.linalg.norm(mesh[0])
    v = a @ cart
    angle = float(np.degrees(np.arctan2(a[0] * v[1] - a[1] * v[0], a @ v)))
    if np.linalg.det(cart) > 0:
        if abs(angle) < ANGLE_EPS_DEG:
            return "identity"
        return f"rotated {angle % 360:.0f}°"
    return f"mirror at {(angle / 2) % 180:.0f}°"


def domain_name(base: str, matrix: ArrayLike, operation: ArrayLike, mesh_inplane: ArrayLike) -> str:
    """Name of the domain ``matrix`` (rows in mesh units) made from the cell named ``base`` by ``operation``.

    Its own Wood notation when that is unrotated ('(1×2)' for the 90° domain
    of '(2×1)'), else the base name and the operation ('(2×1) rotated 120°').

    >>> domain_name("(2×1)", [[0, 2], [-1, 0]], [[0, 1], [-1, 0]], 3.84 * np.eye(2))
    '(1×2)'
    """
    mesh = np.asarray(mesh_inplane, dtype=float)
    wood = wood_notation(canonical_hnf(matrix), mesh)
    op = operation_text(operation, mesh)
    if op == "identity":
        return base
    if wood is not None and wood.angle == 0.0:
        return wood.label
    return f"{base} {op}"


def cell_domains(
    matrix: ArrayLike, operations: ArrayLike, mesh_inplane: ArrayLike, name: str | None = None
) -> tuple[Domain, ...]:
    """The distinct orientations of a cell (as a lattice) under ``operations``, its own first.

    Parameters
    ----------
    matrix : (2, 2) int array_like
        The cell, rows in mesh units.
    operations : (K, 2, 2) int array_like
        Point operations u -> u S (:func:`face_point_group`), identity first.
    mesh_inplane : (2, 2) array_like
        Mesh rows a, b, Å.
    name : str, optional
        The cell's name (default :func:`termination.algebra.lattice2d.cell_notation`).

    Returns
    -------
    tuple of Domain
        One per distinct sublattice N S; a pattern inside the cell may have
        more domains than its lattice (see
        :func:`termination.surface.corrugation.superpose_domains`).

    Examples
    --------
    >>> square = 3.84 * np.eye(2)
    >>> c4v = [[[1, 0], [0, 1]], [[0, 1], [-1, 0]], [[-1, 0], [0, -1]], [[0, -1], [1, 0]]]
    >>> [d.name for d in cell_domains([[2, 0], [0, 1]], c4v, square)], len(cell_domains([[1, 1], [-1, 1]], c4v, square))
    (['(2×1)', '(1×2)'], 1)
    """
    N = np.asarray(matrix, dtype=np.int64)
    mesh = np.asarray(mesh_inplane, dtype=float)
    base = cell_notation(N, mesh) if name is None else name
    seen: list[tuple[int, ...]] = []
    out: list[Domain] = []
    for S in np.asarray(operations, dtype=np.int64).reshape(-1, 2, 2):
        cell = N @ S
        key = tuple(int(v) for v in canonical_hnf(cell).ravel())
        if key in seen:
            continue
        seen.append(key)
        (a, b), (c, d) = ((int(x) for x in row) for row in cell)
        out.append(Domain(domain_name(base, cell, S, mesh), ((a, b), (c, d)), operation_text(S, mesh)))
    return tuple(out)
