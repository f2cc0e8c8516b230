"""Every case the hardening issue lists: a clear one-line error, a flagged result or the right answer.

The issue (no silent wrong answer, no traceback, no hang on any input) names
its findings by group; each parametrised test below takes one group, one
case per finding.  An error case must end with exit code 2, exactly one line
on stderr that names the bad value, no traceback and the input unchanged; a
flagged case must say that no candidate explains the measurements; an answer
case checks the answer against its reference.  The huge inputs are built
small or checked from their headers, so that the whole file runs in seconds.
"""

import json
import math
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from termination import cli
from termination.testing import minimal_cif

runner = CliRunner()
ROOT = Path(__file__).resolve().parents[1]

NACL_CIF = minimal_cif(
    "NaCl", "F m -3 m", (5.64,) * 3, (90,) * 3, [("Na1", "Na", 0, 0, 0), ("Cl1", "Cl", 0.5, 0.5, 0.5)]
)
# an operation list without the F centring: the two atoms then make the CsCl structure
P_OPS = "loop_\n_symmetry_equiv_pos_as_xyz\n'x, y, z'\n'-x, -y, -z'\n"
NACL_POSCAR = "NaCl\n1.0\n5.64 0 0\n0 5.64 0\n0 0 5.64\nNa Cl\n1 1\nDirect\n0 0 0\n0.5 0.5 0.5\n"


def invoke(*args):
    return runner.invoke(cli.app, [str(a) for a in args])


def assert_one_line_error(r, *names):
    """Exit code 2, one stderr line starting 'termination', naming each of ``names``, no traceback."""
    lines = r.stderr.strip().splitlines()
    assert r.exit_code == 2, (r.exit_code, r.stdout[-500:], r.stderr)
    assert len(lines) == 1 and lines[0].startswith("termination"), r.stderr
    assert "Traceback" not in r.output and "unexpected" not in lines[0], r.stderr
    for name in names:
        assert name in lines[0], (name, lines[0])


def assert_flagged(r):
    """The command ran, and its verdict says first that no candidate explains the measurements."""
    assert r.exit_code == 0, r.stderr
    assert "No candidate explains the measurements" in r.stdout, r.stdout[-1500:]
    assert "Fit check passed" not in r.stdout


# --------------------------------------------------------------------------- silent wrong answers: match


@pytest.mark.parametrize(
    "args, outcome, named",
    [
        # a step of 0.01 Å fits nothing: flagged (one step alone may not be an outlier)
        (["--step", "0.01"], "flagged", ()),
        # a step of 1e308 Å is no step: refused
        (["--step", "1e308"], "error", ("1e+308",)),
        # a spacing of 1e-300 Å: flagged
        (["--spacing", "1e-300"], "flagged", ()),
        # one huge step among good ones: beyond the step model's 50 Å range, flagged
        (["--step", "2.82", "--step", "2.82", "--step", "5.64", "--step", "999"], "flagged", ()),
        # a step beyond 1000 Å among good ones: refused
        (["--step", "2.82", "--step", "2.82", "--step", "1e5"], "error", ("100000",)),
        # huge charges gave a NaN score: refused before any work
        (["--step", "2.82", "--charge", "Na=1e300"], "error", ("Na", "1e+300")),
    ],
    ids=["step 0.01", "step 1e308", "spacing 1e-300", "one huge step", "step 1e5", "huge charge"],
)
def test_match_with_measurements_that_fit_nothing(args, outcome, named):
    # rock salt NaCl, a = 5.64 Å: (0 0 1) steps are multiples of a/2 = 2.82 Å (common practice)
    r = invoke("match", "rocksalt:Na,Cl", "--mount", 0, 0, 1, "--max-index", 1, *args)
    if outcome == "error":
        assert_one_line_error(r, *named)
    else:
        assert_flagged(r)


def test_match_with_good_steps_still_passes_the_fit_check():
    # the counterpart of the flagged cases: a/2 and a steps of NaCl (0 0 1) (common practice)
    r = invoke("match", "rocksalt:Na,Cl", "--mount", 0, 0, 1, "--max-index", 1, "--step", 2.82, "--step", 5.64)
    assert r.exit_code == 0 and "Fit check passed" in r.stdout, r.stdout[-1500:]


