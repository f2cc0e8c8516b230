"""A corpus of bad or odd height-map inputs for `termination image`: files of every format and option values.

Used by the fast seeded subset in ``test_fuzz_images.py`` and by the long run
``tests/benchmarks/fuzz_images.py``. Each case is (name, file builder, extra
options); a builder writes its file into a folder and returns the path. Every
case must end with exit code 2, one line on stderr, and the input unchanged.
"""

import os

import numpy as np

from tests.imaging.test_instruments import write_sxm

GOOD_OPTIONS = ["--pixel-size", "0.5A", "--z-unit", "A"]


def _npy(name, array):
    def build(folder):
        path = folder / name
        np.save(path, array)
        return path

    return build


def _bytes(name, data):
    def build(folder):
        path = folder / name
        path.write_bytes(data)
        return path

    return build


def _npy_header(name, replace):
    def build(folder):
        path = folder / name
        np.save(path, np.zeros((16, 16)))
        raw = path.read_bytes()
        path.write_bytes(replace(raw))
        return path

    return build


def _tiff(name, array, **kwargs):
    def build(folder):
        import tifffile

        path = folder / name
        tifffile.imwrite(path, array, **kwargs)
        return path

    return build


def _sxm(name, mutate=lambda b: b, **kwargs):
    def build(folder):
        rng = np.random.default_rng(0)
        img = rng.normal(size=(16, 16)) * 1e-10
        path = write_sxm(folder / name, {"Z": ("m", img, img)}, nx=16, ny=16, **kwargs)
        path.write_bytes(mutate(path.read_bytes()))
        return path

    return build


def _fifo(folder):
    path = folder / "pipe.npy"
    os.mkfifo(path)
    return path


def _folder(folder):
    path = folder / "dir.npy"
    path.mkdir()
    return path


def _hdf5(name, make):
    def build(folder):
        import h5py

        path = folder / name
        with h5py.File(path, "w") as f:
            make(f)
        return path

    return build


def _nxdata_3d(f):
    g = f.create_group("data")
    g.attrs["NX_class"] = "NXdata"
    g.attrs["signal"] = "z"
    g.create_dataset("z", data=np.zeros((3, 8, 8)))


def _nxdata_text(f):
    g = f.create_group("data")
    g.attrs["NX_class"] = "NXdata"
    g.attrs["signal"] = "z"
    g.create_dataset("z", data=np.array([b"a"] * 64).reshape(8, 8))


def _good_npy(folder):
    rng = np.random.default_rng(1)
    path = folder / "good.npy"
    np.save(path, rng.normal(size=(32, 32)))
    return path


