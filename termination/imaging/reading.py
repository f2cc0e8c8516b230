"""Reading height maps and their calibration.

Supported files
---------------
``.npy``
    A 2-D NumPy array of real numbers.
``.txt``, ``.csv``, ``.dat``, ``.asc`` (any other suffix is read as text too)
    A plain-text matrix, one image row per line, numbers separated by
    whitespace or by commas; ``#`` starts a comment; ``nan`` marks a missing
    pixel.
``.tif``, ``.tiff``
    A single-channel TIFF of 8, 16 or 32-bit integers or 32/64-bit floats
    (read with ``tifffile``, imported only when needed).
``.sxm``, ``.nxs``/``.nx``/``.h5``/``.hdf5``, ``.ibw``
    Instrument files (Nanonis scans, NeXus/HDF5, Igor binary waves), with
    their calibration: see :mod:`termination.imaging.instruments`.

Missing pixels are NaN; the analysis leaves them out. Infinite values are
refused. Sizes are bounded before any data is read: at most
:data:`MAX_PIXELS` pixels (from the file's header), data no larger than the
file, text files of at most :data:`MAX_TEXT_BYTES`, heights within
:data:`MAX_HEIGHT_ANGSTROM` and pixel sizes within
[:data:`MIN_PIXEL_ANGSTROM`, :data:`MAX_PIXEL_ANGSTROM`].

Calibration
-----------
The numbers in a plain file are heights in some unit and the pixels have
some size; neither is stored reliably in these formats, so both are given
explicitly, as arguments or in a *sidecar* TOML file beside the image, with
the same name and the suffix ``.toml`` (``scan.npy`` -> ``scan.toml``)::

    # calibration of scan.npy
    pixel_size = "0.05nm"              # or ["0.05nm", "0.06nm"] for (x, y)
    z_unit = "nm"                      # nm, A (or Å), pm, m, or "0.01nm" per count

Arguments win over the sidecar, and the sidecar over an instrument file's
own metadata. ``pixel_size`` is the distance between pixel
centres along x (columns) and y (rows); ``z_unit`` is the length that one unit
of the stored numbers stands for, so integer TIFF counts are calibrated with
e.g. ``z_unit = "0.001nm"``. There are no defaults: an uncalibrated image is
an error, because a wrong unit would silently scale every step height.
"""

from __future__ import annotations

import contextlib
import logging
import math
import os
import re
import stat
import tomllib
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
from numpy.typing import ArrayLike

from termination.arrays import AnyArray, FloatArray
from termination.errors import ImageError
from termination.imaging.limits import (
    MAX_HEIGHT_ANGSTROM,
    MAX_PIXEL_ANGSTROM,
    MAX_PIXELS,
    MAX_TEXT_BYTES,
    MIN_PIXEL_ANGSTROM,
    MIN_PIXELS,
    check_declared,
)
from termination.quantities import LENGTH_UNITS_ANGSTROM, NUMBER_PATTERN, scaled

if TYPE_CHECKING:
    from termination.imaging.instruments import RawImage

__all__ = [
    "MAX_HEIGHT_ANGSTROM",
    "MAX_PIXELS",
    "MAX_PIXEL_ANGSTROM",
    "MAX_TEXT_BYTES",
    "MIN_PIXELS",
    "MIN_PIXEL_ANGSTROM",
    "HeightMap",
    "check_heights",
    "load_array",
    "parse_length",
    "parse_pixel_size",
    "parse_z_unit",
    "read_heightmap",
    "read_sidecar",
    "sidecar_path",
]


_LENGTH_RE = re.compile(rf"^\s*(?P<num>{NUMBER_PATTERN})?\s*(?P<unit>[A-Za-zÅµμ]+)?\s*$")
_PIXEL_TOKEN_RE = re.compile(rf"{NUMBER_PATTERN}\s*(?:[A-Za-wyzÅµμ][A-Za-zÅµμ]*)?")
_SIDECAR_KEYS = {"pixel_size", "z_unit"}
_TIFF_SUFFIXES = {".tif", ".tiff"}
_Z_UNIT_RANGE = (1e-12, 1e12)  # Å per stored unit


