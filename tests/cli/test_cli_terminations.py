import json

from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def test_terminations_table():
    r = runner.invoke(cli.app, ["terminations", "perovskite:Sr,Ti,O", "--plane", "0", "0", "1"])
    assert r.exit_code == 0, r.output
    assert "SrO" in r.output and "TiO2" in r.output and "1.952" in r.output  # a/2 for a = 3.905 Å


def test_terminations_json_fields():
    r = runner.invoke(cli.app, ["terminations", "hexaboride:La,B", "--plane", "0", "0", "1", "--json"])
    data = json.loads(r.stdout)
    assert data["hkl"] == [0, 0, 1] and abs(data["d_angstrom"] - 4.157) < 1e-9
    assert {t["label"] for t in data["terminations"]} == {"B6", "La"}
    t = data["terminations"][0]
    assert {"id", "label", "composition", "depth_angstrom", "broken_bonds_per_nm2", "equivalent_to"} <= set(t)
    assert {"a_angstrom", "b_angstrom", "gamma_deg"} == set(t["apparent_lattice"])  # nested in its termination
    assert {"from", "to", "heights_angstrom"} <= set(data["steps"][0])
    assert {"depth_angstrom", "composition"} <= set(data["layers"][0])


def test_terminations_bad_input():
    r = runner.invoke(cli.app, ["terminations", "fcc:Cu", "--plane", "0", "0", "0"])
    assert r.exit_code == 2 and "(0 0 0)" in r.stderr and len(r.stderr.strip().splitlines()) == 1
    r = runner.invoke(cli.app, ["terminations", "fcc:Cu"])
    assert r.exit_code == 2 and "--plane" in r.stderr
    r = runner.invoke(cli.app, ["terminations", "fcc:Cu", "--plane", "1", "1", "1", "--layer-tol", "-1"])
    assert r.exit_code == 2 and "-1" in r.stderr


def test_huge_bond_cutoff_or_factor_gives_the_first_shell_result_without_overflow():
    # The first-shell rule caps bonds at 1.2 x the nearest-neighbour distance, so any
    # cutoff beyond it must give the same graph; 1e300 used to overflow the image range.
    args = ["terminations", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--json"]
    ref = runner.invoke(cli.app, args + ["--bond-cutoff", "10"])
    assert ref.exit_code == 0, ref.output
    for extra in (["--bond-cutoff", "1e300"], ["--bond-factor", "1e300"]):
        r = runner.invoke(cli.app, args + extra)
        assert r.exit_code == 0 and r.stderr == "", (extra, r.stderr)
        got, want = json.loads(r.stdout), json.loads(ref.stdout)
        assert got["terminations"] == want["terminations"] and got["steps"] == want["steps"]
