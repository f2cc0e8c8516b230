"""Two-dimensional supercells of a surface mesh: enumeration, symmetry, Wood notation, patterns.

Pure 2D lattice math; the polarity module supplies the mesh, the sites and
the point operations of the termination.

Conventions: a supercell is an integer (2, 2) matrix N whose rows are the
supercell vectors in units of the mesh vectors a, b
(``A_super = N @ mesh_inplane``).  The sublattice it spans is identified by
its row Hermite normal form [[p, q], [0, r]] with p r = det N and 0 <= q < r.
A point operation acts on mesh coordinates (row vectors) as u -> u S, so a
supercell N becomes N S.
"""

from dataclasses import dataclass
from functools import lru_cache
from itertools import combinations
from math import comb

import numpy as np

from .lattice import row_basis

__all__ = [
    "COULOMB_EV_ANGSTROM",
    "MAX_PATTERNS",
    "hnf_matrices",
    "canonical_hnf",
    "supercell_classes",
    "Wood",
    "wood_notation",
    "coset_representatives",
    "translation_permutations",
    "supercell_sites",
    "ewald_pair_matrix",
    "PatternRanking",
    "rank_patterns",
]

#: e^2 / (4 pi eps0) in eV Å (CODATA 2018).
COULOMB_EV_ANGSTROM = 14.399645
#: Largest number of occupation patterns enumerated in one supercell.
MAX_PATTERNS = 200_000


def hnf_matrices(det):
    """All row Hermite normal forms of determinant ``det``.

    Each index-``det`` sublattice of Z^2 appears exactly once; there are
    sigma(det) of them (the sum of the divisors).

    Parameters
    ----------
    det : int
        Index of the sublattice, >= 1.

    Returns
    -------
    (M, 2, 2) int ndarray
        Matrices [[p, q], [0, r]], p r = det, 0 <= q < r.

    Examples
    --------
    >>> [m.tolist() for m in hnf_matrices(2)]
    [[[1, 0], [0, 2]], [[1, 1], [0, 2]], [[2, 0], [0, 1]]]
    """
    det = int(det)
    out = []
    for p in range(1, det + 1):
        if det % p:
            continue
        r = det // p
        for q in range(r):
            out.append([[p, q], [0, r]])
    return np.array(out, dtype=np.int64).reshape(-1, 2, 2)


def canonical_hnf(matrix):
    """Row Hermite normal form of a non-singular integer (2, 2) matrix.

    >>> canonical_hnf([[1, 1], [-1, 1]]).tolist()
    [[1, 1], [0, 2]]
    """
    return row_basis(np.asarray(matrix, dtype=np.int64))


def supercell_classes(max_det, operations):
    """Supercells up to index ``max_det``, grouped into classes equivalent under ``operations``.

    Parameters
    ----------
    max_det : int
        Largest index (number of mesh cells in the supercell).
    operations : (K, 2, 2) int array_like
        Point operations of the surface in mesh coordinates (u -> u S).

    Returns
    -------
    list of tuple of (2, 2) int ndarray
        One tuple per class, holding the HNFs of all its members, in order of
        increasing index and then of the HNF entries.

    Notes
    -----
    Two sublattices are equivalent when an operation of the surface's point
    group maps one onto the other: HNF(N S) = HNF(N').  Each class is an
    orbit of the group acting on the sigma(det) HNFs of each index.
    """
    ops = np.asarray(operations, dtype=np.int64).reshape(-1, 2, 2)
    classes = []
    for det in range(1, int(max_det) + 1):
        seen = set()
        for h in hnf_matrices(det):
            key = tuple(h.ravel())
            if key in seen:
                continue
            orbit = {key}
            for s in ops:
                orbit.add(tuple(canonical_hnf(h @ s).ravel()))
            seen |= orbit
            classes.append(tuple(np.array(k, dtype=np.int64).reshape(2, 2) for k in sorted(orbit)))
    return classes


