"""Height maps: readers, calibration, and tilt / lattice / steps on synthetic topographs.

Synthetic topographs are built with known parameters by
``termination.testing``; the analysis must give them back within
the tolerances the issue states: spacing 2 %, step height 5 %, terrace tilt
0.3° — or say "not found".
"""

import math

import numpy as np
import pytest

from termination.errors import ImageError
from termination.identification.measurement import measurement_from_image as to_measurement
from termination.identification.measurement import read_measurement, write_measurement
from termination.imaging.analysis import analyse_heightmap
from termination.imaging.reading import (
    check_heights,
    parse_length,
    parse_pixel_size,
    parse_z_unit,
    read_heightmap,
    sidecar_path,
)
from termination.imaging.terraces import plane_fit
from termination.testing import reciprocal_shell, synthetic_heightmap
from tests.imaging.lattice_grid import reduced

SPACING_REL = 0.02  # the tolerances
STEP_REL = 0.05
TILT_DEG = 0.3


def assert_lattice(lat, a, b, gamma):
    ra, rb, rg = reduced(a, b, gamma)
    assert lat is not None
    assert abs(lat.a - ra) <= SPACING_REL * ra
    assert abs(lat.b - rb) <= SPACING_REL * rb
    assert abs(lat.gamma - rg) <= 1.0
    assert 0 < lat.sigma_a < 0.05 * ra and 0 < lat.sigma_b < 0.05 * rb


def assert_steps(steps, n, height, at_least=False):
    # a meandering edge may cut a terrace in two: one step per pair of adjacent terraces
    assert len(steps) >= n if at_least else len(steps) == n
    for s in steps:
        assert abs(s.height - height) <= STEP_REL * height
        assert 0 < s.sigma < STEP_REL * height


def angle_diff(a, b):
    return abs((a - b + 180.0) % 360.0 - 180.0)


# ----------------------------------------------------------------- calibration


@pytest.mark.parametrize(
    "text, angstrom",
    [
        ("0.05nm", 0.5),  # 1 nm = 10 Å (definition)
        ("0.5A", 0.5),
        ("0.5 Å", 0.5),
        ("50pm", 0.5),  # 1 pm = 0.01 Å
        ("2 angstrom", 2.0),
        ("1e-10m", 1.0),
    ],
)
def test_parse_length_converts_units_to_angstrom(text, angstrom):
    assert math.isclose(parse_length(text), angstrom, rel_tol=1e-12)


@pytest.mark.parametrize(
    "text, fragment",
    [("0.05", "needs a unit"), ("nm", "needs a number"), ("-1nm", "positive"), ("3 furlong", "furlong")],
)
def test_parse_length_rejects_bad_text(text, fragment):
    with pytest.raises(ImageError, match=fragment):
        parse_length(text)


@pytest.mark.parametrize(
    "spec, expected",
    [
        ("0.05nm", (0.5, 0.5)),
        ("0.05nm,0.06nm", (0.5, 0.6)),
        ("0.05,0.06nm", (0.5, 0.6)),
        ("0.05x0.06 nm", (0.5, 0.6)),
        (("0.5A", "60pm"), (0.5, 0.6)),
        (0.25, (0.25, 0.25)),
        ((0.25, 0.3), (0.25, 0.3)),
    ],
)
def test_pixel_size_one_or_two_values(spec, expected):
    assert np.allclose(parse_pixel_size(spec), expected)


@pytest.mark.parametrize("spec", ["0.05", "1nm,2nm,3nm", "abc", "0nm", (1.0, -1.0)])
def test_pixel_size_errors_name_the_value(spec):
    with pytest.raises(ImageError):
        parse_pixel_size(spec)


def test_z_unit_is_length_per_stored_unit():
    assert parse_z_unit("nm") == 10.0
    assert parse_z_unit("A") == 1.0
    assert parse_z_unit("pm") == 0.01
    assert math.isclose(parse_z_unit("0.01nm"), 0.1)
    with pytest.raises(ImageError, match="furlong"):
        parse_z_unit("furlong")


