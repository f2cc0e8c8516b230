"""Topographs in the files that microscope controllers write, with the calibration their metadata holds.

Supported formats
-----------------
``.sxm`` (Nanonis scan files)
    Read here: a text header of ``:KEY:`` lines ending with
    ``:SCANIT_END:``, the bytes ``1A 04``, then big-endian float32 data,
    channel by channel, each recorded forward and (when the header says
    ``both``) backward, one scan line after the other. Pixel size from
    ``SCAN_RANGE`` (m) and ``SCAN_PIXELS``; height unit from the channel's
    ``Unit`` column of ``DATA_INFO``; scan direction from ``SCAN_DIR``.
``.nxs``, ``.nx``, ``.h5``, ``.hdf5`` (NeXus / HDF5)
    Read with ``h5py`` (the ``instruments`` extra): an ``NXdata`` group
    whose ``signal`` attribute names a 2-D dataset with a ``units``
    attribute, and whose ``axes`` name 1-D coordinate datasets with units
    (y first, then x, as NeXus orders them).
``.ibw`` (Igor binary waves, as Asylum Research controllers save images)
    Read with ``igor2`` (the ``instruments`` extra): a 2-D or 3-D wave whose
    first dimension is the fast scan (x), the second the slow scan (y), and
    whose layers are channels named by the dimension labels
    (``HeightTrace``, ``HeightRetrace``, ...); pixel size and units from
    the dimension scaling.

Every reader checks the pixel count and the data size that the header
declares against :data:`~termination.imaging.limits.MAX_PIXELS` and the
file size before it reads any data. Images are returned with x along
columns increasing to the right and y along rows, one row per scan line;
backward lines are reversed so that they read left to right, and a
downward scan is flipped so that the row index grows with y.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from termination.errors import ImageError
from termination.imaging.limits import check_declared

__all__ = ["INSTRUMENT_SUFFIXES", "RawImage", "read_instrument_file"]

#: File suffixes read by this module, and the format each stands for.
INSTRUMENT_SUFFIXES = {
    ".sxm": "Nanonis scan",
    ".nxs": "NeXus",
    ".nx": "NeXus",
    ".h5": "NeXus/HDF5",
    ".hdf5": "NeXus/HDF5",
    ".ibw": "Igor binary wave",
}
_HEADER_LIMIT = 1 << 20  # a scan header is a few kB; more is not a header
_EXTRA = "pip install 'termination[instruments]'"


@dataclass(frozen=True, eq=False)
class RawImage:
    """One channel of an image file, before calibration.

    Parameters
    ----------
    data : (ny, nx) ndarray
        The stored numbers of the channel; NaN for pixels never recorded.
    pixel_size : (float, float) or None
        Pixel size along x and y from the file's metadata, Å.
    z_scale : float or None
        Å per stored unit from the file's metadata.
    channel : str or None
        Name of the channel read.
    direction : str or None
        ``"forward"`` or ``"backward"`` (the scan direction along the line).
    scan_direction : str or None
        ``"up"`` or ``"down"`` (the slow scan), when the file says.
    channels : tuple of str
        Every channel the file holds (``name`` or ``name:direction``).
    """

    data: np.ndarray
    pixel_size: tuple[float, float] | None = None
    z_scale: float | None = None
    channel: str | None = None
    direction: str | None = None
    scan_direction: str | None = None
    channels: tuple[str, ...] = ()


def _unit_angstrom(unit: str | None, what: str, path: Path) -> float | None:
    """Å per unit of a unit name (m, nm, pm, Å, ...); None for an empty unit."""
    from termination.quantities import LENGTH_UNITS_ANGSTROM

    u = (unit or "").strip()
    if not u:
        return None
    if u in ("A", "a"):
        # instrument metadata follow SI: A is the ampere (a current channel), never the ångström
        raise ImageError(f"{path.name}: {what} has unit {u!r} (ampere), not a length: it is not a height channel")
    key = u.lower().replace("ångström", "angstrom")
    if key in ("angstroms", "angstrom", "ang"):
        key = "angstrom"
    if key == "meter" or key == "metre" or key == "meters":
        key = "m"
    if key == "nanometer" or key == "nanometre":
        key = "nm"
    if key not in LENGTH_UNITS_ANGSTROM:
        raise ImageError(f"{path.name}: {what} has unit {u!r}, not a length: it is not a height channel")
    return float(LENGTH_UNITS_ANGSTROM[key])


def _pick(
    channels: list[tuple[str, str | None]], wanted: str | None, path: Path, default_names: tuple[str, ...]
) -> int:
    """Index of the requested channel (name, optionally ``name:forward`` or ``name:backward``)."""
    if wanted is None:
        for name in default_names:
            for i, (n, _d) in enumerate(channels):
                if n.lower() == name.lower():
                    return i
        listed = ", ".join(_label(c) for c in channels)
        raise ImageError(f"{path.name}: no height channel found; choose one with --channel ({listed})")
    name, _, direction = str(wanted).partition(":")
    direction = direction.strip().lower() or None
    if direction not in (None, "forward", "backward"):
        raise ImageError(f"channel direction must be forward or backward, got {wanted!r}")
    for i, (n, d) in enumerate(channels):
        if n.lower() == name.strip().lower() and (direction is None or d == direction):
            return i
    listed = ", ".join(_label(c) for c in channels)
    raise ImageError(f"{path.name}: no channel {wanted!r}; the file holds {listed}")


def _label(channel: tuple[str, str | None]) -> str:
    name, direction = channel
    return name if direction is None else f"{name}:{direction}"


# --------------------------------------------------------------------------- Nanonis .sxm


def _sxm_header(path: Path) -> tuple[dict[str, list[str]], int]:
    with open(path, "rb") as fh:
        head = fh.read(_HEADER_LIMIT)
    end = head.find(b":SCANIT_END:")
    if end < 0:
        raise ImageError(f"{path.name}: not a Nanonis scan file (no :SCANIT_END: in the first MiB)")
    start = head.find(b"\x1a\x04", end)
    if start < 0:
        raise ImageError(f"{path.name}: the header ends without the 1A 04 code before the data")
    text = head[:end].decode("latin-1")
    fields, key = {}, None
    for line in text.replace("\r\n", "\n").replace("\r", "\n").split("\n"):
        m = re.fullmatch(r":(.+):", line.strip())
        if m:
            key = m.group(1)
            fields[key] = []
        elif key is not None:
            fields[key].append(line)
    return fields, start + 2


def _sxm_numbers(fields: dict[str, list[str]], key: str, count: int, path: Path) -> list[float]:
    try:
        values = [float(v) for v in " ".join(fields[key]).split()]
    except KeyError:
        raise ImageError(f"{path.name}: header field {key} missing") from None
    except ValueError:
        raise ImageError(f"{path.name}: header field {key} is not numeric: {' '.join(fields[key])!r}") from None
    if len(values) < count or not all(math.isfinite(v) for v in values[:count]):
        raise ImageError(f"{path.name}: header field {key} needs {count} finite numbers, got {values!r}")
    return values[:count]


def _read_sxm(path: Path, channel: str | None) -> RawImage:
    fields, offset = _sxm_header(path)
    nx_f, ny_f = _sxm_numbers(fields, "SCAN_PIXELS", 2, path)
    if nx_f != int(nx_f) or ny_f != int(ny_f):
        raise ImageError(f"{path.name}: SCAN_PIXELS must be whole numbers, got {nx_f} {ny_f}")
    nx, ny = int(nx_f), int(ny_f)
    range_x, range_y = _sxm_numbers(fields, "SCAN_RANGE", 2, path)
    if not (range_x > 0 and range_y > 0):
        raise ImageError(f"{path.name}: SCAN_RANGE must be positive, got {range_x} {range_y} m")
    table = [ln.strip("\t ").split("\t") for ln in fields.get("DATA_INFO", []) if ln.strip()]
    if len(table) < 2:
        raise ImageError(f"{path.name}: no DATA_INFO channel table in the header")
    head = [h.strip().lower() for h in table[0]]
    try:
        i_name, i_unit, i_dir = head.index("name"), head.index("unit"), head.index("direction")
    except ValueError:
        raise ImageError(f"{path.name}: DATA_INFO needs Name, Unit and Direction columns, got {table[0]!r}") from None
    channels, units, blocks = [], [], []
    for row in table[1:]:
        if len(row) <= max(i_name, i_unit, i_dir):
            raise ImageError(f"{path.name}: DATA_INFO row {row!r} is short")
        kind = row[i_dir].strip().lower()
        directions = {"both": ("forward", "backward"), "forward": ("forward",), "backward": ("backward",)}.get(kind)
        if directions is None:
            raise ImageError(f"{path.name}: DATA_INFO direction {row[i_dir]!r} is not both, forward or backward")
        for d in directions:
            channels.append((row[i_name].strip(), d))
            units.append(row[i_unit].strip())
            blocks.append(len(blocks))
    size = os.path.getsize(path)
    check_declared((len(blocks), ny, nx), 4, size - offset, path)
    index = _pick(channels, channel, path, ("Z",))
    data = np.fromfile(path, dtype=">f4", count=ny * nx, offset=offset + 4 * ny * nx * blocks[index])
    data = data.reshape(ny, nx).astype(np.float64)
    name, direction = channels[index]
    if direction == "backward":
        data = data[:, ::-1]  # recorded right to left
    scan = " ".join(fields.get("SCAN_DIR", [])).strip().lower() or None
    if scan == "down":
        data = data[::-1]  # first line at the top: row index grows with y after the flip
    z_scale = _unit_angstrom(units[index], f"channel {name!r}", path)
    if z_scale is None:
        raise ImageError(f"{path.name}: channel {name!r} has no unit in DATA_INFO")
    px = (range_x * 1e10 / nx, range_y * 1e10 / ny)
    return RawImage(
        data=np.ascontiguousarray(data),
        pixel_size=px,
        z_scale=z_scale,
        channel=name,
        direction=direction,
        scan_direction=scan if scan in ("up", "down") else None,
        channels=tuple(_label(c) for c in channels),
    )


# --------------------------------------------------------------------------- NeXus / HDF5


def _attr_text(value: Any) -> Any:
    if isinstance(value, bytes):
        return value.decode("utf-8", "replace")
    if isinstance(value, np.ndarray):
        return [_attr_text(v) for v in value.tolist()]
    if isinstance(value, (list, tuple)):
        return [_attr_text(v) for v in value]
    return str(value)


def _read_nexus(path: Path, channel: str | None) -> RawImage:
    try:
        import h5py
    except ImportError:
        raise ImageError(f"reading {path.suffix} files needs h5py: {_EXTRA}") from None
    try:
        fh = h5py.File(path, "r")
    except OSError as exc:
        raise ImageError(f"cannot read {path.name} as HDF5: {exc}") from None
    with fh:
        groups = []

        def visit(name: str, obj: Any) -> None:
            if isinstance(obj, h5py.Group) and _attr_text(obj.attrs.get("NX_class", "")) == "NXdata":
                groups.append((name, obj))

        fh.visititems(visit)
        found = []
        for gname, group in groups:
            signal = group.attrs.get("signal")
            if signal is None or _attr_text(signal) not in group:
                continue
            ds = group[_attr_text(signal)]
            if isinstance(ds, h5py.Dataset) and len([s for s in ds.shape if s != 1]) == 2:
                found.append((gname, group, _attr_text(signal)))
        if not found:
            raise ImageError(f"{path.name}: no NXdata group with a 2-D signal")
        names = [(f"{g.rsplit('/', 1)[-1]}/{s}", None) for g, _, s in found]
        if channel is None:
            index = 0
        else:
            wanted = str(channel).strip().lower()
            matches = [
                i
                for i, (g, _, s) in enumerate(found)
                if wanted in (s.lower(), g.lower(), g.rsplit("/", 1)[-1].lower(), f"{g.rsplit('/', 1)[-1]}/{s}".lower())
            ]
            if not matches:
                raise ImageError(
                    f"{path.name}: no channel {channel!r}; the file holds {', '.join(n for n, _ in names)}"
                )
            index = matches[0]
        gname, group, signal = found[index]
        ds = group[signal]
        if ds.dtype.kind not in "iuf":
            raise ImageError(f"{path.name}: signal {signal!r} holds {ds.dtype}, not real numbers")
        check_declared(ds.shape, ds.dtype.itemsize, math.inf, path)
        data = np.asarray(ds[()], dtype=np.float64)
        while data.ndim > 2 and data.shape[0] == 1:
            data = data[0]
        data = data.reshape([s for s in data.shape if s != 1]) if data.ndim > 2 else data
        z_scale = _unit_angstrom(_attr_text(ds.attrs.get("units", "")), f"signal {signal!r}", path)
        axes = group.attrs.get("axes")
        px = None
        if axes is not None:
            axes = _attr_text(axes)
            axes = [axes] if isinstance(axes, str) else list(axes)
            if len(axes) == 2 and all(a in group for a in axes):
                sizes = []
                for a in axes[::-1]:  # NeXus lists the slow axis (y) first
                    coord = np.asarray(group[a][()], dtype=np.float64).ravel()
                    scale = _unit_angstrom(_attr_text(group[a].attrs.get("units", "")), f"axis {a!r}", path)
                    if coord.size < 2 or scale is None:
                        sizes = None
                        break
                    step = np.diff(coord)
                    if not np.all(np.isfinite(step)) or np.any(step == 0):
                        raise ImageError(f"{path.name}: axis {a!r} is not a monotonic coordinate")
                    sizes.append(abs(float(np.mean(step))) * scale)
                if sizes:
                    px = (sizes[0], sizes[1])
                    if _coord_decreasing(group, axes[0]):
                        data = data[::-1]
    return RawImage(
        data=np.ascontiguousarray(data),
        pixel_size=px,
        z_scale=z_scale,
        channel=f"{gname.rsplit('/', 1)[-1]}/{signal}",
        channels=tuple(n for n, _ in names),
    )


def _coord_decreasing(group: Any, name: str) -> bool:
    """True when the coordinate dataset ``name`` of ``group`` runs downwards."""
    coord = np.asarray(group[name][()], dtype=np.float64).ravel()
    return coord.size > 1 and coord[-1] < coord[0]


# --------------------------------------------------------------------------- Igor binary waves


def _read_ibw(path: Path, channel: str | None) -> RawImage:
    try:
        from igor2 import binarywave
    except ImportError:
        raise ImageError(f"reading .ibw files needs igor2: {_EXTRA}") from None
    # the wave header declares the dimensions before the data: check them first
    with open(path, "rb") as fh:
        head = fh.read(512)
    shape, itemsize = _ibw_declared(head, path)
    check_declared(shape, itemsize, os.path.getsize(path), path)
    try:
        wave = binarywave.load(str(path))["wave"]
    except Exception as exc:  # igor2 raises several types for bad files
        raise ImageError(f"cannot read {path.name} as an Igor binary wave: {exc}") from None
    data = np.asarray(wave["wData"])
    if data.dtype.kind not in "iuf":
        raise ImageError(f"{path.name}: the wave holds {data.dtype}, not real numbers")
    if data.ndim == 2:
        data = data[:, :, None]
    if data.ndim != 3:
        raise ImageError(f"{path.name}: an image wave has 2 or 3 dimensions, this one {data.ndim}")
    labels = wave.get("labels") or []
    layer_labels = [_attr_text(v) for v in labels[2][1:]] if len(labels) > 2 and labels[2] else []
    channels = []
    for i in range(data.shape[2]):
        label = layer_labels[i] if i < len(layer_labels) and layer_labels[i] else f"layer{i}"
        m = re.fullmatch(r"(.+?)(Retrace|Trace)", label)
        if m:
            channels.append((m.group(1), "backward" if m.group(2) == "Retrace" else "forward"))
        else:
            channels.append((label, None))
    index = _pick(channels, channel, path, ("Height", "ZSensor", "layer0"))
    header = wave["wave_header"]
    sfa = [float(v) for v in header["sfA"][:2]]
    dim_units = [_attr_text(u) for u in np.asarray(header["dimUnits"])[:2, 0]]
    data_units = _attr_text(np.asarray(header["dataUnits"])[0])
    px = None
    scales = [_unit_angstrom(u, "image axis", path) for u in dim_units]
    if all(s is not None for s in scales) and all(v > 0 and math.isfinite(v) for v in sfa):
        px = (sfa[0] * scales[0], sfa[1] * scales[1])
    z_scale = _unit_angstrom(data_units, f"channel {channels[index][0]!r}", path)
    image = np.ascontiguousarray(data[:, :, index].T.astype(np.float64))
    return RawImage(
        data=image,
        pixel_size=px,
        z_scale=z_scale,
        channel=channels[index][0],
        direction=channels[index][1],
        channels=tuple(_label(c) for c in channels),
    )


def _ibw_declared(head: bytes, path: Path) -> tuple[list[int], int]:
    """(shape, item size) that a version-5 Igor binary wave header declares."""
    if len(head) < 64 + 320:
        raise ImageError(f"{path.name}: too short for an Igor binary wave")
    for order in ("<", ">"):
        version = int(np.frombuffer(head[:2], dtype=f"{order}i2")[0])
        if version == 5:
            break
    else:
        raise ImageError(f"{path.name}: not a version-5 Igor binary wave")
    # WaveHeader5 after the 64-byte BinHeader5: type (int16) at 16, nDim (4 x int32) at 68;
    # type codes: 2 float32, 4 float64, 8 int8, 16 int16, 32 int32, +64 unsigned, +1 complex
    wtype = int(np.frombuffer(head[64 + 16 : 64 + 18], dtype=f"{order}i2")[0])
    dims = [int(v) for v in np.frombuffer(head[64 + 68 : 64 + 84], dtype=f"{order}i4")]
    itemsize = {2: 4, 4: 8, 8: 1, 16: 2, 32: 4}.get(wtype & 0x3E)
    if itemsize is None or wtype & 0x01:
        raise ImageError(f"{path.name}: the wave's number type {wtype} is not a real number type")
    shape = [d for d in dims if d > 0] or [0]
    return shape, itemsize


# --------------------------------------------------------------------------- dispatch


def read_instrument_file(path: Path, channel: str | None = None) -> RawImage:
    """Read one channel of an instrument file (see the module docstring for the formats).

    Parameters
    ----------
    path : Path
        The file; its suffix selects the format.
    channel : str, optional
        Channel name, optionally with ``:forward`` or ``:backward``
        (default: the height channel, forward).

    Returns
    -------
    RawImage

    Raises
    ------
    ImageError
        For a malformed file, a declared size beyond the limits or the
        file, an unknown channel, or a missing reader library.
    """
    suffix = path.suffix.lower()
    if suffix == ".sxm":
        return _read_sxm(path, channel)
    if suffix in (".nxs", ".nx", ".h5", ".hdf5"):
        return _read_nexus(path, channel)
    if suffix == ".ibw":
        return _read_ibw(path, channel)
    raise ImageError(f"{path.name}: {suffix} is not an instrument format")
