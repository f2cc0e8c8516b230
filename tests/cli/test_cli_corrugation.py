import json

from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def invoke(*args):
    return runner.invoke(cli.app, list(args))


def test_corrugation_table_shows_the_apparent_lattice():
    # Rock salt (001), a = 5.64 Å: both ions alike give a/2 = 2.820 Å, the anion
    # alone the a/sqrt 2 = 3.988 Å mesh (issue 5; geometry of the NaCl layer).
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--a", "5.64")
    assert r.exit_code == 0, r.output
    row = next(line for line in r.output.splitlines() if "NaCl" in line and "1×1" in line)
    assert row.split()[3:7] == ["2.820", "2.820", "90.0", "square"]
    assert "(1 1)" in r.output and "(1 0)" not in r.output  # the first-order spot cancels
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--a", "5.64", "--visible", "Cl")
    row = next(line for line in r.output.splitlines() if "NaCl" in line and "1×1" in line)
    assert r.exit_code == 0 and "only Cl" in r.output and row.split()[3:5] == ["3.988"] * 2


def test_corrugation_shows_reconstruction_cells_of_polar_faces():
    # Rock salt (111) is polar (Tasker type 3); removing half of the top ions in a
    # (2x1) cell compensates it (Tasker, J. Phys. C 12, 4977 (1979)); the cell's
    # half-order spots must appear.
    import pytest

    pytest.importorskip("termination.surface.polarity")
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--termination", "Na", "--json")
    assert r.exit_code == 0, r.output
    (t,) = json.loads(r.stdout)["terminations"]
    cells = {c["cell"]: c for c in t["reconstructions"]}
    assert "(2×1)" in cells
    assert any(abs(s["g"][0]) == 0.5 and s["g"][1] == 0 for s in cells["(2×1)"]["spots"])
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--termination", "Na")
    assert "(2×1)" in r.output and "(1/2 0)" in r.output
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--no-reconstructions", "--json")
    assert all(t["reconstructions"] == [] for t in json.loads(r.stdout)["terminations"])


def test_corrugation_json_has_the_issue_fields():
    # ZrNiSn (111), a = 6.11 Å (half-Heusler, from memory): every single-species layer of the
    # fcc sublattices is a hexagonal net of a/sqrt 2 = 4.3204 Å (fcc (111) geometry, common practice).
    r = invoke("corrugation", "half-heusler:Zr,Ni,Sn", "--plane", "1", "1", "1", "--a", "6.11", "--json")
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert data["hkl"] == [1, 1, 1] and len(data["terminations"]) == 3
    for t in data["terminations"]:
        keys = {
            "label",
            "apparent_lattice",
            "neighbour_distance_angstrom",
            "row_spacings_angstrom",
            "spots",
            "reconstructions",
        }
        assert keys <= set(t)
        lat = t["apparent_lattice"]
        a = 6.11 / 2**0.5
        assert abs(lat["a_angstrom"] - a) < 1e-3 and abs(lat["b_angstrom"] - a) < 1e-3
        assert abs(lat["gamma_deg"] - 120) < 1e-6
        assert t["lattice_type"] == "hexagonal"
        assert {"g", "length_per_angstrom", "intensity", "domains"} == set(t["spots"][0])
    # One termination, a weight and a depth: the JSON records the settings.
    r = invoke(
        "corrugation",
        "rocksalt:Na,Cl",
        "--plane",
        "0",
        "0",
        "1",
        "--a",
        "5.64",
        "--termination",
        "T1",
        "--weight",
        "Na=0.2",
        "--depth",
        "3",
        "--json",
    )
    data = json.loads(r.stdout)
    assert data["visibility"]["weights"] == {"Na": 0.2} and data["visibility"]["max_depth_angstrom"] == 3.0
    (t,) = data["terminations"]
    spot = {tuple(s["g"]): s["intensity"] for s in t["spots"]}
    assert abs(t["apparent_lattice"]["a_angstrom"] - 3.988) < 1e-3 and spot[(1, 0)] > 0.5


def test_corrugation_flat_pattern_renders_without_error():
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--visible", "Cl", "--termination", "Na")
    assert r.exit_code == 0, r.output
    assert "flat" in r.output and "—" in r.output
    data = json.loads(
        invoke(
            "corrugation",
            "rocksalt:Na,Cl",
            "--plane",
            "1",
            "1",
            "1",
            "--visible",
            "Cl",
            "--termination",
            "Na",
            "--json",
        ).stdout
    )
    assert data["terminations"][0]["apparent_lattice"]["a_angstrom"] is None  # inf is not JSON


def test_corrugation_bad_inputs_give_one_line_and_exit_code_2():
    cases = [
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "0"], "(0 0 0)"),
        (["corrugation", "rocksalt:Na,Cl"], "--plane"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--weight", "Na=-1"], "-1"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--weight", "Na"], "'Na'"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--visible", "Zz"], "Zz"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--visible", "K"], "'K'"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--decay-length", "nan"], "nan"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--threshold", "1.5"], "1.5"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--termination", "Xy"], "'Xy'"),
        (["corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "13"], "13"),
    ]
    for args, text in cases:
        r = invoke(*args)
        assert r.exit_code == 2, (args, r.output)
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and text in lines[0] and "Traceback" not in r.output, (args, r.stderr)


def test_corrugation_depth_beyond_the_bound_is_an_error_not_a_runaway():
    # --depth 1e300 used to overflow the image range and exhaust memory.
    for depth, shown in (("1e300", "1e+300"), ("1001", "1001")):
        r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--depth", depth, "--no-reconstructions")
        assert r.exit_code == 2, r.output
        lines = r.stderr.strip().splitlines()
        assert len(lines) == 1 and "at most 1000" in lines[0] and shown in lines[0], lines
    r = invoke("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--depth", "1000", "--no-reconstructions")
    assert r.exit_code == 0, r.output


def test_terminations_table_shows_the_apparent_lattice_column():
    # SrTiO3 (001), a = 3.905 Å: TiO2 shows the mesh, SrO (Sr and O alike, the
    # rock-salt-like layer) a/sqrt 2 = 2.761 Å (two-site structure factor, common practice).
    r = invoke("terminations", "perovskite:Sr,Ti,O", "--plane", "0", "0", "1", "--a", "3.905")
    assert r.exit_code == 0, r.output
    assert "apparent lattice" in r.output
    assert "3.905 × 3.905 Å, 90.0°" in r.output and "2.761 × 2.761 Å, 90.0°" in r.output
    data = json.loads(invoke("terminations", "perovskite:Sr,Ti,O", "--plane", "0", "0", "1", "--json").stdout)
    assert all({"a_angstrom", "b_angstrom", "gamma_deg"} == set(t["apparent_lattice"]) for t in data["terminations"])


def test_weight_overrides_visible_as_the_readme_says():
    # rock salt (001), a = 5.64 Å: Na alone images the a/sqrt 2 = 3.988 Å mesh; Na and Cl
    # equally weighted cancel the (1 0) spots, a/2 = 2.82 Å (two-site structure factor, common practice).
    only_na = json.loads(
        invoke("corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--visible", "Na", "--json").stdout
    )
    both = json.loads(
        invoke(
            "corrugation", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--visible", "Na", "--weight", "Cl=1", "--json"
        ).stdout
    )
    assert abs(only_na["terminations"][0]["apparent_lattice"]["a_angstrom"] - 3.988) < 1e-3
    assert abs(both["terminations"][0]["apparent_lattice"]["a_angstrom"] - 2.820) < 1e-3
