"""Stereographic projection around the mount face: every pole of the candidate faces, the measured tilt.

The projection is the one of the upper hemisphere around the mount normal n:
a face normal g at angle theta from n and azimuth phi lands at radius
r = tan(theta / 2), so the primitive circle (r = 1) holds the poles at 90°.
The azimuth is measured from e1, the direction of the mount face's first mesh
vector (:attr:`termination.surface.faces.Face.frame`), towards e2.  Every
symmetry variant of every face family within 90° of the mount is drawn and
labelled; the measured tilt is a ring at r = tan(theta_m / 2) with its ±σ band,
and the most probable faces of ``match`` (or the easiest cleavage faces in a
tilt window of ``planes``) are highlighted.

References
----------
B. D. Cullity and S. R. Stock, Elements of X-Ray Diffraction (3rd ed.,
Prentice Hall, 2001), ch. 2 (the stereographic projection).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, SupportsFloat

import numpy as np

from termination.bulk.crystal import Crystal
from termination.defaults import ANGLE_EPS_DEG, FIGURE_TOP, MAX_INDEX
from termination.figures.canvas import new_figure, style
from termination.figures.labels import hkl_label
from termination.figures.palette import MIST, SLATE, series_style
from termination.surface.faces import distinct_faces, face_geometry, face_variants, variant_tilts
from termination.surface.miller import HKL, check_hkl, face_text, hkl_text
from termination.units import DEG

__all__ = ["Pole", "pole_figure", "poles_within", "stereographic_projection"]


@dataclass(frozen=True)
class Pole:
    """One face normal on the projection.

    ``hkl`` is the face (family representative), ``variant`` the symmetry
    variant whose normal this is, ``tilt`` its angle to the mount normal,
    ``azimuth`` its direction from e1 towards e2 of the mount face, and
    ``x``, ``y`` its place on the projection (r = tan(tilt / 2)).
    """

    hkl: HKL
    variant: HKL
    tilt: float = field(metadata=DEG)
    azimuth: float = field(metadata=DEG)
    x: float
    y: float


def poles_within(
    crystal: Crystal,
    mount: Iterable[SupportsFloat],
    faces: Iterable[Iterable[SupportsFloat]],
    max_tilt_deg: float = 90.0,
) -> tuple[Pole, ...]:
    """Every symmetry variant of ``faces`` whose normal lies within ``max_tilt_deg`` of the mount normal.

    Parameters
    ----------
    crystal : Crystal
    mount : 3 ints
    faces : iterable of 3 ints
        Face families (each is expanded to its variants under the point group).
    max_tilt_deg : float
        Largest tilt kept, degrees (90: the upper hemisphere, its rim included).

    Returns
    -------
    tuple of Pole
        In the order of ``faces``, each family's variants sorted by index.

    Notes
    -----
    g = h B (B the reciprocal rows), tilt = arccos(g . n / |g|) as
    :func:`termination.surface.faces.variant_tilts` computes it, azimuth =
    atan2(g . e2, g . e1), and (x, y) = tan(tilt/2) (cos azimuth, sin azimuth).
    """
    m = check_hkl(mount, "mount")
    frame = face_geometry(crystal, m).frame
    out: list[Pole] = []
    seen: set[HKL] = set()
    for hkl in faces:
        h = check_hkl(hkl)
        if h in seen:
            continue
        seen.add(h)
        variants = face_variants(crystal, h)
        tilts = variant_tilts(crystal, variants, m)
        g = np.asarray(variants, dtype=float) @ crystal.reciprocal
        azimuth = np.degrees(np.arctan2(g @ frame[1], g @ frame[0])) % 360.0
        radius = np.tan(np.radians(tilts) / 2)
        for v, t, phi, r in zip(variants, tilts, azimuth, radius):
            if t <= max_tilt_deg + ANGLE_EPS_DEG:
                rad = math.radians(float(phi))
                out.append(Pole(h, v, float(t), float(phi), float(r * math.cos(rad)), float(r * math.sin(rad))))
    return tuple(out)


def _direction(crystal: Crystal, mount: HKL) -> tuple[int, ...]:
    """[uvw] of e1, the mount face's first mesh vector (the azimuth reference)."""
    from termination.algebra.integer import primitive_index, rationalise

    return primitive_index(rationalise(face_geometry(crystal, mount).mesh_fractional[0], 12))


def _radius(tilt_deg: float) -> float:
    return math.tan(math.radians(min(max(tilt_deg, 0.0), 90.0)) / 2)


