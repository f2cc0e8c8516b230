"""Every option of every command changes the result it should, or is listed with the reason it cannot.

The options are read from the Typer app itself, so a new option without a
case here fails ``test_every_option_has_a_case``.  Each case runs the
command twice, the reference and the reference with one option changed, and
compares the computed part of the JSON (the settings the record echoes back
are left out, so an option that is echoed but ignored does not pass).  Where
the direction of the change is known (more faces for a larger index, fewer
layers for a wider tolerance, ...) the case checks that too.

The reference values are the physics of the trade (common practice): a
larger lattice constant gives larger spacings, a wider layer tolerance
merges layers, a bond cutoff below the nearest-neighbour distance breaks no
bonds, a thicker slab has more atoms.
"""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pytest
import typer
from ase import Atoms
from ase.io import write
from typer.testing import CliRunner

from termination import cli
from termination.structures import build_prototype
from termination.testing import synthetic_heightmap

runner = CliRunner()

# Options that produce files or choose how the output is written, not what is computed: each is
# exercised by the test named next to it.
NO_RESULT = {
    "--json": "chooses the output format; every case below compares --json output",
    "--force": "only allows overwriting an output file (tests/test_outputs.py)",
    "--plot": "output folder of the figures (tests/cli/test_cli_figures.py)",
    "--plot-format": "file format of the figures (tests/cli/test_cli_figures.py)",
    "--report": "output path of the HTML report (tests/test_html_report.py)",
    "--output": "output path of the slab file (tests/surface/test_slab.py)",
    "--format": "file format of the written slab (tests/surface/test_slab.py)",
    "--out": "output path (tests/cli/test_cli_image.py, tests/cli/test_cli_screen.py)",
    "--steps-out": "output path of the step list (tests/cli/test_cli_image.py)",
    "--workers": "parallelism only; rows are identical by design (tests/test_screening.py)",
    "--scheduler": "parallelism only; rows are identical by design (tests/test_screening.py)",
    "--chunk-size": "parallelism only; rows are identical by design (tests/test_screening.py)",
    "--resume": "continues an existing --out file (tests/test_screening.py)",
    "--channel": "picks a channel of a multi-channel instrument file, which .npy is not "
    "(tests/imaging/test_instruments.py)",
    "--demo": "replaces every input by the built-in scenario (tests/cli/test_cli_match.py)",
}
# Options of one command that do not reach its printed record.
NO_RESULT_OF = {
    ("image", "--mount"): "only written into the --out measurement file (tests/cli/test_cli_image.py)",
    ("image", "--three-index"): "the image table shows no face; only the --out file carries the mount",
    ("screen", "--pymatgen-charges"): "pymatgen's guess is the last resort after the built-in one, and no "
    "structure was found where it finds charges the built-in guess misses (NpO, AmO, PuO, PaO, CmO2, TmTe, "
    "CuZn, TiNi, PtAl2: neither finds any); tests/bulk/test_charges.py checks pymatgen's guess itself",
}

NACL = "rocksalt:Na,Cl"


def face(h: int, k: int, l: int) -> list[str]:
    return [str(h), str(k), str(l)]


def more(key: Callable[[Any], Any]) -> Callable[[Any, Any], bool]:
    return lambda ref, got: key(got) > key(ref)


def less(key: Callable[[Any], Any]) -> Callable[[Any, Any], bool]:
    return lambda ref, got: key(got) < key(ref)


@dataclass(frozen=True)
class Case:
    """``base + ref`` is the reference run, ``base + extra`` the changed one; ``expect(ref, got)`` the direction."""

    extra: list[str]
    ref: list[str] = field(default_factory=list)
    base: list[str] | None = None
    expect: Callable[[Any, Any], bool] | None = None
    table: bool = False  # compare the table output (presentation options)
    refused: bool = False  # the changed run must stop with a one-line error


def _bonds_of(result: Any) -> float:
    """Broken bonds per nm² summed over the terminations of a ``terminations`` result."""
    return float(sum(t["broken_bonds_per_nm2"] for t in result[3]))


def _spots(result: Any) -> int:
    """Visible spots summed over the terminations of a ``corrugation`` result."""
    return sum(len(t["spots"]) for t in result[2])