@dataclass(frozen=True)
class Wood:
    """Wood notation of a supercell.

    ``label`` e.g. '(2×1)', 'c(2×2)', '(√3×√3)R30°'; ``centred`` says whether it
    is a c(m×n) cell; ``angle`` is the rotation in degrees (0 unrotated);
    ``matrix`` holds the Wood cell's vectors (rows, mesh units): a basis of the
    supercell for a primitive cell, the doubled conventional cell for c(m×n).
    """

    label: str
    centred: bool
    angle: float
    m: float
    n: float
    matrix: tuple


def _ratio_text(x, tol):
    k = round(x)
    if k >= 1 and abs(x - k) <= tol * max(1.0, x):
        return str(int(k))
    k2 = round(x * x)
    if k2 >= 2 and abs(x * x - k2) <= tol * max(1.0, x * x):
        return f"√{int(k2)}"
    return None


def _angle_text(theta):
    if abs(theta - round(theta)) < 0.05:
        return f"{int(round(theta))}"
    return f"{theta:.1f}"


def wood_notation(matrix, mesh_inplane, *, angle_tol_degrees=0.5, length_rel_tol=1e-3):
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
    det = int(round(abs(np.linalg.det(hnf))))
    mesh = np.asarray(mesh_inplane, dtype=float)
    rng = np.arange(-(2 * det + 1), 2 * det + 2)
    u = np.array(np.meshgrid(rng, rng, indexing="ij")).reshape(2, -1).T
    frac = u @ np.linalg.inv(hnf)
    u = u[np.all(np.abs(frac - np.rint(frac)) < 1e-9, axis=1) & np.any(u != 0, axis=1)]
    v = u @ mesh
    la, lb = np.linalg.norm(mesh, axis=1)

    def angle_from(ref):
        cross = ref[0] * v[:, 1] - ref[1] * v[:, 0]
        return np.degrees(np.arctan2(cross, v @ ref))

    th1, th2 = angle_from(mesh[0]), angle_from(mesh[1])
    lens = np.linalg.norm(v, axis=1)
    cross = u[:, None, 0] * u[None, :, 1] - u[:, None, 1] * u[None, :, 0]
    dth = (th1[:, None] - th2[None, :] + 180.0) % 360.0 - 180.0
    same = np.abs(dth) <= angle_tol_degrees
    best = None
    for centred, index in ((False, det), (True, 2 * det)):
        ii, jj = np.nonzero(same & (cross == index))
        for i, j in zip(ii, jj):
            if centred:
                mid = (u[i] + u[j]) / 2.0
                f = mid @ np.linalg.inv(hnf)
                if np.any(np.abs(mid - np.rint(mid)) > 1e-9) or np.any(np.abs(f - np.rint(f)) > 1e-9):
                    continue
            m, n = lens[i] / la, lens[j] / lb
            mt, nt = _ratio_text(m, length_rel_tol), _ratio_text(n, length_rel_tol)
            if mt is None or nt is None:
                continue
            theta = float(th1[i])
            rotated = abs(theta) > angle_tol_degrees
            key = (rotated, centred, round(abs(theta), 3), theta < 0, round(m * n, 6), -round(m, 6),
                   tuple(u[i]), tuple(u[j]))
            if best is None or key < best[0]:
                label = ("c" if centred else "") + f"({mt}×{nt})"
                if rotated:
                    label += f"R{_angle_text(abs(theta))}°"
                mat = ((int(u[i][0]), int(u[i][1])), (int(u[j][0]), int(u[j][1])))
                best = (key, Wood(label, centred, 0.0 if not rotated else abs(theta), float(m), float(n), mat))
    return None if best is None else best[1]


def coset_representatives(hnf):
    """Mesh translations (i, j), 0 <= i < p, 0 <= j < r, one per cell of the supercell [[p, q], [0, r]].

    >>> coset_representatives([[2, 1], [0, 1]]).tolist()
    [[0, 0], [1, 0]]
    """
    hnf = np.asarray(hnf, dtype=np.int64)
    p, r = int(hnf[0, 0]), int(hnf[1, 1])
    i, j = np.meshgrid(np.arange(p), np.arange(r), indexing="ij")
    return np.stack([i.ravel(), j.ravel()], axis=1)