def stereographic_projection(
    crystal: Crystal,
    mount: Iterable[SupportsFloat],
    faces: Sequence[Iterable[SupportsFloat]] | None = None,
    *,
    max_index: int | None = None,
    tilt: float | None = None,
    tilt_sigma: float | None = None,
    highlight: Mapping[HKL, float] | None = None,
    highlight_label: str = "p",
    top: int = FIGURE_TOP,
    window: tuple[float, float] | None = None,
    title: str | None = None,
    width_in: float = 5.2,
) -> Any:
    """Stereographic projection around the mount face with every pole of ``faces``.

    Parameters
    ----------
    crystal : Crystal
    mount : 3 ints
    faces : sequence of 3 ints, optional
        Face families; default every distinct face up to ``max_index``
        (default :data:`~termination.defaults.MAX_INDEX`).
    tilt, tilt_sigma : float, optional
        Measured tilt of the terraces to the mount and its standard
        uncertainty, degrees: drawn as a ring with a ±σ band.
    highlight : mapping of face to float, optional
        A score per face (a probability, or 1/cleavage rank); the ``top``
        highest are drawn in the series colours, the legend giving
        ``highlight_label = score``.
    window : (min, max), optional
        A tilt window of ``planes --tilt-window``, degrees, shaded.
    title : str, optional
    width_in : float
        Figure width, inches.

    Returns
    -------
    matplotlib.figure.Figure
        One axes.  The poles of a family are one scatter with the gid
        'poles (h k l)', highlighted families 'poles (h k l) highlighted';
        each pole has a text label (gid 'pole label'); the measured tilt is
        the circle 'tilt ring' with the band 'tilt band'.
    """
    from matplotlib.patches import Annulus, Circle

    m = check_hkl(mount, "mount")
    hexagonal = crystal.hexagonal_axes
    if faces is None:
        n = MAX_INDEX if max_index is None else max_index
        families: list[HKL] = [f.hkl for f in distinct_faces(crystal, max_index=n)]
    else:
        families = [check_hkl(f) for f in faces]
    poles = poles_within(crystal, m, families)
    scores = dict(highlight or {})
    # Scores equal to 12 decimals keep the order of ``faces`` (as the match report ranks its faces).
    ranked = sorted((f for f in families if f in scores), key=lambda f: (-round(scores[f], 12), families.index(f)))
    chosen = {f: i for i, f in enumerate(ranked[: max(int(top), 0)])}
    with style():
        fig = new_figure(width_in, width_in)
        ax = fig.add_subplot()
        ax.set_aspect("equal")
        ax.set_axis_off()
        lim = 1.16
        ax.set_xlim(-lim, lim)
        ax.set_ylim(-lim, lim)
        ax.add_patch(Circle((0, 0), 1.0, fill=False, ec=SLATE, lw=0.9, gid="primitive circle"))
        for r_deg in (30.0, 60.0):
            ax.add_patch(Circle((0, 0), _radius(r_deg), fill=False, ec=MIST, lw=0.5, ls=":", gid="guide"))
        ax.plot([-1, 1], [0, 0], color=MIST, lw=0.5, zorder=0)
        ax.plot([0, 0], [-1, 1], color=MIST, lw=0.5, zorder=0)
        ax.annotate(
            f"e1 ∥ {hkl_label(_direction(crystal, m), brackets='[]', hexagonal=hexagonal)}",
            (1.0, 0.0),
            xytext=(0, -14),
            textcoords="offset points",
            ha="right",
            color=SLATE,
            fontsize=6,
        )
        if window is not None:
            lo, hi = _radius(window[0]), _radius(window[1])
            band = Annulus((0, 0), hi, max(hi - lo, 1e-9), fc="none", ec=SLATE, hatch="////", lw=0, alpha=0.35)
            band.set_gid("tilt window")
            ax.add_patch(band)
        if tilt is not None:
            r = _radius(tilt)
            if tilt_sigma:
                r_in, r_out = _radius(tilt - tilt_sigma), _radius(tilt + tilt_sigma)
                if r_in <= 1e-9:
                    ax.add_patch(Circle((0, 0), r_out, fc=MIST, ec="none", alpha=0.6, gid="tilt band"))
                else:
                    ax.add_patch(Annulus((0, 0), r_out, r_out - r_in, fc=MIST, ec="none", alpha=0.6, gid="tilt band"))
            sigma_text = f" ± {tilt_sigma:.1f}°" if tilt_sigma else ""
            ax.add_patch(
                Circle(
                    (0, 0),
                    r,
                    fill=False,
                    ec="#000000",
                    lw=1.1,
                    ls="--",
                    gid="tilt ring",
                    label=f"measured tilt {tilt:.1f}°{sigma_text}",
                )
            )
        size = 9.0 if len(poles) < 60 else 7.0 if len(poles) < 150 else 5.0
        font = 6.0 if len(poles) < 60 else 5.0 if len(poles) < 150 else 4.0
        for family in families:
            mine = [p for p in poles if p.hkl == family]
            if not mine:
                continue
            xy = np.array([(p.x, p.y) for p in mine])
            if family in chosen:
                st = series_style(chosen[family])
                ax.scatter(
                    xy[:, 0],
                    xy[:, 1],
                    s=size * 5,
                    marker=st.marker,
                    c=st.colour,
                    edgecolors="#000000",
                    linewidths=0.6,
                    zorder=6,
                    gid=f"poles {hkl_text(family)} highlighted",
                    label=f"{hkl_label(family, hexagonal=hexagonal)}  {highlight_label} = {scores[family]:.2f}",
                )
            else:
                ax.scatter(
                    xy[:, 0],
                    xy[:, 1],
                    s=size,
                    marker="o",
                    c=MIST,
                    edgecolors=SLATE,
                    linewidths=0.5,
                    zorder=4,
                    gid=f"poles {hkl_text(family)}",
                )
            for p in mine:
                ax.annotate(
                    hkl_label(p.variant, brackets="", hexagonal=hexagonal),
                    (p.x, p.y),
                    xytext=(2.5, 2.5),
                    textcoords="offset points",
                    fontsize=font,
                    color="#000000" if family in chosen else SLATE,
                    gid="pole label",
                    zorder=7,
                )
        ax.scatter([0], [0], s=30, marker="+", c="#000000", linewidths=1.0, zorder=8, gid="mount")
        where = face_text(m, hexagonal)
        ax.set_title(title or f"Poles around the mount face {where} (stereographic, upper hemisphere)")
        handles, _ = ax.get_legend_handles_labels()
        if handles:
            ax.legend(loc="upper left", bbox_to_anchor=(0.0, 1.0), fontsize=6.5, handletextpad=0.3)
    return fig