def cases():
    """Every case of the corpus: (name, builder, options)."""
    nan_rows = np.random.default_rng(2).normal(size=(32, 32))
    nan_rows[::2] = np.nan
    nan_rows[1::4] = np.nan
    inf = np.ones((16, 16))
    inf[3, 3] = np.inf
    huge = np.zeros((16, 16))
    huge[2, 2] = 1e300
    out = [
        ("npy random bytes", _bytes("junk.npy", bytes(range(256)) * 3), GOOD_OPTIONS),
        ("npy empty file", _bytes("empty.npy", b""), GOOD_OPTIONS),
        ("npy truncated data", _npy_header("trunc.npy", lambda b: b[:200]), GOOD_OPTIONS),
        (
            "npy header of 800 MB",
            _npy_header("claims.npy", lambda b: b.replace(b"'shape': (16, 16), ", b"'shape': (9999, 9999),")),
            GOOD_OPTIONS,
        ),
        ("npy header of 80 GB", _npy_header("claims80.npy", lambda b: b.replace(b"(16, 16), ", b"(99999, 99999)")), []),
        (
            "npy unterminated header",
            _npy_header("tok.npy", lambda b: b.replace(b"(16, 16)", b"(16, 16 ")),
            GOOD_OPTIONS,
        ),
        ("npy header not a dict", _npy_header("notdict.npy", lambda b: b.replace(b"{", b"[")), GOOD_OPTIONS),
        ("npy object dtype", _npy_header("obj.npy", lambda b: b.replace(b"'<f8'", b"'|O' ")), GOOD_OPTIONS),
        ("npy complex", _npy("complex.npy", np.ones((16, 16), dtype=complex)), GOOD_OPTIONS),
        ("npy 3-D stack", _npy("stack.npy", np.zeros((3, 16, 16))), GOOD_OPTIONS),
        ("npy 1-D", _npy("line.npy", np.arange(100.0)), GOOD_OPTIONS),
        ("npy 4 x 4", _npy("tiny.npy", np.arange(16.0).reshape(4, 4)), GOOD_OPTIONS),
        ("npy all NaN", _npy("nan.npy", np.full((16, 16), np.nan)), GOOD_OPTIONS),
        ("npy 75 % NaN", _npy("mostlynan.npy", nan_rows), GOOD_OPTIONS),
        ("npy infinite pixel", _npy("inf.npy", inf), GOOD_OPTIONS),
        ("npy 1e300 height", _npy("huge.npy", huge), GOOD_OPTIONS),
        ("npy constant", _npy("const.npy", np.full((16, 16), 3.0)), GOOD_OPTIONS),
        ("text ragged", _bytes("ragged.txt", b"1 2 3\n4 5\n" * 8), GOOD_OPTIONS),
        ("text words", _bytes("words.txt", b"a b c\n" * 8), GOOD_OPTIONS),
        ("text binary", _bytes("bin.txt", bytes(range(128, 256)) * 4), GOOD_OPTIONS),
        ("text comments only", _bytes("comments.txt", b"# nothing\n\n"), GOOD_OPTIONS),
        ("tiff random bytes", _bytes("junk.tif", b"II*\x00" + bytes(range(256)) * 4), GOOD_OPTIONS),
        ("tiff RGB", _tiff("rgb.tif", np.zeros((16, 16, 3), dtype=np.uint8), photometric="rgb"), GOOD_OPTIONS),
        (
            "tiff 12288² compressed",
            _tiff("big.tif", np.zeros((12288, 12288), dtype=np.uint8), compression="zlib", tile=(512, 512)),
            GOOD_OPTIONS,
        ),
        ("sxm without end tag", _sxm("noend.sxm", lambda b: b.replace(b":SCANIT_END:", b":SCANIT_XXX:")), []),
        ("sxm truncated data", _sxm("trunc.sxm", lambda b: b[:-100]), []),
        ("sxm 10^10 pixels", _sxm("huge.sxm", lambda b: b.replace(b"16       16", b"99999    99999")), []),
        ("sxm negative range", _sxm("neg.sxm", lambda b: b.replace(b"4.000000E-09", b"-4.000000E-09")), []),
        ("sxm NaN range", _sxm("nanrange.sxm", lambda b: b.replace(b"4.000000E-09", b"nan         ")), []),
        ("sxm denormal range", _sxm("denorm.sxm", lambda b: b.replace(b"4.000000E-09", b"4.0000E-320 ")), []),
        ("sxm no channel table", _sxm("notable.sxm", lambda b: b.replace(b":DATA_INFO:", b":DATA_XXXX:")), []),
        ("sxm unknown channel", _sxm("chan.sxm"), ["--channel", "Bias"]),
        ("sxm bad direction", _sxm("dir.sxm"), ["--channel", "Z:sideways"]),
        ("nexus random bytes", _bytes("junk.nxs", b"\x89HDF\r\n\x1a\n" + bytes(200)), GOOD_OPTIONS),
        ("nexus no NXdata", _hdf5("empty.nxs", lambda f: f.create_group("entry")), GOOD_OPTIONS),
        ("nexus 3-D signal", _hdf5("cube.nxs", _nxdata_3d), GOOD_OPTIONS),
        ("nexus text signal", _hdf5("text.nxs", _nxdata_text), GOOD_OPTIONS),
        ("ibw random bytes", _bytes("junk.ibw", b"\x05\x00" + bytes(500)), GOOD_OPTIONS),
        ("ibw short", _bytes("short.ibw", b"\x05\x00"), GOOD_OPTIONS),
        ("FIFO", _fifo, GOOD_OPTIONS),
        ("folder", _folder, GOOD_OPTIONS),
        ("missing file", lambda folder: folder / "missing.npy", GOOD_OPTIONS),
    ]
    for value in ["0", "-1nm", "5e-320A", "nan", "inf nm", "1e400nm", "abc", "1nm,2nm,3nm", "1e9m"]:
        out.append((f"--pixel-size {value}", _good_npy, ["--pixel-size", value, "--z-unit", "A"]))
    for value in ["furlong", "0nm", "-1A", "1e30m"]:
        out.append((f"--z-unit {value}", _good_npy, ["--pixel-size", "1A", "--z-unit", value]))
    for option, value in [
        ("--min-step", "-1"),
        ("--min-step", "0"),
        ("--min-step", "nan"),
        ("--max-nan", "2"),
        ("--max-nan", "0"),
        ("--drift-lattice", "cubic"),
        ("--channel", "Z"),
    ]:
        out.append((f"{option} {value}", _good_npy, [*GOOD_OPTIONS, option, value]))
    return out


def mutations(rng, count):
    """Random byte-level mutations of good files of every format: (name, builder, options)."""
    from tests.imaging.test_instruments import write_sxm as _write

    def good_files(folder):
        img = rng.normal(size=(24, 24))
        p1 = folder / "m.npy"
        np.save(p1, img)
        p2 = _write(folder / "m.sxm", {"Z": ("m", img * 1e-10, img * 1e-10)}, nx=24, ny=24)
        p3 = folder / "m.txt"
        p3.write_text("\n".join(" ".join(f"{v:.6g}" for v in row) for row in img))
        return [p1, p2, p3]

    out = []
    for i in range(count):
        seed = int(rng.integers(1 << 31))

        def build(folder, seed=seed, i=i):
            local = np.random.default_rng(seed)
            files = good_files(folder)
            path = files[i % len(files)]
            data = bytearray(path.read_bytes())
            for _ in range(int(local.integers(1, 8))):
                kind = local.integers(3)
                pos = int(local.integers(len(data)))
                if kind == 0:
                    data[pos] = int(local.integers(256))
                elif kind == 1:
                    del data[pos : pos + int(local.integers(1, 64))]
                else:
                    data[pos:pos] = bytes(local.integers(0, 256, int(local.integers(1, 16))).astype(np.uint8))
            path.write_bytes(bytes(data))
            for other in files:
                if other != path:
                    other.unlink()
            return path

        out.append((f"mutation {i} (seed {seed})", build, GOOD_OPTIONS if i % 3 != 1 else []))
    return out
