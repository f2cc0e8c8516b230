"""Atomic layers of a face: atoms projected onto the outward normal over one period.

For a face (hkl) with outward normal n and plane spacing d, every atom has a
height z = r . n taken modulo d.  Atoms whose heights lie within
``layer_tol_angstrom`` of each other (single linkage, periodic in z) form one
atomic layer.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray, IntArray
from termination.bulk.crystal import Crystal
from termination.defaults import LAYER_TOL_ANGSTROM
from termination.errors import StructureError
from termination.surface.faces import Face
from termination.surface.miller import hkl_text
from termination.units import ANGSTROM, E

__all__ = ["FaceAtoms", "Layer", "cluster_layers", "face_atoms"]


@dataclass(frozen=True, eq=False)
class FaceAtoms:
    """The atoms of one surface primitive cell of a face.

    Attributes
    ----------
    face : Face
    species : tuple of str
        One entry per atom of the primitive cell.
    heights : (N,) FloatArray
        Height along the outward normal, in [0, d), Å.
    inplane : (N, 2) FloatArray
        Cartesian in-plane coordinates along the face frame (e1, e2), Å.
    conventional_index : (N,) IntArray
        Index of each atom in the crystal's conventional cell.
    mesh_inplane : (2, 2) FloatArray
        Mesh vectors a, b as rows in (e1, e2) coordinates, Å.
    stack_inplane : (2,) FloatArray
        In-plane part of the stacking vector, Å: the copy of an atom one
        period higher (z + d) sits at ``inplane + stack_inplane``.
    charges : (N,) FloatArray or None
        Formal charges (units of e) when the crystal carries them.
    """

    face: Face
    species: tuple[str, ...]
    heights: FloatArray = field(metadata=ANGSTROM)
    inplane: FloatArray = field(metadata=ANGSTROM)
    conventional_index: IntArray
    mesh_inplane: FloatArray = field(metadata=ANGSTROM)
    stack_inplane: FloatArray = field(metadata=ANGSTROM)
    charges: FloatArray | None = field(metadata=E)

    @property
    def d(self) -> float:
        """Period of the face, Å."""
        return self.face.d


@dataclass(frozen=True)
class Layer:
    """One atomic layer of the period.

    ``height`` is its mean height in [0, d) along the normal, from the
    crystal's origin; ``depth`` is measured down from the top layer of the
    face's first termination T1, in [0, d), and so does not depend on the
    origin; ``atoms`` index :class:`FaceAtoms`;
    ``composition`` counts atoms per surface primitive cell.
    """

    height: float = field(metadata=ANGSTROM)
    depth: float = field(metadata=ANGSTROM)
    composition: dict[str, int]
    atoms: tuple[int, ...]


def face_atoms(crystal: Crystal, face: Face) -> FaceAtoms:
    """Primitive-cell atoms of ``face`` with heights and in-plane coordinates.

    Notes
    -----
    The basis M = (mesh a, mesh b, stacking vector) is a primitive cell of the
    lattice, so the fractional coordinates s = x M^-1 of the conventional atoms,
    taken modulo 1, identify the primitive-cell atoms (centring copies
    coincide).  Then z = s_3 d and the in-plane position is (s M A) projected
    on the frame (e1, e2).
    """
    M = np.vstack([face.mesh_fractional, face.stack_fractional])
    s = crystal.positions @ np.linalg.inv(M)
    s -= np.floor(s)
    s[np.abs(s - 1.0) <= 1e-8] = 0.0  # float noise only: an atom at 0.99999 stays there
    # Positions rounded to 1e-6 (mod 1) as one int64 code per atom: a 1D
    # unique is much faster than a row-wise one and finds the same atoms.
    q = np.rint(s * 1e6).astype(np.int64) % 1_000_000
    key = (q[:, 0] * 1_000_000 + q[:, 1]) * 1_000_000 + q[:, 2]
    _, first = np.unique(key, return_index=True)
    first = np.sort(first)
    expected = crystal.natoms / len(crystal.centring)
    if len(first) != round(expected):
        raise StructureError(
            f"face {hkl_text(face.hkl)}: found {len(first)} atoms per primitive cell, expected {expected:g}; "
            "the structure's symmetry tolerance may be too loose"
        )
    sp = s[first]
    cart = sp @ (M @ crystal.lattice)
    frame = face.frame
    heights = sp[:, 2] * face.d
    mesh_cart = face.mesh_fractional @ crystal.lattice
    stack_cart = face.stack_fractional @ crystal.lattice
    charges = None if crystal.charges is None else crystal.charges[first]
    return FaceAtoms(
        face=face,
        species=tuple(crystal.species[i] for i in first),
        heights=heights,
        inplane=cart @ frame[:2].T,
        conventional_index=first,
        mesh_inplane=mesh_cart @ frame[:2].T,
        stack_inplane=stack_cart @ frame[:2].T,
        charges=charges,
    )


def cluster_layers(
    heights: ArrayLike, period: float | None, layer_tol_angstrom: float = LAYER_TOL_ANGSTROM
) -> tuple[IntArray, FloatArray]:
    """Group heights into layers by single linkage, periodic in ``period`` or not.

    Parameters
    ----------
    heights : (N,) array_like
        Heights in [0, period), Å (any heights when ``period`` is None).
    period : float or None
        Period d, Å; None for a finite stack (no wrap across the period).
    layer_tol_angstrom : float
        Heights closer than this (Å) belong to one layer.

    Returns
    -------
    labels : (N,) IntArray
        Layer index per atom, layers numbered by increasing mean height.
    centres : (L,) FloatArray
        Mean height of each layer (in [0, period) when periodic).

    Examples
    --------
    >>> labels, centres = cluster_layers([0.0, 0.05, 1.0, 1.98], 2.0, 0.1)
    >>> labels.tolist(), np.round(centres, 3).tolist()
    ([0, 0, 1, 0], [0.01, 1.0])
    >>> cluster_layers([0.0, 0.05, 1.0, 1.98], None, 0.1)[0].tolist()
    [0, 0, 1, 2]
    """
    z = np.asarray(heights, dtype=float)
    order = np.argsort(z, kind="stable")
    zs = z[order]
    gaps = np.diff(zs)
    new = np.concatenate([[0], np.cumsum(gaps > layer_tol_angstrom)])
    unwrapped = zs.copy()
    if period is not None:
        # Periodic wrap: the last cluster joins the first across z = period, one period down.
        # Only its heights move: a first layer that straddles period / 2 without wrapping
        # keeps its own heights (it used to be torn apart, and its cut placed inside it).
        if len(zs) > 1 and new[-1] > 0 and (zs[0] + period - zs[-1]) <= layer_tol_angstrom:
            last = new == new[-1]
            new[last] = 0
            unwrapped[last] -= period
    n = new.max() + 1
    centres = np.bincount(new, weights=unwrapped, minlength=n) / np.bincount(new, minlength=n)
    if period is not None:
        centres %= period
    rank = np.argsort(np.argsort(centres, kind="stable"), kind="stable")
    labels = np.empty(len(z), dtype=int)
    labels[order] = rank[new]
    return labels, np.sort(centres)