@dataclass(frozen=True, eq=False)
class HeightMap:
    """A calibrated height map.

    Parameters
    ----------
    heights : (ny, nx) ndarray of float64
        Heights in Å; NaN marks missing pixels. Row index is y, column index is x.
    pixel_size : tuple of 2 float
        Distance between pixel centres along x (columns) and y (rows), Å.
    path : str or None
        The file it was read from.
    channel, direction, scan_direction : str or None
        The channel read, ``forward``/``backward`` along the line, and
        ``up``/``down`` for the slow scan, when the file says.
    calibration : str
        Where the pixel size and the height unit came from: ``arguments``,
        ``sidecar``, ``file`` (the file's metadata), or two of them joined
        by ``+`` (pixel size first).
    """

    heights: np.ndarray
    pixel_size: tuple[float, float]
    path: str | None = None
    channel: str | None = None
    direction: str | None = None
    scan_direction: str | None = None
    calibration: str = "arguments"

    @property
    def shape(self) -> tuple[int, ...]:
        return self.heights.shape


def parse_length(text: str, *, what: str = "length") -> float:
    """Parse a length with a unit (``0.05nm``, ``0.5A``, ``0.5 Å``, ``50pm``) to Å.

    Parameters
    ----------
    text : str
        A positive number followed by one of pm, A, Å, angstrom, nm, um, m.
    what : str
        Name of the quantity, used in error messages.

    Returns
    -------
    float
        The length in Å.

    Raises
    ------
    ImageError
        If the unit is missing or unknown, or the number is not positive and finite.

    Examples
    --------
    >>> parse_length("0.05nm")
    0.5
    >>> parse_length("50 pm")
    0.5
    """
    value, unit = _split_length(text, what)
    if value is None:
        raise ImageError(f"{what} {text!r} needs a number, e.g. '0.05nm'")
    if unit is None:
        raise ImageError(f"{what} {text!r} needs a unit: pm, A, nm (e.g. '0.05nm')")
    return scaled(value, unit)


def _split_length(text: Any, what: str) -> tuple[str | None, str | None]:
    """(number text or None, unit or None) of a length written as text, both checked."""
    if not isinstance(text, str):
        raise ImageError(f"{what} must be text like '0.05nm', got {text!r}")
    match = _LENGTH_RE.match(text)
    if match is None or (match["num"] is None and match["unit"] is None):
        raise ImageError(f"cannot read {what} {text!r}; write e.g. '0.05nm', '0.5A' or '50pm'")
    unit = match["unit"]
    if unit is not None and unit.lower() not in LENGTH_UNITS_ANGSTROM:
        raise ImageError(f"unknown unit {unit!r} in {what} {text!r}; use pm, A, nm, um or m")
    value = match["num"]
    if value is not None:
        number = float(value)
        if not math.isfinite(number) or number <= 0:
            raise ImageError(f"{what} must be positive, got {text!r}")
    return value, unit


