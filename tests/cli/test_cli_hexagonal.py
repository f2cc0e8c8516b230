"""Command line on hexagonal and layered crystals: Miller-Bravais faces in and out, --three-index, --c and --x."""

import json

import pytest
from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def invoke(*args):
    return runner.invoke(cli.app, [str(a) for a in args])


def one_line_error(r):
    lines = r.stderr.strip().splitlines()
    assert r.exit_code == 2 and len(lines) == 1 and "Traceback" not in r.output, (r.exit_code, r.output, r.stderr)
    return lines[0]


def test_planes_writes_four_index_faces_and_directions_and_reads_a_four_index_mount():
    r = invoke("planes", "hcp:Zn", "--max-index", "1", "--mount", "0", "0", "0", "1", "--wide")
    assert r.exit_code == 0, r.output
    assert "(1 0 -1 0)" in r.output and "(1 1 -2 0)" in r.output and "(0 0 0 1)" in r.output
    assert "[-1 2 -1 0]" in r.output  # rotation axis [0 1 0] = [-1 2 -1 0] (u = (2U - V)/3, ...)
    r3 = invoke("planes", "hcp:Zn", "--max-index", "1", "--mount", "0", "0", "1", "--three-index")
    assert r3.exit_code == 0 and "(1 0 0)" in r3.output and "(1 0 -1 0)" not in r3.output


def test_json_carries_hkl_and_hkil_in_hexagonal_axes_only():
    data = json.loads(invoke("planes", "hcp:Zn", "--max-index", "1", "--mount", "0", "0", "0", "1", "--json").stdout)
    assert data["structure"]["crystal_system"] == "hexagonal"
    assert data["mount"] == [0, 0, 1] and data["mount_hkil"] == [0, 0, 0, 1]
    prism = next(f for f in data["faces"] if f["hkl"] == [1, 0, 0])
    assert prism["hkil"] == [1, 0, -1, 0] and prism["tilt_variant_hkil"] == [1, 0, -1, 0]
    assert prism["tilt_axis_uvtw"] == [-1, 2, -1, 0]
    keys = list(prism)
    assert keys.index("hkil") == keys.index("hkl") + 1  # next to hkl
    cubic = json.loads(invoke("planes", "fcc:Cu", "--max-index", "1", "--json").stdout)
    assert "hkil" not in cubic["faces"][0] and cubic["structure"]["crystal_system"] == "cubic"


@pytest.mark.parametrize(
    "args, text",
    [
        (["planes", "fcc:Cu", "--mount", "1", "0", "-1", "0"], "apply to hexagonal and trigonal lattices only"),
        (["terminations", "fcc:Cu", "--plane", "1", "1", "-2", "0"], "Cu is cubic"),
        (["planes", "hcp:Zn", "--a", "2.66"], "give --c"),
        (["planes", "fcc:Cu", "--a", "3.6", "--c", "3.6"], "cubic: --c 3.6 does not apply"),
        (["planes", "tetradymite:Bi,Se", "--x", "0.4"], "write --x NAME=VALUE"),
        (["planes", "wurtzite:Ga,N", "--x", "v=0.4"], "no free parameter 'v'"),
        (["planes", "wurtzite:Ga,N", "--x", "u=abc"], "--x u"),
    ],
)
def test_bad_faces_and_lattice_options_are_one_line_errors(args, text):
    assert text in one_line_error(invoke(*args))


@pytest.mark.parametrize(
    "args, text",
    [
        (["planes", "hcp:Zn", "--mount", "1", "0", "-2", "0"], "i must be -(h + k) = -1, got -2"),
        (["terminations", "hcp:Zn", "--plane", "1", "0"], "three integers H K L, or four H K I L"),
        (["terminations", "hcp:Zn", "--plane", "1", "0", "x", "0"], "three integers H K L, or four H K I L"),
    ],
)
def test_malformed_face_options_are_one_line_usage_errors(capsys, args, text):
    with pytest.raises(SystemExit) as exc:
        cli.main(args)
    err = capsys.readouterr().err.strip().splitlines()
    assert exc.value.code == 2 and len(err) == 1 and text in err[0], err


def test_c_and_named_free_parameters_build_the_crystal():
    r = invoke("terminations", "wurtzite:Ga,N", "--a", "3.19", "--c", "5.19", "--x", "u=0.377", "--plane", "0 0 0 1")
    assert r.exit_code == 0, r.output
    assert "c = 5.1900" in r.output and "(0 0 0 1)" in r.output
    r = invoke("planes", "wurtzite:Ga,N", "--a", "3.19", "--c", "5.19", "--x", "0.377", "--max-index", "1")
    assert r.exit_code == 0, r.output


def test_terminations_name_the_van_der_waals_layer():
    r = invoke("terminations", "tetradymite:Bi,Se", "--plane", "0", "0", "0", "1")
    assert r.exit_code == 0 and "Van der Waals layer: T1 (Bi2Se3)" in r.output and "9.545" in r.output
    data = json.loads(invoke("terminations", "tetradymite:Bi,Se", "--plane", "0", "0", "0", "1", "--json").stdout)
    assert data["hkil"] == [0, 0, 0, 1] and data["terminations"][0]["van_der_waals"] is True


def test_structures_lists_every_crystal_system_and_the_tabulated_compounds():
    r = invoke("structures")
    assert r.exit_code == 0
    for name, system in [("hcp", "hexagonal"), ("tetradymite", "trigonal"), ("rutile", "tetragonal")]:
        assert any(line.split()[:2] == [name, system] for line in r.output.splitlines()), name
    data = json.loads(invoke("structures", "--json").stdout)
    corundum = next(p for p in data["prototypes"] if p["name"] == "corundum")
    assert corundum["lattice_constants"] == "a, c" and set(corundum["parameters"]) == {"z", "x"}
    assert "Al,O" in corundum["tabulated"]


def test_match_verdict_and_table_in_miller_bravais_indices():
    r = invoke(
        "match",
        "hcp:Zn",
        "--mount",
        "0",
        "0",
        "0",
        "1",
        "--tilt",
        "90+-1",
        "--spacing",
        "2.66",
        "--spacing",
        "4.95",
        "--row-angle",
        "90",
        "--step",
        "2.31",
        "--top",
        "3",
    )
    assert r.exit_code == 0, r.output
    assert "Most likely (1 0 -1 0)" in " ".join(r.output.split())
