"""Miller indices: validation and the way practitioners write faces and directions.

A face is written (h k l) with spaces, a direction [u v w].
"""

from __future__ import annotations

import numpy as np

from termination.algebra.integer import primitive_index
from termination.errors import PlaneError

__all__ = ["check_hkl", "hkl_text", "uvw_text"]


def hkl_text(hkl):
    """Miller index as practitioners write it in text.

    >>> hkl_text((1, -1, 0))
    '(1 -1 0)'
    """
    return "(" + " ".join(str(int(v)) for v in hkl) + ")"


def check_hkl(hkl, name="plane"):
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
    return primitive_index(ints)


def uvw_text(uvw):
    """Direction as practitioners write it in text.

    >>> uvw_text((1, -1, 0))
    '[1 -1 0]'
    """
    return "[" + " ".join(str(int(v)) for v in uvw) + "]"
