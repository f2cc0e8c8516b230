"""Miller indices: validation, Miller-Bravais indices of hexagonal lattices, and the way practitioners write both.

A face is written (h k l) with spaces, a direction [u v w].  In a lattice
with hexagonal axes (hexagonal and trigonal crystals; spglib gives
rhombohedral ones in hexagonal axes too) a face is written with four
Miller-Bravais indices (h k i l), i = -(h + k), and a direction as
[u v t w] with t = -(u + v); both are computed from the three-index forms,
which stay the ones every calculation uses.  ``three_index_notation()``
switches the written form back to three indices (``--three-index``).
"""

from __future__ import annotations

import contextlib
import contextvars
from collections.abc import Iterable, Iterator
from math import gcd
from typing import SupportsFloat, SupportsInt

import numpy as np

from termination.algebra.integer import primitive_index
from termination.defaults import MAX_FACE_INDEX
from termination.errors import PlaneError

__all__ = [
    "HKIL",
    "HKL",
    "check_hkl",
    "direction_text",
    "face_text",
    "from_four_index",
    "hkil_text",
    "hkl_text",
    "hkl_tuple",
    "three_index_notation",
    "to_four_index",
    "uvtw",
    "uvtw_text",
    "uvw_text",
]

#: A Miller index (h, k, l) or a direction [u, v, w] as three Python ints.
HKL = tuple[int, int, int]
#: A Miller-Bravais index (h, k, i, l) or a direction [u, v, t, w] as four Python ints.
HKIL = tuple[int, int, int, int]

_THREE_INDEX: contextvars.ContextVar[bool] = contextvars.ContextVar("three_index", default=False)


@contextlib.contextmanager
def three_index_notation(enabled: bool = True) -> Iterator[None]:
    """Within the block, :func:`face_text` and :func:`direction_text` write three indices for every lattice.

    The written form only (like ``numpy.printoptions``); results and JSON
    keep ``hkl`` and add ``hkil`` regardless.

    >>> with three_index_notation():
    ...     face_text((1, 0, 0), hexagonal=True)
    '(1 0 0)'
    >>> face_text((1, 0, 0), hexagonal=True)
    '(1 0 -1 0)'
    """
    token = _THREE_INDEX.set(bool(enabled))
    try:
        yield
    finally:
        _THREE_INDEX.reset(token)


def hkl_tuple(v: Iterable[SupportsInt]) -> HKL:
    """Three integers as an :data:`HKL` tuple; ``ValueError`` for any other length.

    >>> hkl_tuple([1, -1, 0])
    (1, -1, 0)
    """
    h, k, l = (int(x) for x in v)
    return h, k, l


def hkl_text(hkl: Iterable[SupportsInt]) -> str:
    """Miller index as practitioners write it in text.

    >>> hkl_text((1, -1, 0))
    '(1 -1 0)'
    """
    return "(" + " ".join(str(int(v)) for v in hkl) + ")"


def to_four_index(hkl: Iterable[SupportsInt]) -> HKIL:
    """Miller-Bravais index (h k i l) of the face (h k l) of a lattice with hexagonal axes: i = -(h + k).

    >>> to_four_index((1, 0, 0)), to_four_index((1, 1, 0))
    ((1, 0, -1, 0), (1, 1, -2, 0))
    """
    h, k, l = hkl_tuple(hkl)
    return h, k, -(h + k), l


def from_four_index(hkil: Iterable[SupportsFloat], name: str = "plane") -> HKL:
    """Three-index form (h k l) of a Miller-Bravais index (h k i l); PlaneError unless i = -(h + k).

    >>> from_four_index((1, 0, -1, 0))
    (1, 0, 0)
    """
    values = _integers(hkil, name, (4,))
    h, k, i, l = values
    if i != -(h + k):
        raise PlaneError(
            f"{name} ({h} {k} {i} {l}) is not a Miller-Bravais index: i must be -(h + k) = {-(h + k)}, got {i}"
        )
    return h, k, l


def hkil_text(hkl: Iterable[SupportsInt]) -> str:
    """Face (h k l) of a hexagonal lattice written with four indices.

    >>> hkil_text((1, 0, 0)), hkil_text((0, 0, 1))
    ('(1 0 -1 0)', '(0 0 0 1)')
    """
    return "(" + " ".join(str(v) for v in to_four_index(hkl)) + ")"


