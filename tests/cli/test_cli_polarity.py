"""CLI: `termination polarity` and the polar column of `termination planes`."""

import json
import subprocess
import sys

import pytest
from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def invoke(*args):
    return runner.invoke(cli.app, list(args))


def test_polarity_table_of_rocksalt_111():
    # Tasker, J. Phys. C 12, 4977 (1979): rock salt (111) is type III, half of the top layer goes
    r = invoke("polarity", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "2")
    assert r.exit_code == 0, r.output
    assert "III" in r.output and "remove 1/2 (Na layer)" in r.output
    assert "(2×1)" in r.output and "Na +1, Cl -1" in r.output
    assert "polar" in r.output and "Ewald" in r.output


def test_polarity_table_of_a_nonpolar_face():
    r = invoke("polarity", "perovskite:Sr,Ti,O", "--plane", "0", "0", "1")
    assert r.exit_code == 0, r.output
    assert "not polar" in r.output and "none needed" in r.output


def test_polarity_json_has_the_issue_fields():
    r = invoke("polarity", "hexaboride:La,B", "--plane", "0", "0", "1", "--charge", "La=2", "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    (face,) = data["faces"]
    assert face["hkl"] == [0, 0, 1] and face["polar"] is True
    by = {t["label"]: t for t in face["terminations"]}
    la = by["La"]
    assert la["tasker_type"] == "III" and la["compensation"] == pytest.approx(-0.5)  # issue: half the metal
    assert isinstance(la["dipole_per_area_e_per_angstrom"], float)
    woods = {rec["wood"] for rec in la["reconstructions"]}
    assert {"(2×1)", "c(2×2)"} <= woods
    rec = la["reconstructions"][0]
    assert {"matrix", "wood", "sites", "changed"} <= set(rec)
    assert data["charges"]["charges_e"]["B"] == pytest.approx(-1 / 3)  # solved for neutrality
    assert data["charges"]["source"] == "option"


def test_polarity_over_faces_and_the_metal_note():
    r = invoke("polarity", "hexaboride:La,B", "--max-index", "1", "--max-cell", "2")
    assert r.exit_code == 0, r.output
    assert "only a guide" in " ".join(r.output.split())  # rich wraps long lines
    assert "(0 0 1)" in r.output and "(1 1 1)" in r.output


def test_planes_marks_polar_faces():
    r = invoke("planes", "zincblende:Ga,As", "--max-index", "1", "--json")
    assert r.exit_code == 0, r.output
    polar = {tuple(p["hkl"]): p["polar"] for p in json.loads(r.stdout)["faces"]}
    # W. A. Harrison, J. Vac. Sci. Technol. 16, 1492 (1979)
    assert polar[(0, 1, 1)] is False and polar[(0, 0, 1)] is True and polar[(1, 1, 1)] is True
    table = invoke("planes", "zincblende:Ga,As", "--max-index", "1")
    assert "polar" in table.output and "yes" in table.output


def test_planes_polar_unknown_without_charges_and_with_given_charges():
    r = invoke("planes", "half-heusler:Ti,Ni,Sn", "--max-index", "1", "--json")
    assert all(p["polar"] is None for p in json.loads(r.stdout)["faces"])
    r = invoke("planes", "half-heusler:Ti,Ni,Sn", "--max-index", "1", "--charge", "Ti=4", "--charge", "Ni=0", "--json")
    polar = {tuple(p["hkl"]): p["polar"] for p in json.loads(r.stdout)["faces"]}
    assert polar[(1, 1, 1)] is True  # Ti4+ / Sn4- planes along [111]


def test_planes_and_polarity_on_a_prototype_do_not_import_pymatgen():
    code = (
        "import sys, cli\n"
        "from typer.testing import CliRunner\n"
        "r = CliRunner().invoke(cli.app, ['planes', 'rocksalt:Na,Cl', '--max-index', '2'])\n"
        "assert r.exit_code == 0, r.output\n"
        "r = CliRunner().invoke(cli.app, ['polarity', 'rocksalt:Na,Cl', '--plane', '1', '1', '1'])\n"
        "assert r.exit_code == 0, r.output\n"
        "print('pymatgen' in sys.modules)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=cli.__file__.rsplit("/", 1)[0]
    ).stdout
    assert out.strip() == "False"


@pytest.mark.parametrize(
    "args, text",
    [
        (["polarity", "rocksalt:Na,Cl", "--plane", "0", "0", "0"], "(0 0 0)"),
        (["polarity", "rocksalt:Na,Cl", "--charge", "Na=abc"], "Na=abc"),
        (["polarity", "rocksalt:Na,Cl", "--charge", "Na=2", "--charge", "Cl=-1"], "not neutral"),
        (["polarity", "rocksalt:Na,Cl", "--charge", "Zz=1"], "Zz"),
        (["polarity", "rocksalt:Na,Cl", "--max-cell", "0"], "max cell"),
        (["polarity", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-index", "2"], "not both"),
        (["polarity", "half-heusler:Ti,Ni,Sn", "--plane", "1", "1", "1"], "TiNiSn"),
        (["planes", "rocksalt:Na,Cl", "--charge", "Na=nan"], "Na=nan"),
    ],
)
def test_bad_inputs_give_one_line_and_exit_code_2(args, text):
    r = invoke(*args)
    assert r.exit_code == 2, (args, r.output)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0] and "Traceback" not in r.output
