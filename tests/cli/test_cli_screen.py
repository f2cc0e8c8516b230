"""`termination screen`, `termination slab` and `planes --tilt-window` on the command line."""

import csv
import json

import ase.io
from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def invoke(*args):
    return runner.invoke(cli.app, [str(a) for a in args])


def test_screen_table_and_json():
    r = invoke("screen", "rocksalt:Na,Cl", "perovskite:Sr,Ti,O", "--max-index", "1", "--workers", "1")
    assert r.exit_code == 0, r.output
    assert "Screened 2 of 2 structures" in r.output and "(1 1 1)" in r.output and "III/III" in r.output
    data = json.loads(invoke("screen", "rocksalt:Na,Cl", "--max-index", "1", "--workers", "1", "--json").stdout)
    assert data["command"] == "screen" and data["screened"] == 1
    faces = {tuple(row["hkl"]): row for row in data["results"]}
    assert faces[(0, 0, 1)]["cleavage_rank"] == 1  # rock salt cleaves on {100} (common practice)
    assert faces[(1, 1, 1)]["polar"] is True and faces[(1, 1, 1)]["terminations"][0]["tasker_type"] == "III"


def test_screen_writes_csv_with_two_workers_and_resumes(tmp_path):
    out = tmp_path / "rows.csv"
    specs = ["fcc:Cu", "bcc:Fe", "bad:Xx"]
    r = invoke("screen", *specs, "--max-index", "1", "--workers", "2", "--out", out)
    assert r.exit_code == 0, r.output
    assert "1 failed" in r.output and f"Rows in {out}" in r.output
    with open(out, newline="", encoding="utf-8") as fh:
        rows = list(csv.DictReader(fh))
    assert [row["structure"] for row in rows if row["error"]] == ["bad:Xx"]
    again = invoke("screen", *specs, "--max-index", "1", "--workers", "1", "--out", out)
    assert again.exit_code == 2 and "--resume" in again.output
    resumed = invoke("screen", *specs, "--max-index", "1", "--workers", "1", "--out", out, "--resume")
    assert resumed.exit_code == 0 and "Screened 0 of 3 structures (3 already in the output)" in resumed.output


def test_screen_bad_inputs_are_one_line_errors(tmp_path):
    r = invoke("screen", tmp_path / "missing.cif")
    assert r.exit_code == 2 and "no such structure file" in r.output
    r = invoke("screen", "fcc:Cu", "--workers", "0")
    assert r.exit_code == 2 and "--workers" in r.output
    r = invoke("screen", "fcc:Cu", "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")
    assert r.exit_code == 2 and "not both" in r.output


def test_slab_table_json_and_file(tmp_path):
    out = tmp_path / "POSCAR"
    args = ["slab", "rocksalt:Na,Cl", "--plane", 1, 1, 1, "--termination", "Na", "--cell", "2x1"]
    r = invoke(*args, "--layers", 3, "--symmetric", "-o", out)
    assert r.exit_code == 0, r.output
    assert "Stoichiometric: Na6Cl6" in r.output and "Symmetric: yes" in r.output and f"Wrote {out}" in r.output
    assert len(ase.io.read(out)) == 12
    r = invoke(*args, "--layers", 3, "--symmetric", "-o", out)
    assert r.exit_code == 2 and "exists" in r.output
    data = json.loads(invoke(*args, "--json").stdout)
    assert data["command"] == "slab" and data["cell"] == "(2×1)" and data["slab"]["charge_e"] == -1.0
    assert data["slab"]["lattice_angstrom"][2][:2] == [0.0, 0.0]


def test_slab_bad_inputs_are_one_line_errors():
    r = invoke("slab", "rocksalt:Na,Cl", "--plane", 1, 1, 1)
    assert r.exit_code == 2 and "--termination" in r.output
    r = invoke("slab", "rocksalt:Na,Cl", "--plane", 1, 1, 1, "--termination", "K")
    assert r.exit_code == 2 and "no termination 'K'" in r.output
    r = invoke("slab", "rocksalt:Na,Cl", "--plane", 1, 1, 1, "--termination", "Na", "--layers", 0)
    assert r.exit_code == 2 and "layers" in r.output


def test_planes_tilt_window_lists_every_variant_by_tilt():
    r = invoke("planes", "rocksalt:Na,Cl", "--mount", 0, 0, 1, "--tilt-window", 70, 75, "--max-index", 3)
    assert r.exit_code == 0, r.output
    assert "72.45" in r.output and "(3 1 1)" in r.output and "cleave rank" in r.output
    data = json.loads(invoke("planes", "fcc:Cu", "--mount", 0, 0, 1, "--tilt-window", 0, 60, "--json").stdout)
    tilts = [w["tilt_deg"] for w in data["window"]]
    assert tilts == sorted(tilts) and data["tilt_window_deg"] == [0.0, 60.0]
    r = invoke("planes", "fcc:Cu", "--tilt-window", 0, 10)
    assert r.exit_code == 2 and "--mount" in r.output
