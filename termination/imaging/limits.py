"""Size limits of height maps: checked from a file's header before any data is read, and on arrays.

Time and memory grow in proportion to the pixel count: an 8192 x 8192 map,
the largest accepted, took about 80 s and 2.3 GiB on a 2-core machine
(``termination image`` on a map of ``tests/benchmarks/bench_heightmap.py``);
large maps show a progress bar and can be interrupted.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from pathlib import Path

from termination.errors import ImageError

__all__ = [
    "MAX_HEIGHT_ANGSTROM",
    "MAX_PIXELS",
    "MAX_PIXEL_ANGSTROM",
    "MAX_TEXT_BYTES",
    "MIN_PIXELS",
    "MIN_PIXEL_ANGSTROM",
    "check_declared",
]

#: Smallest accepted image side, pixels.
MIN_PIXELS = 8
#: Largest accepted image, pixels (8192 x 8192), checked from the file's header before decoding.
MAX_PIXELS = 8192 * 8192
#: Largest accepted text matrix, bytes.
MAX_TEXT_BYTES = 256 * 1024 * 1024
#: Largest accepted |height| after calibration, Å (1 mm: far beyond any scanner's range).
MAX_HEIGHT_ANGSTROM = 1e7
#: Smallest accepted pixel size, Å (0.1 pm).
MIN_PIXEL_ANGSTROM = 1e-3
#: Largest accepted pixel size, Å (100 µm).
MAX_PIXEL_ANGSTROM = 1e6


def check_declared(shape: Sequence[int], itemsize: int, available: float, path: Path) -> None:
    """Refuse a declared image larger than :data:`MAX_PIXELS` or than the bytes the file holds.

    Parameters
    ----------
    shape : sequence of int
        Dimensions the file's header declares.
    itemsize : int
        Bytes per stored number.
    available : int or float
        Bytes of data the file holds after its header (``math.inf`` when unknown).
    path : Path
        The file, named in the message.
    """
    if any(int(s) <= 0 for s in shape):
        raise ImageError(f"{path.name}: the header declares an empty image of shape {tuple(shape)}")
    pixels = math.prod(int(s) for s in shape)
    if pixels > MAX_PIXELS:
        raise ImageError(f"{path.name}: the header declares {pixels:,} pixels, more than the limit of {MAX_PIXELS:,}")
    if pixels * itemsize > available:
        raise ImageError(
            f"{path.name}: the header declares {pixels * itemsize:,} bytes of data but the file holds {available:,}"
        )
