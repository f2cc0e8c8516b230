"""Surface coordination: how many of its bulk bonds each atom below a termination keeps.

An atom of the semi-infinite crystal below a termination keeps the bonds of
the bulk bond graph (:func:`termination.bulk.bonds.bond_graph`) whose
partner lies below the cut plane too; the bonds that cross the cut are
lost.  On rutile TiO2 (110) with its bridging-O rows on top this tells the
five-fold Ti (one apical bond cut) from the six-fold Ti under the bridging O,
the labels Ti5c and Ti6c of the surface-science literature.  Atoms deep in
the crystal keep their bulk coordination.
"""

from __future__ import annotations

import numpy as np

from termination.arrays import IntArray
from termination.bulk.bonds import bond_graph
from termination.bulk.crystal import Crystal
from termination.defaults import BOND_FACTOR, LENGTH_EPS_ANGSTROM, RELATIVE_EPS
from termination.errors import StructureError
from termination.surface.terminations import FaceTerminations, SurfaceAtoms

__all__ = ["surface_coordination"]


def surface_coordination(
    crystal: Crystal,
    face_terminations: FaceTerminations,
    key: str,
    atoms: SurfaceAtoms,
    *,
    bond_factor: float = BOND_FACTOR,
    bond_cutoff_angstrom: float | None = None,
) -> IntArray:
    """Bonds each atom keeps in the semi-infinite crystal below termination ``key``.

    Parameters
    ----------
    crystal : Crystal
        The bulk crystal the terminations were built from.
    face_terminations : FaceTerminations
    key : str
        Termination id or label.
    atoms : SurfaceAtoms
        Atoms below that termination (:meth:`FaceTerminations.surface_atoms`
        or :meth:`FaceTerminations.repeat_unit` of the same termination).
    bond_factor, bond_cutoff_angstrom : float, float or None
        The bond rule (:func:`termination.bulk.bonds.bond_graph`).

    Returns
    -------
    (N,) IntArray
        Number of bonds of each atom whose partner lies below the cut plane.

    Notes
    -----
    An atom at depth z (below the top layer) bonded by the bulk vector v
    keeps the bond when its partner, at depth z - v.n (n the outward
    normal), lies below the cut plane at depth z_cut <= 0 above the top
    layer.  Each atom is matched to its atom of the face's primitive cell by
    its height modulo d and its in-plane position modulo the mesh (after
    the stacking shift of whole periods).

    Examples
    --------
    >>> from termination.structures import build_prototype
    >>> from termination.surface.terminations import face_terminations
    >>> c = build_prototype("rocksalt:Na,Cl", a=5.64)
    >>> ft = face_terminations(c, (0, 0, 1))
    >>> top = ft.surface_atoms("NaCl", 3.0)
    >>> sorted(set(zip(np.round(top.depth, 2).tolist(), surface_coordination(c, ft, "NaCl", top).tolist())))
    [(0.0, 5), (2.82, 6)]
    """
    ft = face_terminations
    t = ft.termination(key)
    fa = ft.atoms
    d = ft.d
    z_top = ft.layers[t.layers[0]].height
    cut_depth = -((t.cut_height - z_top) % d)
    height = z_top - np.asarray(atoms.depth, dtype=float)
    # Match each atom to its primitive-cell atom: whole periods k apart in height, mesh translations in plane.
    k = np.rint((height[:, None] - fa.heights[None, :]) / d)
    same_height = np.abs(height[:, None] - fa.heights[None, :] - k * d) <= max(ft.layer_tol_angstrom, 1e-3)
    diff = atoms.inplane[:, None, :] - fa.inplane[None, :, :] - k[:, :, None] * fa.stack_inplane[None, None, :]
    frac = diff @ np.linalg.inv(fa.mesh_inplane)
    same_place = np.all(np.abs(frac - np.rint(frac)) <= 1e-4, axis=-1)
    hit = same_height & same_place
    if not np.all(hit.any(axis=1)):
        bad = int(np.flatnonzero(~hit.any(axis=1))[0])
        raise StructureError(f"atom {atoms.species[bad]} at depth {atoms.depth[bad]:.3f} Å is no atom of this face")
    which = np.argmax(hit, axis=1)
    conventional = fa.conventional_index[which]
    graph = bond_graph(crystal, bond_factor, bond_cutoff_angstrom)
    normal = np.asarray(ft.face.normal, dtype=float)
    rise = graph.vector @ normal  # height gained from source to partner, Å
    mine = graph.source[None, :] == conventional[:, None]
    partner_depth = np.asarray(atoms.depth, dtype=float)[:, None] - rise[None, :]
    kept = mine & (partner_depth > cut_depth + LENGTH_EPS_ANGSTROM + RELATIVE_EPS)
    return np.asarray(kept.sum(axis=1), dtype=np.int64)