# ----------------------------------------------------------------- readers


@pytest.fixture()
def small():
    rng = np.random.default_rng(3)
    return rng.normal(size=(16, 20))


def test_npy_reader_and_calibration(tmp_path, small):
    path = tmp_path / "scan.npy"
    np.save(path, small)
    hm = read_heightmap(path, pixel_size="0.05nm", z_unit="nm")
    assert hm.heights.shape == (16, 20)
    assert np.allclose(hm.heights, small * 10.0)
    assert hm.pixel_size == (0.5, 0.5)


@pytest.mark.parametrize("sep", [" ", "\t", ","])
def test_text_matrix_reader(tmp_path, small, sep):
    path = tmp_path / "scan.txt"
    rows = [sep.join(f"{v:.17g}" for v in row) for row in small]
    path.write_text("# exported heights\n" + "\n".join(rows) + "\n\n", encoding="utf-8")
    hm = read_heightmap(path, pixel_size="0.5A", z_unit="A")
    assert np.array_equal(hm.heights, small)


def test_text_matrix_keeps_missing_pixels(tmp_path, small):
    path = tmp_path / "scan.csv"
    data = small.copy()
    data[2, 3] = np.nan
    path.write_text("\n".join(",".join(f"{v:.17g}" for v in row) for row in data), encoding="utf-8")
    hm = read_heightmap(path, pixel_size="0.5A", z_unit="A")
    assert np.isnan(hm.heights[2, 3]) and np.isfinite(hm.heights).sum() == data.size - 1


@pytest.mark.parametrize(
    "text, fragment",
    [("1 2 3\n4 5\n" * 8, "row 2 has 2 values"), ("1 2 x\n" * 8, "x")],
)
def test_text_matrix_errors(tmp_path, text, fragment):
    path = tmp_path / "bad.txt"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ImageError, match=fragment):
        read_heightmap(path, pixel_size="0.5A", z_unit="A")


@pytest.mark.parametrize("dtype", [np.uint8, np.uint16, np.int32, np.float32, np.float64])
def test_tiff_reader_for_integer_and_float_samples(tmp_path, dtype):
    tifffile = pytest.importorskip("tifffile")
    rng = np.random.default_rng(0)
    counts = rng.integers(0, 200, size=(24, 32)).astype(dtype)
    path = tmp_path / "scan.tif"
    tifffile.imwrite(path, counts)
    # integer counts calibrated by a z unit of 0.01 nm (0.1 Å) per count
    hm = read_heightmap(path, pixel_size="0.05nm", z_unit="0.01nm")
    assert np.allclose(hm.heights, counts.astype(np.float64) * 0.1)