def parse_pixel_size(spec: Any) -> tuple[float, float]:
    """Pixel size along x and y in Å from text or numbers.

    Parameters
    ----------
    spec : str, float or sequence of two
        ``"0.05nm"`` (square pixels), ``"0.05nm,0.06nm"``, ``"0.05,0.06nm"``
        or ``"0.05x0.06nm"`` (x then y; a unit written only once applies to
        both), a sequence of two such strings, or numbers taken as Å.

    Returns
    -------
    tuple of 2 float
        (x, y) pixel size, Å.

    Raises
    ------
    ImageError
        For a missing unit, a non-positive size or more than two values.

    Examples
    --------
    >>> parse_pixel_size("0.05nm")
    (0.5, 0.5)
    >>> parse_pixel_size("0.5,0.6A")
    (0.5, 0.6)
    """
    what = "pixel size"
    if isinstance(spec, str):
        parts = [m.group(0) for m in _PIXEL_TOKEN_RE.finditer(spec)]
        if not parts or _PIXEL_TOKEN_RE.sub("", spec).strip(" \t,x×*") != "":
            raise ImageError(f"cannot read {what} {spec!r}; write e.g. '0.05nm' or '0.05nm,0.06nm'")
    elif isinstance(spec, (int, float)) and not isinstance(spec, bool):
        parts = [spec]
    else:
        try:
            parts = list(spec)
        except TypeError:
            raise ImageError(f"{what} must be text like '0.05nm', got {spec!r}") from None
    if not 1 <= len(parts) <= 2:
        raise ImageError(f"{what} takes one value or two (x, y), got {spec!r}")
    values, units = [], []
    for p in parts:
        if isinstance(p, str):
            v, u = _split_length(p, what)
        elif isinstance(p, (int, float)) and not isinstance(p, bool):
            v, u = repr(float(p)), "A"
            if not math.isfinite(p) or p <= 0:
                raise ImageError(f"{what} must be positive, got {p!r}")
        else:
            raise ImageError(f"{what} must be text like '0.05nm', got {p!r}")
        if v is None:
            raise ImageError(f"{what} {spec!r} needs a number, e.g. '0.05nm'")
        values.append(v)
        units.append(u)
    if units[-1] is None:
        raise ImageError(f"{what} {spec!r} needs a unit: pm, A, nm (e.g. '0.05nm')")
    units = [u if u is not None else units[-1] for u in units]
    sizes = [scaled(v, u) for v, u in zip(values, units)]
    if len(sizes) == 1:
        sizes *= 2
    for size in sizes:
        _check_pixel_angstrom(size, spec)
    return (float(sizes[0]), float(sizes[1]))


def _check_pixel_angstrom(size: float, spec: Any) -> None:
    if not MIN_PIXEL_ANGSTROM <= size <= MAX_PIXEL_ANGSTROM:
        raise ImageError(
            f"pixel size {spec!r} = {size:g} Å lies outside {MIN_PIXEL_ANGSTROM:g} to {MAX_PIXEL_ANGSTROM:g} Å"
        )


def parse_z_unit(spec: Any) -> float:
    """Length in Å that one unit of the stored heights stands for.

    Parameters
    ----------
    spec : str or float
        ``"nm"``, ``"A"`` (or ``"Å"``), ``"pm"``, ``"m"``, or a length such as
        ``"0.01nm"`` for integer counts; a number is taken as Å per unit.

    Returns
    -------
    float
        Å per stored unit.

    Examples
    --------
    >>> parse_z_unit("nm")
    10.0
    >>> parse_z_unit("0.5pm")
    0.005
    """
    if isinstance(spec, (int, float)) and not isinstance(spec, bool):
        value = float(spec)
        if not math.isfinite(value) or value <= 0:
            raise ImageError(f"z unit must be positive, got {spec!r}")
    else:
        number, unit = _split_length(spec, "z unit")
        if unit is None:
            raise ImageError(f"z unit {spec!r} needs a unit: nm, A or pm")
        value = scaled("1" if number is None else number, unit)
    if not _Z_UNIT_RANGE[0] <= value <= _Z_UNIT_RANGE[1]:
        raise ImageError(
            f"z unit {spec!r} = {value:g} Å per unit lies outside {_Z_UNIT_RANGE[0]:g} to {_Z_UNIT_RANGE[1]:g} Å"
        )
    return value


def sidecar_path(path: str | os.PathLike[str]) -> Path:
    """The calibration file beside an image: same name, suffix ``.toml``.

    >>> sidecar_path("data/scan.npy").name
    'scan.toml'
    """
    return Path(path).with_suffix(".toml")


