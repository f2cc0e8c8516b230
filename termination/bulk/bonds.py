"""Neighbour graph of the bulk crystal.

Two atoms i and j at distance R are bonded when

1. R lies in the first coordination shell of at least one of them.  The first
   shell of an atom is found from its gap: with its sorted neighbour
   distances d_1 < d_2 < ... , the shell ends at the largest ratio
   d_(k+1) / d_k among the distances within ``shell_factor`` x d_1 (the ratio
   from the last of them to the next distance beyond counts too).  hcp metals
   keep their 6 + 6 neighbours (2.66 and 2.91 Å in Zn, a gap of 1.09 before
   one of 1.59), bcc metals their 8 + 6, and ionic crystals drop the
   cation-cation and anion-anion contacts (Ca-Ca in fluorite, Sr-Sr in a
   perovskite) that lie beyond the gap.
2. Their elements A and B bond in this crystal: some A-B contact is closer
   than ``bond_factor`` times the sum of covalent radii (Cordero et al. 2008)
   and lies in a first shell; every A-B contact of a first shell up to
   ``shell_factor`` times that length is then a bond.  With a fixed cutoff
   given by the user, R must be below it instead.

The second rule keeps the long M-B bonds of hexaborides and drops the
anion-anion contacts of a first shell (F-F in fluorite).  The search is
bounded by the shells (a cell-list search, :mod:`termination.bulk.neighbours`),
so its memory grows with the number of neighbours, not with N².  The graph is
built once per crystal and reused for every face.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from termination.arrays import BoolArray, FloatArray, IntArray
from termination.bulk.crystal import Crystal
from termination.bulk.elements import UNIT_FORMERS, atomic_number, covalent_radius
from termination.bulk.neighbours import Neighbours, nearest_distances, neighbour_pairs
from termination.defaults import BOND_FACTOR, RELATIVE_EPS, ROUNDING_EPS, SHELL_FACTOR
from termination.errors import StructureError
from termination.units import ANGSTROM

__all__ = ["BondGraph", "bond_graph", "first_shells"]


@dataclass(frozen=True, eq=False)
class BondGraph:
    """Directed bond list of the conventional cell (each bond appears twice).

    Attributes
    ----------
    source, target : (B,) IntArray
        Atom indices into the crystal's conventional cell.
    vector : (B, 3) FloatArray
        Cartesian vector from the source atom to the bonded image of the
        target, Å.
    length : (B,) FloatArray
        Bond lengths, Å.
    weight : (B,) FloatArray
        Dimensionless bond strength proxy w = (r_i + r_j) / R, the sum of
        covalent radii over the bond length: about 1 for an ordinary bond,
        larger for short (strong) bonds.
    unit : (B,) BoolArray
        True for bonds between two unit-forming non-metals (B-B, C-O, Si-O,
        ...): bonds inside polyanions and clusters that a cleave keeps intact.
    bond_factor : float
        The radius-rule factor the graph was built with.
    cutoff_angstrom : float or None
        The fixed cutoff that replaced the radius rule, Å.
    """

    source: IntArray
    target: IntArray
    vector: FloatArray = field(metadata=ANGSTROM)
    length: FloatArray = field(metadata=ANGSTROM)
    weight: FloatArray
    unit: BoolArray
    bond_factor: float
    cutoff_angstrom: float | None = field(metadata=ANGSTROM)

    @property
    def coordination(self) -> IntArray:
        """(N,) number of bonds per conventional-cell atom."""
        return np.bincount(self.source, minlength=int(self.source.max(initial=-1)) + 1)


def bond_graph(
    crystal: Crystal,
    bond_factor: float = BOND_FACTOR,
    cutoff_angstrom: float | None = None,
    shell_factor: float = SHELL_FACTOR,
) -> BondGraph:
    """Bonds of ``crystal`` (cached per crystal and parameters).

    Parameters
    ----------
    crystal : Crystal
    bond_factor : float
        Elements A and B bond when one of their first-shell contacts is closer
        than ``bond_factor * (r_A + r_B)`` (module notes).
    cutoff_angstrom : float, optional
        Fixed bond cutoff in Å; replaces the radius rule when given.
    shell_factor : float
        Window of the first-shell search relative to each atom's
        nearest-neighbour distance (``inf`` switches the shell rule off and
        leaves the radius rule alone).

    Returns
    -------
    BondGraph
    """
    if cutoff_angstrom is not None:
        c = float(cutoff_angstrom)
        if not (np.isfinite(c) and c > 0):
            raise StructureError(f"bond cutoff must be a positive length in Å, got {cutoff_angstrom}")
        cutoff_angstrom = c
    b = float(bond_factor)
    if not (np.isfinite(b) and b > 0):
        raise StructureError(f"bond factor must be positive, got {bond_factor}")
    f = float(shell_factor)
    if not f >= 1:
        raise StructureError(f"shell factor must be at least 1, got {shell_factor}")
    return _bond_graph(_Geometry(crystal), b, cutoff_angstrom, f)


class _Geometry:
    """A crystal's atoms as a cache key: copies that differ only in their charges share one bond graph."""

    def __init__(self, crystal: Crystal) -> None:
        self.crystal = crystal
        self.key = (crystal.lattice.tobytes(), crystal.positions.tobytes(), crystal.species)

    def __hash__(self) -> int:
        return hash(self.key)

    def __eq__(self, other: object) -> bool:
        return isinstance(other, _Geometry) and self.key == other.key


