"""Polar surfaces: layer charges, dipole of the repeat unit, Tasker type and the compensating fraction.

The stack of a face (hkl) seen from a termination is the repeat unit of one
period d that starts at the cut above that termination
(:meth:`FaceTerminations.repeat_unit`).  With formal charges q_a on its atoms
and z_a their depth below the top layer (positive into the crystal, Å):

- layer charges sigma_i = sum of q_a over the atoms of layer i, per surface
  primitive cell (e),
- dipole mu = sum_a q_a z_a (e Å per surface cell; mu / A in e/Å),
- Tasker type: I if every layer is neutral, II if the layers are charged but
  mu = 0, III (polar) otherwise,
- compensating charge dq = mu / d (e per surface cell), the charge the top
  layer must gain (dq > 0) or lose (dq < 0) for the macroscopic field of a
  thick slab to vanish,
- compensation f = dq / Q, Q the charge of the top unit (or of the top layer
  when the top unit is neutral): f < 0 is the fraction of its sites to
  remove, f > 0 the fraction to add.

Sign convention: a slab of N repeat units with the cleaved termination on top
has the outward-normal dipole -N mu (pymatgen's ``Slab.dipole`` direction);
adding dq to the top layer and -dq to the bottom one adds N d dq and cancels
it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from fractions import Fraction
from typing import Literal, TypedDict, Unpack

import numpy as np

from termination.bulk.crystal import Crystal
from termination.bulk.elements import count_species
from termination.defaults import (
    CHARGE_TOL_E,
    COMPENSATION_LAYERS,
    DIPOLE_TOL_E_PER_ANGSTROM,
    FRACTION_TOL,
    MAX_CELL,
    MAX_PATTERNS,
    RELATIVE_EPS,
)
from termination.errors import ChargeError
from termination.surface.layers import cluster_layers
from termination.surface.miller import HKL, hkl_text
from termination.surface.reconstructions import (
    Reconstruction,
    _reconstructions,
    check_max_cell,
    compensation_layers,
)
from termination.surface.terminations import FaceTerminations, SurfaceAtoms
from termination.units import ANGSTROM, ANGSTROM2, E_ANGSTROM, E_PER_ANGSTROM, E

__all__ = [
    "CompensationSiteKind",
    "FacePolarity",
    "LayerCharge",
    "PolarityTolerances",
    "TaskerType",
    "TerminationPolarity",
    "face_is_polar",
    "face_polarity",
    "layer_charges",
    "termination_polarity",
]


#: Tasker's classification of a termination's repeat unit.
TaskerType = Literal["I", "II", "III"]
#: Which sites a compensation fraction counts.
CompensationSiteKind = Literal["top unit", "top layer"]


class PolarityTolerances(TypedDict, total=False):
    """Tolerances of :func:`termination_polarity` that :func:`face_polarity` and :func:`face_is_polar` pass on."""

    charge_tol_e: float
    dipole_tol_e_per_angstrom: float
    fraction_tol: float
    max_patterns: int


@dataclass(frozen=True)
class LayerCharge:
    """One atomic layer of the repeat unit: depth below the top layer (Å), atoms and charge per surface cell (e)."""

    depth: float = field(metadata=ANGSTROM)
    composition: dict[str, int]
    charge: float = field(metadata=E)


@dataclass(frozen=True)
class TerminationPolarity:
    """Polarity of one termination.

    Attributes
    ----------
    id, label : str
        As in :class:`~termination.surface.terminations.Termination`.
    tasker_type : str
        'I', 'II' or 'III'.
    layers : tuple of LayerCharge
        Layers of the repeat unit, top first.
    dipole : float
        mu = sum q_a z_a over the repeat unit, e Å per surface cell (z = depth).
    dipole_per_area : float
        mu / A, e/Å.
    compensating_charge : float
        dq = mu / d, e per surface cell.
    compensation : float or None
        dq / Q: fraction of the sites to remove (< 0) or add (> 0); 0 when
        non-polar; None when the top unit and top layer are neutral.
    site_kind : str or None
        'top unit' or 'top layer': which sites ``compensation`` counts.
    site_label : str or None
        One such site ('Na', 'B6').
    reconstructions : tuple of Reconstruction
        Best first.
    note : str or None
    """

    id: str
    label: str
    tasker_type: TaskerType
    layers: tuple[LayerCharge, ...]
    dipole: float = field(metadata=E_ANGSTROM)
    dipole_per_area: float = field(metadata=E_PER_ANGSTROM)
    compensating_charge: float = field(metadata=E)
    compensation: float | None
    site_kind: CompensationSiteKind | None
    site_label: str | None
    reconstructions: tuple[Reconstruction, ...]
    note: str | None


@dataclass(frozen=True)
class FacePolarity:
    """Polarity of a face: its inequivalent terminations; ``polar`` when all are Tasker type III.

    ``d`` is the period of the face (Å), ``area`` that of its surface primitive cell (Å²).
    """

    hkl: HKL
    d: float = field(metadata=ANGSTROM)
    area: float = field(metadata=ANGSTROM2)
    polar: bool
    terminations: tuple[TerminationPolarity, ...]


def layer_charges(ru: SurfaceAtoms, tol_angstrom: float) -> tuple[LayerCharge, ...]:
    """Layers of a repeat unit (single linkage in depth, top first) with their charges.

    Parameters
    ----------
    ru : SurfaceAtoms
        The repeat unit (:meth:`FaceTerminations.repeat_unit`).
    tol_angstrom : float
        Layer tolerance, Å.

    Returns
    -------
    tuple of LayerCharge
        Charges are 0 when the atoms carry none.
    """
    q = np.zeros(len(ru.species)) if ru.charges is None else np.asarray(ru.charges, dtype=float)
    if not len(ru.depth):
        return ()
    labels, _ = cluster_layers(ru.depth, None, tol_angstrom)
    out = []
    for k in range(int(labels.max()) + 1):
        idx = np.flatnonzero(labels == k)
        comp = count_species(ru.species[i] for i in idx)
        out.append(LayerCharge(depth=float(ru.depth[idx].mean()), composition=comp, charge=float(q[idx].sum())))
    return tuple(out)


def _fraction_text(f: float) -> str:
    """|f| as '1/4' when it is a simple fraction, else as a decimal."""
    fr = Fraction(abs(f)).limit_denominator(24)
    return f"{fr.numerator}/{fr.denominator}" if abs(float(fr) - abs(f)) < RELATIVE_EPS else f"{abs(f):.4g}"


def _nearest_note(recs: tuple[Reconstruction, ...], compensation: float, max_cell: int, kind: str) -> str:
    """What the nearest cells realise instead of the exact compensation, and where the rest must come from."""
    names: list[str] = []
    for r in recs:
        text = f"{r.name} ({r.residual_charge:+.3f} e per cell left)"
        if text not in names:
            names.append(text)
    shown = ", ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")
    return (
        f"no cell up to index {max_cell} realises {_fraction_text(compensation)} of the {kind} exactly; nearest: "
        f"{shown}; the remainder is left to electronic compensation or adsorbates"
    )


def termination_polarity(
    crystal: Crystal | None,
    face_terminations: FaceTerminations,
    termination_key: str,
    *,
    max_cell: int = MAX_CELL,
    charge_tol_e: float = CHARGE_TOL_E,
    dipole_tol_e_per_angstrom: float = DIPOLE_TOL_E_PER_ANGSTROM,
    fraction_tol: float = FRACTION_TOL,
    max_patterns: int = MAX_PATTERNS,
    with_reconstructions: bool = True,
    layers: int = COMPENSATION_LAYERS,
    keep_best: int | None = None,
) -> TerminationPolarity:
    """Layer charges, dipole, Tasker type, compensation and reconstructions of one termination.

    Parameters
    ----------
    crystal : Crystal or None
        Bulk crystal (for the termination's symmetry); may be None only when
        ``with_reconstructions`` is False.
    face_terminations : FaceTerminations
        Built from a crystal with charges (its atoms carry them).
    termination_key : str
        Termination id or label.
    max_cell : int
        Largest supercell index for reconstructions.
    charge_tol_e : float
        Layer charges below this (e per surface cell) count as neutral.
    dipole_tol_e_per_angstrom : float
        |mu| / A below this (e/Å) counts as no dipole.
    fraction_tol, max_patterns
        See :func:`termination.surface.reconstructions.reconstructions`.
    with_reconstructions : bool
        Skip the supercell search when False.
    layers : {1, 2}
        Layers (or units) from the top that may give the compensating charge
        (:func:`termination.surface.reconstructions.compensation_layers`).
    keep_best : int, optional
        List only the best ``keep_best`` cells that change the top layer
        alone and the best ``keep_best`` that change two layers (the same
        cells, in the same order, as at the head of each kind in the full
        list; the others are ranked but not described, and the note names
        only the cells listed).

    Returns
    -------
    TerminationPolarity
        With the reconstruction cells that realise the compensation, best
        first; when none up to ``max_cell`` does, the nearest ones (smallest
        residual charge first) and a note saying so.

    Notes
    -----
    With z_a the depth of atom a below the top layer over the repeat unit
    that starts at the cut above the termination,

        sigma_i = sum_{a in layer i} q_a,    mu = sum_a q_a z_a,    dq = mu / d,

    per surface primitive cell of area A.  Tasker type I: all sigma_i = 0;
    II: some sigma_i != 0 but mu = 0; III: mu != 0.  A slab of N repeat
    units has the outward dipole -N mu; moving dq from the bottom to the top
    layer cancels it (the layer-stack condition of Goniakowski et al.,
    sigma_top' = sigma_top + dq).  The compensation is f = dq / Q with Q the
    top unit's charge (the top layer's when the unit is neutral).  For a
    rock-salt (111) stack (+-sigma layers, spacing d/2) f = -1/2.  The charge
    dq may come from the top layer and the one below it
    (:func:`termination.surface.reconstructions.reconstructions`); where no
    cell realises it exactly, the nearest cells are listed and the remainder
    is left to electronic compensation or adsorbates.

    References
    ----------
    P. W. Tasker, J. Phys. C 12, 4977 (1979).
    J. Goniakowski, F. Finocchi and C. Noguera, Rep. Prog. Phys. 71, 016501 (2008).
    """
    ft = face_terminations
    n_cells = check_max_cell(max_cell)
    if with_reconstructions and crystal is None:
        raise TypeError("termination_polarity needs the crystal to search reconstructions")
    t = ft.termination(termination_key)
    ru = ft.repeat_unit(t.id)
    layer_rows = layer_charges(ru, ft.layer_tol_angstrom)
    area = ft.face.mesh.area
    d = ft.d
    if ru.charges is None:
        raise ChargeError(
            f"face {hkl_text(ft.face.hkl)}: the atoms carry no charges; build the terminations from a "
            "crystal with charges (Crystal.with_charges)"
        )
    q = np.asarray(ru.charges, dtype=float)
    mu = float(q @ ru.depth)
    dq = mu / d
    charged = any(abs(L.charge) > charge_tol_e for L in layer_rows)
    tasker: TaskerType
    if not charged:
        tasker = "I"
    elif abs(mu) / area <= dipole_tol_e_per_angstrom:
        tasker = "II"
    else:
        tasker = "III"
    note = None
    compensation: float | None = 0.0
    sites_kind: CompensationSiteKind | None = None
    site_label: str | None = None
    recs: tuple[Reconstruction, ...] = ()
    if tasker == "I" and abs(mu) / area > dipole_tol_e_per_angstrom:
        note = "neutral layers, but their rumpling gives the repeat unit a dipole"
    if tasker == "III":
        groups = compensation_layers(ft, t.id, "auto", charge_tol_e, layers)
        group = groups[0]
        # The atoms carry charges (checked above), so the sites do too.
        Q = 0.0 if group.charge is None else float(np.sum(group.charge))
        sites_kind = "top unit" if group.kind == "unit" else "top layer"
        site_label = group.label
        if abs(Q) <= charge_tol_e:
            compensation = None
            note = "the top unit and top layer are neutral: the compensation must come from deeper layers"
        else:
            compensation = round(dq / Q, 12)  # drop float noise: -0.25, not -0.24999999999999997
            if abs(compensation) >= 1 - fraction_tol:
                note = (
                    f"compensation needs {_fraction_text(compensation)} of the {sites_kind}: more than "
                    "these sites can give"
                )
            elif with_reconstructions and crystal is not None:
                if compensation > 0:
                    groups = groups[:1]
                recs = _reconstructions(
                    crystal, ft, t.id, compensation, n_cells, groups, fraction_tol, max_patterns, True, keep_best
                )
                if recs and not recs[0].exact:
                    note = _nearest_note(recs, compensation, n_cells, sites_kind)
                elif not recs:
                    note = f"no supercell up to index {n_cells} realises {_fraction_text(compensation)} of the sites"
    return TerminationPolarity(
        id=t.id,
        label=t.label,
        tasker_type=tasker,
        layers=layer_rows,
        dipole=mu,
        dipole_per_area=mu / area,
        compensating_charge=dq,
        compensation=compensation,
        site_kind=sites_kind,
        site_label=site_label,
        reconstructions=recs,
        note=note,
    )


def face_polarity(
    crystal: Crystal,
    face_terminations: FaceTerminations,
    *,
    max_cell: int = MAX_CELL,
    with_reconstructions: bool = True,
    **tolerances: Unpack[PolarityTolerances],
) -> FacePolarity:
    """Polarity of every inequivalent termination of one face.

    Parameters
    ----------
    crystal : Crystal
        With charges (see :func:`termination.bulk.charges.with_formal_charges`).
    face_terminations : FaceTerminations
        Built from that crystal.
    max_cell : int
    with_reconstructions : bool
    **tolerances
        ``charge_tol_e``, ``dipole_tol_e_per_angstrom``, ``fraction_tol``,
        ``max_patterns`` of :func:`termination_polarity`.

    Returns
    -------
    FacePolarity
        ``polar`` is True when every termination is Tasker type III.
    """
    ft = face_terminations
    rows = tuple(
        termination_polarity(
            crystal, ft, t.id, max_cell=max_cell, with_reconstructions=with_reconstructions, **tolerances
        )
        for t in ft.terminations
        if t.equivalent_to is None
    )
    return FacePolarity(
        hkl=ft.face.hkl,
        d=ft.d,
        area=ft.face.mesh.area,
        polar=all(r.tasker_type == "III" for r in rows),
        terminations=rows,
    )


def face_is_polar(face_terminations: FaceTerminations, **tolerances: Unpack[PolarityTolerances]) -> bool | None:
    """True when every termination of the face is Tasker type III; None when its atoms carry no charges.

    Cheap: no supercell search.  ``tolerances`` as in :func:`termination_polarity`.
    """
    ft = face_terminations
    if ft.atoms.charges is None:
        return None
    return all(
        termination_polarity(None, ft, t.id, with_reconstructions=False, **tolerances).tasker_type == "III"
        for t in ft.terminations
        if t.equivalent_to is None
    )
