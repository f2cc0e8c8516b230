"""Step heights between terraces of the terminations of one face.

A terrace of termination i with a terrace of termination j above it is
separated by a step of height

    h = delta_ij + n d,   delta_ij = (z_j - z_i) mod d,   n = 0, 1, 2, ...

with z the height of each termination's top layer along the outward normal
and d the period of the face.  An offset within the tolerance of d wraps to
0 (the two tops are the same plane one period apart), and a height within
the tolerance of 0 is no step.  This module is the one implementation of
that rule; the ``terminations`` table and the ``match`` likelihood both use
it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from termination.defaults import LENGTH_EPS_ANGSTROM
from termination.units import ANGSTROM

__all__ = ["AllowedStep", "StepHeights", "allowed_heights", "class_steps", "step_offset", "steps_from"]


@dataclass(frozen=True)
class StepHeights:
    """Allowed step heights from a terrace of ``from_label`` up to one of ``to_label`` (Å).

    ``from_ids`` and ``to_ids`` are the symmetry-equivalent terminations the
    labels stand for; ``heights`` are sorted.
    """

    from_label: str = field(metadata={"json": "from"})
    to_label: str = field(metadata={"json": "to"})
    from_ids: tuple[str, ...]
    to_ids: tuple[str, ...]
    heights: tuple[float, ...] = field(metadata=ANGSTROM)


@dataclass(frozen=True)
class AllowedStep:
    """One allowed step: a terrace of ``lower`` below one of ``upper``, ``multiple`` extra periods d."""

    lower: str
    upper: str
    multiple: int
    height: float = field(metadata=ANGSTROM)


def step_offset(z_lower: float, z_upper: float, d: float, tol_angstrom: float) -> float:
    """delta = (z_upper - z_lower) mod d, in [0, d); offsets within ``tol_angstrom`` of 0 or d are 0.

    Examples
    --------
    >>> step_offset(0.0, 1.0, 4.0, 0.1), step_offset(1.0, 0.0, 4.0, 0.1), step_offset(0.0, 3.95, 4.0, 0.1)
    (1.0, 3.0, 0.0)
    >>> step_offset(3.95, 0.0, 4.0, 0.1)
    0.0
    """
    tol = max(tol_angstrom, LENGTH_EPS_ANGSTROM)
    delta = (z_upper - z_lower) % d
    # Within the tolerance of 0 or of d the two tops are one plane (up to whole periods).
    return 0.0 if delta > d - tol or delta < tol else float(delta)


def allowed_heights(
    z_lower: float, z_upper: float, d: float, max_multiple: int, tol_angstrom: float
) -> list[tuple[int, float]]:
    """``(n, delta + n d)`` for n = 0 .. max_multiple, leaving out heights within the tolerance of 0.

    Examples
    --------
    >>> allowed_heights(0.0, 1.0, 4.0, 2, 0.1)
    [(0, 1.0), (1, 5.0), (2, 9.0)]
    >>> allowed_heights(0.0, 0.0, 4.0, 2, 0.1)
    [(1, 4.0), (2, 8.0)]
    """
    tol = max(tol_angstrom, LENGTH_EPS_ANGSTROM)
    delta = step_offset(z_lower, z_upper, d, tol)
    return [(n, delta + n * d) for n in range(max_multiple + 1) if delta + n * d > tol]


def steps_from(
    termination_id: str,
    tops: Mapping[str, float],
    d: float,
    max_multiple: int,
    tol_angstrom: float,
) -> list[AllowedStep]:
    """Every step a terrace of ``termination_id`` can make, up or down, to any termination.

    Parameters
    ----------
    termination_id : str
    tops : mapping
        Termination id -> height of its top layer in [0, d), Å.
    d : float
        Period, Å.
    max_multiple : int
    tol_angstrom : float
        Offsets and heights within this of d and 0 wrap (see the module notes).

    Returns
    -------
    list of AllowedStep
        Up steps (``lower`` is ``termination_id``) to every termination, then
        down steps (``upper`` is ``termination_id``) from every other one; a
        step between two terraces of the same termination is listed once.
    """
    z = tops[termination_id]
    out = [
        AllowedStep(termination_id, other, n, h)
        for other, z_other in tops.items()
        for n, h in allowed_heights(z, z_other, d, max_multiple, tol_angstrom)
    ]
    out += [
        AllowedStep(other, termination_id, n, h)
        for other, z_other in tops.items()
        if other != termination_id
        for n, h in allowed_heights(z_other, z, d, max_multiple, tol_angstrom)
    ]
    return out


def class_steps(
    classes: Sequence[tuple[str, Sequence[str]]],
    tops: Mapping[str, float],
    d: float,
    max_multiple: int,
    tol_angstrom: float,
) -> tuple[StepHeights, ...]:
    """Step heights for every ordered pair of classes of equivalent terminations.

    Parameters
    ----------
    classes : sequence of (label, ids)
        One entry per class of symmetry-equivalent terminations.
    tops, d, max_multiple, tol_angstrom
        As in :func:`steps_from`.

    Returns
    -------
    tuple of StepHeights
        Heights over every member pair, duplicates (to 1e-6 Å) merged, sorted.
    """
    out = []
    for label_a, ids_a in classes:
        for label_b, ids_b in classes:
            heights: dict[float, float] = {}
            for a in ids_a:
                for b in ids_b:
                    for _, h in allowed_heights(tops[a], tops[b], d, max_multiple, tol_angstrom):
                        heights.setdefault(round(h, 6), float(h))
            out.append(StepHeights(label_a, label_b, tuple(ids_a), tuple(ids_b), tuple(sorted(heights.values()))))
    return tuple(out)
