"""CLI: --cell, --site-weight and match --depth; polarity with two-layer and nearest cells (issue 13)."""

import json

import pytest
from typer.testing import CliRunner

from termination import cli

runner = CliRunner()


def invoke(*args):
    return runner.invoke(cli.app, list(args))


def one_line_error(r, text):
    assert r.exit_code == 2, r.output
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and text in lines[0] and "Traceback" not in r.output, lines


@pytest.fixture(scope="module")
def cif(tmp_path_factory):
    """CIF files written by pymatgen: rutile and wurtzite ZnO (structures no prototype covers)."""
    from pymatgen.core import Lattice, Structure
    from pymatgen.io.cif import CifWriter

    folder = tmp_path_factory.mktemp("cif")
    made = {}
    # Rutile TiO2: P4_2/mnm, a = 4.594 Å, c = 2.959 Å, O at 4f x = 0.305 (from memory).
    rutile = Structure.from_spacegroup(
        "P4_2/mnm", Lattice.tetragonal(4.594, 2.959), ["Ti", "O"], [[0, 0, 0], [0.305] * 2 + [0]]
    )
    # Wurtzite ZnO: P6_3mc, a = 3.250 Å, c = 5.207 Å, u = 0.382 (from memory).
    zno = Structure.from_spacegroup(
        "P6_3mc", Lattice.hexagonal(3.250, 5.207), ["Zn", "O"], [[1 / 3, 2 / 3, 0], [1 / 3, 2 / 3, 0.382]]
    )
    for name, s in (("rutile", rutile), ("zno", zno)):
        path = folder / f"{name}.cif"
        CifWriter(s).write_file(str(path))
        made[name] = str(path)
    return made


def test_corrugation_with_a_given_cell_shows_its_domains():
    # Si(001)-(2×1) and its (1×2) domain: half-order spots along both axes, 7.68 Å square together
    # (Schlier and Farnsworth, J. Chem. Phys. 30, 917 (1959); a = 5.431 Å, common practice).
    args = ["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--termination", "T1", "--cell", "2x1"]
    r = invoke(*args)
    assert r.exit_code == 0, r.output
    assert "(2×1) (given)" in r.output and "(1/2 0)" in r.output and "(0 1/2)" in r.output
    assert "2 domains superposed ((2×1), (1×2))" in " ".join(r.output.split())
    data = json.loads(invoke(*args, "--json").stdout)
    (t,) = data["terminations"]
    (cell,) = t["cells"]
    assert cell["cell"] == "(2×1)" and cell["domains"] == ["(2×1)", "(1×2)"]
    assert cell["apparent_lattice"]["b_angstrom"] == pytest.approx(2 * 5.431 / 2**0.5)
    assert cell["domain_lattice"]["a_angstrom"] == pytest.approx(2 * 5.431 / 2**0.5)
    counts = {tuple(s["g"]): s["domains"] for s in cell["spots"]}
    assert counts[(0.5, 0.0)] == 1 and counts[(0.0, 0.5)] == 1 and counts[(1.0, 0.0)] == 2


def test_corrugation_site_weight_picks_the_five_fold_ti_rows(cif):
    # TiO2(110): the Ti5c rows are a√2 = 6.50 Å apart (Diebold et al., Phys. Rev. Lett. 77, 1322 (1996)).
    args = ["corrugation", cif["rutile"], "--plane", "1", "1", "0", "--termination", "O", "--visible", "Ti"]
    args += ["--depth", "2", "--site-weight", "Ti6c=0", "--no-reconstructions", "--json"]
    r = invoke(*args)
    assert r.exit_code == 0, r.output
    data = json.loads(r.stdout)
    assert data["visibility"]["site_weights"] == {"Ti6c": 0.0}
    (t,) = data["terminations"]
    assert t["row_spacings_angstrom"][0] == pytest.approx(4.594 * 2**0.5, abs=1e-3)