# The computed part of each command's record (echoed settings left out).
RESULT: dict[str, Callable[[dict[str, Any]], Any]] = {
    "structures": lambda d: d["prototypes"],
    "planes": lambda d: (d["structure"], d["faces"], d["window"]),
    "terminations": lambda d: (d["structure"], d["d_angstrom"], d["layers"], d["terminations"], d["steps"]),
    "polarity": lambda d: (d["structure"], d["charges"]["charges_e"], d["faces"]),
    "corrugation": lambda d: (d["structure"], d["mesh"], d["terminations"]),
    "slab": lambda d: (d["slab"], d["termination"], d["changed"], d["mode"]),
    "match": lambda d: (d["candidates"], d["faces"], d["fit"], d["verdict"]),
    "image": lambda d: d["analysis"],
    "screen": lambda d: d["results"],
}

BASE: dict[str, list[str]] = {
    "structures": ["structures"],
    "planes": ["planes", NACL, "--max-index", "1"],
    "terminations": ["terminations", NACL, "--plane", *face(1, 1, 1)],
    "polarity": ["polarity", NACL, "--plane", *face(1, 1, 1)],
    "corrugation": ["corrugation", NACL, "--plane", *face(0, 0, 1)],
    "slab": ["slab", NACL, "--plane", *face(1, 1, 1), "--termination", "Na", "--layers", "2"],
    "match": [
        "match",
        NACL,
        "--mount",
        *face(0, 0, 1),
        "--tilt",
        "0+-1",
        "--spacing",
        "3.99+-0.15",
        "--max-index",
        "1",
    ],
    "image": ["image", "{scan}", "--pixel-size", "0.05nm", "--z-unit", "nm"],
    "screen": ["screen", NACL, "--max-index", "1", "--workers", "1"],
}

# Shared cases: the structure argument, lattice constants, free parameters and symmetry tolerance; the cut and
# bond settings.
HEX = "hcp:Zn"
STRAINED = "{strained}"  # rocksalt NaCl with c 0.005 Å longer than a: cubic at --symprec 0.1 only
FLUORITE = "fluorite:Ca,F"  # (1 1 1): F-Ca-F triple layers 0.79 Å apart; the cheapest cut lies between F layers
PEROVSKITE = "perovskite:Sr,Ti,O"  # (0 0 1): neutral SrO and TiO2 layers; polar with Sr=3, Ti=3
PEROVSKITE_CHARGES = ["--charge", "Sr=3", "--charge", "Ti=3", "--charge", "O=-2"]


def _structure_cases(command: str, rest: list[str], hex_rest: list[str] | None = None) -> dict[str, Case]:
    """The structure argument, --a, --c, --x and --symprec for ``command STRUCTURE *rest``."""
    return {
        "structure": Case(["rocksalt:K,Cl", *rest], ref=[NACL, *rest], base=[command]),
        # a larger lattice constant gives a larger cell (common practice)
        "--a": Case(["--a", "6.0"], base=[command, NACL, *rest]),
        "--c": Case(
            ["--a", "2.66", "--c", "5.5"], ref=["--a", "2.66", "--c", "4.95"], base=[command, HEX, *(hex_rest or rest)]
        ),
        "--x": Case(["--x", "0.40"], base=[command, "wurtzite:Ga,N", *(hex_rest or rest)]),
        "--symprec": Case(["--symprec", "0.1"], base=[command, STRAINED, *rest]),
    }


def _cut_cases(command: str, rest: list[str]) -> dict[str, Case]:
    """--layer-tol, --bond-factor, --bond-cutoff and --unit-ratio on fluorite (1 1 1) (``rest`` picks the face)."""
    base = [command, FLUORITE, *rest]
    return {
        # a 1 Å tolerance merges each F-Ca-F triple layer (0.79 Å spacing) into one layer
        "--layer-tol": Case(["--layer-tol", "1.0"], base=base),
        # below the Ca-F distance (2.37 Å) no bonds are kept: every cut is free, Ca-F cuts become terminations
        "--bond-cutoff": Case(["--bond-cutoff", "2.0"], base=base),
        "--bond-factor": Case(["--bond-factor", "0.5"], base=base),
        # a Ca-F cut breaks three times the bonds of the F-F cut: a ratio of 5 lets it end a repeat unit
        "--unit-ratio": Case(["--unit-ratio", "5"], base=base),
    }


def _charge_case(command: str, rest: list[str]) -> dict[str, Case]:
    return {"--charge": Case(PEROVSKITE_CHARGES, base=[command, PEROVSKITE, *rest])}


P111 = ["--plane", *face(1, 1, 1)]
P001 = ["--plane", *face(0, 0, 1)]
HEX_PLANE = ["--plane", "0", "0", "0", "1"]
MATCH_111 = [*BASE["match"], "--mount", *face(1, 1, 1), "--step", "3.26+-0.1"]

