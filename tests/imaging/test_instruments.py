"""Instrument files: Nanonis .sxm (own reader), NeXus/HDF5 (h5py) and Igor binary waves (igor2).

Each test writes a small file of the format itself, following the format's
published layout, and checks that the reader returns the same numbers with
the calibration the file carries.
"""

import math

import numpy as np
import pytest

from termination.errors import ImageError
from termination.imaging.reading import MAX_PIXELS, read_heightmap


def write_sxm(path, channels, *, nx, ny, range_m=(4e-9, 3e-9), scan_dir="up", both=True, extra=b""):
    """A Nanonis .sxm file: ':KEY:' header lines, ':SCANIT_END:', 1A 04, big-endian float32 per channel.

    ``channels`` maps name -> (unit, forward (ny, nx), backward (ny, nx) or None), with the images as
    they appear (x to the right); backward lines are stored in the order they were scanned (right to left)
    and a downward scan stores its top line first (Nanonis scan file layout, vendor manual).
    """
    rows = ["Channel\tName\tUnit\tDirection\tCalibration\tOffset"]
    data = b""
    for i, (name, (unit, fwd, bwd)) in enumerate(channels.items()):
        rows.append(f"{14 + i}\t{name}\t{unit}\t{'both' if both else 'forward'}\t1.000E+0\t0.000E+0")
        for img, backward in ((fwd, False), (bwd, True)):
            if img is None:
                continue
            stored = img[:, ::-1] if backward else img
            stored = stored[::-1] if scan_dir == "down" else stored
            data += np.ascontiguousarray(stored, dtype=">f4").tobytes()
    header = (
        ":NANONIS_VERSION:\n2\n"
        f":SCAN_PIXELS:\n       {nx}       {ny}\n"
        f":SCAN_RANGE:\n           {range_m[0]:.6E}           {range_m[1]:.6E}\n"
        f":SCAN_DIR:\n{scan_dir}\n"
        ":DATA_INFO:\n\t" + "\n\t".join(rows) + "\n\n"
        ":SCANIT_END:\n\n\n"
    )
    path.write_bytes(header.encode("latin-1") + b"\x1a\x04" + data + extra)
    return path


@pytest.fixture()
def images():
    rng = np.random.default_rng(5)
    return rng.normal(size=(12, 16)) * 1e-10, rng.normal(size=(12, 16)) * 1e-10


def test_sxm_channel_calibration_and_directions(tmp_path, images):
    fwd, bwd = images
    cur = np.ones((12, 16))
    path = write_sxm(tmp_path / "scan.sxm", {"Z": ("m", fwd, bwd), "Current": ("A", cur, cur)}, nx=16, ny=12)
    hm = read_heightmap(path)
    assert hm.channel == "Z" and hm.direction == "forward" and hm.calibration == "file"
    # 4 nm over 16 pixels and 3 nm over 12 pixels: 2.5 Å each (the header's SCAN_RANGE is in m)
    assert hm.pixel_size == pytest.approx((2.5, 2.5))
    assert np.allclose(hm.heights, fwd * 1e10, rtol=1e-6)  # float32 storage
    back = read_heightmap(path, channel="Z:backward")
    assert back.direction == "backward" and np.allclose(back.heights, bwd * 1e10, rtol=1e-6)
    with pytest.raises(ImageError, match="not a length"):
        read_heightmap(path, channel="Current")
    with pytest.raises(ImageError, match="no channel 'Bias'.*Z:forward"):
        read_heightmap(path, channel="Bias")


def test_sxm_downward_scan_is_flipped_so_rows_grow_with_y(tmp_path, images):
    fwd, _ = images
    up = read_heightmap(write_sxm(tmp_path / "up.sxm", {"Z": ("m", fwd, None)}, nx=16, ny=12, both=False))
    down = read_heightmap(
        write_sxm(tmp_path / "down.sxm", {"Z": ("m", fwd, None)}, nx=16, ny=12, both=False, scan_dir="down")
    )
    assert np.array_equal(up.heights, down.heights)
    assert (up.scan_direction, down.scan_direction) == ("up", "down")


