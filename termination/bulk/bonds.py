"""Neighbour graph of the bulk crystal.

Two atoms are bonded when their distance R is

- below ``bond_factor`` times the sum of their covalent radii (Cordero et al.
  2008), or below a fixed cutoff given by the user, and
- within the first coordination shell of at least one of them:
  R <= ``shell_factor`` x the nearest-neighbour distance of that atom.

The second condition drops cation-cation and anion-anion contacts of ionic
crystals (Ca-Ca in fluorite, Sr-Sr in a perovskite) while keeping both shells
of bcc metals and the long M-B bonds of hexaborides.  The graph is built once
per crystal and reused for every face.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

from termination.arrays import BoolArray, FloatArray, IntArray
from termination.bulk.crystal import Crystal
from termination.bulk.elements import UNIT_FORMERS, covalent_radius
from termination.defaults import BOND_FACTOR, POINT_EPS_ANGSTROM, RELATIVE_EPS, ROUNDING_EPS, SHELL_FACTOR
from termination.errors import StructureError
from termination.units import ANGSTROM

__all__ = ["BondGraph", "bond_graph"]


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
        Pairs closer than this times the sum of covalent radii were bonded.
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
        Pairs closer than ``bond_factor * (r_i + r_j)`` are bonded.
    cutoff_angstrom : float, optional
        Fixed bond cutoff in Å; replaces the radius rule when given.
    shell_factor : float
        First-shell width relative to each atom's nearest-neighbour distance
        (``inf`` switches the shell rule off).

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
    return _bond_graph(crystal, b, cutoff_angstrom, f)


@lru_cache(maxsize=32)
def _bond_graph(crystal: Crystal, bond_factor: float, cutoff_angstrom: float | None, shell_factor: float) -> BondGraph:
    radii = np.array([covalent_radius(s) for s in crystal.species])
    former = np.array([s in UNIT_FORMERS for s in crystal.species])
    pair_cut = bond_factor * (radii[:, None] + radii[None, :])
    if cutoff_angstrom is not None:
        pair_cut = np.full_like(pair_cut, cutoff_angstrom)
    rmax = float(pair_cut.max())
    lattice = crystal.lattice
    # Every atom has its own image one lattice vector away, so no nearest-neighbour
    # distance exceeds the shortest cell vector, and the first-shell rule below drops
    # anything beyond shell_factor times it: a larger cutoff only enlarges the search.
    rmax = min(rmax, shell_factor * float(np.linalg.norm(lattice, axis=1).min()) * (1 + RELATIVE_EPS))
    # Image range: enough cells along each axis to reach rmax (plane spacing 1/|b_i|).
    spacing = 1.0 / np.linalg.norm(crystal.reciprocal, axis=1)
    reach = np.ceil(rmax / spacing).astype(int) + 1
    grids = np.meshgrid(*[np.arange(-r, r + 1) for r in reach], indexing="ij")
    shifts = np.stack([g.ravel() for g in grids], axis=1)
    pos = crystal.positions
    # (N, N, S, 3) fractional separations from atom i to image s of atom j.
    diff = pos[None, :, None, :] - pos[:, None, None, :] + shifts[None, None, :, :]
    cart = diff @ lattice
    dist = np.linalg.norm(cart, axis=-1)
    dist[dist < POINT_EPS_ANGSTROM] = np.inf
    nearest = dist.min(axis=(1, 2))
    shell = shell_factor * np.maximum(nearest[:, None], nearest[None, :])
    mask = (dist < pair_cut[:, :, None]) & (dist <= shell[:, :, None] * (1 + ROUNDING_EPS))
    i, j, s = np.nonzero(mask)
    length = dist[i, j, s]
    weight = (radii[i] + radii[j]) / length
    return BondGraph(
        source=i,
        target=j,
        vector=cart[i, j, s],
        length=length,
        weight=weight,
        unit=former[i] & former[j],
        bond_factor=bond_factor,
        cutoff_angstrom=cutoff_angstrom,
    )