def _coset_index(hnf, u):
    """Index of the coset of integer vectors ``u`` (M, 2) modulo the HNF sublattice."""
    p, q, r = int(hnf[0, 0]), int(hnf[0, 1]), int(hnf[1, 1])
    u = np.array(u, dtype=np.int64, copy=True)
    k = np.floor_divide(u[:, 0], p)
    u[:, 0] -= k * p
    u[:, 1] -= k * q
    u[:, 1] %= r
    return u[:, 0] * r + u[:, 1]


def translation_permutations(hnf, n_base):
    """How each mesh translation of the supercell permutes its sites.

    Sites are numbered ``coset * n_base + base`` (see :func:`supercell_sites`).

    Returns
    -------
    (D, D * n_base) int ndarray
        Row t: image site of every site under the translation by the t-th coset
        representative (row 0 is the identity).
    """
    hnf = np.asarray(hnf, dtype=np.int64)
    reps = coset_representatives(hnf)
    det = len(reps)
    perms = np.empty((det, det * n_base), dtype=np.int64)
    for t in range(det):
        image = _coset_index(hnf, reps + reps[t])
        perms[t] = (image[:, None] * n_base + np.arange(n_base)[None, :]).ravel()
    return perms


def supercell_sites(hnf, mesh_inplane, base_inplane):
    """Cartesian in-plane positions of all sites of the supercell.

    Parameters
    ----------
    hnf : (2, 2) int array_like
    mesh_inplane : (2, 2) array_like
        Mesh rows a, b, Å.
    base_inplane : (g, 2) array_like
        Sites of one mesh cell, Å.

    Returns
    -------
    positions : (D g, 2) ndarray
        Site ``coset * g + base`` at base_inplane[base] + reps[coset] @ mesh.
    cell : (2, 2) ndarray
        Supercell rows, Å.
    """
    hnf = np.asarray(hnf, dtype=np.int64)
    mesh = np.asarray(mesh_inplane, dtype=float)
    base = np.asarray(base_inplane, dtype=float).reshape(-1, 2)
    shifts = coset_representatives(hnf) @ mesh
    positions = (shifts[:, None, :] + base[None, :, :]).reshape(-1, 2)
    return positions, hnf @ mesh


def ewald_pair_matrix(cell, positions, alpha=None, *, cutoff_erfc=6.0):
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
    (n, n) ndarray
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

    cell = np.asarray(cell, dtype=float)
    pos = np.asarray(positions, dtype=float).reshape(-1, 2)
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
    keep = (gn > 1e-12) & (gn <= gc)
    g, gn = g[keep], gn[keep]
    weight = erfc(gn / (2 * alpha)) / gn
    phase = np.einsum("ijk,gk->ijg", diff, g)
    phi += (2 * np.pi / area) * (np.cos(phase) @ weight)
    phi -= 2 * np.sqrt(np.pi) / (alpha * area)
    phi[np.diag_indices_from(phi)] -= 2 * alpha / np.sqrt(np.pi)
    return phi


@dataclass(frozen=True, eq=False)
class PatternRanking:
    """Occupation patterns of one supercell, ranked by electrostatic energy.

    Attributes
    ----------
    patterns : (P, k) int ndarray
        Changed-site indices of one pattern per class of mesh translations,
        for every class with exactly the supercell's period, best first.
    energy_ev : (P,) ndarray
        Energy per changed site, E = (q²/2) sum_{i,j in pattern} Phi_ij / k,
        in eV (lower is better).
    distinct : int
        Number of such classes, P.
    total : int
        Number of k-subsets of the sites, C(n, k).
    """

    patterns: np.ndarray
    energy_ev: np.ndarray
    distinct: int
    total: int


