"""`termination image`: table, JSON, measurement file, overwrite refusal, bad input."""

import json
import re

import numpy as np
import pytest
from typer.testing import CliRunner

from termination import cli
from termination.identification.measurement import read_measurement, read_steps
from termination.testing import synthetic_heightmap

runner = CliRunner()

# known geometry of the synthetic topograph (heights stored in nm, pixels 0.05 nm)
TILT, A, STEP = 5.0, 4.0, 1.48


def numbers(line):
    return [float(v) for v in re.findall(r"-?\d+\.\d+", line)]


def invoke(*args):
    return runner.invoke(cli.app, [str(a) for a in args])


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    folder = tmp_path_factory.mktemp("image")
    z = synthetic_heightmap(
        (256, 256),
        0.5,
        tilt_deg=TILT,
        azimuth_deg=30.0,
        step_heights=[STEP] * 3,
        step_azimuth_deg=10.0,
        lattice=(A, A, 90.0, 15.0),
        noise_angstrom=0.05,
        seed=1,
    )
    path = folder / "scan.npy"
    np.save(path, z / 10.0)
    return path


def test_table_shows_tilt_lattice_and_steps(scan):
    r = invoke("image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm")
    assert r.exit_code == 0, r.output
    assert "256 × 256 px" in r.output
    lines = r.output.splitlines()
    terrace = next(ln for ln in lines if "terrace (identifies the face)" in ln)
    assert abs(numbers(terrace)[0] - TILT) <= 0.3
    lattice = next(ln for ln in lines if "±" in ln and "90." in ln)
    a, sigma_a, b = numbers(lattice)[:3]
    assert abs(a - A) <= 0.02 * A and abs(b - A) <= 0.02 * A and 0 < sigma_a < 0.1
    heights = [numbers(ln)[0] for ln in lines if re.match(r"^\s*[123]\s+\d", ln)]
    assert len(heights) == 3 and all(abs(h - STEP) <= 0.05 * STEP for h in heights)
    assert "drift-free" in r.output