def test_multi_page_and_rgb_tiff_are_refused(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    pages = tmp_path / "stack.tif"
    tifffile.imwrite(
        pages, np.ones((3, 16, 16), dtype=np.float32) * np.arange(3)[:, None, None], photometric="minisblack"
    )
    with pytest.raises(ImageError, match="2-D"):
        read_heightmap(pages, pixel_size="0.5A", z_unit="A")
    rgb = tmp_path / "rgb.tif"
    tifffile.imwrite(rgb, np.random.default_rng(0).integers(0, 255, (16, 16, 3), dtype=np.uint8), photometric="rgb")
    with pytest.raises(ImageError, match="3 dimensions"):
        read_heightmap(rgb, pixel_size="0.5A", z_unit="A")


def test_sidecar_gives_calibration_and_arguments_override_it(tmp_path, small):
    path = tmp_path / "scan.npy"
    np.save(path, small)
    side = sidecar_path(path)
    assert side.name == "scan.toml"
    side.write_text('pixel_size = ["0.05nm", "0.06nm"]\nz_unit = "pm"\n', encoding="utf-8")
    hm = read_heightmap(path)
    assert hm.pixel_size == (0.5, 0.6)
    assert np.allclose(hm.heights, small * 0.01)
    hm2 = read_heightmap(path, pixel_size="0.2A", z_unit="nm")
    assert hm2.pixel_size == (0.2, 0.2)
    assert np.allclose(hm2.heights, small * 10.0)


def test_sidecar_errors(tmp_path, small):
    path = tmp_path / "scan.npy"
    np.save(path, small)
    sidecar_path(path).write_text('pixel = "0.05nm"\n', encoding="utf-8")
    with pytest.raises(ImageError, match="unknown key 'pixel'"):
        read_heightmap(path)
    sidecar_path(path).write_text('pixel_size = "0.05"\n', encoding="utf-8")
    with pytest.raises(ImageError, match="scan.toml.*needs a unit"):
        read_heightmap(path, z_unit="nm")


def test_sidecar_bare_numbers_are_refused_not_taken_as_angstrom(tmp_path, small):
    # "Neither the pixel size nor the height unit is guessed" (README): a number without a
    # unit used to be read as Å, so pixel_size = 0.05 meant for nm gave a lattice 10x too small.
    path = tmp_path / "scan.npy"
    np.save(path, small)
    for text in ("pixel_size = 0.05\n", "pixel_size = [0.05, 0.06]\n", 'pixel_size = "0.05nm"\nz_unit = 1\n'):
        sidecar_path(path).write_text(text, encoding="utf-8")
        with pytest.raises(ImageError, match="scan.toml.*needs a unit"):
            read_heightmap(path, z_unit="nm") if "z_unit" not in text else read_heightmap(path)


def test_missing_calibration_is_an_error(tmp_path, small):
    path = tmp_path / "scan.npy"
    np.save(path, small)
    with pytest.raises(ImageError, match="pixel size of scan.npy unknown"):
        read_heightmap(path, z_unit="nm")
    with pytest.raises(ImageError, match="height unit of scan.npy unknown"):
        read_heightmap(path, pixel_size="0.05nm")


def test_reading_never_modifies_the_file(tmp_path, small):
    path = tmp_path / "scan.npy"
    np.save(path, small)
    before = path.read_bytes()
    read_heightmap(path, pixel_size="0.05nm", z_unit="nm")
    assert path.read_bytes() == before


def test_unreadable_files(tmp_path):
    with pytest.raises(ImageError, match="no such image file"):
        read_heightmap(tmp_path / "nothing.npy", pixel_size="1A", z_unit="A")
    bad = tmp_path / "bad.npy"
    bad.write_bytes(b"not an array")
    with pytest.raises(ImageError, match="bad.npy"):
        read_heightmap(bad, pixel_size="1A", z_unit="A")


@pytest.mark.parametrize(
    "array, fragment",
    [
        (np.full((32, 32), np.nan), "only NaN"),
        (np.full((32, 32), 4.2), "constant"),
        (np.zeros((4, 32, 32)), "3 dimensions"),
        (np.arange(64.0), "1 dimensions"),
        (np.ones((4, 40)) * np.arange(40), "too small"),
        (np.where(np.eye(16) > 0, np.inf, 1.0), "infinite"),
        (np.ones((16, 16), dtype=complex), "real numbers"),
    ],
)
def test_unusable_arrays_are_refused(array, fragment):
    with pytest.raises(ImageError, match=fragment):
        check_heights(array)
    with pytest.raises(ImageError, match=fragment):
        analyse_heightmap(array, 0.5)


def test_single_leading_axis_is_dropped():
    assert check_heights(np.arange(256.0).reshape(1, 16, 16)).shape == (16, 16)


# ----------------------------------------------------------------- synthetic data


def test_synthetic_generator_puts_steps_where_asked():
    # no lattice, no noise: far from the steps the plane-removed height is the step sum / cos(tilt)
    z = synthetic_heightmap(
        (64, 256), 0.5, tilt_deg=10, azimuth_deg=0, step_heights=[1.5, 1.5], step_azimuth_deg=0, step_width_px=0.5
    )
    x = (np.arange(256) - 127.5) * 0.5
    flat = z - math.tan(math.radians(10)) * x[None, :]
    assert math.isclose(flat[0, -1] - flat[0, 0], 3.0 / math.cos(math.radians(10)), rel_tol=1e-6)


def test_reciprocal_shell_of_square_and_hexagonal_lattices():
    # textbook: square a -> |g| = 1/a (two per half plane); hexagonal a -> 2/(sqrt(3) a), three
    _, g = reciprocal_shell(4.0, 4.0, 90.0)
    assert len(g) == 2 and np.allclose(np.linalg.norm(g, axis=1), 0.25)
    _, g = reciprocal_shell(3.0, 3.0, 60.0)
    assert len(g) == 3 and np.allclose(np.linalg.norm(g, axis=1), 2 / (math.sqrt(3) * 3.0))


# ----------------------------------------------------------------- plane fit


def test_plane_fit_matches_least_squares_of_numpy():
    z = synthetic_heightmap(
        (64, 96), (0.5, 0.4), tilt_deg=7, azimuth_deg=130, step_heights=[2.0], noise_angstrom=0.1, seed=4
    )
    ny, nx = z.shape
    y, x = np.mgrid[0:ny, 0:nx]
    A = np.column_stack([(x.ravel() - (nx - 1) / 2) * 0.5, (y.ravel() - (ny - 1) / 2) * 0.4, np.ones(z.size)])
    ref = np.linalg.lstsq(A, z.ravel(), rcond=None)[0]  # numpy lstsq as the reference
    a, b, c = plane_fit(z, (0.5, 0.4))
    assert np.allclose([a, b, c], ref, rtol=1e-9, atol=1e-9)


# ----------------------------------------------------------------- analysis


def test_square_lattice_steps_and_tilt_round_trip():
    # truth: the parameters the synthetic topograph is built with
    truth = dict(
        tilt_deg=5.0,
        azimuth_deg=30.0,
        step_heights=[1.48] * 3,
        step_azimuth_deg=10.0,
        step_wave_angstrom=4.0,
        lattice=(4.0, 4.0, 90.0, 15.0),
        corrugation_angstrom=0.1,
        noise_angstrom=0.05,
    )
    r = analyse_heightmap(synthetic_heightmap((256, 256), 0.5, seed=1, **truth), 0.5)
    assert abs(r.tilt.terrace - 5.0) <= TILT_DEG
    assert angle_diff(r.tilt.terrace_azimuth, 30.0) <= 2.0
    assert r.tilt.terrace_sigma < TILT_DEG
    # the staircase adds to the terrace slope: 3 steps of 1.48 Å over ~128 Å add about atan(4.44/128) = 2.0° (geometry)
    assert r.tilt.macroscopic > r.tilt.terrace + 0.5
    assert_lattice(r.lattice, 4.0, 4.0, 90.0)
    assert_steps(r.steps, 3, 1.48)
    assert r.terraces == 4
    assert any("drift-free" in n for n in r.notes)


def test_hexagonal_lattice_on_a_strongly_tilted_terrace():
    # truth: the synthetic parameters
    # at 20° the image shows the lattice foreshortened by cos 20°; a, b, gamma are in the terrace plane
    truth = dict(
        tilt_deg=20.0,
        azimuth_deg=-40.0,
        step_heights=[2.0, -2.0, 2.0],
        step_azimuth_deg=100.0,
        step_wave_angstrom=5.0,
        lattice=(3.0, 3.0, 60.0, 5.0),
        corrugation_angstrom=0.1,
        noise_angstrom=0.05,
    )
    r = analyse_heightmap(synthetic_heightmap((256, 256), 0.5, seed=1, **truth), 0.5)
    assert abs(r.tilt.terrace - 20.0) <= TILT_DEG
    assert angle_diff(r.tilt.terrace_azimuth, 320.0) <= 1.0
    assert_lattice(r.lattice, 3.0, 3.0, 60.0)
    # first shell of a hexagonal lattice: three spots per half plane (textbook), on each terrace measured
    assert r.lattice.peaks == 3 * max(r.lattice.terraces, 1)
    # up, down, up: every edge joins the same two levels, so they make one step height, measured three times
    assert_steps(r.steps, 1, 2.0)


def test_oblique_lattice_with_non_square_pixels():
    # truth: the synthetic parameters; the expected a, b, gamma are those of the Gauss-reduced basis
    truth = dict(
        tilt_deg=3.0,
        azimuth_deg=200.0,
        lattice=(3.6, 5.1, 70.0, 40.0),
        corrugation_angstrom=0.15,
        noise_angstrom=0.05,
        step_heights=[1.8],
        step_azimuth_deg=60.0,
    )
    px = (0.4, 0.5)
    r = analyse_heightmap(synthetic_heightmap((300, 256), px, seed=2, **truth), px)
    assert_lattice(r.lattice, 3.6, 5.1, 70.0)
    assert abs(r.tilt.terrace - 3.0) <= TILT_DEG
    assert_steps(r.steps, 1, 1.8)


def test_single_terrace_has_no_steps_and_says_so():
    # truth: one terrace, tilt 2°, hexagonal 3 Å corrugation (synthetic)
    z = synthetic_heightmap(
        (256, 256), 0.5, tilt_deg=2.0, azimuth_deg=75.0, lattice=(3.0, 3.0, 60.0, 5.0), noise_angstrom=0.05, seed=3
    )
    r = analyse_heightmap(z, 0.5)
    assert r.steps == () and r.terraces == 1
    assert any("one terrace" in n for n in r.notes)
    assert abs(r.tilt.terrace - 2.0) <= TILT_DEG and abs(r.tilt.macroscopic - 2.0) <= TILT_DEG
    assert_lattice(r.lattice, 3.0, 3.0, 60.0)


def test_no_corrugation_gives_no_lattice():
    z = synthetic_heightmap(
        (256, 256), 0.5, tilt_deg=2.0, step_heights=[1.48, 1.48], corrugation_angstrom=0.0, noise_angstrom=0.05, seed=4
    )
    r = analyse_heightmap(z, 0.5)
    assert r.lattice is None
    assert any(n.startswith("no lattice") for n in r.notes)
    assert_steps(r.steps, 2, 1.48)


def test_strong_noise_is_an_honest_not_found():
    # noise of 5 Å per pixel hides 1.48 Å steps and a 0.1 Å corrugation
    z = synthetic_heightmap(
        (256, 256),
        0.5,
        tilt_deg=2.0,
        step_heights=[1.48] * 2,
        lattice=(3.0, 3.0, 60.0, 5.0),
        corrugation_angstrom=0.1,
        noise_angstrom=5.0,
        seed=5,
    )
    r = analyse_heightmap(z, 0.5)
    assert r.lattice is None
    assert r.steps == ()
    # the staircase is hidden: either the terrace tilt is withheld or it is right
    assert r.tilt.terrace is None or abs(r.tilt.terrace - 2.0) <= TILT_DEG
    assert any(n.startswith("no lattice") for n in r.notes)


def test_pure_noise_finds_nothing():
    # white noise has no lattice and no terraces: the false-alarm rate is 1e-3 per image by construction
    z = np.random.default_rng(6).normal(0.0, 0.3, (256, 256))
    r = analyse_heightmap(z, 0.5)
    assert r.lattice is None and r.steps == ()


@pytest.mark.parametrize("seed", range(12))
def test_every_reported_number_is_right_or_absent(seed):
    # random geometry and noise up to 3 Å: anything reported must be within tolerance
    rng = np.random.default_rng(100 + seed)
    px = rng.uniform(0.35, 0.7)
    tilt, az = rng.uniform(0, 20), rng.uniform(0, 360)
    n, h = int(rng.integers(0, 4)), rng.uniform(0.8, 2.5)
    kind = ("square", "hex", None)[seed % 3]
    a = rng.uniform(3.0, 5.0)
    lat = (a, a, 90.0 if kind == "square" else 60.0, rng.uniform(0, 180)) if kind else None
    noise = 10 ** rng.uniform(-2, 0.5)
    z = synthetic_heightmap(
        (256, 256),
        px,
        tilt_deg=tilt,
        azimuth_deg=az,
        step_heights=[h] * n,
        step_azimuth_deg=rng.uniform(0, 360),
        step_wave_angstrom=3.0,
        lattice=lat,
        corrugation_angstrom=rng.uniform(0.05, 0.2),
        noise_angstrom=noise,
        seed=seed,
    )
    r = analyse_heightmap(z, px)
    if r.tilt.terrace is not None:
        assert abs(r.tilt.terrace - tilt) <= max(TILT_DEG, 3 * r.tilt.terrace_sigma)
    if lat is None:
        assert r.lattice is None
    elif r.lattice is not None:
        assert_lattice(r.lattice, *lat[:3])
    for s in r.steps:
        assert abs(s.height - h) <= max(STEP_REL * h, 3 * s.sigma)
    if n == 0:
        assert r.steps == ()


def test_step_uncertainty_covers_the_error_under_noise():
    z = synthetic_heightmap(
        (384, 384),
        0.5,
        tilt_deg=4.0,
        azimuth_deg=10.0,
        step_heights=[1.5] * 3,
        step_azimuth_deg=-20.0,
        lattice=(3.5, 3.5, 90.0, 0.0),
        noise_angstrom=1.0,
        seed=7,
    )
    r = analyse_heightmap(z, 0.5)
    assert len(r.steps) == 3
    for s in r.steps:
        assert abs(s.height - 1.5) <= 4 * s.sigma  # a 4σ bound on Gaussian errors (common practice)


def test_missing_pixels_are_ignored():
    # truth: the synthetic parameters; NaN blocks must not change the answer
    z = synthetic_heightmap(
        (256, 256),
        0.5,
        tilt_deg=6.0,
        azimuth_deg=250.0,
        step_heights=[1.6, 1.6],
        lattice=(4.2, 4.2, 90.0, 30.0),
        noise_angstrom=0.05,
        seed=8,
    )
    z[100:130, 40:90] = np.nan
    z[:, :3] = np.nan
    r = analyse_heightmap(z, 0.5)
    assert abs(r.tilt.terrace - 6.0) <= TILT_DEG
    assert_lattice(r.lattice, 4.2, 4.2, 90.0)
    assert_steps(r.steps, 2, 1.6)


def test_results_do_not_depend_on_height_offset_or_a_quarter_turn():
    z = synthetic_heightmap(
        (256, 256),
        0.5,
        tilt_deg=4.0,
        azimuth_deg=20.0,
        step_heights=[1.4, 1.4],
        step_azimuth_deg=45.0,
        lattice=(3.3, 3.3, 60.0, 12.0),
        noise_angstrom=0.05,
        seed=9,
    )
    r0 = analyse_heightmap(z, 0.5)
    r1 = analyse_heightmap(z + 123.0, 0.5)
    assert math.isclose(r0.tilt.terrace, r1.tilt.terrace, abs_tol=1e-9)
    assert [s.height for s in r0.steps] == pytest.approx([s.height for s in r1.steps], abs=1e-9)
    # rot90 turns the image by 90°; x and y axes swap, so the azimuth moves by ±90°. The scan lines
    # do not turn with it (rows stay scan lines), so only without line offsets is the model the same.
    r0 = analyse_heightmap(z, 0.5, line_offsets=False)
    r2 = analyse_heightmap(np.rot90(z), 0.5, line_offsets=False)
    assert math.isclose(r0.tilt.terrace, r2.tilt.terrace, abs_tol=1e-6)
    assert min(angle_diff(r2.tilt.azimuth, r0.tilt.azimuth + d) for d in (90, -90)) < 1e-6
    assert r2.lattice.a == pytest.approx(r0.lattice.a, rel=1e-3)
    assert r2.lattice.gamma == pytest.approx(r0.lattice.gamma, abs=0.05)
    assert sorted(s.height for s in r2.steps) == pytest.approx(sorted(s.height for s in r0.steps), abs=1e-3)
    # with line offsets fitted along the rows, the turned image agrees within the uncertainty
    r3 = analyse_heightmap(np.rot90(z), 0.5)
    assert abs(r3.tilt.terrace - r1.tilt.terrace) <= 3 * math.hypot(r1.tilt.terrace_sigma, r3.tilt.terrace_sigma)


def test_analysis_is_deterministic():
    z = synthetic_heightmap(
        (256, 256), 0.5, step_heights=[1.2], lattice=(3.0, 3.0, 60.0, 0.0), noise_angstrom=0.2, seed=10
    )
    assert analyse_heightmap(z, 0.5) == analyse_heightmap(z.copy(), 0.5)


def test_progress_callback_sees_every_stage():
    z = synthetic_heightmap((128, 128), 0.5, step_heights=[1.2], lattice=(3.0, 3.0, 60.0, 0.0), seed=11)
    seen = []
    analyse_heightmap(z, 0.5, progress=lambda f, stage: seen.append((f, stage)))
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    assert {"plane fit", "terraces", "steps", "lattice"} <= {s for _, s in seen}


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        (dict(min_step_angstrom=-1), "min_step_angstrom"),
        (dict(min_terrace_fraction=2.0), "min_terrace_fraction"),
        (dict(edge_guard_px=0), "edge_guard_px"),
        (dict(index_tol=0.6), "index_tol"),
        (dict(progress=3), "progress"),
    ],
)
def test_bad_parameters_name_themselves(kwargs, fragment):
    z = synthetic_heightmap((32, 32), 0.5, seed=0, noise_angstrom=0.1)
    with pytest.raises(ImageError, match=fragment):
        analyse_heightmap(z, 0.5, **kwargs)


