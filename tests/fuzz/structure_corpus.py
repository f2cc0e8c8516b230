"""A seeded corpus of malformed structure files (CIF, POSCAR, extended XYZ and others) for the fuzz tests.

Every file is broken on purpose, by one of the defects below with random
details: each must give exit code 2 and one line on stderr, and leave the
file as it was.  ``corpus(seed, n)`` draws ``n`` of them; the full corpus
(``tests/fuzz/run_structure_corpus.py``) draws thousands.
"""

from __future__ import annotations

import random
from collections.abc import Callable

from termination.testing import minimal_cif

GOOD_CIF = minimal_cif(
    "NaCl", "F m -3 m", (5.64,) * 3, (90,) * 3, [("Na1", "Na", 0, 0, 0, 1), ("Cl1", "Cl", 0.5, 0.5, 0.5, 1)]
)

GOOD_POSCAR = "NaCl\n5.64\n1 0 0\n0 1 0\n0 0 1\nNa Cl\n4 4\nDirect\n" + "".join(
    f"{x} {y} {z}\n"
    for x, y, z in [(0, 0, 0), (0, 0.5, 0.5), (0.5, 0, 0.5), (0.5, 0.5, 0)]
    + [(0.5, 0.5, 0.5), (0.5, 0, 0), (0, 0.5, 0), (0, 0, 0.5)]
)

GOOD_XYZ = (
    '2\nLattice="0 2.82 2.82 2.82 0 2.82 2.82 2.82 0" Properties=species:S:1:pos:R:3 pbc="T T T"\n'
    "Na 0 0 0\nCl 2.82 2.82 2.82\n"
)

BAD_NUMBERS = ["nan", "inf", "-inf", "1e400", "-5.64", "0", "x", "1e-300", "5.64.1", "--1", ""]
BAD_SYMBOLS = ["11", "Uuo", "Xx", "na1+x", "?", "Q", "Nq", "0"]
BAD_GROUPS = ["F m -3 x", "Q 1", "P 7", "", "F m m m m"]

Defect = Callable[[random.Random], tuple[str, bytes, str]]


def _cif(rng: random.Random) -> tuple[str, bytes, str]:
    kind = rng.choice(
        ["length", "angle", "type", "group", "truncate", "occupancy", "collide", "columns", "no-atoms", "ops", "number"]
    )
    t = GOOD_CIF
    if kind == "length":
        axis = rng.choice("abc")
        bad = rng.choice(BAD_NUMBERS)
        t = t.replace(f"_cell_length_{axis} 5.64", f"_cell_length_{axis} {bad or '?'}")
    elif kind == "angle":
        name = rng.choice(["alpha", "beta", "gamma"])
        bad = rng.choice(["0", "180", "200", "-90", "nan", "720", "x"])
        t = t.replace(f"_cell_angle_{name} 90", f"_cell_angle_{name} {bad}")
    elif kind == "type":
        t = t.replace("Na1 Na", f"Na1 {rng.choice(BAD_SYMBOLS)}")
    elif kind == "group":
        t = t.replace("'F m -3 m'", f"'{rng.choice(BAD_GROUPS)}'")
    elif kind == "truncate":
        t = t[: rng.randrange(20, t.index("Na1"))]
    elif kind == "occupancy":
        t = t.replace("Na1 Na 0 0 0 1", f"Na1 Na 0 0 0 {rng.choice(['0.5', '0.3', '0.9'])}")
    elif kind == "collide":
        t = t + f"Cl2 Cl {rng.uniform(0, 0.02):.4f} 0 0 1\n"
    elif kind == "columns":
        t = t.replace("Cl1 Cl 0.5 0.5 0.5 1", "Cl1 Cl 0.5 0.5")
    elif kind == "no-atoms":
        t = t.split("loop_")[0]
    elif kind == "ops":
        ops = rng.choice(["'x, y, z'", "'x, y, z'\n'-x, -y, -z'", "'x, y, z'\n'y, x, z'"])
        t = t.replace("'F m -3 m'\n", f"'F m -3 m'\nloop_\n_symmetry_equiv_pos_as_xyz\n{ops}\n")
    else:
        t = t.replace(
            "_cell_length_a", f"_space_group_IT_number {rng.choice(['0', '231', '221', '2.5', 'x'])}\n_cell_length_a"
        )
    return "NaCl.cif", t.encode(), f"cif {kind}"


