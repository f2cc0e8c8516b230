"""Symmetry of a face: the space-group operations that keep it, and their action in the surface plane.

A space-group operation (R, t) maps the face (hkl) onto itself when
h R^-1 = h.  Such operations relate terminations of the face (they shift
heights along the normal by (h . t)/|G|); those that also keep a
termination's cut form the 2D point group of that termination, acting on
mesh coordinates as integer matrices.
"""

from __future__ import annotations

from functools import lru_cache
from typing import cast

import numpy as np

from termination.arrays import BoolArray, FloatArray, IntArray
from termination.bulk.crystal import Crystal
from termination.defaults import ANGLE_EPS_DEG, RELATIVE_EPS
from termination.surface.faces import Face

__all__ = [
    "describe_operation",
    "face_operations",
    "keeps_face",
    "mesh_actions",
    "operation_tables",
    "termination_operations",
]


@lru_cache(maxsize=32)
def operation_tables(crystal: Crystal) -> tuple[IntArray, IntArray]:
    """Per-operation tables of the crystal's space group (cached; a Crystal is immutable).

    Returns
    -------
    rinv : (M, 3, 3) IntArray
        R^-1, acting on row Miller indices (h' = h R^-1).
    preference : (M,) IntArray
        0 for the identity rotation (pure translations), 1 for other proper
        rotations, 3 for improper ones: the order in which operations are
        tried when describing how two terminations are related.
    """
    rots = crystal.rotations
    improper = np.linalg.det(rots) < 0
    not_identity = np.trace(rots, axis1=1, axis2=2) != 3
    rinv = np.rint(np.linalg.inv(rots)).astype(np.int64)
    return rinv, 2 * improper.astype(np.int64) + not_identity.astype(np.int64)


def keeps_face(crystal: Crystal, face: Face) -> BoolArray:
    """(M,) BoolArray: the operations with h R^-1 = h."""
    rinv, _ = operation_tables(crystal)
    h = np.asarray(face.hkl, dtype=np.int64)
    return cast(BoolArray, np.all(np.einsum("i,nij->nj", h, rinv) == h, axis=1))


def face_operations(crystal: Crystal, face: Face) -> tuple[IntArray, FloatArray]:
    """Space-group operations that map the face onto itself: (R, t) with h R^-1 = h.

    R is (K, 3, 3), t (K, 3), both in the fractional basis of the crystal.
    """
    keep = keeps_face(crystal, face)
    return crystal.rotations[keep], crystal.translations[keep]


def describe_operation(crystal: Crystal, face: Face, R: IntArray) -> str:
    """In-plane action of a rotation R ((3, 3), fractional) that keeps the face normal.

    'translated', 'rotated 90°' or 'mirror at 45°' (angles from mesh vector a).
    """
    A = crystal.lattice
    Rc = A.T @ R @ np.linalg.inv(A.T)
    e1, e2 = face.frame[0], face.frame[1]
    v = Rc @ e1
    angle = float(np.degrees(np.arctan2(v @ e2, v @ e1)))
    if np.linalg.det(R) > 0:
        if abs(angle) < ANGLE_EPS_DEG:
            return "translated"
        return f"rotated {angle % 360:.0f}°"
    return f"mirror at {(angle / 2) % 180:.0f}°"


def termination_operations(crystal: Crystal, face: Face, *, shift_tol_angstrom: float = 1e-4) -> IntArray:
    """2D point operations of a semi-infinite crystal cut parallel to ``face``, on mesh coordinates.

    Parameters
    ----------
    crystal : Crystal
    face : Face
    shift_tol_angstrom : float
        Tolerance on the height shift of an operation, Å.

    Returns
    -------
    (K, 2, 2) IntArray
        Distinct S with u -> u S (u a row of mesh coordinates), identity first.

    Notes
    -----
    From the space-group operations (R, t) that keep the face
    (h R^-1 = h; :func:`face_operations`) those that also shift heights by
    (h . t) / |G| = 0 modulo d keep every cut of the face, whichever
    termination it exposes: they form the symmetry of the semi-infinite
    crystal.  Their in-plane action on the mesh rows M (fractional, (2, 3))
    is M R^T = S M.
    """
    rots, trans = face_operations(crystal, face)
    h = np.asarray(face.hkl, dtype=float)
    gnorm = np.linalg.norm(h @ crystal.reciprocal)
    d = face.d
    shift = (trans @ h) / gnorm % d
    shift = np.minimum(shift, d - shift)
    keep = shift <= shift_tol_angstrom
    out = mesh_actions(face, rots[keep])
    ident = np.eye(2, dtype=np.int64)
    out.sort(key=lambda s: not np.array_equal(s, ident))
    return np.array(out, dtype=np.int64).reshape(-1, 2, 2)


def mesh_actions(face: Face, rotations: IntArray) -> list[IntArray]:
    """Distinct in-plane actions S (M R^T = S M) of rotations that keep the face's mesh.

    Parameters
    ----------
    face : Face
        Its mesh rows M are fractional, (2, 3).
    rotations : (K, 3, 3) IntArray
        Rotation parts R of space-group operations, acting on fractional columns.

    Returns
    -------
    list of (2, 2) IntArray
        One S per distinct action, in the order of first appearance; a
        rotation whose action is not an integer matrix (it does not map the
        mesh onto itself) is left out.
    """
    mesh = np.asarray(face.mesh_fractional, dtype=float)
    pinv = np.linalg.pinv(mesh)
    out: list[IntArray] = []
    for R in rotations:
        S = mesh @ R.T @ pinv
        Si = np.rint(S).astype(np.int64)
        if np.max(np.abs(S - Si)) > RELATIVE_EPS or not np.allclose(Si @ mesh, mesh @ R.T, atol=RELATIVE_EPS):
            continue
        if not any(np.array_equal(Si, o) for o in out):
            out.append(Si)
    return out
