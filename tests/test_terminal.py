"""Tables fit an 80-column terminal without cutting a number; --wide never cuts at 120 columns or more."""

import numpy as np
import pytest
from typer.testing import CliRunner

from termination import cli
from termination.testing import synthetic_heightmap

COMMANDS = [
    ["structures"],
    ["planes", "half-heusler:Ti,Ni,Sn", "--max-index", "3", "--mount", "1", "1", "0"],
    ["planes", "hexaboride:La,B", "--max-index", "3"],
    ["planes", "wurtzite:Zn,O", "--max-index", "3", "--mount", "1", "0", "-1", "0"],
    ["terminations", "tetradymite:Bi,Se", "--plane", "0", "0", "0", "1"],
    ["terminations", "diamond:Si", "--plane", "0", "0", "1"],
    ["terminations", "half-heusler:Ti,Ni,Sn", "--plane", "1", "1", "1"],
    ["polarity", "hexaboride:La,B", "--plane", "0", "0", "1"],
    ["polarity", "zincblende:Ga,As", "--max-index", "1"],
    ["corrugation", "hexaboride:La,B", "--plane", "0", "0", "1"],
    ["corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--weight", "Na=0.5", "--depth", "4"],
    ["planes", "half-heusler:Ti,Ni,Sn", "--max-index", "3", "--mount", "0", "0", "1", "--tilt-window", "40", "60"],
    ["screen", "rocksalt:Na,Cl", "perovskite:Sr,Ti,O", "half-heusler:Ti,Ni,Sn", "--max-index", "2", "--workers", "1"],
    ["slab", "perovskite:Sr,Ti,O", "--plane", "0", "1", "1", "--termination", "O2", "--cell", "2x1", "--layers", "8"],
    ["slab", "hexaboride:La,B", "--plane", "0", "0", "1", "--termination", "B6", "--symmetric"],
    ["polarity", "rocksalt:Ni,O", "--plane", "1", "1", "1"],
    ["polarity", "perovskite:Sr,Ti,O", "--plane", "1", "1", "0"],
    ["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--cell", "2x1", "--cell", "(2√2×√2)R45°"],
    ["corrugation", "fcc:Cu", "--plane", "1", "1", "1", "--cell", "sqrt3xsqrt3R30", "--cell", "4,2,3,3"],
    ["match", "diamond:Si", "--mount", "0", "0", "1", "--spacing", "7.68", "--cell", "2x1", "--cell", "c(4x2)"],
    ["match", "--demo"],
    [
        "match",
        "perovskite:Sr,Ti,O",
        "--mount",
        "1",
        "1",
        "0",
        "--tilt",
        "45+-2",
        "--spacing",
        "2.76",
        "--spacing",
        "3.9",
        "--row-angle",
        "90",
        "--step",
        "1.95",
        "--step",
        "3.9",
    ],
]


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    z = synthetic_heightmap(
        (192, 192), 0.25, tilt_deg=3.0, step_heights=[2.0], lattice=(3.0, 3.0, 90.0, 10.0), noise_angstrom=0.02, seed=3
    )
    path = tmp_path_factory.mktemp("image") / "scan.npy"
    np.save(path, z)
    return path


def _run(args, columns):
    r = CliRunner().invoke(cli.app, args, env={"COLUMNS": str(columns)})
    assert r.exit_code == 0, (args, r.output)
    return r.stdout.splitlines()


def _all(scan):
    return [*COMMANDS, ["image", str(scan), "--pixel-size", "0.25A", "--z-unit", "A"]]


def test_default_tables_fit_80_columns_without_cutting(scan):
    for args in _all(scan):
        lines = _run(args, 80)
        too_long = [ln for ln in lines if len(ln.rstrip()) > 80]
        assert not too_long, (args, too_long)
        assert not any("…" in ln for ln in lines), args


@pytest.mark.parametrize("columns", [120, 200])
def test_wide_tables_are_never_cut(scan, columns):
    for args in _all(scan):
        lines = _run([*args, "--wide"], columns)
        assert not any("…" in ln for ln in lines), args


def test_the_width_check_can_fail():
    # A narrower terminal than the table: the renderer keeps the numbers whole and the
    # table is wider than the terminal, which the check above would report.
    lines = _run(["planes", "half-heusler:Ti,Ni,Sn", "--max-index", "3", "--mount", "1", "1", "0"], 40)
    assert any(len(ln.rstrip()) > 40 for ln in lines)
    assert not any("…" in ln for ln in lines)


def test_help_shows_metavars_units_and_defaults():
    r = CliRunner().invoke(cli.app, ["planes", "--help"], env={"COLUMNS": "100"})
    assert "--mount H K [I] L" in r.stdout and "[default: 3]" in r.stdout and "<int" not in r.stdout
    r = CliRunner().invoke(cli.app, ["corrugation", "-h"], env={"COLUMNS": "100"})
    assert r.exit_code == 0 and "--decay-length Å" in r.stdout and "[default: 0.5]" in r.stdout
    assert "list[str]" not in r.stdout


def test_bare_command_prints_help_and_version_works(capsys):
    with pytest.raises(SystemExit) as exc:
        cli.main([])
    assert exc.value.code == 0 and "Usage: termination" in capsys.readouterr().out
    with pytest.raises(SystemExit) as exc:
        cli.main(["--version"])
    from termination import __version__

    assert exc.value.code == 0 and __version__ in capsys.readouterr().out