def read_sidecar(path: str | os.PathLike[str]) -> dict[str, Any]:
    """Read a calibration sidecar TOML.

    Parameters
    ----------
    path : str or path-like
        The sidecar itself (see :func:`sidecar_path`).

    Returns
    -------
    dict
        With the keys that are present: ``pixel_size`` (tuple of 2 float, Å)
        and ``z_unit`` (float, Å per stored unit).

    Raises
    ------
    ImageError
        For malformed TOML, unknown keys or unreadable values.
    """
    path = Path(path)
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ImageError(f"cannot read calibration file {str(path)!r}: {exc.strerror}") from None
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise ImageError(f"{path}: malformed TOML: {exc}") from None
    unknown = set(data) - _SIDECAR_KEYS
    if unknown:
        raise ImageError(f"{path}: unknown key {sorted(unknown)[0]!r}; known keys are pixel_size, z_unit")
    out = {}
    for key in ("pixel_size", "z_unit"):
        # A bare TOML number has no unit; the file must say it, as --pixel-size and --z-unit do.
        values = data.get(key) if isinstance(data.get(key), list) else [data.get(key)]
        if any(isinstance(v, (int, float)) and not isinstance(v, bool) for v in values):
            raise ImageError(
                f"{path}: {key} = {data[key]!r} needs a unit, written as text, e.g. "
                + ('"0.05nm"' if key == "pixel_size" else '"nm"')
            )
    try:
        if "pixel_size" in data:
            out["pixel_size"] = parse_pixel_size(data["pixel_size"])
        if "z_unit" in data:
            out["z_unit"] = parse_z_unit(data["z_unit"])
    except ImageError as exc:
        raise ImageError(f"{path}: {exc}") from None
    return out


def check_heights(heights: ArrayLike, *, what: str = "height map", max_abs: float | None = None) -> FloatArray:
    """Convert to a float64 C-ordered 2-D array and refuse unusable images.

    Parameters
    ----------
    heights : array_like, (ny, nx)
        Real numbers; NaN marks missing pixels. Leading axes of length one
        are dropped.
    what : str
        Name used in error messages.
    max_abs : float, optional
        Largest accepted magnitude (heights in Å: :data:`MAX_HEIGHT_ANGSTROM`).

    Returns
    -------
    (ny, nx) ndarray of float64

    Raises
    ------
    ImageError
        For a shape that is not 2-D, fewer than ``MIN_PIXELS`` pixels a side,
        non-real values, infinite values, only NaN, or a constant image.
    """
    arr = np.asarray(heights)
    while arr.ndim > 2 and arr.shape[0] == 1:
        arr = arr[0]
    if arr.ndim != 2:
        raise ImageError(f"{what} must be a 2-D array (one channel), got {arr.ndim} dimensions, shape {arr.shape}")
    if arr.dtype.kind not in "iuf":
        raise ImageError(f"{what} must hold real numbers, got dtype {arr.dtype}")
    if min(arr.shape) < MIN_PIXELS:
        raise ImageError(f"{what} of shape {arr.shape} is too small; need at least {MIN_PIXELS} pixels a side")
    if arr.size > MAX_PIXELS:
        raise ImageError(f"{what} of shape {arr.shape} has more than the limit of {MAX_PIXELS:,} pixels")
    arr = np.ascontiguousarray(arr, dtype=np.float64)
    if np.isinf(arr).any():
        raise ImageError(f"{what} contains {int(np.isinf(arr).sum())} infinite values")
    n = int(np.count_nonzero(~np.isnan(arr)))
    if n == 0:
        raise ImageError(f"{what} holds only NaN: no height values")
    lo, hi = float(np.nanmin(arr)), float(np.nanmax(arr))
    if lo == hi:
        raise ImageError(f"{what} is constant (every height is {lo:g}): nothing to analyse")
    if max_abs is not None and max(abs(lo), abs(hi)) > max_abs:
        raise ImageError(
            f"{what} holds a height of {hi if abs(hi) > abs(lo) else lo:g} Å, beyond the limit of ±{max_abs:g} Å "
            "(check the z unit)"
        )
    return arr


def _regular_file(path: Path) -> int:
    """The size of ``path``, refusing what is not a regular file (a folder, a FIFO, a device)."""
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise ImageError(f"no such image file: {str(path)!r}") from None
    except OSError as exc:
        raise ImageError(f"cannot read {str(path)!r}: {exc.strerror}") from None
    if not stat.S_ISREG(st.st_mode):
        raise ImageError(f"{str(path)!r} is not a regular file")
    return st.st_size


