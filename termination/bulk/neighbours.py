"""Neighbour search in a periodic cell: every atom pair within a radius, by cell lists.

The cell is cut into bins along its three axes, each bin at least as wide
(perpendicular to its faces) as the search radius where the cell allows it;
an atom's neighbours then lie in the bins a few steps away, periodic images
included.  Work and memory grow with the number of pairs found, not with
N² × images, so a cell of thousands of atoms needs a few megabytes.  The
bond graph and the closest-contact check of a structure both use it.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field
from typing import cast

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray, IntArray
from termination.defaults import MAX_NEIGHBOUR_PAIRS, POINT_EPS_ANGSTROM
from termination.errors import StructureError
from termination.units import ANGSTROM

__all__ = ["Neighbours", "nearest_distances", "neighbour_pairs"]

#: Distance evaluations per block of the search: bounds the temporary arrays (about 100 MB of float64).
_BLOCK = 4_000_000
#: Below this many atom pairs x images a small cell is searched densely (faster; about 10 MB at most).
_DENSE = 200_000


@dataclass(frozen=True, eq=False)
class Neighbours:
    """Directed atom pairs within a radius (each pair appears twice, once from each atom).

    Attributes
    ----------
    source, target : (P,) IntArray
        Atom indices.
    shift : (P, 3) IntArray
        Lattice translation of the target image: the pair joins atom
        ``source`` to atom ``target`` displaced by ``shift`` (fractional,
        with positions wrapped into [0, 1)).
    vector : (P, 3) FloatArray
        Cartesian vector from the source to the target image, Å.
    distance : (P,) FloatArray
        Its length, Å.
    radius_angstrom : float
        The search radius, Å.

    Pairs are sorted by source, target and shift (lexicographic), so the
    list does not depend on how the search was organised.
    """

    source: IntArray
    target: IntArray
    shift: IntArray
    vector: FloatArray = field(metadata=ANGSTROM)
    distance: FloatArray = field(metadata=ANGSTROM)
    radius_angstrom: float = field(metadata=ANGSTROM)

    def __len__(self) -> int:
        return len(self.source)

    def take(self, keep: ArrayLike) -> Neighbours:
        """The pairs selected by a boolean mask or index array ``keep``."""
        k = np.asarray(keep)
        return Neighbours(
            self.source[k], self.target[k], self.shift[k], self.vector[k], self.distance[k], self.radius_angstrom
        )


def _bins(lattice: FloatArray, radius: float, n_atoms: int) -> tuple[IntArray, IntArray]:
    """Bins per axis and the reach (bins to look on either side) for a search radius, Å.

    A bin along axis k is w_k = s_k / n_k wide perpendicular to its faces,
    with s_k = 1 / |b_k| the spacing of the lattice planes (b_k the reciprocal
    rows).  Two atoms whose bins differ by m along k are more than
    (m - 1) w_k apart, so bins up to ceil(radius / w_k) away hold every
    neighbour.  At most about two bins per atom are made, so empty bins do not
    dominate a sparse cell.
    """
    spacing = 1.0 / np.linalg.norm(np.linalg.inv(lattice).T, axis=1)
    n = np.maximum(1, np.floor(spacing / radius)).astype(np.int64)
    while int(np.prod(n)) > 2 * n_atoms + 8:
        k = int(np.argmax(n))
        n[k] = max(1, n[k] // 2)
    reach = np.ceil(radius / (spacing / n) - 1e-12).astype(np.int64)
    return n, np.maximum(reach, 1)


def neighbour_pairs(
    lattice: ArrayLike, positions: ArrayLike, radius_angstrom: float, *, max_pairs: int = MAX_NEIGHBOUR_PAIRS
) -> Neighbours:
    """Every pair of atoms (periodic images included) closer than ``radius_angstrom``.

    Parameters
    ----------
    lattice : (3, 3) array_like
        Lattice vectors as rows, Cartesian, Å.
    positions : (N, 3) array_like
        Fractional coordinates (wrapped into [0, 1) here).
    radius_angstrom : float
        Pairs with distance < radius are returned, Å.  An atom and its own
        image one lattice vector away count as a pair.
    max_pairs : int
        Refuse, before the search, a radius that would give more pairs than
        this (estimated from the atom density).

    Returns
    -------
    Neighbours

    Raises
    ------
    StructureError
        For a radius that is not a positive length or that would pair too many atoms.

    Notes
    -----
    The pair vector is ((x_j - x_i) + t) A with x fractional, t the image
    translation and A the lattice rows; the expected number of pairs is
    N² (4/3) pi r³ / V.

    Examples
    --------
    >>> nb = neighbour_pairs(np.eye(3) * 3.0, [[0, 0, 0]], 3.5)
    >>> len(nb), float(nb.distance.min())
    (6, 3.0)
    """
    A = np.ascontiguousarray(lattice, dtype=np.float64)
    x = np.ascontiguousarray(positions, dtype=np.float64).reshape(-1, 3)
    x = x - np.floor(x)
    x[x >= 1.0] = 0.0
    r = float(radius_angstrom)
    if not (np.isfinite(r) and r > 0):
        raise StructureError(f"neighbour search radius must be a positive length in Å, got {radius_angstrom}")
    n_atoms = len(x)
    volume = abs(float(np.linalg.det(A)))
    expected = n_atoms * n_atoms * (4.0 / 3.0) * np.pi * r**3 / volume
    if expected > max_pairs:
        raise StructureError(
            f"a neighbour search to {r:.3g} Å would pair about {expected:.3g} atom pairs in this "
            f"{n_atoms}-atom cell (limit {max_pairs:.3g}); use a shorter bond cutoff"
        )
    spacing = 1.0 / np.linalg.norm(np.linalg.inv(A).T, axis=1)
    images = np.ceil(r / spacing).astype(np.int64) + 1
    if n_atoms * n_atoms * int(np.prod(2 * images + 1)) <= _DENSE:
        return _dense_pairs(A, x, r, images)
    n, reach = _bins(A, r, n_atoms)
    b3 = np.minimum(np.floor(x * n).astype(np.int64), n - 1)
    flat = cast(IntArray, np.ravel_multi_index(tuple(b3.T), tuple(int(v) for v in n)))
    counts = np.bincount(flat, minlength=int(np.prod(n)))
    width = int(counts.max())
    order = np.argsort(flat, kind="stable")
    starts = np.concatenate([[0], np.cumsum(counts)[:-1]])
    slot = np.arange(n_atoms) - starts[flat[order]]
    members = np.full((len(counts), width), -1, dtype=np.int64)
    members[flat[order], slot] = order

    chunk = max(1, _BLOCK // max(1, width))
    found: list[tuple[IntArray, IntArray, IntArray, FloatArray, FloatArray]] = []
    ranges = [range(-int(m), int(m) + 1) for m in reach]
    for offset in itertools.product(*ranges):
        nb3 = b3 + np.asarray(offset, dtype=np.int64)
        image = np.floor_divide(nb3, n)
        wrapped = nb3 - image * n
        nb_flat = cast(IntArray, np.ravel_multi_index(tuple(wrapped.T), tuple(int(v) for v in n)))
        for lo in range(0, n_atoms, chunk):
            hi = min(n_atoms, lo + chunk)
            cand = members[nb_flat[lo:hi]]  # (k, width)
            valid = cand >= 0
            if not valid.any():
                continue
            ii = np.broadcast_to(np.arange(lo, hi)[:, None], cand.shape)[valid]
            jj = cand[valid]
            tt = np.broadcast_to(image[lo:hi, None, :], (*cand.shape, 3))[valid]
            vec = ((x[jj] - x[ii]) + tt) @ A
            dist = np.sqrt(np.einsum("ij,ij->i", vec, vec))
            keep = (dist < r) & (dist >= POINT_EPS_ANGSTROM)
            if keep.any():
                found.append((ii[keep], jj[keep], tt[keep], vec[keep], dist[keep]))
    if found:
        src, tgt, shf, vec, dist = (np.concatenate(parts) for parts in zip(*found))
    else:
        src, tgt = np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
        shf, vec, dist = np.empty((0, 3), dtype=np.int64), np.empty((0, 3)), np.empty(0)
    key = np.lexsort((shf[:, 2], shf[:, 1], shf[:, 0], tgt, src))
    return Neighbours(
        source=cast(IntArray, src[key].astype(np.int64)),
        target=cast(IntArray, tgt[key].astype(np.int64)),
        shift=cast(IntArray, shf[key].astype(np.int64)),
        vector=vec[key],
        distance=dist[key],
        radius_angstrom=r,
    )


def _dense_pairs(A: FloatArray, x: FloatArray, r: float, images: IntArray) -> Neighbours:
    """:func:`neighbour_pairs` of a small cell: every atom pair against every image within ``images`` cells.

    For a few atoms this is faster than cell lists and its arrays are small
    (at most ``_DENSE`` distances); the pairs and their order are the same.
    """
    grids = np.meshgrid(*[np.arange(-m, m + 1) for m in images], indexing="ij")
    shifts = np.stack([g.ravel() for g in grids], axis=1)
    diff = (x[None, :, None, :] - x[:, None, None, :]) + shifts[None, None, :, :]
    cart = diff @ A
    dist = np.sqrt(np.einsum("ijsk,ijsk->ijs", cart, cart))
    i, j, s = np.nonzero((dist < r) & (dist >= POINT_EPS_ANGSTROM))
    return Neighbours(
        source=i.astype(np.int64),
        target=j.astype(np.int64),
        shift=shifts[s].astype(np.int64),
        vector=cart[i, j, s],
        distance=dist[i, j, s],
        radius_angstrom=r,
    )


def nearest_distances(lattice: ArrayLike, positions: ArrayLike) -> FloatArray:
    """(N,) distance from every atom to its nearest neighbour (its own images included), Å.

    The search starts at the radius of a sphere holding about four atoms and
    grows by half until every atom has a neighbour; an atom's own image one
    lattice vector away bounds it.

    Examples
    --------
    >>> nearest_distances(np.eye(3) * 3.0, [[0, 0, 0], [0.5, 0.5, 0.5]]).round(4).tolist()
    [2.5981, 2.5981]
    """
    A = np.ascontiguousarray(lattice, dtype=np.float64)
    x = np.ascontiguousarray(positions, dtype=np.float64).reshape(-1, 3)
    n_atoms = len(x)
    volume = abs(float(np.linalg.det(A)))
    shortest = float(np.linalg.norm(A, axis=1).min())
    radius = min(shortest, (4.0 * volume / (n_atoms * (4.0 / 3.0) * np.pi)) ** (1.0 / 3.0)) * 1.01
    while True:
        nb = neighbour_pairs(A, x, radius)
        nearest = np.full(n_atoms, np.inf)
        np.minimum.at(nearest, nb.source, nb.distance)
        if np.all(np.isfinite(nearest)):
            return nearest
        radius = min(1.5 * radius, shortest * 1.01)