def test_sxm_arguments_override_the_file_and_incomplete_scans_are_nan(tmp_path, images):
    fwd, bwd = images
    fwd = fwd.copy()
    fwd[8:] = np.nan  # an interrupted scan leaves NaN lines
    path = write_sxm(tmp_path / "scan.sxm", {"Z": ("m", fwd, bwd)}, nx=16, ny=12)
    hm = read_heightmap(path, pixel_size="1A", z_unit="nm")
    assert hm.pixel_size == (1.0, 1.0) and hm.calibration == "arguments"
    assert np.isnan(hm.heights[8:]).all() and np.allclose(hm.heights[:8], fwd[:8] * 10.0, rtol=1e-6)


@pytest.mark.parametrize(
    "mutate, fragment",
    [
        (lambda h: h.replace(b"16       12", b"99999    99999"), "more than the limit"),
        (lambda h: h.replace(b"16       12", b"64       64"), "file holds"),
        (lambda h: h.replace(b":SCANIT_END:", b":SCANIT_XXX:"), "not a Nanonis scan"),
        (lambda h: h.replace(b"4.000000E-09", b"-4.000000E-09"), "SCAN_RANGE must be positive"),
        (lambda h: h.replace(b"\tboth\t", b"\tsideways\t"), "sideways"),
    ],
)
def test_sxm_bad_headers_are_one_clear_error(tmp_path, images, mutate, fragment):
    fwd, bwd = images
    path = write_sxm(tmp_path / "scan.sxm", {"Z": ("m", fwd, bwd)}, nx=16, ny=12)
    path.write_bytes(mutate(path.read_bytes()))
    with pytest.raises(ImageError, match=fragment):
        read_heightmap(path)


def test_nexus_nxdata_signal_axes_and_units(tmp_path):
    h5py = pytest.importorskip("h5py")
    rng = np.random.default_rng(2)
    z = rng.normal(size=(10, 14))
    path = tmp_path / "scan.nxs"
    with h5py.File(path, "w") as f:
        # NeXus: NXentry/NXdata with @signal and @axes (slow axis first), units on every dataset
        entry = f.create_group("entry")
        entry.attrs["NX_class"] = "NXentry"
        data = entry.create_group("topography")
        data.attrs["NX_class"] = "NXdata"
        data.attrs["signal"] = "height"
        data.attrs["axes"] = ["y", "x"]
        h = data.create_dataset("height", data=z)
        h.attrs["units"] = "nm"
        data.create_dataset("y", data=np.arange(10) * 0.06).attrs["units"] = "nm"
        data.create_dataset("x", data=np.arange(14) * 0.05).attrs["units"] = "nm"
    hm = read_heightmap(path)
    assert hm.pixel_size == pytest.approx((0.5, 0.6))
    assert np.allclose(hm.heights, z * 10.0)
    assert hm.channel == "topography/height" and hm.calibration == "file"
    with pytest.raises(ImageError, match="no channel 'phase'"):
        read_heightmap(path, channel="phase")


def test_nexus_without_units_needs_the_calibration(tmp_path):
    h5py = pytest.importorskip("h5py")
    path = tmp_path / "scan.h5"
    with h5py.File(path, "w") as f:
        g = f.create_group("data")
        g.attrs["NX_class"] = "NXdata"
        g.attrs["signal"] = "z"
        g.create_dataset("z", data=np.arange(100.0).reshape(10, 10))
    with pytest.raises(ImageError, match="pixel size of scan.h5 unknown"):
        read_heightmap(path)
    assert read_heightmap(path, pixel_size="1A", z_unit="A").calibration == "arguments"


