"""Cleavage ranking: faces ordered by the broken-bond density of their cheapest cut.

A crystal cleaves most easily along the face whose cheapest cut breaks the
fewest bonds per area.  The cost of a face is the weighted broken-bond
density w of its cheapest termination (bonds crossing the cut per nm²,
weighted by w = (r_i + r_j)/R, as in
:mod:`termination.surface.terminations`); a face whose cheapest cut crosses
a van der Waals gap breaks no bond and has w = 0, so it ranks first.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from termination.arrays import IntArray
from termination.defaults import CLEAVAGE_TIE_PER_NM2
from termination.surface.terminations import FaceTerminations

__all__ = ["cleavage_cost", "cleavage_ranks"]


def cleavage_cost(face_terminations: FaceTerminations) -> float:
    """Weighted broken-bond density of the face's cheapest cut, bonds per nm².

    Parameters
    ----------
    face_terminations : FaceTerminations

    Returns
    -------
    float
        min over the terminations t of w_t, with w_t = sum over the bonds
        crossing the cut of (r_i + r_j)/R, per nm²; 0 for a van der Waals gap.
    """
    return min(t.weighted_bonds_per_nm2 for t in face_terminations.terminations)


def cleavage_ranks(costs: Sequence[float], tie_per_nm2: float = CLEAVAGE_TIE_PER_NM2) -> IntArray:
    """Competition ranks of faces by cost: 1 for the cheapest; faces within ``tie_per_nm2`` share a rank.

    Parameters
    ----------
    costs : (F,) sequence of float
        :func:`cleavage_cost` of each face, bonds per nm².
    tie_per_nm2 : float
        Costs closer than this (per nm²) to the first cost of a group tie.

    Returns
    -------
    (F,) IntArray
        Rank of each face in input order ("1224" ranking: a tie shares the
        better rank and the next rank skips).

    Examples
    --------
    >>> cleavage_ranks([9.5, 0.0, 9.5, 12.1]).tolist()
    [2, 1, 2, 4]
    """
    c = np.asarray(costs, dtype=float)
    order = np.argsort(c, kind="stable")
    ranks = np.empty(len(c), dtype=np.int64)
    group_start = 0
    for position, i in enumerate(order):
        if position == 0 or c[i] - c[order[group_start]] > tie_per_nm2:
            group_start = position
        ranks[i] = group_start + 1
    return ranks
