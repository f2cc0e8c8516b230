"""Array type aliases used in signatures across the package (spglib style).

Shapes are given in docstrings, e.g. ``positions : (N, 3) FloatArray,
fractional``.
"""

from __future__ import annotations

from typing import Any

import numpy as np
from numpy.typing import NDArray

__all__ = ["AnyArray", "BoolArray", "ComplexArray", "FloatArray", "IntArray"]

#: Array of float64.
FloatArray = NDArray[np.float64]
#: Array of int64 (or any signed integer).
IntArray = NDArray[np.int64]
#: Array of booleans.
BoolArray = NDArray[np.bool_]
#: Array of complex128.
ComplexArray = NDArray[np.complex128]
#: Array of any dtype.
AnyArray = NDArray[Any]
