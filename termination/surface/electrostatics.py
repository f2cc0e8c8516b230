"""Electrostatics of charges in a plane: the 2D Ewald sum with a uniform compensating background."""

from __future__ import annotations

from typing import cast

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray
from termination.defaults import ZERO_EPS

__all__ = ["COULOMB_EV_ANGSTROM", "ewald_pair_matrix"]

#: e^2 / (4 pi eps0) in eV Å (CODATA 2018).
COULOMB_EV_ANGSTROM = 14.399645


def ewald_pair_matrix(
    cell: ArrayLike, positions: ArrayLike, alpha: float | None = None, *, cutoff_erfc: float = 6.0
) -> FloatArray:
    """Pair potential matrix of a 2D-periodic set of unit point charges in one plane (2D Ewald sum).

    Parameters
    ----------
    cell : (2, 2) array_like
        Periodic cell rows, Cartesian, Å.
    positions : (n, 2) array_like
        Charges' in-plane positions, Å.
    alpha : float, optional
        Ewald splitting parameter, 1/Å (default sqrt(pi / area)); the result
        does not depend on it.
    cutoff_erfc : float
        Real and reciprocal sums stop where erfc falls below erfc(cutoff_erfc).

    Returns
    -------
    (n, n) FloatArray
        Phi, 1/Å, such that the energy of charges q (units of e) with a
        uniform neutralising background in the same plane is
        E = (1/2) q^T Phi q (e²/Å; times :data:`COULOMB_EV_ANGSTROM` for eV).

    Notes
    -----
    For charges interacting by 1/r in a plane z = 0, periodic in 2D with
    cell area A,

    Phi_ij = sum'_L erfc(α |r_ij + L|) / |r_ij + L|
             + (2π/A) sum_{G≠0} cos(G·r_ij) erfc(|G| / 2α) / |G|
             - 2 sqrt(π) / (α A) - δ_ij 2α / sqrt(π),

    the prime excluding the self term i = j, L = 0.  The constant
    -2 sqrt(π)/(α A) is the G -> 0 limit left by a uniform compensating sheet.

    References
    ----------
    D. E. Parry, Surf. Sci. 49, 433 (1975); L. Bonsall and A. A. Maradudin,
    Phys. Rev. B 15, 1959 (1977).
    """
    from scipy.special import erfc  # lazy: keeps scipy off the planes/match start-up path

    cell = np.asarray(cell, dtype=np.float64)
    pos = np.asarray(positions, dtype=np.float64).reshape(-1, 2)
    area = abs(np.linalg.det(cell))
    if alpha is None:
        alpha = np.sqrt(np.pi / area)
    rc = cutoff_erfc / alpha
    gc = 2.0 * alpha * cutoff_erfc
    recip = np.linalg.inv(cell).T  # rows b_i with a_i . b_j = delta_ij
    diff = pos[None, :, :] - pos[:, None, :]  # r_j - r_i
    span = np.max(np.linalg.norm(diff, axis=-1), initial=0.0)
    nr = np.ceil((rc + span) * np.linalg.norm(recip, axis=1)).astype(int) + 1
    i, j = np.meshgrid(np.arange(-nr[0], nr[0] + 1), np.arange(-nr[1], nr[1] + 1), indexing="ij")
    lat = np.stack([i.ravel(), j.ravel()], axis=1) @ cell
    lat = lat[np.linalg.norm(lat, axis=1) <= rc + span]
    dist = np.linalg.norm(diff[:, :, None, :] + lat[None, None, :, :], axis=-1)
    with np.errstate(divide="ignore", invalid="ignore"):
        term = np.where(dist > 1e-10, erfc(alpha * dist) / dist, 0.0)
    phi = term.sum(axis=2)
    ng = np.ceil(gc / (2 * np.pi) * np.linalg.norm(cell, axis=1)).astype(int) + 1
    i, j = np.meshgrid(np.arange(-ng[0], ng[0] + 1), np.arange(-ng[1], ng[1] + 1), indexing="ij")
    g = 2 * np.pi * (np.stack([i.ravel(), j.ravel()], axis=1) @ recip)
    gn = np.linalg.norm(g, axis=1)
    keep = (gn > ZERO_EPS) & (gn <= gc)
    g, gn = g[keep], gn[keep]
    weight = erfc(gn / (2 * alpha)) / gn
    phase = np.einsum("ijk,gk->ijg", diff, g)
    phi += (2 * np.pi / area) * (np.cos(phase) @ weight)
    phi -= 2 * np.sqrt(np.pi) / (alpha * area)
    phi[np.diag_indices_from(phi)] -= 2 * alpha / np.sqrt(np.pi)
    return cast(FloatArray, phi)