@pytest.mark.parametrize("command", ["polarity", "slab"])
def test_huge_charges_are_refused_by_every_command_that_takes_charges(command, tmp_path):
    extra = ["--termination", "Na", "-o", tmp_path / "s.vasp"] if command == "slab" else []
    r = invoke(command, "rocksalt:Na,Cl", "--plane", 1, 1, 1, "--charge", "Na=1e300", *extra)
    assert_one_line_error(r, "Na", "1e+300")
    assert not (tmp_path / "s.vasp").exists()


# --------------------------------------------------------------------------- silent wrong answers: missing pixels


@pytest.mark.parametrize(
    "mask",
    [
        lambda z: z[::7].fill(np.nan),  # gave a 7.67° tilt instead of 5.0° and "one terrace"
        lambda z: z[:, ::5].fill(np.nan),  # gave a 5.78 Å lattice at 76° instead of 4.0 Å square
        lambda z: z[100].fill(np.nan),  # one lost line turned 3 true steps into 7
    ],
    ids=["every 7th row", "every 5th column", "one row"],
)
def test_missing_pixels_change_no_answer(mask):
    from termination.imaging.analysis import analyse_heightmap
    from termination.testing import synthetic_heightmap
    from tests.imaging.test_artifacts import TRUTH, check

    # the synthetic truth: 5.0° terrace tilt, 4.0 Å square lattice, three 1.5 Å steps
    truth = dict(TRUTH, lattice=(4.0, 4.0, 90.0, 10.0), step_heights=[1.5, 1.5, 1.5], tilt_deg=5.0)
    z = synthetic_heightmap((256, 256), 0.5, seed=0, **truth)
    mask(z)
    r = analyse_heightmap(z, 0.5)
    check(r, truth)
    assert r.terraces == 4 and len(r.steps) == 3, (r.terraces, r.steps)
    assert r.nan_fraction > 0


# --------------------------------------------------------------------------- silent wrong answers: files


@pytest.mark.parametrize(
    "edit, named",
    [
        (lambda t: t.replace("Na1 Na", "Na1 11"), "'11'"),  # a numeric type symbol dropped every Na
        (lambda t: t.replace("Na1 Na", "Na1 Uuo"), "'Uuo'"),  # read as U
        (lambda t: t.replace("F m -3 m", "F m -3 x"), "'F m -3 x'"),  # unknown symbol: became CsCl
        (lambda t: t.replace("'F m -3 m'\n", "'F m -3 m'\n" + P_OPS), "Pm-3m"),  # operations without F centring
        (lambda t: t.replace("_cell_length_a", "_space_group_IT_number 221\n_cell_length_a"), "221"),  # disagree
        (lambda t: t.replace("a 5.64", "a -5.64"), "-5.64"),  # negative cell length
        (lambda t: t.replace("alpha 90", "alpha -90"), "-90"),  # negative angle
        (lambda t: t.replace("alpha 90", "alpha 200"), "200"),  # alpha = 200°
    ],
    ids=[
        "type 11",
        "Uuo",
        "unknown symbol",
        "operations without centring",
        "number vs symbol",
        "a < 0",
        "alpha < 0",
        "alpha 200",
    ],
)
def test_cif_defects_are_refused(tmp_path, edit, named):
    path = tmp_path / "NaCl.cif"
    path.write_text(edit(NACL_CIF))
    before = path.read_bytes()
    r = invoke("planes", path, "--max-index", 1)
    assert_one_line_error(r, "NaCl.cif", named)
    assert path.read_bytes() == before


def test_poscar_counts_line_shorter_than_the_species_line_is_refused(tmp_path):
    path = tmp_path / "POSCAR"
    path.write_text(NACL_POSCAR.replace("Na Cl\n1 1\n", "Na Cl\n1\n"))
    r = invoke("planes", path, "--max-index", 1)
    assert_one_line_error(r, "POSCAR", "line 7")


def test_cif_without_atom_sites_names_the_file(tmp_path):
    # about 25 CIF defects used to give the same bare "Invalid CIF file with no structures!"
    path = tmp_path / "NaCl.cif"
    path.write_text(NACL_CIF.split("loop_")[0])
    assert_one_line_error(invoke("planes", path, "--max-index", 1), "NaCl.cif", "atom sites")


# --------------------------------------------------------------------------- non-centrosymmetric crystals


