"""End to end: a topograph -> `termination image` -> measurement file -> `termination match`."""

import json

import numpy as np
from typer.testing import CliRunner

from termination import cli
from termination.testing import synthetic_heightmap

runner = CliRunner()


def test_topograph_to_identification(tmp_path):
    # A Cu(111) terrace series as an STM would record it, built from the textbook geometry:
    # hexagonal 1x1 of a/sqrt2 = 2.556 Å and monatomic steps a/sqrt3 = 2.087 Å (common practice).
    z = synthetic_heightmap(
        (384, 384),
        0.25,
        tilt_deg=0.8,
        azimuth_deg=30,
        step_heights=(2.087, 2.087),
        step_azimuth_deg=10,
        lattice=(2.556, 2.556, 120.0, 15.0),
        corrugation_angstrom=0.08,
        noise_angstrom=0.02,
        seed=4,
    )
    scan = tmp_path / "scan.npy"
    np.save(scan, z)
    out = tmp_path / "measurement.toml"
    r = runner.invoke(
        cli.app,
        ["image", str(scan), "--pixel-size", "0.25A", "--z-unit", "A", "--mount", "1", "1", "1", "--out", str(out)],
    )
    assert r.exit_code == 0, r.output
    r = runner.invoke(cli.app, ["match", "fcc:Cu", "--measurement", str(out), "--json", "--top", "3"])
    assert r.exit_code == 0, r.output
    best = json.loads(r.stdout)["candidates"][0]
    assert best["hkl"] == [1, 1, 1] and best["probability"] > 0.5


def test_match_analyses_an_image_in_one_step(tmp_path):
    # the same Cu(111) terrace series (textbook geometry, common practice), with line offsets and adsorbates
    z = synthetic_heightmap(
        (384, 384),
        0.25,
        tilt_deg=0.8,
        azimuth_deg=30,
        step_heights=(2.087, 2.087),
        step_azimuth_deg=10,
        lattice=(2.556, 2.556, 120.0, 15.0),
        corrugation_angstrom=0.08,
        noise_angstrom=0.02,
        line_offset_angstrom=0.2,
        adsorbate_fraction=0.02,
        seed=4,
    )
    scan = tmp_path / "scan.npy"
    np.save(scan, z / 10.0)  # stored in nm
    args = [
        "match",
        "fcc:Cu",
        "--image",
        str(scan),
        "--pixel-size",
        "0.025nm",
        "--z-unit",
        "nm",
        "--mount",
        "1",
        "1",
        "1",
    ]
    r = runner.invoke(cli.app, [*args, "--json", "--top", "3"])
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert data["candidates"][0]["hkl"] == [1, 1, 1]
    assert any(n.startswith("Measured on") for n in data["notes"])
    # the command line overrides what the image measured
    r = runner.invoke(cli.app, [*args, "--step", "2.09+-0.05", "--json"])
    assert r.exit_code == 0, r.output
    assert [s["value"] for s in json.loads(r.stdout)["measurement"]["steps_angstrom"]] == [2.09]
    r = runner.invoke(cli.app, [*args])
    assert r.exit_code == 0 and "Measured on" in r.output


def test_image_calibration_options_need_an_image():
    r = runner.invoke(cli.app, ["match", "fcc:Cu", "--pixel-size", "0.25A"])
    assert r.exit_code == 2 and "--image" in r.stderr