CASES: dict[str, dict[str, Case]] = {
    "structures": {
        "--wide": Case(["--wide"], table=True, expect=more(len)),
    },
    "planes": {
        **_structure_cases("planes", ["--max-index", "1"]),
        **_charge_case("planes", ["--max-index", "1"]),
        "--max-index": Case(["--max-index", "2"], expect=more(lambda r: len(r[1]))),
        "--mount": Case(["--mount", *face(0, 0, 1)]),
        "--tilt-window": Case(["--tilt-window", "30", "60"], base=[*BASE["planes"], "--mount", *face(0, 0, 1)]),
        "--wide": Case(["--wide"], table=True, expect=more(len)),
        "--three-index": Case(["--three-index"], base=["planes", HEX, "--max-index", "1"], table=True),
    },
    "terminations": {
        **_structure_cases("terminations", P111, HEX_PLANE),
        **_cut_cases("terminations", P111),
        "--layer-tol": Case(
            ["--layer-tol", "1.0"], base=["terminations", FLUORITE, *P111], expect=less(lambda r: len(r[2]))
        ),
        # a cutoff below the Na-Cl distance (2.82 Å) keeps no bonds, so no cut breaks any
        "--bond-cutoff": Case(["--bond-cutoff", "2.0"], expect=lambda ref, got: _bonds_of(got) == 0 < _bonds_of(ref)),
        "--plane": Case(P001, ref=P111, base=["terminations", NACL]),
        "--max-multiple": Case(
            ["--max-multiple", "0"], expect=less(lambda r: sum(len(s["heights_angstrom"]) for s in r[4]))
        ),
        "--wide": Case(["--wide"], table=True, expect=more(len)),
        "--three-index": Case(["--three-index"], base=["terminations", HEX, *HEX_PLANE], table=True),
    },
    "polarity": {
        **_structure_cases("polarity", P111, HEX_PLANE),
        **_cut_cases("polarity", P111),
        **_charge_case("polarity", P001),
        "--plane": Case(P001, ref=P111, base=["polarity", NACL]),
        "--max-index": Case(["--max-index", "1"], base=["polarity", NACL], expect=less(lambda r: len(r[2]))),
        "--max-cell": Case(["--max-cell", "1"]),
        "--wide": Case(["--wide"], table=True, expect=more(len)),
        "--three-index": Case(["--three-index"], base=["polarity", HEX, *HEX_PLANE], table=True),
    },
    "corrugation": {
        **_structure_cases("corrugation", P001, HEX_PLANE),
        **_charge_case("corrugation", P001),
        "--plane": Case(["--plane", *face(1, 1, 0)], ref=P001, base=["corrugation", NACL]),
        "--termination": Case(["--termination", "Cl"], ref=["--termination", "Na"], base=["corrugation", NACL, *P111]),
        "--visible": Case(["--visible", "Cl"]),
        "--weight": Case(["--weight", "Na=0.2"]),
        "--decay-length": Case(["--decay-length", "3.0"], base=["corrugation", NACL, *P111, "--depth", "4"]),
        "--depth": Case(["--depth", "4"], base=["corrugation", NACL, *P111]),
        # Na at half weight: the spots of the Cl sublattice drop to 1/3 of the strongest
        "--threshold": Case(
            ["--threshold", "0.5"], expect=less(_spots), base=["corrugation", NACL, *P001, "--weight", "Na=0.5"]
        ),
        "--reconstructions": Case(["--no-reconstructions"], base=["corrugation", NACL, *P111]),
        "--max-cell": Case(["--max-cell", "2"], base=["corrugation", NACL, *P111]),
        "--cell": Case(["--cell", "2x2"], base=["corrugation", NACL, *P111]),
        "--site-weight": Case(["--site-weight", "Na3=0"], base=["corrugation", NACL, *P111]),
        "--wide": Case(["--wide"], table=True, expect=more(len)),
        "--three-index": Case(["--three-index"], base=["corrugation", HEX, *HEX_PLANE], table=True),
    },
    "slab": {
        **_structure_cases("slab", [*P001, "--termination", "T1"], [*HEX_PLANE, "--termination", "T1"]),
        **_cut_cases("slab", [*P111, "--termination", "T1"]),
        **_charge_case("slab", [*P001, "--termination", "T1"]),
        "--plane": Case(
            ["--plane", *face(1, 1, 0), "--termination", "T1"], ref=[*P001, "--termination", "T1"], base=["slab", NACL]
        ),
        "--termination": Case(["--termination", "Cl"]),
        "--cell": Case(["--cell", "2x2"]),
        "--pattern": Case(["--pattern", "2"]),
        "--layers": Case(["--layers", "3"], expect=more(lambda r: r[0]["natoms"])),
        "--vacuum": Case(["--vacuum", "20"], expect=more(lambda r: abs(np.linalg.det(r[0]["lattice_angstrom"])))),
        "--symmetric": Case(["--symmetric"]),
        "--max-cell": Case(["--max-cell", "2"], base=[*BASE["slab"], "--pattern", "1"]),
        "--wide": Case(["--wide"], base=[*BASE["slab"], "--layers", "8"], table=True, expect=more(len)),
        "--three-index": Case(["--three-index"], base=["slab", HEX, *HEX_PLANE, "--termination", "T1"], table=True),
    },
    "match": {
        **_structure_cases("match", BASE["match"][2:], ["--mount", "0", "0", "0", "1", "--tilt", "0+-1"]),
        **_cut_cases("match", ["--mount", *face(1, 1, 1), "--tilt", "0+-1", "--step", "3.1+-0.1", "--max-index", "1"]),
        **_charge_case("match", ["--mount", *face(0, 0, 1), "--tilt", "0+-1", "--max-index", "1"]),
        "--mount": Case(["--mount", *face(1, 1, 0)]),
        "--tilt": Case(["--tilt", "45+-1"]),
        "--spacing": Case(["--spacing", "5.64+-0.15"]),
        "--row-angle": Case(["--row-angle", "60+-2"]),
        "--step": Case(["--step", "3.26+-0.1"]),
        "--steps": Case(["--steps", "{steps}"]),
        "--measurement": Case(["--measurement", "{measurement}"]),
        "--image": Case(["--image", "{scan}", "--pixel-size", "0.05nm", "--z-unit", "nm"]),
        "--pixel-size": Case(
            ["--image", "{scan}", "--pixel-size", "0.04nm", "--z-unit", "nm"],
            ref=["--image", "{scan}", "--pixel-size", "0.05nm", "--z-unit", "nm"],
        ),
        "--z-unit": Case(
            ["--image", "{scan}", "--pixel-size", "0.05nm", "--z-unit", "A"],
            ref=["--image", "{scan}", "--pixel-size", "0.05nm", "--z-unit", "nm"],
        ),
        "--max-index": Case(["--max-index", "2"], expect=more(lambda r: len(r[0]))),
        "--visible": Case(["--visible", "Cl"], base=MATCH_111),
        "--weight": Case(["--weight", "Na=0.1"], base=MATCH_111),
        # Cl alone images: its (0 0 1) lattice is 3.99 Å in the top layer, 2.82 Å with the layer below
        "--decay-length": Case(["--decay-length", "20"], base=[*BASE["match"], "--visible", "Cl", "--depth", "3"]),
        "--depth": Case(["--depth", "3"], base=[*BASE["match"], "--visible", "Cl"]),
        "--site-weight": Case(["--site-weight", "Na3=0"], base=MATCH_111),
        "--mount-sigma": Case(["--mount-sigma", "10"]),
        "--flat-prior": Case(["--flat-prior"]),
        "--no-reconstructions": Case(["--no-reconstructions"], base=MATCH_111),
        "--max-cell": Case(["--max-cell", "1"], base=MATCH_111),
        "--cell": Case(["--cell", "2x2"], base=MATCH_111),
        "--top": Case(["--top", "2"], expect=less(lambda r: len(r[0]))),
        "--wide": Case(["--wide"], table=True),
        "--three-index": Case(
            ["--three-index"],
            base=["match", HEX, "--mount", "0", "0", "0", "1", "--tilt", "0+-1", "--max-index", "1"],
            table=True,
        ),
    },
    "image": {
        "file": Case(["{flat}"], ref=["{scan}"], base=["image", "--pixel-size", "0.05nm", "--z-unit", "nm"]),
        "--pixel-size": Case(
            ["--pixel-size", "0.04nm"], ref=["--pixel-size", "0.05nm"], base=["image", "{scan}", "--z-unit", "nm"]
        ),
        "--z-unit": Case(["--z-unit", "A"], ref=["--z-unit", "nm"], base=["image", "{scan}", "--pixel-size", "0.05nm"]),
        # steps of 2.82 Å are below a 3.5 Å threshold
        "--min-step": Case(["--min-step", "3.5"], expect=less(lambda r: len(r["steps"]))),
        "--drift-lattice": Case(["--drift-lattice", "square"]),
        # 1 % of the pixels missing: refused at a 0.5 % limit
        "--max-nan": Case(
            ["--max-nan", "0.005"], base=["image", "{holes}", "--pixel-size", "0.05nm", "--z-unit", "nm"], refused=True
        ),
        "--wide": Case(["--wide"], table=True),
    },
    "screen": {
        "paths": Case(["rocksalt:K,Cl"], ref=[NACL], base=["screen", "--max-index", "1", "--workers", "1"]),
        "--max-index": Case(["--max-index", "2"], expect=more(len)),
        "--max-cell": Case(["--max-cell", "1"]),
        "--symprec": Case(["--symprec", "0.1"], base=["screen", STRAINED, "--max-index", "1", "--workers", "1"]),
        **_cut_cases("screen", ["--max-index", "1", "--workers", "1"]),
        "--wide": Case(["--wide"], table=True),
    },
}


