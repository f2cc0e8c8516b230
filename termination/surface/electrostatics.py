"""Electrostatics of 2D-periodic point charges: the Ewald sum in a plane and in a slab of planes."""

from __future__ import annotations

from typing import cast

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import FloatArray
from termination.defaults import ZERO_EPS

__all__ = ["COULOMB_EV_ANGSTROM", "ewald_bulk_potential", "ewald_pair_matrix", "ewald_slab_matrix"]

#: e^2 / (4 pi eps0) in eV Å (CODATA 2018).
COULOMB_EV_ANGSTROM = 14.399645

#: Two charges closer than this (Å) are one charge: its own self term.
_SAME_SITE_ANGSTROM = 1e-10


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
    It is :func:`ewald_slab_matrix` with every z = 0.

    References
    ----------
    D. E. Parry, Surf. Sci. 49, 433 (1975); L. Bonsall and A. A. Maradudin,
    Phys. Rev. B 15, 1959 (1977).
    """
    pos = np.asarray(positions, dtype=np.float64).reshape(-1, 2)
    xyz = np.hstack([pos, np.zeros((len(pos), 1))])
    return ewald_slab_matrix(cell, xyz, xyz, alpha, cutoff_erfc=cutoff_erfc)


def ewald_slab_matrix(
    cell: ArrayLike,
    targets: ArrayLike,
    sources: ArrayLike,
    alpha: float | None = None,
    *,
    cutoff_erfc: float = 6.0,
) -> FloatArray:
    """Potential at ``targets`` of unit point charges at ``sources``, both 2D-periodic, at any heights (2D Ewald sum).

    Parameters
    ----------
    cell : (2, 2) array_like
        Periodic cell rows, Cartesian in the plane, Å.
    targets : (n, 3) array_like
        Points (x, y, z), Å; z along the normal (any origin, either sign).
    sources : (m, 3) array_like
        Charges (x, y, z), Å.  A source at the position of a target is that
        target itself: its own term is left out (only its periodic images count).
    alpha : float, optional
        Ewald splitting parameter, 1/Å (default sqrt(pi / area)).
    cutoff_erfc : float
        Real and reciprocal sums stop where erfc falls below erfc(cutoff_erfc).

    Returns
    -------
    (n, m) FloatArray
        Phi, 1/Å: the potential at target i of source j and all its periodic
        images.  For charges q at the sources, V = Phi q (e/Å) and, with the
        targets equal to the sources, E = (1/2) q^T Phi q; for a neutral set
        of charges both are independent of ``alpha``.

    Notes
    -----
    With rho the in-plane and z the normal separation of a pair, and |G|
    including the factor 2π (Parry 1975; Heyes, Barber and Clarke 1977),

    Phi = sum'_L erfc(α r_L) / r_L
          + (π/A) sum_{G≠0} cos(G·rho) / |G| [e^{|G|z} erfc(|G|/2α + αz) + e^{-|G|z} erfc(|G|/2α - αz)]
          - (2π/A) [z erf(αz) + exp(-α²z²) / (α sqrt(π))]
          - δ_self 2α / sqrt(π),

    r_L = |(rho + L, z)|.  The G = 0 term is -(2π/A)|z| up to a constant for
    large |z|: the potential of a uniformly charged sheet, whose field does
    not decay.  For z = 0 it reduces to the planar sum of
    :func:`ewald_pair_matrix` with its uniform compensating sheet.  The
    products e^{±|G|z} erfc(...) are evaluated as
    exp(-|G|²/4α² - α²z²) erfcx(...) where that is finite.

    References
    ----------
    D. E. Parry, Surf. Sci. 49, 433 (1975); 51, 345 (1975) (erratum);
    D. M. Heyes, M. Barber and J. H. R. Clarke, J. Chem. Soc., Faraday Trans. 2
    73, 1485 (1977).
    """
    from scipy.special import erf, erfc, erfcx  # lazy: keeps scipy off the planes/match start-up path

    cell = np.asarray(cell, dtype=np.float64)
    tgt = np.asarray(targets, dtype=np.float64).reshape(-1, 3)
    src = np.asarray(sources, dtype=np.float64).reshape(-1, 3)
    area = abs(np.linalg.det(cell))
    if alpha is None:
        alpha = float(np.sqrt(np.pi / area))
    rc = cutoff_erfc / alpha
    gc = 2.0 * alpha * cutoff_erfc
    inverse = np.linalg.inv(cell)
    recip = inverse.T  # rows b_i with a_i . b_j = delta_ij
    diff = src[None, :, :] - tgt[:, None, :]  # (n, m, 3): r_j - r_i
    z = diff[..., 2]
    # Every image is summed, so the in-plane separation may be taken modulo the cell: this keeps the
    # real-space search radius small however far the sources drift (a slab's stacking shift).
    rho = diff[..., :2] - np.floor(diff[..., :2] @ inverse + 0.5) @ cell
    rho_len = _lengths(rho)
    same = (rho_len < _SAME_SITE_ANGSTROM) & (np.abs(z) < _SAME_SITE_ANGSTROM)
    # Real space: every image within rc of a target (in-plane distances bound the 3D ones).
    span = np.max(rho_len, initial=0.0)
    nr = np.ceil((rc + span) * _lengths(recip)).astype(int) + 1
    lat = _grid(-nr[0], nr[0], -nr[1], nr[1]) @ cell
    lat = lat[_lengths(lat) <= rc + span]
    phi = np.zeros(z.shape)
    out = phi.reshape(-1)
    # Pairs farther apart along the normal than rc have no real-space term.
    near = np.flatnonzero(np.abs(z.reshape(-1)) < rc)
    flat_rho, flat_z = rho.reshape(-1, 2)[near], z.reshape(-1)[near]
    chunk = max(1, 500_000 // max(1, len(lat)))  # bound the (pairs, images) temporaries
    for s in range(0, len(flat_z), chunk):
        dx = flat_rho[s : s + chunk, 0, None] + lat[None, :, 0]
        dy = flat_rho[s : s + chunk, 1, None] + lat[None, :, 1]
        dist = np.sqrt(dx * dx + dy * dy + flat_z[s : s + chunk, None] ** 2)
        # Images beyond rc add less than erfc(cutoff_erfc) / rc each: left out like those beyond rc + span.
        inside = (dist < rc) & (dist > _SAME_SITE_ANGSTROM)
        term = np.zeros(dist.shape)
        d_in = dist[inside]
        term[inside] = erfc(alpha * d_in) / d_in
        out[near[s : s + chunk]] = term.sum(axis=1)
    # Reciprocal space.  The terms are even in G: one of each pair +-G, counted twice.
    ng = np.ceil(gc / (2 * np.pi) * _lengths(cell)).astype(int) + 1
    ij = _grid(0, ng[0], -ng[1], ng[1])
    half = (ij[:, 0] > 0) | ((ij[:, 0] == 0) & (ij[:, 1] > 0))
    g = 2 * np.pi * (ij[half] @ recip)
    gn = _lengths(g)
    keep = (gn > ZERO_EPS) & (gn <= gc)
    g, gn = g[keep], gn[keep]
    if len(gn):
        # Beyond |z| = 40/|G|min every G≠0 term is below exp(-40): only the G = 0 sheet term is left.
        close = np.flatnonzero(np.abs(z.reshape(-1)) * gn.min() < 40.0)
        za = np.abs(z.reshape(-1)[close])[:, None]  # the sum is even in z
        x_g = gn / (2 * alpha)
        base = np.exp(-(x_g**2))[None, :] * np.exp(-((alpha * za) ** 2))
        terms = base * erfcx(x_g + alpha * za)  # e^{|G|z} erfc(|G|/2α + αz)
        x_down = x_g - alpha * za
        above = x_down >= 0
        # e^{-|G|z} erfc(|G|/2α - αz): through erfcx where that is finite, directly where erfc is not small.
        terms[above] += base[above] * erfcx(x_down[above])
        below = ~above
        terms[below] += np.exp(-(gn[None, :] * za)[below]) * erfc(x_down[below])
        phase = np.cos(rho.reshape(-1, 2)[close] @ g.T)
        out[close] += (2 * np.pi / area) * np.sum(phase * terms / gn, axis=-1)
    sheet = np.abs(z) * erf(alpha * np.abs(z)) + np.exp(-((alpha * z) ** 2)) / (alpha * np.sqrt(np.pi))
    phi -= (2 * np.pi / area) * sheet
    phi[same] -= 2 * alpha / np.sqrt(np.pi)
    return cast(FloatArray, phi)


def _lengths(v: FloatArray) -> FloatArray:
    """Euclidean lengths along the last axis: sqrt(sum v^2), what ``np.linalg.norm(v, axis=-1)`` computes."""
    out: FloatArray = np.sqrt(np.add.reduce(v * v, axis=-1))
    return out


def _grid(i0: int, i1: int, j0: int, j1: int) -> FloatArray:
    """(K, 2) integer pairs (i, j), i0 <= i <= i1 and j0 <= j <= j1, i slowest (``meshgrid`` "ij" order), as floats."""
    i = np.repeat(np.arange(i0, i1 + 1), j1 - j0 + 1)
    j = np.tile(np.arange(j0, j1 + 1), i1 - i0 + 1)
    return np.stack([i, j], axis=1).astype(float)


def ewald_bulk_potential(
    lattice: ArrayLike,
    positions: ArrayLike,
    charges: ArrayLike,
    targets: ArrayLike,
    alpha: float | None = None,
    *,
    cutoff_erfc: float = 6.0,
) -> FloatArray:
    """Potential at ``targets`` of a 3D-periodic crystal of point charges (3D Ewald sum).

    Parameters
    ----------
    lattice : (3, 3) array_like
        Cell vectors as rows, Cartesian, Å.
    positions : (n, 3) array_like
        Cartesian positions of the charges of one cell, Å.
    charges : (n,) array_like
        Their charges, e; their sum must be zero.
    targets : (t, 3) array_like
        Cartesian points, Å.  A target on a charge is that charge's own
        site: its own term is left out (its periodic images count).
    alpha : float, optional
        Ewald splitting parameter, 1/Å (default sqrt(pi) / V^(1/3)).
    cutoff_erfc : float
        Real and reciprocal sums stop where erfc (or its Gaussian) is below erfc(cutoff_erfc).

    Returns
    -------
    (t,) FloatArray
        V, e/Å (times :data:`COULOMB_EV_ANGSTROM` for volts), with the mean
        potential of the cell zero.

    Notes
    -----
    V(r) = sum_j q_j [sum'_L erfc(α|r - r_j - L|)/|r - r_j - L|
    + (4π/V) sum_{G≠0} exp(-G²/4α²)/G² cos(G·(r - r_j))] - δ_self 2α q/sqrt(π),
    |G| with the factor 2π.  For rock salt it gives the Madelung constant
    1.747565 at each ion in units of e/r0.

    References
    ----------
    P. P. Ewald, Ann. Phys. 369, 253 (1921); C. Kittel, Introduction to
    Solid State Physics, 8th ed. (Wiley, 2005), appendix B.
    """
    from scipy.special import erfc  # lazy: keeps scipy off the planes/match start-up path

    cell = np.asarray(lattice, dtype=np.float64)
    src = np.asarray(positions, dtype=np.float64).reshape(-1, 3)
    q = np.asarray(charges, dtype=np.float64).reshape(-1)
    tgt = np.asarray(targets, dtype=np.float64).reshape(-1, 3)
    volume = abs(np.linalg.det(cell))
    if alpha is None:
        alpha = float(np.sqrt(np.pi) / volume ** (1.0 / 3.0))
    rc = cutoff_erfc / alpha
    gc = 2.0 * alpha * cutoff_erfc
    # A short basis of the same lattice keeps the wrapped separations and so the image sphere small
    # (a face's primitive cell is often long and thin).
    cell = _short_basis(cell)
    recip = np.linalg.inv(cell).T
    diff = tgt[:, None, :] - src[None, :, :]  # (t, n, 3)
    diff -= np.floor(diff @ np.linalg.inv(cell) + 0.5) @ cell  # every image is summed: nearest one suffices
    span = np.max(np.linalg.norm(diff, axis=-1), initial=0.0)
    nr = np.ceil((rc + span) * np.linalg.norm(recip, axis=1)).astype(int) + 1
    grid = np.meshgrid(*[np.arange(-k, k + 1) for k in nr], indexing="ij")
    lat = np.stack([v.ravel() for v in grid], axis=1) @ cell
    lat = lat[np.linalg.norm(lat, axis=1) <= rc + span]
    v = np.zeros(len(tgt))
    for i in range(len(tgt)):  # one target at a time bounds the (charges, images) temporaries
        dx = diff[i][:, 0, None] - lat[None, :, 0]
        dy = diff[i][:, 1, None] - lat[None, :, 1]
        dz = diff[i][:, 2, None] - lat[None, :, 2]
        dist = np.sqrt(dx * dx + dy * dy + dz * dz)
        # Images beyond rc add less than erfc(cutoff_erfc) / rc each: left out.
        inside = (dist < rc) & (dist > _SAME_SITE_ANGSTROM)
        term = np.zeros(dist.shape)
        d_in = dist[inside]
        term[inside] = erfc(alpha * d_in) / d_in
        v[i] = float(term.sum(axis=1) @ q)
        own = np.any(dist < _SAME_SITE_ANGSTROM, axis=1)  # the target sits on this charge or an image of it
        v[i] -= 2 * alpha / np.sqrt(np.pi) * float(q[own].sum())
    # The terms are even in G: one of each pair +-G, counted twice.
    ng = np.ceil(gc / (2 * np.pi) * np.linalg.norm(cell, axis=1)).astype(int) + 1
    grid = np.meshgrid(np.arange(0, ng[0] + 1), *[np.arange(-k, k + 1) for k in ng[1:]], indexing="ij")
    h, k, m = (x.ravel() for x in grid)
    half = (h > 0) | ((h == 0) & ((k > 0) | ((k == 0) & (m > 0))))
    g = 2 * np.pi * (np.stack([h[half], k[half], m[half]], axis=1) @ recip)
    gn2 = np.sum(g * g, axis=1)
    keep = (gn2 > ZERO_EPS) & (gn2 <= gc * gc)
    g, gn2 = g[keep], gn2[keep]
    weight = np.exp(-gn2 / (4 * alpha * alpha)) / gn2
    phase = np.cos(np.einsum("tnk,gk->tng", diff, g))  # (t, n, G)
    v += (8 * np.pi / volume) * np.einsum("tng,g,n->t", phase, weight, q)
    return cast(FloatArray, v)


def _short_basis(cell: FloatArray) -> FloatArray:
    """(3, 3) rows of a short basis of the lattice of ``cell`` (rows): pairwise reduction until nothing shortens.

    Each step subtracts an integer multiple of one row from another, so the
    lattice stays the same; every step shortens a row, so it ends.
    """
    b = np.array(cell, dtype=np.float64)
    for _ in range(100):
        changed = False
        b = b[np.argsort(np.einsum("ij,ij->i", b, b), kind="stable")]
        for i in range(3):
            for j in range(3):
                if i == j:
                    continue
                k = np.round(b[i] @ b[j] / (b[j] @ b[j]))
                if k != 0:
                    shorter = b[i] - k * b[j]
                    if shorter @ shorter < b[i] @ b[i] * (1 - 1e-12):
                        b[i] = shorter
                        changed = True
        if not changed:
            break
    if np.linalg.det(b) * np.linalg.det(cell) < 0:
        b[0] = -b[0]
    return b