def test_json_has_the_documented_fields(scan):
    r = invoke("image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm", "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)["analysis"]
    assert {"tilt", "lattice", "steps", "terraces", "nan_fraction", "drift", "notes"} <= set(data)
    assert {"macroscopic_deg", "terrace_deg", "azimuth_deg", "terrace_sigma_deg"} <= set(data["tilt"])
    assert {"a_angstrom", "b_angstrom", "gamma_deg", "sigma_a_angstrom", "sigma_b_angstrom"} <= set(data["lattice"])
    assert abs(data["tilt"]["terrace_deg"] - TILT) <= 0.3
    assert abs(data["lattice"]["a_angstrom"] - A) <= 0.02 * A
    assert abs(data["lattice"]["gamma_deg"] - 90.0) <= 1.0
    assert data["terraces"] == 4
    assert [set(s) for s in data["steps"]] == [{"height_angstrom", "sigma_angstrom"}] * 3
    assert all(abs(s["height_angstrom"] - STEP) <= 0.05 * STEP for s in data["steps"])
    assert data["drift"] is None


def test_out_writes_a_measurement_file_that_reads_back(scan, tmp_path):
    out = tmp_path / "measurement.toml"
    steps = tmp_path / "steps.txt"
    r = invoke(
        "image",
        scan,
        "--pixel-size",
        "0.05nm",
        "--z-unit",
        "nm",
        "--out",
        out,
        "--steps-out",
        steps,
        "--mount",
        0,
        0,
        1,
    )
    assert r.exit_code == 0, r.output
    m = read_measurement(out)
    assert m.mount == (0, 0, 1)
    assert abs(m.tilt.value - TILT) <= 0.3
    assert [abs(v.value - A) <= 0.02 * A for v in m.spacings] == [True, True]
    assert abs(m.row_angle.value - 90.0) <= 1.0
    assert len(m.steps) == 3 and all(abs(v.value - STEP) <= 0.05 * STEP for v in m.steps)
    assert read_steps(steps) == m.steps
    assert "drift-free" in out.read_text(encoding="utf-8")


def test_existing_output_is_not_overwritten_without_force(scan, tmp_path):
    out = tmp_path / "measurement.toml"
    out.write_text("keep\n")
    r = invoke("image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm", "--out", out)
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "exists" in lines[0] and "--force" in lines[0]
    assert out.read_text() == "keep\n"
    r = invoke("image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm", "--out", out, "--force")
    assert r.exit_code == 0, r.output
    assert read_measurement(out).tilt is not None


def test_sidecar_calibration_is_used(scan, tmp_path):
    local = tmp_path / "side.npy"
    local.write_bytes(scan.read_bytes())
    (tmp_path / "side.toml").write_text('pixel_size = "0.05nm"\nz_unit = "nm"\n', encoding="utf-8")
    r = invoke("image", local, "--json")
    assert r.exit_code == 0, r.output
    assert abs(json.loads(r.stdout)["analysis"]["lattice"]["a_angstrom"] - A) <= 0.02 * A


def test_bad_inputs_give_one_line_and_exit_code_2(scan, tmp_path):
    nan = tmp_path / "nan.npy"
    np.save(nan, np.full((32, 32), np.nan))
    cases = [
        (["image", scan, "--z-unit", "nm"], "--pixel-size"),
        (["image", scan, "--pixel-size", "0.05", "--z-unit", "nm"], "needs a unit"),
        (["image", scan, "--pixel-size", "0.05nm", "--z-unit", "furlong"], "furlong"),
        (["image", nan, "--pixel-size", "0.05nm", "--z-unit", "nm"], "only NaN"),
        (["image", tmp_path / "missing.npy", "--pixel-size", "0.05nm", "--z-unit", "nm"], "missing.npy"),
        (["image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm", "--out", scan, "--force"], "input file"),
    ]
    for args, text in cases:
        r = invoke(*args)
        assert r.exit_code == 2, (args, r.output)
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and text in lines[0] and "Traceback" not in r.output, (args, r.stderr)
    assert np.load(scan).shape == (256, 256)  # the input is untouched


def test_out_and_steps_out_naming_one_file_is_refused_before_writing(scan, tmp_path):
    # Before, the measurement file was written and then the step list failed on it.
    target = tmp_path / "both.toml"
    for extra in ([], ["--force"]):
        r = invoke(
            "image",
            scan,
            "--pixel-size",
            "0.05nm",
            "--z-unit",
            "nm",
            "--out",
            target,
            "--steps-out",
            tmp_path / "." / "both.toml",
            *extra,
        )
        assert r.exit_code == 2, r.output
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and "both.toml" in lines[0] and "named twice" in lines[0], lines
        assert not target.exists()


def test_bad_mount_is_an_error_even_without_out(scan):
    # --mount only ends up in the --out file, but a (0 0 0) mount is bad input either way.
    r = invoke("image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm", "--mount", 0, 0, 0)
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "0 0 0" in lines[0], lines


def test_never_an_empty_step_list_or_measurement_file(tmp_path):
    # one terrace: no step heights, so --steps-out is refused (exit 2, the reason) and nothing is written
    flat = tmp_path / "flat.npy"
    z = synthetic_heightmap((128, 128), 0.5, tilt_deg=1.0, lattice=(A, A, 90.0, 0.0), noise_angstrom=0.05, seed=2)
    np.save(flat, z)
    steps = tmp_path / "steps.txt"
    out = tmp_path / "m.toml"
    r = invoke("image", flat, "--pixel-size", "0.5A", "--z-unit", "A", "--out", out, "--steps-out", steps)
    assert r.exit_code == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and "no step heights" in lines[0] and "not written" in lines[0], lines
    assert not steps.exists() and not out.exists()
    # the measurement file alone is written, and says what was not determined
    r = invoke("image", flat, "--pixel-size", "0.5A", "--z-unit", "A", "--out", out)
    assert r.exit_code == 0, r.output
    text = out.read_text(encoding="utf-8")
    assert "# not determined: step heights" in text and read_measurement(out).steps == ()


def test_a_measurement_file_with_nothing_in_it_is_not_written(scan, tmp_path, monkeypatch):
    import dataclasses

    from termination.imaging import analysis as module

    real = module.analyse_heightmap

    def nothing_found(*args, **kwargs):
        # an analysis that determined neither the terrace tilt, nor a lattice, nor a step
        r = real(*args, **kwargs)
        tilt = dataclasses.replace(r.tilt, terrace=None, terrace_azimuth=None, terrace_sigma=None)
        return dataclasses.replace(r, tilt=tilt, lattice=None, steps=(), notes=("no lattice: test",))

    monkeypatch.setattr(module, "analyse_heightmap", nothing_found)
    out = tmp_path / "m.toml"
    r = invoke("image", scan, "--pixel-size", "0.05nm", "--z-unit", "nm", "--out", out)
    assert r.exit_code == 2 and "nothing measured" in r.stderr and not out.exists(), r.output


def test_channel_and_calibration_come_from_an_instrument_file(tmp_path):
    from tests.imaging.test_instruments import write_sxm

    z = synthetic_heightmap(
        (128, 160), 0.5, tilt_deg=2.0, step_heights=[2.0], lattice=(A, A, 90.0, 10.0), noise_angstrom=0.05, seed=3
    )
    path = write_sxm(
        tmp_path / "scan.sxm",
        {"Z": ("m", z * 1e-10, z[:, ::-1] * 0 + z * 1e-10)},
        nx=160,
        ny=128,
        range_m=(8e-9, 6.4e-9),
    )
    r = invoke("image", path, "--channel", "Z:backward", "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert data["source"]["channel"] == "Z" and data["source"]["direction"] == "backward"
    assert data["source"]["calibration"] == "file" and data["source"]["pixel_size_x_angstrom"] == pytest.approx(0.5)
    assert abs(data["analysis"]["lattice"]["a_angstrom"] - A) <= 0.02 * A
    r = invoke("image", path, "--channel", "Current")
    assert r.exit_code == 2 and "no channel 'Current'" in r.stderr


def test_drift_lattice_option(tmp_path):
    z = synthetic_heightmap(
        (256, 256),
        0.5,
        tilt_deg=2.0,
        step_heights=[2.0],
        lattice=(3.0, 3.0, 60.0, 5.0),
        noise_angstrom=0.05,
        drift=(0.03, 0.02),
        seed=1,
    )
    path = tmp_path / "drift.npy"
    np.save(path, z)
    r = invoke("image", path, "--pixel-size", "0.5A", "--z-unit", "A", "--drift-lattice", "hexagonal", "--json")
    assert r.exit_code == 0, r.output
    drift = json.loads(r.stdout)["analysis"]["drift"]
    assert drift["lattice_type"] == "hexagonal" and abs(drift["shear"] - 0.03) < 0.01
    r = invoke("image", path, "--pixel-size", "0.5A", "--z-unit", "A", "--drift-lattice", "cubic")
    assert r.exit_code == 2 and "drift_lattice" in r.stderr
