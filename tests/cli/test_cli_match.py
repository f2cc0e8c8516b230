import json
import pathlib

import pytest
from typer.testing import CliRunner

from termination import cli
from termination.structures import bundled

runner = CliRunner()
EXAMPLES = sorted(pathlib.Path(bundled("examples")).glob("*.toml"))


def test_demo_runs_and_states_the_hypothesis_caution():
    r = runner.invoke(cli.app, ["match", "--demo"])
    assert r.exit_code == 0, r.output
    assert "(0 0 1)" in r.output and "hypothesis" in r.output and "safety" in r.output


def test_match_json_fields():
    r = runner.invoke(
        cli.app,
        [
            "match",
            "rocksalt:Na,Cl",
            "--mount",
            "0",
            "0",
            "1",
            "--tilt",
            "0+-1",
            "--spacing",
            "3.99±0.15",
            "--step",
            "2.82+-0.1",
            "--visible",
            "Cl",
            "--top",
            "3",
            "--json",
        ],
    )
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert len(data["candidates"]) == 3
    best = data["candidates"][0]
    assert best["rank"] == 1 and best["hkl"] == [0, 0, 1]
    assert {"termination", "probability", "log_likelihood", "tilt_deg", "spacings_angstrom", "steps_angstrom"} <= set(
        best
    )
    assert set(best["termination"]) == {"id", "label"}
    assert {"measured", "predicted", "residual"} <= set(best["spacings_angstrom"][0])
    assert abs(sum(c["probability"] for c in data["candidates"]) - 1) < 0.05 or best["probability"] > 0.9


def test_command_line_overrides_the_measurement_file(tmp_path):
    f = tmp_path / "m.toml"
    f.write_text("mount = [0, 0, 1]\ntilt = { value = 45.0, sigma = 2.0 }\n")
    before = f.read_bytes()
    r = runner.invoke(cli.app, ["match", "fcc:Cu", "--measurement", str(f), "--tilt", "0+-1", "--json"])
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["candidates"][0]["hkl"] == [0, 0, 1]
    assert f.read_bytes() == before  # input files are never modified


def test_steps_file(tmp_path):
    f = tmp_path / "steps.txt"
    f.write_text("# height sigma\n3.13 0.1\n3.16\n6.27 0.15\n")
    r = runner.invoke(
        cli.app, ["match", "diamond:Si", "--mount", "1", "1", "1", "--tilt", "0+-1", "--steps", str(f), "--json"]
    )
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["candidates"][0]["hkl"] == [1, 1, 1]


@pytest.mark.parametrize(
    "args, text",
    [
        (["match", "fcc:Cu", "--mount", "0", "0", "1", "--tilt", "10+--1"], "10+--1"),
        (["match", "fcc:Cu", "--mount", "0", "0", "1", "--tilt", "nan"], "nan"),
        (["match", "fcc:Cu", "--mount", "0", "0", "0", "--tilt", "10"], "0 0 0"),
        (["match", "fcc:Cu", "--tilt", "10"], "mount"),
        (["match", "fcc:Cu", "--mount", "0", "0", "1", "--step", "abc"], "abc"),
        (["match", "fcc:Cu", "--mount", "0", "0", "1", "--step", "2", "--weight", "Cu"], "ELEMENT=VALUE"),
        (["match"], "STRUCTURE"),
    ],
)
def test_bad_inputs_give_one_line(args, text):
    r = runner.invoke(cli.app, args)
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0], lines


@pytest.mark.parametrize(
    "extra, text",
    [
        (["--visible", "Xx"], "Xx"),  # not an element
        (["--visible", "K"], "'K' is not in this crystal"),  # an element, but not in NaCl
        (["--weight", "K=0.5"], "'K' is not in this crystal"),
        (["--weight", "Na=0", "--weight", "Cl=0"], "all zero"),
        (["--visible", "Na", "--weight", "Na=0"], "all zero"),
    ],
)
def test_match_rejects_visibility_that_names_no_imaging_species_of_the_crystal(extra, text):
    # Before, these left every termination flat and ranked on the floors alone, silently.
    r = runner.invoke(cli.app, ["match", "rocksalt:Na,Cl", "--spacing", "4"] + extra)
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0], lines


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_example_files_identify_their_face(path):
    # Examples are invented practice scenarios; the file name says the intended face.
    family, _, face = path.stem.rpartition("_")
    proto, compound = family.split("_")
    from termination.structures import PROTOTYPES

    elements = _elements(proto, compound)
    spec = f"{proto}:{','.join(elements)}"
    assert proto in PROTOTYPES
    r = runner.invoke(cli.app, ["match", spec, "--measurement", str(path), "--json", "--top", "1"])
    assert r.exit_code == 0, r.output
    hkl = json.loads(r.stdout)["candidates"][0]["hkl"]
    assert "".join(str(abs(v)) for v in hkl) in {face, face[::-1]} or sorted(map(abs, hkl)) == sorted(map(int, face))


def _elements(proto, compound):
    import re

    els = re.findall(r"[A-Z][a-z]?", compound)
    if proto == "heusler":  # X2YZ written Cu2MnAl
        return els
    if proto == "hexaboride":
        return [els[0], "B"]
    if proto == "perovskite":
        return els[:3]
    if proto == "fluorite":
        return els[:2]
    return els


def test_demo_takes_no_structure():
    r = runner.invoke(cli.app, ["match", "--demo", "fcc:Cu"])
    assert r.exit_code == 2 and "--demo" in r.stderr


def test_lower_case_visible_species_is_normalised():
    r = runner.invoke(
        cli.app,
        [
            "match",
            "rocksalt:Na,Cl",
            "--mount",
            "0",
            "0",
            "1",
            "--tilt",
            "0+-1",
            "--spacing",
            "3.99+-0.15",
            "--visible",
            "cl",
            "--json",
            "--top",
            "1",
        ],
    )
    assert r.exit_code == 0, r.output
    assert json.loads(r.stdout)["candidates"][0]["hkl"] == [0, 0, 1]


def test_huge_values_give_one_line_and_no_numeric_warnings():
    r = runner.invoke(cli.app, ["planes", "rocksalt:Na,Cl", "--a", "1e300"])
    assert r.exit_code == 2 and len(r.stderr.strip().splitlines()) == 1 and "1000" in r.stderr
    r = runner.invoke(cli.app, ["match", "fcc:Cu", "--mount", "0", "0", "1", "--spacing", "1e300", "--json"])
    assert r.exit_code == 2 and len(r.stderr.strip().splitlines()) == 1 and "1e+300" in r.stderr


def test_empty_steps_file_names_the_file(tmp_path):
    f = tmp_path / "empty.txt"
    f.write_text("# nothing measured\n")
    r = runner.invoke(cli.app, ["match", "fcc:Cu", "--mount", "0", "0", "1", "--steps", str(f)])
    assert r.exit_code == 2 and "empty.txt" in r.stderr