def test_polarity_lists_the_octopole_and_the_cells_per_layer():
    # Wolf, Phys. Rev. Lett. 68, 3315 (1992): octopolar p(2×2) of rock-salt (111), 3/4 of the
    # top layer and 1/4 of the second removed.
    r = invoke("polarity", "rocksalt:Ni,O", "--plane", "1", "1", "1", "--a", "4.177")
    assert r.exit_code == 0, r.output
    row = next(line for line in r.output.splitlines() if line.startswith("(2×2)"))
    assert "3 of 4 O + 1 of 4 Ni" in row or "3 of 4 Ni + 1 of 4 O" in row
    data = json.loads(invoke("polarity", "rocksalt:Ni,O", "--plane", "1", "1", "1", "--json").stdout)
    recs = data["faces"][0]["terminations"][0]["reconstructions"]
    octo = [x for x in recs[:3] if x["wood"] == "(2×2)"]
    assert octo and octo[0]["layer_changed"] == [3, 1] and octo[0]["residual_charge_e"] == 0.0


def test_polarity_gives_the_nearest_cells_of_zno_0001(cif):
    # Dulub, Diebold and Kresse, Phys. Rev. Lett. 90, 016102 (2003): ZnO(0001)-Zn would need 0.236 of
    # the Zn removed; the (2×2) with one Zn vacancy is the nearest cell, the rest is left to
    # electronic compensation or adsorbates.
    r = invoke("polarity", cif["zno"], "--plane", "0", "0", "1", "--charge", "Zn=2", "--charge", "O=-2")
    assert r.exit_code == 0, r.output
    text = " ".join(r.output.split())
    assert "nearest: (2×2)" in text and "electronic compensation or adsorbates" in text
    assert "residual (e)" in r.output and "+0.028" in r.output
    r = invoke("polarity", cif["zno"], "--plane", "0", "0", "1", "--charge", "Zn=2", "--charge", "O=-2", "--json")
    (t,) = json.loads(r.stdout)["faces"][0]["terminations"]
    best = t["reconstructions"][0]
    assert best["wood"] == "(2×2)" and best["residual_charge_e"] == pytest.approx(0.028, abs=1e-9)


def test_match_with_cell_depth_and_site_weight(cif):
    r = invoke(
        "match", "diamond:Si", "--mount", "0", "0", "1", "--tilt", "0+-1", "--spacing", "7.68+-0.2", "--cell", "2x1"
    )
    assert r.exit_code == 0, r.output
    first = next(line for line in r.output.splitlines() if line.lstrip().startswith("1 "))
    assert "(0 0 1)" in first and "(2×1) given" in first
    args = ["match", cif["rutile"], "--mount", "1", "1", "0", "--tilt", "0+-1", "--spacing", "6.5+-0.25"]
    args += ["--spacing", "2.96+-0.15", "--row-angle", "90+-3", "--visible", "Ti", "--depth", "2"]
    args += ["--site-weight", "Ti6c=0", "--no-reconstructions", "--json"]
    r = invoke(*args)
    assert r.exit_code == 0, r.output
    best = json.loads(r.stdout)["candidates"][0]
    assert best["hkl"] == [1, 1, 0] and best["termination"]["label"] == "O"


@pytest.mark.parametrize(
    "args, text",
    [
        (["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--cell", "2y1"], "'2y1'"),
        (["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--cell", "1x1"], "unreconstructed"),
        (["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--cell", "sqrt3xsqrt3R30"], "no supercell"),
        (["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--cell", "20x20"], "at most 100"),
        (["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--site-weight", "Si3x=1"], "'Si3x'"),
        (["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--site-weight", "Ti5c=1"], "'Ti'"),
        (["match", "diamond:Si", "--spacing", "7.68", "--cell", "2,4,1,2"], "singular"),
        (["match", "diamond:Si", "--spacing", "7.68", "--depth", "-1"], "-1"),
        (["match", "diamond:Si", "--spacing", "7.68", "--site-weight", "Si3c=x"], "'x'"),
    ],
)
def test_bad_cells_and_site_weights_give_one_line_and_exit_code_2(args, text):
    one_line_error(invoke(*args), text)