def pole_figure(report: Any, crystal: Crystal, *, top: int = FIGURE_TOP, width_in: float = 5.2) -> Any:
    """The projection of a ``match`` or ``planes`` report.

    Parameters
    ----------
    report : MatchReport or PlanesReport
        ``match``: every candidate face (``report.faces``), the measured tilt
        with the sigma used, the ``top`` faces by probability highlighted.
        ``planes``: its faces around its mount (or (0 0 1) without one); with
        a tilt window, the window shaded and the faces inside it highlighted
        by cleavage rank (1 cleaves most easily).
    crystal : Crystal
        The crystal the report was made from.

    Returns
    -------
    matplotlib.figure.Figure
        See :func:`stereographic_projection`.
    """
    from termination.identification.likelihood import MatchReport
    from termination.reports import PlanesReport

    if isinstance(report, MatchReport):
        if report.mount is None:
            from termination.errors import MeasurementError

            raise MeasurementError("the pole figure needs the mount face (--mount H K L)")
        m = report.measurement
        probabilities = {f.hkl: f.probability for f in report.faces}
        return stereographic_projection(
            crystal,
            report.mount,
            [f.hkl for f in report.faces],
            tilt=None if m.tilt is None else m.tilt.value,
            tilt_sigma=None if m.tilt is None else m.tilt.sigma,
            highlight=probabilities,
            top=top,
            title=f"{report.structure.formula}: candidate poles around the mount "
            f"{face_text(report.mount, crystal.hexagonal_axes)}",
            width_in=width_in,
        )
    if isinstance(report, PlanesReport):
        mount = report.mount if report.mount is not None else (0, 0, 1)
        ranks: dict[HKL, float] = {}
        for w in report.window:
            ranks[w.hkl] = max(ranks.get(w.hkl, 0.0), 1.0 / w.cleavage_rank)
        where = "mount" if report.mount is not None else "face"
        return stereographic_projection(
            crystal,
            mount,
            [f.hkl for f in report.faces],
            highlight=ranks or None,
            highlight_label="1/rank",
            top=top,
            window=report.tilt_window,
            title=f"{report.structure.formula}: poles up to index {report.max_index} around the {where} "
            f"{face_text(mount, crystal.hexagonal_axes)}",
            width_in=width_in,
        )
    raise TypeError(f"pole_figure takes a MatchReport or a PlanesReport, got {type(report).__name__}")