def _load_npy(path: Path, size: int) -> AnyArray:
    """A .npy array, its header checked (shape, type, data size against the file) before the data is read."""
    from numpy.lib import format as npformat

    try:
        with open(path, "rb") as fh:
            version = npformat.read_magic(fh)
            if version == (1, 0):
                shape, fortran, dtype = npformat.read_array_header_1_0(fh, max_header_size=10_000)
            else:
                shape, fortran, dtype = npformat.read_array_header_2_0(fh, max_header_size=10_000)
            offset = fh.tell()
    except Exception as exc:  # a malformed header raises ValueError, SyntaxError, TokenError, ...
        raise ImageError(
            f"cannot read {str(path)!r} as a .npy array: malformed header ({type(exc).__name__})"
        ) from None
    if dtype.hasobject or dtype.kind not in "iuf" or dtype.subdtype is not None:
        raise ImageError(f"{path.name} must hold real numbers, got dtype {dtype}")
    check_declared(shape or (1,), dtype.itemsize, size - offset, path)
    data = np.fromfile(path, dtype=dtype, count=math.prod(shape), offset=offset)
    return data.reshape(shape, order="F" if fortran else "C")


@contextlib.contextmanager
def _quiet_logger(name: str) -> Iterator[None]:
    """Silence a library's logger (its warnings would add lines to a one-line error)."""
    logger = logging.getLogger(name)
    level, propagate = logger.level, logger.propagate
    logger.setLevel(logging.CRITICAL + 1)
    logger.propagate = False
    try:
        yield
    finally:
        logger.setLevel(level)
        logger.propagate = propagate


def _load_tiff(path: Path, size: int) -> AnyArray:
    try:
        import tifffile
    except ImportError:  # pragma: no cover - tifffile is a dependency
        raise ImageError("reading TIFF needs the tifffile package (pip install tifffile)") from None
    try:
        with _quiet_logger("tifffile"), tifffile.TiffFile(path) as tif:
            pages = tif.pages
            if len(pages) == 0:
                raise ImageError(f"{path.name}: the TIFF holds no image")
            page = pages.first
            shape = page.shape
            # the pixel count comes from the header: a small compressed file may expand enormously
            pixels = math.prod(shape) * max(len(pages), 1)
            check_declared((pixels,), 1, math.inf, path)
            if len(pages) > 1:
                return np.zeros((len(pages), *shape))  # refused as several channels by check_heights
            return page.asarray()
    except ImageError:
        raise
    except Exception as exc:  # tifffile raises several types for bad files
        raise ImageError(f"cannot read {str(path)!r} as TIFF: {exc}") from None


def load_raw(path: str | os.PathLike[str], channel: str | None = None) -> RawImage:
    """Read the numbers of one channel of a height-map file and the calibration it carries (none for plain files).

    Parameters
    ----------
    path : str or path-like
        ``.npy``, ``.tif``/``.tiff``, an instrument file (see
        :mod:`termination.imaging.instruments`) or a plain-text matrix.
    channel : str, optional
        Channel of an instrument file.

    Returns
    -------
    RawImage
        As stored (not yet checked; see :func:`check_heights`).

    Raises
    ------
    ImageError
        If the file is not a regular file, cannot be read or parsed, or
        declares more pixels or data than the limits or the file allow.
    """
    from termination.imaging.instruments import INSTRUMENT_SUFFIXES, RawImage, read_instrument_file

    path = Path(path)
    size = _regular_file(path)
    suffix = path.suffix.lower()
    if suffix in INSTRUMENT_SUFFIXES:
        return read_instrument_file(path, channel)
    if channel is not None:
        raise ImageError(f"{path.name} holds one channel; --channel applies to instrument files")
    if suffix == ".npy":
        return RawImage(_load_npy(path, size))
    if suffix in _TIFF_SUFFIXES:
        return RawImage(_load_tiff(path, size))
    if size > MAX_TEXT_BYTES:
        raise ImageError(f"{path.name}: a text matrix of {size:,} bytes is beyond the limit of {MAX_TEXT_BYTES:,}")
    return RawImage(_load_text(path))


def load_array(path: str | os.PathLike[str]) -> AnyArray:
    """The raw numbers of a single-channel height-map file (no calibration applied); see :func:`load_raw`."""
    return load_raw(path).data


