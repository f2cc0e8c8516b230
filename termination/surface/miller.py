"""Miller indices: validation and the way practitioners write faces and directions.

A face is written (h k l) with spaces, a direction [u v w].
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import SupportsFloat, SupportsInt

import numpy as np

from termination.algebra.integer import primitive_index
from termination.errors import PlaneError

__all__ = ["HKL", "check_hkl", "hkl_text", "hkl_tuple", "uvw_text"]

#: A Miller index (h, k, l) or a direction [u, v, w] as three Python ints.
HKL = tuple[int, int, int]


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


def check_hkl(hkl: Iterable[SupportsFloat], name: str = "plane") -> HKL:
    """Validate a Miller index and return it as a primitive tuple of ints.

    Non-primitive indices such as (0 0 2) are reduced to (0 0 1): the face is
    the same; the true plane spacing is set by the lattice centring.

    >>> check_hkl((0, 0, 2))
    (0, 0, 1)
    """
    try:
        values = [float(v) for v in hkl]
    except (TypeError, ValueError):
        raise PlaneError(f"{name} must be three integers, got {hkl!r}") from None
    if len(values) != 3 or not all(np.isfinite(values)) or any(v != int(v) for v in values):
        raise PlaneError(f"{name} must be three integers, got {hkl!r}")
    ints = [int(v) for v in values]
    if ints == [0, 0, 0]:
        raise PlaneError(f"{name} (0 0 0) is not a plane")
    return hkl_tuple(primitive_index(ints))


def uvw_text(uvw: Iterable[SupportsInt]) -> str:
    """Direction as practitioners write it in text.

    >>> uvw_text((1, -1, 0))
    '[1 -1 0]'
    """
    return "[" + " ".join(str(int(v)) for v in uvw) + "]"