@lru_cache(maxsize=64)
def _subsets_touching_first_cell(n, k, g):
    """k-subsets of range(n), as sorted rows, whose smallest element is < g (cached, read-only)."""
    blocks = []
    for first in range(min(g, n - k + 1)):
        rest = list(combinations(range(first + 1, n), k - 1))
        rest = np.array(rest, dtype=np.int64).reshape(len(rest), k - 1)
        blocks.append(np.hstack([np.full((len(rest), 1), first, dtype=np.int64), rest]))
    out = np.vstack(blocks) if blocks else np.zeros((0, k), dtype=np.int64)
    out.flags.writeable = False
    return out


def rank_patterns(cell, positions, k, permutations, charge=1.0, max_patterns=MAX_PATTERNS):
    """Rank the ways of changing ``k`` of the supercell's sites by their 2D Ewald energy.

    Parameters
    ----------
    cell : (2, 2) array_like
        Supercell rows, Å.
    positions : (n, 2) array_like
        Candidate sites, Å, numbered ``coset * g + base`` as by
        :func:`supercell_sites` (g = n / D sites per 1×1 cell).
    k : int
        Number of sites removed (vacancies) or added (adatoms), 0 < k < n.
    permutations : (D, n) int array_like
        Site permutations of the supercell's mesh translations
        (:func:`translation_permutations`); patterns left invariant by a
        non-trivial one have a smaller period and are dropped.
    charge : float
        Charge of one changed site, e (only scales the energies).
    max_patterns : int
        Refuse (return None) when more subsets than this would be examined.

    Returns
    -------
    PatternRanking or None
        None when there are too many subsets or none has the full period.

    Notes
    -----
    The criterion is the electrostatic energy of the changed sites as point
    charges ±q in the surface plane with a uniform compensating background,
    from :func:`ewald_pair_matrix`, per changed site.  Vacancies repel one
    another, so the lowest energy spreads them out as evenly as the cell
    allows (the 2D Wigner-lattice limit).  For equivalent candidate sites it
    differs from the energy of the whole modified top layer by a
    pattern-independent constant.

    The energy does not change under a mesh translation, so one pattern per
    translation class is enough: every class has a member with a site in the
    first 1×1 cell, and only those subsets are generated; classes are told
    apart by the smallest bit mask over their D translates.  Ties go to the
    lexicographically first pattern, so the result is deterministic.
    """
    pos = np.asarray(positions, dtype=float).reshape(-1, 2)
    n = len(pos)
    k = int(k)
    perms = np.asarray(permutations, dtype=np.int64)
    det = len(perms)
    g = n // det
    if not 0 < k < n or n > 62:  # subsets are int64 bit masks
        return None
    total = comb(n, k)
    examined = sum(comb(n - 1 - f, k - 1) for f in range(min(g, n - k + 1)))
    if examined > max_patterns:
        return None
    combos = _subsets_touching_first_cell(n, k, g)
    bits = np.left_shift(np.int64(1), np.arange(n, dtype=np.int64))
    masks = np.stack([bits[perm][combos].sum(axis=1) for perm in perms])  # (D, m): every translate's bits
    primitive = np.all(masks[1:] != masks[0][None, :], axis=0)
    combos, masks = combos[primitive], masks[:, primitive]
    if not len(combos):
        return None
    _, first = np.unique(masks.min(axis=0), return_index=True)
    combos = combos[np.sort(first)]
    phi = ewald_pair_matrix(cell, pos)
    energy = np.empty(len(combos))
    chunk = max(1, 2_000_000 // (k * k))
    for s in range(0, len(combos), chunk):
        c = combos[s:s + chunk]
        energy[s:s + chunk] = phi[c[:, :, None], c[:, None, :]].sum(axis=(1, 2))
    energy *= 0.5 * charge * charge * COULOMB_EV_ANGSTROM / k
    order = np.lexsort((np.arange(len(combos)), np.round(energy, 9)))
    return PatternRanking(combos[order], energy[order], len(combos), total)