def _gaas_poscar(invert, shift):
    # zinc blende GaAs, a = 5.653 Å; the inverted description is the same crystal turned by a proper rotation
    frac = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0], *([[0.25, 0.25, 0.25]] * 4)], float)
    frac[4:] += frac[:4]
    frac = (-frac if invert else frac) + shift
    lines = "\n".join(" ".join(f"{v % 1:.10f}" for v in row) for row in frac)
    return f"GaAs\n1.0\n5.653 0 0\n0 5.653 0\n0 0 5.653\nGa As\n4 4\nDirect\n{lines}\n"


def _stack(structure, hkl):
    extra = ["--a", 5.653] if ":" in str(structure) else []
    r = invoke("terminations", structure, "--plane", *hkl, *extra, "--json")
    assert r.exit_code == 0, r.stderr
    data = json.loads(r.stdout)
    layers = [(round(layer["depth_angstrom"], 6), layer["composition"]) for layer in data["layers"]]
    return layers, [t["label"] for t in data["terminations"]]


@pytest.mark.parametrize("invert, shift", [(False, 0.0), (True, 0.0), (True, 0.137), (False, 0.31)])
def test_polar_faces_and_depths_do_not_depend_on_the_input_setting(tmp_path, invert, shift):
    # GaAs (1 1 1) is the Ga face, "(111)A" (common practice), whatever the input setting; depths are
    # measured from the top layer, not from the origin of the input
    path = tmp_path / "GaAs.vasp"
    path.write_text(_gaas_poscar(invert, shift))
    for hkl, top in (((1, 1, 1), "Ga"), ((-1, -1, -1), "As")):
        layers, labels = _stack(path, hkl)
        assert layers[0] == (0.0, {top: 1}), (invert, shift, hkl, layers)
        assert (layers, labels) == _stack("zincblende:Ga,As", hkl)


def test_inequivalent_namesakes_keep_their_primes_on_every_variant_of_a_face():
    # wurtzite ZnO (0 3 1): two inequivalent Zn terminations with equal broken bonds and equal layer gaps
    # (found by the property tests); which one is Zn and which Zn' must not depend on the variant given
    from termination.structures import build_prototype
    from termination.surface.faces import face_variants
    from termination.surface.terminations import face_terminations

    crystal = build_prototype("wurtzite:Zn,O")
    seen = set()
    for variant in face_variants(crystal, (0, 3, 1)):
        ft = face_terminations(crystal, variant)
        seen.add(tuple((t.label, round(t.depth, 6)) for t in ft.terminations))
        assert [t.label for t in ft.terminations].count("Zn'") == 1
    assert len(seen) == 1, seen


# --------------------------------------------------------------------------- tracebacks


@pytest.mark.parametrize(
    "args, named",
    [
        (["terminations", "rocksalt:Na,Cl", "--plane", 1000003, 999983, 1], "1000003"),  # blamed the tolerance
        (["planes", "rocksalt:Na,Cl", "--mount", 1000003, 999983, 1], "1000003"),  # gave tilts
        (["corrugation", "rocksalt:Na,Cl", "--plane", 0, 0, 101], "101"),
        (["polarity", "rocksalt:Na,Cl", "--plane", -101, 0, 1], "-101"),
        (["match", "rocksalt:Na,Cl", "--mount", 2**62, 1, 1, "--step", 2.82], str(2**62)),  # int64 overflow
        (["planes", "rocksalt:Na,Cl", "--max-index", 13], "13"),
        (["polarity", "rocksalt:Na,Cl", "--max-cell", 13], "13"),
    ],
    ids=[
        "plane 1000003",
        "mount 1000003",
        "corrugation 101",
        "polarity -101",
        "mount 2^62",
        "max-index 13",
        "max-cell 13",
    ],
)
def test_huge_miller_indices_are_refused_before_work(args, named):
    start = time.perf_counter()
    r = invoke(*args)
    assert_one_line_error(r, named)
    assert time.perf_counter() - start < 20  # refused up front, not after a long search