def test_bad_pixel_size_is_an_image_error():
    with pytest.raises(ImageError, match="pixel_size"):
        analyse_heightmap(np.random.default_rng(0).normal(size=(32, 32)), -0.5)


def test_measurement_from_an_analysis_round_trips_through_the_file(tmp_path):
    z = synthetic_heightmap(
        (256, 256),
        0.5,
        tilt_deg=5.0,
        step_heights=[1.48] * 2,
        lattice=(4.0, 4.0, 90.0, 0.0),
        noise_angstrom=0.05,
        seed=12,
    )
    r = analyse_heightmap(z, 0.5)
    m = to_measurement(r, mount=(0, 0, 1), max_index=3)
    assert m.mount == (0, 0, 1) and m.max_index == 3
    assert m.tilt.value == pytest.approx(r.tilt.terrace, abs=1e-4)
    assert m.tilt.sigma == pytest.approx(r.tilt.terrace_sigma, rel=0.05)
    assert [v.value for v in m.spacings] == pytest.approx([r.lattice.a, r.lattice.b], abs=1e-4)
    assert m.row_angle.value == pytest.approx(r.lattice.gamma, abs=1e-4)
    assert [v.value for v in m.steps] == pytest.approx([s.height for s in r.steps], abs=1e-4)
    path = write_measurement(tmp_path / "m.toml", m)
    assert read_measurement(path) == m


def test_measurement_leaves_out_what_was_not_found():
    z = synthetic_heightmap((256, 256), 0.5, tilt_deg=2.0, corrugation_angstrom=0.0, noise_angstrom=0.05, seed=13)
    m = to_measurement(analyse_heightmap(z, 0.5))
    assert m.spacings == () and m.row_angle is None and m.steps == ()
    assert m.tilt is not None


def test_measurement_row_angle_is_the_obtuse_gamma_and_left_out_when_drift_fixed_it():
    # hexagonal 3.0 Å: gamma = 120° in the obtuse convention (surface crystallography, common practice)
    z = synthetic_heightmap(
        (256, 256), 0.5, tilt_deg=2.0, step_heights=[2.0], lattice=(3.0, 3.0, 60.0, 5.0), noise_angstrom=0.05, seed=3
    )
    m = to_measurement(analyse_heightmap(z, 0.5))
    assert 90.0 <= m.row_angle.value <= 120.0 and abs(m.row_angle.value - 120.0) < 1.0
    corrected = analyse_heightmap(z, 0.5, drift_lattice="hexagonal")
    m = to_measurement(corrected)
    assert m.row_angle is None and len(m.spacings) == 2