def _options() -> list[tuple[str, str]]:
    """Every (command, option) pair of the app, by the option's long name (arguments by their name)."""
    group = typer.main.get_command(cli.app)
    assert hasattr(group, "commands")  # typer's group (typer may carry its own copy of click)
    pairs = []
    for name, command in sorted(group.commands.items()):
        for param in command.params:
            if param.param_type_name == "option":
                pairs.append((name, max(param.opts, key=len)))
            else:
                pairs.append((name, str(param.name)))
    return pairs


def test_every_option_has_a_case():
    missing = [
        (c, o) for c, o in _options() if o not in NO_RESULT and (c, o) not in NO_RESULT_OF and o not in CASES.get(c, {})
    ]
    assert not missing, f"options with neither a case nor a reason: {missing}"
    stale = [(c, o) for c, opts in CASES.items() for o in opts if (c, o) not in _options()]
    assert not stale, f"cases of options the app no longer has: {stale}"


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """The input files the cases name in braces."""
    folder = tmp_path_factory.mktemp("every_option")
    geometry = dict(tilt_deg=5.0, azimuth_deg=30.0, step_azimuth_deg=10.0, lattice=(4.0, 4.0, 90.0, 15.0), seed=1)
    z = synthetic_heightmap((128, 128), 0.5, step_heights=[2.82, 2.82], noise_angstrom=0.05, **geometry)
    np.save(folder / "scan.npy", z / 10.0)
    np.save(folder / "flat.npy", synthetic_heightmap((128, 128), 0.5, noise_angstrom=0.05, **geometry) / 10.0)
    holes = z.copy()
    holes[:13, :13] = np.nan  # 169 of 16384 pixels, 1 %
    np.save(folder / "holes.npy", holes / 10.0)
    (folder / "steps.txt").write_text("2.82 0.1\n2.82 0.1\n")
    (folder / "measurement.toml").write_text("row_angle = { value = 60.0, sigma = 2.0 }\n")
    nacl = build_prototype(NACL)
    atoms = Atoms(nacl.species, scaled_positions=nacl.positions, cell=nacl.lattice + np.diag([0, 0, 0.005]), pbc=True)
    write(folder / "strained.cif", atoms)
    return {p.stem: str(p) for p in folder.iterdir()}