def test_huge_mount_in_a_measurement_file_is_refused(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text("mount = [1000003, 999983, 1]\nsteps = [2.82]\n")
    assert_one_line_error(invoke("match", "rocksalt:Na,Cl", "--measurement", path), "m.toml", "1000003")


def test_deeply_nested_toml_is_one_line(tmp_path):
    path = tmp_path / "deep.toml"
    path.write_text("a = " + "[" * 5000 + "]" * 5000 + "\n")
    assert_one_line_error(invoke("match", "rocksalt:Na,Cl", "--measurement", path), "deep.toml", "nested")


def _image_case(name):
    from tests.imaging.image_corpus import cases

    return next(c for c in cases() if c[0] == name)


@pytest.mark.parametrize(
    "name",
    ["npy unterminated header", "npy header of 80 GB", "npy 1e300 height", "sxm denormal range"],
)
def test_malformed_height_maps_are_one_line(tmp_path, name):
    _, build, options = _image_case(name)
    path = build(tmp_path)
    before = path.read_bytes()
    assert_one_line_error(invoke("image", path, *options))
    assert path.read_bytes() == before


def test_a_1000_atom_p1_cell_gives_its_bonds():
    # rock salt 5 x 5 x 5 conventional cells, every atom moved by up to 0.02 Å so that spglib finds P1:
    # each ion keeps its 6 nearest neighbours (common practice) and no dense N^2 x images array is made
    from termination.bulk.bonds import bond_graph
    from termination.structures import build_prototype

    c = build_prototype("rocksalt:Na,Cl", a=5.64)
    lattice = c.lattice * 5
    shifts = np.array([(i, j, k) for i in range(5) for j in range(5) for k in range(5)], float)
    frac = ((c.positions[None, :, :] + shifts[:, None, :]) / 5).reshape(-1, 3)
    rng = np.random.default_rng(0)
    cart = frac @ lattice + rng.uniform(-0.02, 0.02, size=(len(frac), 3)) / math.sqrt(3)
    from termination.bulk.crystal import build_crystal

    big = build_crystal(lattice, cart @ np.linalg.inv(lattice), list(c.species) * 125)
    assert len(big.species) == 1000 and big.spacegroup_number == 1
    graph = bond_graph(big)
    assert np.bincount(graph.source, minlength=1000).tolist() == [6] * 1000


# --------------------------------------------------------------------------- hangs and memory


def _fifo(folder):
    path = folder / "fifo"
    os.mkfifo(path)
    return path


@pytest.mark.parametrize("option", ["--measurement", "--steps"])
@pytest.mark.parametrize("source", ["fifo", "/dev/zero"])
def test_fifo_and_dev_zero_are_refused_at_once(tmp_path, option, source):
    path = _fifo(tmp_path) if source == "fifo" else Path("/dev/zero")
    start = time.perf_counter()
    r = invoke("match", "rocksalt:Na,Cl", option, path)
    assert_one_line_error(r, str(path), "not a regular file")
    assert time.perf_counter() - start < 20


def test_a_step_list_of_100k_lines_is_refused_before_matching(tmp_path):
    from termination.defaults import MAX_MEASURED_VALUES

    path = tmp_path / "steps.txt"
    path.write_text("2.82\n" * 100_000)
    start = time.perf_counter()
    r = invoke("match", "rocksalt:Na,Cl", "--steps", path)
    assert_one_line_error(r, "steps.txt", "100000", str(MAX_MEASURED_VALUES))
    assert time.perf_counter() - start < 20


def test_a_tiff_of_12288_squared_pixels_is_refused_from_its_header(tmp_path):
    import tifffile

    # the file was a 150 kB compressed TIFF; an empty (sparse) one declares the same 12288 x 12288
    # pixels in its header without taking 150 MB of disk, and must be refused from that header alone
    path = tmp_path / "big.tif"
    with tifffile.TiffWriter(path) as tif:
        tif.write(shape=(12288, 12288), dtype=np.uint8)
    start = time.perf_counter()
    r = invoke("image", path, "--pixel-size", "0.5A", "--z-unit", "A")
    assert_one_line_error(r, "big.tif", f"{12288**2:,}")
    assert time.perf_counter() - start < 20


def test_polarity_reports_its_progress_per_face():
    from termination.reports import polarity_report
    from termination.structures import build_prototype

    seen = []
    polarity_report(build_prototype("rocksalt:Na,Cl"), max_index=1, progress=lambda f, s: seen.append((f, s)))
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    assert len(seen) == 3 + 1  # (0 0 1), (0 1 1), (1 1 1) of an fcc lattice (common practice), then done


def test_match_reports_its_progress_over_faces_and_cells():
    from termination.identification.likelihood import match
    from termination.identification.measurement import Measurement, Value
    from termination.structures import build_prototype

    seen = []
    measured = Measurement(mount=(0, 0, 1), max_index=1, steps=(Value(2.82),))
    match(build_prototype("rocksalt:Na,Cl"), measured, progress=lambda f, s: seen.append((f, s)), select_cells=None)
    fractions = [f for f, _ in seen]
    assert fractions == sorted(fractions) and fractions[0] == 0.0 and fractions[-1] == 1.0
    stages = [s for _, s in seen]
    assert stages[:3] == ["face (0 0 1)", "face (0 1 1)", "face (1 1 1)"]  # fcc faces to index 1
    assert any(s.startswith("cells of (1 1 1)") for s in stages)  # the polar (1 1 1) (Tasker 1979)


def test_polarity_at_the_largest_indices_can_be_interrupted():
    # --max-index 12 --max-cell 12 runs for minutes: Ctrl-C gives one line and exit code 130
    code = "import sys; from termination import cli; print('ready', flush=True); cli.main(sys.argv[1:])"
    args = ["polarity", "rocksalt:Na,Cl", "--max-index", "12", "--max-cell", "12"]
    proc = subprocess.Popen(
        [sys.executable, "-c", code, *args], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
    )
    try:
        assert proc.stdout.readline().strip() == "ready"
        time.sleep(1.5)
        proc.send_signal(signal.SIGINT)
        _, err = proc.communicate(timeout=120)
    finally:
        proc.kill()
    assert proc.returncode == 130, err
    assert err.strip().splitlines() == [err.strip()] and "interrupted" in err and "Traceback" not in err, err


# --------------------------------------------------------------------------- outputs


def _scan(folder):
    from termination.testing import synthetic_heightmap

    z = synthetic_heightmap((128, 128), 0.5, tilt_deg=3.0, step_heights=[2.0], lattice=(3.0, 3.0, 90.0, 0.0), seed=1)
    path = folder / "scan.npy"
    np.save(path, z)
    return path


def test_out_naming_a_hard_link_of_the_input_is_refused_even_with_force(tmp_path):
    scan = _scan(tmp_path)
    link = tmp_path / "link.toml"
    os.link(scan, link)
    before = scan.read_bytes()
    r = invoke("image", scan, "--pixel-size", "0.5A", "--z-unit", "A", "--out", link, "--force")
    assert_one_line_error(r, "link.toml")
    assert scan.read_bytes() == before


def test_a_failing_second_output_leaves_no_first_output(tmp_path):
    scan = _scan(tmp_path)
    out = tmp_path / "m.toml"
    (tmp_path / "taken.txt").write_text("kept\n")
    r = invoke(
        "image", scan, "--pixel-size", "0.5A", "--z-unit", "A", "--out", out, "--steps-out", tmp_path / "taken.txt"
    )
    assert_one_line_error(r, "taken.txt")
    assert not out.exists() and (tmp_path / "taken.txt").read_text() == "kept\n"


def test_reader_log_lines_never_add_a_second_line(tmp_path):
    # a TIFF the reader logs about (random bytes after the magic number) still gives one line
    _, build, options = _image_case("tiff random bytes")
    assert_one_line_error(invoke("image", build(tmp_path), *options))


# --------------------------------------------------------------------------- the safety net


@pytest.mark.parametrize(
    "exc", [MemoryError(), RecursionError("maximum recursion depth exceeded"), OverflowError("int too large")]
)
def test_any_unexpected_exception_is_one_line_naming_command_and_input(monkeypatch, exc):
    import logging

    import termination.reports as reports

    def broken(*args, **kwargs):
        logging.getLogger("pymatgen").error("a third-party log line")  # must not reach stderr
        raise exc

    monkeypatch.setattr(reports, "planes_report", broken)
    r = invoke("planes", "rocksalt:Na,Cl")
    lines = r.stderr.strip().splitlines()
    assert r.exit_code == 2 and len(lines) == 1, r.stderr
    assert "planes rocksalt:Na,Cl" in lines[0] and type(exc).__name__ in lines[0] and "--traceback" in lines[0]
    assert "Traceback" not in r.output


def test_traceback_option_shows_the_trace(monkeypatch):
    import termination.reports as reports

    def broken(*args, **kwargs):
        raise OverflowError("int too large")

    monkeypatch.setattr(reports, "planes_report", broken)
    with pytest.raises(OverflowError, match="int too large"):
        cli.main(["planes", "rocksalt:Na,Cl", "--traceback"])
    with pytest.raises(SystemExit) as stop:  # and only for that call
        cli.main(["planes", "rocksalt:Na,Cl"])
    assert stop.value.code == 2