def uvtw(uvw: Iterable[SupportsInt]) -> HKIL:
    """Four-index direction [u v t w] of the direction [U V W] of a lattice with hexagonal axes.

    Notes
    -----
    u = (2U - V)/3, v = (2V - U)/3, t = -(u + v), w = W, scaled to the
    smallest integers (common practice).

    >>> uvtw((1, 0, 0)), uvtw((1, 1, 0)), uvtw((0, 0, 1))
    ((2, -1, -1, 0), (1, 1, -2, 0), (0, 0, 0, 1))
    """
    U, V, W = hkl_tuple(uvw)
    four = [2 * U - V, 2 * V - U, -(U + V), 3 * W]
    g = 0
    for x in four:
        g = gcd(g, abs(x))
    g = g or 1
    u, v, t, w = (x // g for x in four)
    return u, v, t, w


def uvw_text(uvw: Iterable[SupportsInt]) -> str:
    """Direction as practitioners write it in text.

    >>> uvw_text((1, -1, 0))
    '[1 -1 0]'
    """
    return "[" + " ".join(str(int(v)) for v in uvw) + "]"


def uvtw_text(uvw: Iterable[SupportsInt]) -> str:
    """Direction [U V W] of a hexagonal lattice written with four indices.

    >>> uvtw_text((1, 0, 0))
    '[2 -1 -1 0]'
    """
    return "[" + " ".join(str(v) for v in uvtw(uvw)) + "]"


def face_text(hkl: Iterable[SupportsInt], hexagonal: bool) -> str:
    """A face as practitioners write it: (h k i l) in a lattice with hexagonal axes, else (h k l).

    Inside :func:`three_index_notation` always (h k l).

    >>> face_text((1, 1, 0), hexagonal=True), face_text((1, 1, 0), hexagonal=False)
    ('(1 1 -2 0)', '(1 1 0)')
    """
    return hkil_text(hkl) if hexagonal and not _THREE_INDEX.get() else hkl_text(hkl)


def direction_text(uvw: Iterable[SupportsInt], hexagonal: bool) -> str:
    """A direction as practitioners write it: [u v t w] in a lattice with hexagonal axes, else [u v w].

    >>> direction_text((1, 0, 0), hexagonal=True)
    '[2 -1 -1 0]'
    """
    return uvtw_text(uvw) if hexagonal and not _THREE_INDEX.get() else uvw_text(uvw)


def _integers(values: Iterable[SupportsFloat], name: str, lengths: tuple[int, ...]) -> list[int]:
    """Finite whole numbers of one of the allowed counts, as ints; PlaneError naming ``name`` otherwise."""
    words = {3: "three integers (h k l)", 4: "four integers (h k i l)"}
    what = ", or ".join(words[n] for n in lengths)
    if lengths == (3, 4):
        what += " in hexagonal axes"
    try:
        floats = [float(v) for v in values]
    except (TypeError, ValueError):
        raise PlaneError(f"{name} must be {what}, got {values!r}") from None
    if len(floats) not in lengths or not all(np.isfinite(floats)) or any(v != int(v) for v in floats):
        raise PlaneError(f"{name} must be {what}, got {values!r}")
    ints = [int(v) for v in floats]
    # Checked before any work: a huge index makes huge surface cells (and overflows int64).
    if any(abs(v) > MAX_FACE_INDEX for v in ints):
        raise PlaneError(
            f"{name} ({' '.join(str(v) for v in ints)}): Miller indices must lie within ±{MAX_FACE_INDEX} "
            f"(MAX_FACE_INDEX), got {max(ints, key=abs)}"
        )
    return ints


def check_hkl(hkl: Iterable[SupportsFloat], name: str = "plane", hexagonal: bool | None = None) -> HKL:
    """Validate a Miller index and return it as a primitive tuple of ints (h, k, l).

    Non-primitive indices such as (0 0 2) are reduced to (0 0 1): the face is
    the same; the true plane spacing is set by the lattice centring.  Four
    values are a Miller-Bravais index (h k i l), accepted when i = -(h + k)
    and the lattice has hexagonal axes (``hexagonal`` True; None when the
    caller does not know the lattice).

    >>> check_hkl((0, 0, 2)), check_hkl((1, 0, -1, 0), hexagonal=True)
    ((0, 0, 1), (1, 0, 0))
    """
    ints = _integers(hkl, name, (3, 4))
    if len(ints) == 4:
        if hexagonal is False:
            raise PlaneError(
                f"{name} {hkl_text(ints)}: four (Miller-Bravais) indices apply to hexagonal and trigonal "
                "lattices only; give three indices (h k l)"
            )
        ints = list(from_four_index(ints, name))
    if ints == [0, 0, 0]:
        raise PlaneError(f"{name} (0 0 0) is not a plane")
    return hkl_tuple(primitive_index(ints))