_runs: dict[tuple[str, ...], Any] = {}


def _run(args: list[str], files: dict[str, str], table: bool) -> Any:
    args = [a.format(**files) if "{" in a else a for a in args]
    args = args if table else [*args, "--json"]
    key = tuple(args)
    if key not in _runs:
        r = runner.invoke(cli.app, args)
        assert r.exit_code == 0 or not table, (args, r.output)
        if table:
            _runs[key] = r.stdout
        elif r.exit_code != 0:
            _runs[key] = ("error", r.stderr.strip())
        else:
            _runs[key] = RESULT[args[0]](json.loads(r.stdout))
    return _runs[key]


def _failed(result: Any) -> bool:
    return isinstance(result, tuple) and result[:1] == ("error",)


@pytest.mark.parametrize(("command", "option"), [(c, o) for c, opts in CASES.items() for o in opts])
def test_option_changes_the_result(command, option, files):
    case = CASES[command][option]
    base = case.base if case.base is not None else BASE[command]
    ref = _run(base + case.ref, files, case.table)
    got = _run(base + case.extra, files, case.table)
    assert not _failed(ref), ref
    assert _failed(got) == case.refused, got
    assert got != ref, f"{command} {' '.join(case.extra)} gives the same result as without it"
    if case.expect is not None:
        assert case.expect(ref, got), f"{command} {' '.join(case.extra)} changes the result the wrong way"
