import json

from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def invoke(*args):
    """Run the CLI in-process through its console-script entry point."""
    return runner.invoke(cli.app, list(args))


def test_planes_table_lists_faces_and_tilts():
    r = invoke("planes", "rocksalt:Na,Cl", "--max-index", "2", "--mount", "0", "0", "1")
    assert r.exit_code == 0, r.output
    assert "(1 1 1)" in r.output and "54.74" in r.output  # standard cubic angle tables
    assert "Fm-3m" in r.output


def test_planes_json_has_documented_fields():
    r = invoke("planes", "zincblende:Ga,As", "--max-index", "1", "--json")
    assert r.exit_code == 0
    data = json.loads(r.stdout)
    assert {"structure", "mount", "faces"} <= set(data)
    hkls = [p["hkl"] for p in data["faces"]]
    assert [1, 1, 1] in hkls and [-1, -1, -1] in hkls
    assert set(data["faces"][0]) >= {"hkl", "d_angstrom", "tilt_deg", "multiplicity", "mesh", "terminations"}
    assert data["schema_version"] and data["command"] == "planes"
    assert "As" in data["structure"]["caution"]  # toxic-element handling caution


def test_structures_lists_prototypes():
    r = invoke("structures", "--wide")
    assert r.exit_code == 0 and "half-heusler" in r.output and "4b" in r.output
    data = json.loads(invoke("structures", "--json").stdout)
    assert any(p["name"] == "hexaboride" and p["parameters"] == {"x": 0.2} for p in data["prototypes"])


def test_bad_inputs_give_one_line_and_exit_code_2(tmp_path):
    bad = tmp_path / "broken.cif"
    bad.write_text("data_x\n_cell_length_a nonsense\n")
    cases = [
        (["planes", "rocksalt:Na,Cl", "--mount", "0", "0", "0"], "(0 0 0)"),
        (["planes", "rocksalt:Na,Zz"], "Zz"),
        (["planes", "rocksalt:Na,Cl", "--a", "-3.1"], "-3.1"),
        (["planes", "rocksalt:Na,Cl", "--max-index", "13"], "13"),
        (["planes", "rocksalt:Na"], "takes 2 elements"),
        (["planes", str(bad)], "broken.cif"),
    ]
    for args, text in cases:
        r = invoke(*args)
        assert r.exit_code == 2, (args, r.output)
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and text in lines[0] and "Traceback" not in r.output


def test_console_entry_point_turns_usage_errors_into_one_line(capsys):
    import pytest

    with pytest.raises(SystemExit) as exc:
        cli.main(["planes", "rocksalt:Na,Cl", "--max-index", "abc"])
    assert exc.value.code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--max-index" in err[0]