def _poscar(rng: random.Random) -> tuple[str, bytes, str]:
    kind = rng.choice(["counts-short", "counts-long", "count", "scale", "vector", "symbol", "mode", "coords", "huge"])
    lines = GOOD_POSCAR.splitlines()
    if kind == "counts-short":
        lines[6] = "4"
    elif kind == "counts-long":
        lines[6] = "4 4 4"
    elif kind == "count":
        lines[6] = f"4 {rng.choice(['0', '-4', 'x', '4.5'])}"
    elif kind == "scale":
        lines[1] = rng.choice(["0", "nan", "x", "-0"])
    elif kind == "vector":
        lines[rng.choice([2, 3, 4])] = rng.choice(["0 0 0", "1 nan 0", "1 0", "x y z", "1e400 0 0"])
    elif kind == "symbol":
        lines[5] = f"Na {rng.choice(BAD_SYMBOLS)}"
    elif kind == "mode":
        lines[7] = rng.choice(["Fractional", "", "3"])
    elif kind == "coords":
        k = rng.randrange(8, len(lines))
        if rng.random() < 0.5:
            del lines[k:]
        else:
            lines[k] = rng.choice(["0 0", "x 0 0", "nan 0 0", "0 0 1e400"])
    else:
        lines[6] = f"{rng.choice([10**6, 10**9, 99999])} 4"
    return "POSCAR", ("\n".join(lines) + "\n").encode(), f"poscar {kind}"


def _xyz(rng: random.Random) -> tuple[str, bytes, str]:
    kind = rng.choice(["no-lattice", "pbc", "natoms", "lattice", "symbol", "position", "properties", "huge"])
    lines = GOOD_XYZ.splitlines()
    if kind == "no-lattice":
        lines[1] = "Properties=species:S:1:pos:R:3"
    elif kind == "pbc":
        lines[1] = lines[1].replace('pbc="T T T"', f'pbc="{rng.choice(["T T F", "F F F", "T F T"])}"')
    elif kind == "natoms":
        lines[0] = rng.choice(["3", "x", "-2", "0", "2 2"])
    elif kind == "lattice":
        lines[1] = lines[1].replace(
            "0 2.82 2.82 2.82 0 2.82 2.82 2.82 0", rng.choice(["0 0 0 0 0 0 0 0 0", "1 2 3", "nan 0 0 0 1 0 0 0 1"])
        )
    elif kind == "symbol":
        lines[2] = f"{rng.choice(BAD_SYMBOLS)} 0 0 0"
    elif kind == "position":
        lines[3] = rng.choice(["Cl 2.82 2.82", "Cl x 0 0", "Cl nan 0 0"])
    elif kind == "properties":
        lines[1] = lines[1].replace(
            "species:S:1:pos:R:3", rng.choice(["pos:R:3", "species:S:1", "species:Q:1:pos:R:3"])
        )
    else:
        lines[0] = str(rng.choice([10**7, 10**12]))
    return "NaCl.xyz", ("\n".join(lines) + "\n").encode(), f"xyz {kind}"


def _junk(rng: random.Random) -> tuple[str, bytes, str]:
    name = rng.choice(["junk.cif", "POSCAR", "junk.xyz", "junk.vasp", "junk.extxyz", "junk.cif"])
    size = rng.choice([0, 1, 17, 300, 4096])
    data = bytes(rng.randrange(256) for _ in range(size))
    return name, data, f"junk {size} bytes as {name}"


DEFECTS: tuple[Defect, ...] = (_cif, _cif, _poscar, _xyz, _junk)


def corpus(seed: int, n: int) -> list[tuple[str, bytes, str]]:
    """``n`` malformed structure files (file name, content, what is wrong), reproducibly from ``seed``."""
    rng = random.Random(seed)
    return [rng.choice(DEFECTS)(rng) for _ in range(n)]
