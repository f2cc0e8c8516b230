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