def _load_text(path: Path) -> FloatArray:
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise ImageError(f"cannot read {str(path)!r}: not a text matrix (use .npy, .tif or text)") from None
    except OSError as exc:
        raise ImageError(f"cannot read {str(path)!r}: {exc.strerror}") from None
    lines = [ln.split("#", 1)[0].strip() for ln in text.splitlines()]
    lines = [ln for ln in lines if ln]
    if not lines:
        raise ImageError(f"{str(path)!r} holds no numbers")
    delimiter = "," if "," in lines[0] else None
    rows = [ln.rstrip(",").split(delimiter) for ln in lines]
    width = len(rows[0])
    for i, row in enumerate(rows):
        if len(row) != width:
            raise ImageError(f"{str(path)!r}: row {i + 1} has {len(row)} values, the first row has {width}")
    if width * len(rows) > MAX_PIXELS:
        raise ImageError(f"{path.name}: {width * len(rows):,} values, more than the limit of {MAX_PIXELS:,} pixels")
    try:
        return np.array([[float(v) for v in row] for row in rows], dtype=np.float64)
    except ValueError as exc:
        raise ImageError(f"{str(path)!r}: {exc}") from None


def read_heightmap(
    path: str | os.PathLike[str],
    *,
    pixel_size: Any = None,
    z_unit: Any = None,
    channel: str | None = None,
) -> HeightMap:
    """Read a height map and calibrate it to Å.

    Parameters
    ----------
    path : str or path-like
        Image file (see the module docstring for formats).
    pixel_size : str, float or sequence of two, optional
        Pixel size, e.g. ``"0.05nm"`` or ``("0.05nm", "0.06nm")``; numbers are Å.
        Overrides the sidecar and the file's metadata.
    z_unit : str or float, optional
        Unit of the stored heights (``"nm"``, ``"A"``, ``"pm"``, ``"0.01nm"``);
        a number is Å per unit. Overrides the sidecar and the file's metadata.
    channel : str, optional
        Channel of an instrument file (``Z``, ``Z:backward``, ...).

    Returns
    -------
    HeightMap
        Heights in Å, pixel size in Å, and what was read.

    Raises
    ------
    ImageError
        If the file is unreadable, its array unusable (see :func:`check_heights`),
        or the pixel size or z unit is given neither as an argument, nor in the
        sidecar ``<name>.toml``, nor in the file's metadata.

    Notes
    -----
    The file is only read, never modified.
    """
    path = Path(path)
    raw = load_raw(path, channel)
    side = sidecar_path(path)
    cal = read_sidecar(side) if side.is_file() and side != path else {}
    sources = []
    for given, key, from_file, parse in (
        (pixel_size, "pixel_size", raw.pixel_size, parse_pixel_size),
        (z_unit, "z_unit", raw.z_scale, parse_z_unit),
    ):
        if given is not None:
            sources.append(("arguments", parse(given)))
        elif key in cal:
            sources.append(("sidecar", cal[key]))
        elif from_file is not None:
            sources.append(("file", from_file))
        else:
            sources.append((None, None))
    (px_source, px), (z_source, zu) = sources
    if px is None:
        raise ImageError(
            f"pixel size of {path.name} unknown: pass --pixel-size (e.g. 0.05nm) or set pixel_size in {side.name}"
        )
    if zu is None:
        raise ImageError(f"height unit of {path.name} unknown: pass --z-unit nm|A|pm or set z_unit in {side.name}")
    if px_source == "file":
        for size in px:
            _check_pixel_angstrom(size, f"{size:g} Å from {path.name}")
    heights = check_heights(raw.data, what=path.name)
    heights *= zu
    check_heights(heights, what=path.name, max_abs=MAX_HEIGHT_ANGSTROM)
    return HeightMap(
        heights=heights,
        pixel_size=(float(px[0]), float(px[1])),
        path=str(path),
        channel=raw.channel,
        direction=raw.direction,
        scan_direction=raw.scan_direction,
        calibration=px_source if px_source == z_source else f"{px_source}+{z_source}",
    )
