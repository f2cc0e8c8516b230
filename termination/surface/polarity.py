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

from dataclasses import dataclass
from fractions import Fraction

import numpy as np

from termination.bulk.elements import count_species
from termination.defaults import CHARGE_TOL_E, DIPOLE_TOL_E_PER_ANGSTROM, FRACTION_TOL, MAX_CELL, MAX_PATTERNS
from termination.errors import ChargeError
from termination.surface.layers import cluster_layers
from termination.surface.miller import hkl_text
from termination.surface.reconstructions import (
    _reconstructions,
    check_max_cell,
    compensation_sites,
)

__all__ = [
    "FacePolarity",
    "LayerCharge",
    "TerminationPolarity",
    "face_is_polar",
    "face_polarity",
    "layer_charges",
    "termination_polarity",
]


@dataclass(frozen=True)
class LayerCharge:
    """One atomic layer of the repeat unit: depth below the top layer (Å), atoms and charge per surface cell (e)."""

    depth: float
    composition: dict
    charge: float


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
    tasker_type: str
    layers: tuple
    dipole: float
    dipole_per_area: float
    compensating_charge: float
    compensation: float | None
    site_kind: str | None
    site_label: str | None
    reconstructions: tuple
    note: str | None


@dataclass(frozen=True)
class FacePolarity:
    """Polarity of a face: its inequivalent terminations; ``polar`` when all are Tasker type III."""

    hkl: tuple
    d: float
    area: float
    polar: bool
    terminations: tuple


def layer_charges(ru, tol_angstrom):
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


def _fraction_text(f):
    fr = Fraction(abs(f)).limit_denominator(24)
    return f"{fr.numerator}/{fr.denominator}" if abs(float(fr) - abs(f)) < 1e-6 else f"{abs(f):.4g}"


def termination_polarity(
    crystal,
    face_terminations,
    termination_key,
    *,
    max_cell=MAX_CELL,
    charge_tol_e=CHARGE_TOL_E,
    dipole_tol_e_per_angstrom=DIPOLE_TOL_E_PER_ANGSTROM,
    fraction_tol=FRACTION_TOL,
    max_patterns=MAX_PATTERNS,
    with_reconstructions=True,
):
    """Layer charges, dipole, Tasker type, compensation and reconstructions of one termination.

    Parameters
    ----------
    crystal : Crystal
        Bulk crystal (for the termination's symmetry).
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

    Returns
    -------
    TerminationPolarity

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
    rock-salt (111) stack (+-sigma layers, spacing d/2) f = -1/2.

    References
    ----------
    P. W. Tasker, J. Phys. C 12, 4977 (1979).
    J. Goniakowski, F. Finocchi and C. Noguera, Rep. Prog. Phys. 71, 016501 (2008).
    """
    ft = face_terminations
    max_cell = check_max_cell(max_cell)
    t = ft.termination(termination_key)
    ru = ft.repeat_unit(t.id)
    layers = layer_charges(ru, ft.layer_tol_angstrom)
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
    charged = any(abs(L.charge) > charge_tol_e for L in layers)
    if not charged:
        tasker = "I"
    elif abs(mu) / area <= dipole_tol_e_per_angstrom:
        tasker = "II"
    else:
        tasker = "III"
    note = None
    compensation, sites_kind, site_label, recs = 0.0, None, None, ()
    if tasker == "I" and abs(mu) / area > dipole_tol_e_per_angstrom:
        note = "neutral layers, but their rumpling gives the repeat unit a dipole"
    if tasker == "III":
        group = compensation_sites(ft, t.id, "auto", charge_tol_e)
        Q = float(np.sum(group.charge))
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
            elif with_reconstructions:
                recs = _reconstructions(
                    crystal, ft, t.id, compensation, int(max_cell), group, fraction_tol, max_patterns
                )
                if not recs:
                    note = f"no supercell up to index {max_cell} realises {_fraction_text(compensation)} of the sites"
    return TerminationPolarity(
        id=t.id,
        label=t.label,
        tasker_type=tasker,
        layers=layers,
        dipole=mu,
        dipole_per_area=mu / area,
        compensating_charge=dq,
        compensation=compensation,
        site_kind=sites_kind,
        site_label=site_label,
        reconstructions=recs,
        note=note,
    )


def face_polarity(crystal, face_terminations, *, max_cell=MAX_CELL, with_reconstructions=True, **tolerances):
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


def face_is_polar(face_terminations, **tolerances):
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