def test_igor_binary_wave_layers_scaling_and_units(tmp_path):
    igorwriter = pytest.importorskip("igorwriter")
    pytest.importorskip("igor2")
    rng = np.random.default_rng(3)
    trace, retrace = rng.normal(size=(16, 12)) * 1e-9, rng.normal(size=(16, 12)) * 1e-9
    # Igor layout: dimension 0 is x (fast scan, points per line), 1 is y (lines), 2 the channel layers
    wave = igorwriter.IgorWave(np.stack([trace, retrace], axis=2).astype(np.float32), name="scan")
    wave.set_dimscale("x", 0, 2e-10, "m")
    wave.set_dimscale("y", 0, 3e-10, "m")
    wave.set_datascale("m")
    wave.set_dimlabel(2, 0, "HeightTrace")
    wave.set_dimlabel(2, 1, "HeightRetrace")
    path = tmp_path / "scan.ibw"
    wave.save(str(path))
    hm = read_heightmap(path)
    assert hm.channel == "Height" and hm.direction == "forward"
    assert hm.pixel_size == pytest.approx((2.0, 3.0))
    assert hm.heights.shape == (12, 16)  # rows are scan lines
    assert np.allclose(hm.heights, trace.T * 1e10, rtol=1e-6)
    back = read_heightmap(path, channel="Height:backward")
    assert np.allclose(back.heights, retrace.T * 1e10, rtol=1e-6)


def test_missing_reader_library_names_the_extra(tmp_path, monkeypatch):
    import builtins

    real_import = builtins.__import__

    def no_h5py(name, *args, **kwargs):
        if name == "h5py":
            raise ImportError("no h5py")
        return real_import(name, *args, **kwargs)

    path = tmp_path / "scan.nxs"
    path.write_bytes(b"\x89HDF\r\n\x1a\n")
    monkeypatch.setattr(builtins, "__import__", no_h5py)
    with pytest.raises(ImageError, match=r"termination\[instruments\]"):
        read_heightmap(path, pixel_size="1A", z_unit="A")


# ----------------------------------------------------------------- bounds before decoding


def test_npy_headers_are_checked_before_the_data_is_read(tmp_path):
    good = tmp_path / "good.npy"
    np.save(good, np.zeros((16, 16)))
    raw = good.read_bytes()
    huge = tmp_path / "huge.npy"  # the header claims 800 MB in a 2 kB file
    huge.write_bytes(raw[:128].replace(b"'shape': (16, 16), ", b"'shape': (9999, 9999),") + raw[128:])
    with pytest.raises(ImageError, match="file holds|limit"):
        read_heightmap(huge, pixel_size="1A", z_unit="A")
    broken = tmp_path / "broken.npy"
    broken.write_bytes(raw[:10] + b"{'descr': '<f8', 'fortran_order': False, 'shape': (16, 16" + b" " * 60 + b"\n")
    with pytest.raises(ImageError, match="malformed header"):
        read_heightmap(broken, pixel_size="1A", z_unit="A")


def test_tiff_pixel_count_comes_from_the_header(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    side = int(math.isqrt(MAX_PIXELS)) + 8
    path = tmp_path / "big.tif"
    # a compressed TIFF of zeros is tiny on disk but would expand beyond the limit
    tifffile.imwrite(path, np.zeros((side, side), dtype=np.uint8), compression="zlib", tile=(256, 256))
    assert path.stat().st_size < 5_000_000
    with pytest.raises(ImageError, match="more than the limit"):
        read_heightmap(path, pixel_size="1A", z_unit="A")


@pytest.mark.parametrize("heights", [1e300, -1e300])
def test_huge_heights_are_refused(tmp_path, heights):
    path = tmp_path / "scan.npy"
    z = np.zeros((16, 16))
    z[3, 3] = heights
    np.save(path, z)
    with pytest.raises(ImageError, match="beyond the limit"):
        read_heightmap(path, pixel_size="1A", z_unit="A")


@pytest.mark.parametrize("size", ["5e-320A", "1e-20nm", "1e30m"])
def test_denormal_and_absurd_pixel_sizes_are_refused(size):
    from termination.imaging.reading import parse_pixel_size

    with pytest.raises(ImageError, match="outside"):
        parse_pixel_size(size)


def test_fifo_and_folders_are_not_read(tmp_path):
    import os

    fifo = tmp_path / "pipe.npy"
    os.mkfifo(fifo)
    with pytest.raises(ImageError, match="not a regular file"):
        read_heightmap(fifo, pixel_size="1A", z_unit="A")
    with pytest.raises(ImageError, match="not a regular file"):
        read_heightmap(tmp_path, pixel_size="1A", z_unit="A")