def first_shells(pairs: Neighbours, window_angstrom: FloatArray, natoms: int) -> FloatArray:
    """Radius of the first coordination shell of every atom, from the gap in its sorted neighbour distances.

    Parameters
    ----------
    pairs : Neighbours
        Every pair within at least ``shell_factor`` x ``window_angstrom`` of its
        source atom (so that the distance after the window is known or
        known to be farther).
    window_angstrom : (N,) FloatArray
        The window per atom: ``shell_factor`` x its nearest-neighbour distance, Å.
    natoms : int

    Returns
    -------
    (N,) FloatArray
        The largest distance of each atom's first shell, Å.

    Notes
    -----
    Distances equal within a relative 1e-6 form one level d_k.  Over the
    levels with d_k within the window, the shell ends at the first level of
    largest ratio d_(k+1) / d_k; when no level follows within the search
    radius R, R / d_k stands for the ratio (a lower bound that still exceeds
    every ratio inside the window when R >= shell_factor x window).
    """
    order = np.lexsort((pairs.distance, pairs.source))
    src = pairs.source[order]
    dist = pairs.distance[order]
    new = np.ones(len(dist), dtype=bool)
    new[1:] = (src[1:] != src[:-1]) | (dist[1:] > dist[:-1] * (1 + RELATIVE_EPS))
    starts = np.flatnonzero(new)
    level_src = src[starts]
    level_lo = dist[starts]
    level_hi = np.maximum.reduceat(dist, starts)
    next_lo = np.full(len(starts), np.inf)
    same = level_src[1:] == level_src[:-1]
    next_lo[:-1][same] = level_lo[1:][same]
    window = window_angstrom[level_src]
    reach = np.where(np.isfinite(next_lo), next_lo, pairs.radius_angstrom)
    ratio = reach / level_lo
    inside = level_lo <= window * (1 + ROUNDING_EPS)
    ratio = np.where(inside, ratio, -np.inf)
    best = np.full(natoms, -np.inf)
    np.maximum.at(best, level_src, ratio)
    is_best = inside & (ratio >= best[level_src] * (1 - ROUNDING_EPS))
    first = np.full(natoms, len(starts), dtype=np.int64)
    np.minimum.at(first, level_src[is_best], np.flatnonzero(is_best))
    shells = np.zeros(natoms)
    has = first < len(starts)
    shells[has] = level_hi[first[has]]
    return shells


@lru_cache(maxsize=32)
def _bond_graph(
    geometry: _Geometry, bond_factor: float, cutoff_angstrom: float | None, shell_factor: float
) -> BondGraph:
    crystal = geometry.crystal
    radii = np.array([covalent_radius(s) for s in crystal.species])
    former = np.array([s in UNIT_FORMERS for s in crystal.species])
    numbers = np.array([atomic_number(s) for s in crystal.species], dtype=np.int64)
    lattice, positions = crystal.lattice, crystal.positions
    if not np.isfinite(shell_factor):
        # No shell rule: the radius rule (or the cutoff) alone.
        reach = cutoff_angstrom if cutoff_angstrom is not None else bond_factor * 2 * float(radii.max())
        pairs = neighbour_pairs(lattice, positions, reach * (1 + RELATIVE_EPS))
        sum_r = radii[pairs.source] + radii[pairs.target]
        limit = np.full(len(pairs), cutoff_angstrom) if cutoff_angstrom is not None else bond_factor * sum_r
        bonded = pairs.distance < limit
    else:
        window = shell_factor * nearest_distances(lattice, positions)
        pairs = neighbour_pairs(lattice, positions, shell_factor * float(window.max()) * (1 + RELATIVE_EPS))
        shells = first_shells(pairs, window, crystal.natoms)
        i, j, dist = pairs.source, pairs.target, pairs.distance
        in_shell = dist <= np.maximum(shells[i], shells[j]) * (1 + ROUNDING_EPS)
        if cutoff_angstrom is not None:
            bonded = in_shell & (dist < cutoff_angstrom)
        else:
            sum_r = radii[i] + radii[j]
            kind = np.minimum(numbers[i], numbers[j]) * 1000 + np.maximum(numbers[i], numbers[j])
            bonding = np.unique(kind[in_shell & (dist < bond_factor * sum_r)])
            bonded = in_shell & np.isin(kind, bonding) & (dist < shell_factor * bond_factor * sum_r)
    b = pairs.take(bonded)
    length = b.distance
    return BondGraph(
        source=b.source,
        target=b.target,
        vector=b.vector,
        length=length,
        weight=(radii[b.source] + radii[b.target]) / length,
        unit=former[b.source] & former[b.target],
        bond_factor=bond_factor,
        cutoff_angstrom=cutoff_angstrom,
    )
