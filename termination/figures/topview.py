"""Top view of a termination: its atoms by species and depth, the surface mesh, the apparent lattice, the cell.

Looking down the outward normal, the atoms from the top layer down to one
period d are drawn over a few surface cells: colour and marker by species
(:func:`termination.figures.palette.species_styles`), paler and smaller with
depth.  The surface mesh (a, b) is drawn at the origin; the apparent lattice
(what a topograph shows, from the visible Fourier spots of the corrugation
model) is drawn dashed from the brightest site; a reconstruction cell is
drawn with its removed sites (dashed rings where the atoms were) or added
sites (stars).  A scale bar gives the length.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from termination.algebra.integer import row_basis
from termination.algebra.lattice2d import reduced_obtuse
from termination.arrays import FloatArray
from termination.bulk.crystal import Crystal
from termination.bulk.elements import covalent_radius
from termination.defaults import SITE_TOL_ANGSTROM
from termination.figures.canvas import new_figure, style
from termination.figures.labels import hkl_label, nice_length, scale_bar
from termination.figures.palette import COLOURS, species_styles, tint
from termination.surface.corrugation import (
    CorrugationPattern,
    Spot,
    Visibility,
    reconstruction_corrugation,
    termination_corrugation,
)
from termination.surface.reconstructions import Reconstruction
from termination.surface.terminations import FaceTerminations

__all__ = ["apparent_vectors", "cell_polygon", "lattice_points", "termination_top_view"]


def apparent_vectors(
    spots: Sequence[Spot], mesh_inplane: FloatArray, cell_inplane: FloatArray | None = None
) -> FloatArray:
    """The apparent lattice as vectors: the reduced real basis dual to the lattice the visible spots generate.

    Parameters
    ----------
    spots : sequence of Spot
        Visible spots, indices in units of the 1x1 reciprocal mesh.
    mesh_inplane : (2, 2) FloatArray
        Mesh rows a, b in the face frame, Å.
    cell_inplane : (2, 2) FloatArray, optional
        The cell the pattern repeats with (a reconstruction cell); default the mesh.

    Returns
    -------
    (k, 2) FloatArray
        k = 2 vectors (|a| <= |b|, obtuse angle), k = 1 for stripes (the
        stripe period along the one spot direction), k = 0 when no spot is
        visible.

    Notes
    -----
    G = (h, k) @ B with B = inv(mesh)^T; in the cell's reciprocal basis
    B_C = inv(C)^T the indices n = G C^T are integers, and the visible spots
    generate the lattice with basis H B_C, H the Hermite form of the n.  Its
    dual inv(H B_C)^T, Gauss-reduced with the obtuse angle, is the apparent
    lattice (as :func:`termination.surface.corrugation.pattern_from_sites`
    computes its lengths and angle).
    """
    mesh = np.asarray(mesh_inplane, dtype=float)
    cell = mesh if cell_inplane is None else np.asarray(cell_inplane, dtype=float)
    if not len(spots):
        return np.zeros((0, 2))
    g = np.array([s.g for s in spots], dtype=float) @ np.linalg.inv(mesh).T
    n = np.rint(g @ cell.T).astype(np.int64)
    n = n[np.any(n != 0, axis=1)]
    cross = n[:, None, 0] * n[None, :, 1] - n[:, None, 1] * n[None, :, 0]
    recip = np.linalg.inv(cell).T
    if np.any(cross != 0):
        gbasis = row_basis(n).astype(float) @ recip
        real = np.linalg.inv(gbasis).T
        v1, v2 = reduced_obtuse(real[0], real[1])
        return np.vstack([v1, v2])
    first = n[0] // math.gcd(int(abs(n[0][0])), int(abs(n[0][1])))
    multiple = math.gcd(*(int(abs(v)) for v in (n @ first) // int(first @ first)))
    gvec = multiple * first.astype(float) @ recip
    return np.asarray([gvec / float(gvec @ gvec)])


def cell_polygon(origin: FloatArray, vectors: FloatArray) -> FloatArray:
    """(4, 2) corners of the cell spanned by the rows of ``vectors`` at ``origin``: 0, a, a + b, b."""
    a, b = np.asarray(vectors, dtype=float)
    o = np.asarray(origin, dtype=float)
    return np.array([o, o + a, o + a + b, o + b])


def lattice_points(vectors: FloatArray, lower: FloatArray, upper: FloatArray, margin: float = 0.0) -> FloatArray:
    """(P, 2) points i a + j b of the lattice ``vectors`` (rows) in the box [lower, upper] grown by ``margin``."""
    basis = np.asarray(vectors, dtype=float)
    lo = np.asarray(lower, dtype=float) - margin
    hi = np.asarray(upper, dtype=float) + margin
    corners = np.array([[lo[0], lo[1]], [hi[0], lo[1]], [lo[0], hi[1]], [hi[0], hi[1]]]) @ np.linalg.inv(basis)
    i0, j0 = np.floor(corners.min(axis=0)).astype(int) - 1
    i1, j1 = np.ceil(corners.max(axis=0)).astype(int) + 1
    i, j = np.meshgrid(np.arange(i0, i1 + 1), np.arange(j0, j1 + 1), indexing="ij")
    pts = np.column_stack([i.ravel(), j.ravel()]).astype(float) @ basis
    inside = np.all((pts >= lo) & (pts <= hi), axis=1)
    out: FloatArray = pts[inside]
    return out


def _periodic_match(points: FloatArray, sites: FloatArray, cell: FloatArray, tol: float) -> np.ndarray:
    """(N,) bool: point N coincides with one of ``sites`` modulo the lattice ``cell`` (rows), within ``tol`` Å."""
    if not len(sites):
        return np.zeros(len(points), dtype=bool)
    diff = points[:, None, :] - sites[None, :, :]
    frac = diff @ np.linalg.inv(cell)
    frac -= np.rint(frac)
    out: np.ndarray = np.any(np.linalg.norm(frac @ cell, axis=-1) < tol, axis=1)
    return out


#: Atoms are drawn with this fraction of their covalent radius, so neighbours stay apart.
ATOM_SCALE = 0.45


def _marker_collection(marker: str, centres: FloatArray, radii: FloatArray, **kwargs: Any) -> Any:
    """A PatchCollection of ``marker`` shapes at ``centres`` (N, 2) with circumradius ``radii`` (N,), in data units.

    Sizes in data units (Å), not points, so an atom keeps its size whatever the layout.
    """
    from matplotlib.collections import PatchCollection
    from matplotlib.markers import MarkerStyle
    from matplotlib.patches import PathPatch
    from matplotlib.path import Path

    ms = MarkerStyle(marker)
    path = ms.get_path().transformed(ms.get_transform())
    extent = float(np.abs(path.vertices).max()) or 1.0
    patches = [
        PathPatch(Path(path.vertices * (r / extent) + c, path.codes)) for c, r in zip(np.asarray(centres), radii)
    ]
    collection = PatchCollection(patches, match_original=False, **kwargs)
    collection.set_offsets(np.asarray(centres))  # the atom positions, for readers of the figure
    return collection


def termination_top_view(
    face_terminations: FaceTerminations,
    key: str,
    *,
    reconstruction: Reconstruction | None = None,
    cell_matrix: Sequence[Sequence[int]] | None = None,
    cell_name: str | None = None,
    visibility: Visibility | None = None,
    crystal: Crystal | None = None,
    depth_angstrom: float | None = None,
    span_angstrom: float | None = None,
    title: str | None = None,
    hexagonal: bool | None = None,
    width_in: float = 6.0,
) -> Any:
    """Top view of termination ``key``: atoms by species and depth, mesh, apparent lattice, cell, scale bar.

    Parameters
    ----------
    face_terminations : FaceTerminations
    key : str
        Termination id or label.
    reconstruction : Reconstruction, optional
        A cell of the polarity step (:attr:`TerminationPolarity.reconstructions`):
        drawn with its removed or added sites, and the apparent lattice is
        that of the reconstructed surface.
    cell_matrix : (2, 2) ints, optional
        A cell given without an atom pattern (``--cell``), rows in mesh
        units: drawn as a cell; the atoms and apparent lattice stay 1x1.
    cell_name : str, optional
        Its name in the legend.
    visibility : Visibility, optional
        Corrugation model of the apparent lattice (default :class:`Visibility()`).
    crystal : Crystal, optional
        The bulk crystal; needed only for ``visibility.site_weights``.
    depth_angstrom : float, optional
        Atoms down to this depth below the top layer are drawn; default d.
    span_angstrom : float, optional
        Side of the square shown, Å; default three cells (at least 10 Å).
    title : str, optional
    hexagonal : bool, optional
        Write the face (h k i l); default from ``crystal`` (three indices without it).
    width_in : float

    Returns
    -------
    matplotlib.figure.Figure
        One axes in the face frame (e1 to the right, Å).  Atoms are one
        scatter per species (gid 'atoms <El>', offsets in Å); the cells are
        polygons with the gids 'mesh cell', 'apparent cell' and
        'reconstruction cell'; vacancies and adatoms are the scatters
        'removed sites' and 'added sites'; the scale bar is the line 'scale bar'.
    """
    from matplotlib.lines import Line2D
    from matplotlib.patches import Polygon

    ft = face_terminations
    t = ft.termination(key)
    v = Visibility() if visibility is None else visibility
    depth = ft.d if depth_angstrom is None else float(depth_angstrom)
    sa = ft.surface_atoms(t.id, depth)
    mesh = np.asarray(sa.mesh_inplane, dtype=float)
    cell = None if reconstruction is None else np.asarray(reconstruction.cell_inplane, dtype=float)
    if cell is None and cell_matrix is not None:
        cell = np.asarray(cell_matrix, dtype=float) @ mesh
    pattern: CorrugationPattern = (
        termination_corrugation(ft, t.id, v, crystal=crystal)
        if reconstruction is None
        else reconstruction_corrugation(ft, t.id, reconstruction, v, crystal=crystal)
    )
    apparent = apparent_vectors(pattern.spots, mesh, None if reconstruction is None else cell)
    shown = mesh if cell is None else cell
    longest = float(max(np.linalg.norm(shown, axis=1).max(), np.linalg.norm(shown.sum(axis=0))))
    span = (
        float(span_angstrom)
        if span_angstrom
        else max(10.0, 1.6 * longest, 3.2 * float(np.linalg.norm(mesh, axis=1).max()))
    )
    centre = shown.sum(axis=0) / 2
    lo, hi = centre - span / 2, centre + span / 2
    shifts = lattice_points(mesh, lo, hi, margin=float(np.abs(sa.inplane).max()) + 3.0)
    pos = (sa.inplane[None, :, :] + shifts[:, None, :]).reshape(-1, 2)
    dep = np.tile(sa.depth, len(shifts))
    spc = np.tile(np.asarray(sa.species, dtype=object), len(shifts))
    keep = np.all((pos >= lo - 1.0) & (pos <= hi + 1.0), axis=1)
    pos, dep, spc = pos[keep], dep[keep], spc[keep]
    removed = np.zeros(len(pos), dtype=bool)
    if reconstruction is not None and cell is not None and reconstruction.mode == "remove":
        hit = _periodic_match(pos, np.asarray(reconstruction.changed_atoms_inplane, float), cell, SITE_TOL_ANGSTROM)
        deep = np.zeros(len(pos), dtype=bool)
        for z in np.asarray(reconstruction.changed_atoms_depth, float):
            deep |= np.abs(dep - z) < SITE_TOL_ANGSTROM
        removed = hit & deep
    styles = species_styles(ft.atoms.species)
    max_depth = max(float(dep.max()) if len(dep) else 0.0, 1e-6)
    with style():
        fig = new_figure(width_in, width_in * 0.72)
        ax = fig.add_subplot()
        ax.set_aspect("equal")
        ax.set_xlim(lo[0], hi[0])
        ax.set_ylim(lo[1], hi[1])
        ax.set_xticks([])
        ax.set_yticks([])
        for side in ("left", "bottom"):
            ax.spines[side].set_visible(False)
        order = np.argsort(-dep, kind="stable")  # deepest first, so the top layer is drawn over them
        for el, st in styles.items():
            mine = order[(spc[order] == el) & ~removed[order]]
            if not len(mine):
                continue
            fraction = dep[mine] / max_depth
            radii = ATOM_SCALE * covalent_radius(el) * (1.0 - 0.35 * fraction)
            ax.add_collection(
                _marker_collection(
                    st.marker,
                    pos[mine],
                    radii,
                    facecolors=[tint(st.colour, 0.7 * f) for f in fraction],
                    edgecolors=[tint("#000000", 0.3 + 0.5 * f) for f in fraction],
                    linewidths=0.6,
                    zorder=3,
                    gid=f"atoms {el}",
                )
            )
        handles: list[Any] = [
            Line2D([], [], ls="", marker=st.marker, mfc=st.colour, mec="#000000", ms=7, label=el)
            for el, st in styles.items()
        ]
        ax.add_patch(
            Polygon(
                cell_polygon(np.zeros(2), mesh),
                closed=True,
                fill=False,
                ec="#000000",
                lw=1.4,
                zorder=6,
                gid="mesh cell",
            )
        )
        for vec, name in zip(mesh, ("a", "b")):
            ax.annotate(
                "", xy=vec, xytext=(0, 0), arrowprops={"arrowstyle": "-|>", "color": "#000000", "lw": 1.2}, zorder=7
            )
            ax.text(*(vec * 1.06), name, fontsize=8, fontweight="bold", zorder=7)
        handles.append(
            Line2D([], [], color="#000000", lw=1.4, label=f"mesh {ft.face.mesh.a:.2f} × {ft.face.mesh.b:.2f} Å")
        )
        if len(apparent) == 2:
            amp = v.amplitudes(list(spc), dep) * ~removed  # by species and depth (site weights aside)
            best = np.flatnonzero(amp >= amp.max() * (1 - 1e-9))
            origin = pos[best[int(np.argmin(np.linalg.norm(pos[best] - centre, axis=1)))]]
            ax.add_patch(
                Polygon(
                    cell_polygon(origin, apparent),
                    closed=True,
                    fill=False,
                    ec=COLOURS[1],
                    lw=1.6,
                    ls="--",
                    zorder=6,
                    gid="apparent cell",
                )
            )
            la = pattern.apparent_lattice
            handles.append(
                Line2D(
                    [],
                    [],
                    color=COLOURS[1],
                    lw=1.6,
                    ls="--",
                    label=f"apparent {la.a:.2f} × {la.b:.2f} Å, {la.gamma:.0f}°",
                )
            )
        if cell is not None:
            ax.add_patch(
                Polygon(
                    cell_polygon(np.zeros(2), cell),
                    closed=True,
                    fill=False,
                    ec=COLOURS[2],
                    lw=1.8,
                    ls="-.",
                    zorder=6,
                    gid="reconstruction cell",
                )
            )
            name = reconstruction.label if reconstruction is not None else (cell_name or "cell")
            handles.append(Line2D([], [], color=COLOURS[2], lw=1.8, ls="-.", label=f"{name} cell"))
            if reconstruction is not None and reconstruction.mode == "remove":
                rem = np.flatnonzero(removed)
                ax.add_collection(
                    _marker_collection(
                        "o",
                        pos[rem],
                        np.array([ATOM_SCALE * covalent_radius(str(el)) for el in spc[rem]]),
                        facecolors="none",
                        edgecolors=COLOURS[2],
                        linewidths=1.2,
                        linestyles="--",
                        zorder=8,
                        gid="removed sites",
                    )
                )
                handles.append(
                    Line2D(
                        [],
                        [],
                        ls="",
                        marker="o",
                        mfc="none",
                        mec=COLOURS[2],
                        ms=8,
                        label=f"removed {reconstruction.site_label}",
                    )
                )
            elif reconstruction is not None:
                added = np.asarray(reconstruction.changed_atoms_inplane, dtype=float)
                tiles = lattice_points(cell, lo, hi, margin=span)
                sites = (added[None, :, :] + tiles[:, None, :]).reshape(-1, 2)
                inside = np.all((sites >= lo) & (sites <= hi), axis=1)
                species_added = list(reconstruction.changed_atoms_species) * len(tiles)
                radii = np.array([ATOM_SCALE * covalent_radius(el) for el in species_added])[inside]
                ax.add_collection(
                    _marker_collection(
                        "*",
                        sites[inside],
                        1.3 * radii,
                        facecolors=COLOURS[5],
                        edgecolors="#000000",
                        linewidths=0.7,
                        zorder=9,
                        gid="added sites",
                    )
                )
                handles.append(
                    Line2D(
                        [],
                        [],
                        ls="",
                        marker="*",
                        mfc=COLOURS[5],
                        mec="#000000",
                        ms=10,
                        label=f"added {reconstruction.site_label}",
                    )
                )
        scale_bar(ax, nice_length(span))
        fig.legend(
            handles=handles,
            loc="outside right center",
            fontsize=6.5,
            title=f"atoms to {depth:.1f} Å deep,\npaler when deeper",
            title_fontsize=6.5,
        )
        four = bool(hexagonal) if hexagonal is not None else crystal is not None and crystal.hexagonal_axes
        ax.set_title(title or f"{hkl_label(ft.face.hkl, hexagonal=four)} {t.label} ({t.id}) from above")
    return fig
