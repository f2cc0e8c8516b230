"""``match`` on large polar cells: MgAl2O4 spinel (56 atoms) and Y3Al5O12 garnet (160 atoms).

Each crystal is built from its Wyckoff sites with the package's own orbit
builder (``structures.prototypes.orbit``, spglib's table of operations) and
``build_crystal``; no prototype table and no pymatgen are involved.

- MgAl2O4, Fd-3m origin choice 2, a = 8.08 Å: Mg 8a (1/8, 1/8, 1/8),
  Al 16d (1/2, 1/2, 1/2), O 32e (x, x, x) with x = 0.262 (from memory).
- Y3Al5O12, Ia-3d, a = 12.0 Å: Y 24c (1/8, 0, 1/4), Al 16a (0, 0, 0),
  Al 24d (3/8, 0, 1/4), O 96h (-0.0306, 0.0512, 0.1500) (from memory); the
  composition is checked to come out Y24 Al40 O96.

The measurement is a plausible one of each crystal mounted on (1 0 0): the
spinel's (1 1 1) terrace (tilt 54.7°, 5.71 Å hexagonal mesh, 4.67 Å steps)
and the garnet's (1 1 0) terrace (tilt 45°, 10.39 x 12.0 Å mesh, 4.24 Å
steps).  ``match`` runs in-process with every default (reconstruction cells
where they are in contention); each run starts from a freshly built
``Crystal`` (built outside the timer), so no per-crystal cache is warm.  One
untimed warm-up run first pays the one-off imports (scipy's special
functions).  Reported: median wall time and median CPU time (the machine is
shared; CPU time is less sensitive to the load), and the top five rows, so
that a later run can compare its ranking (``--save FILE`` writes them,
``--compare FILE`` checks them against a saved run).

Run:  python tests/benchmarks/bench_match.py [--max-index 4] [--repeats 5] [--only spinel]

Targets (issue 19, 2-core machine): spinel <= 0.5 s, garnet <= 1.5 s at max index 4.
"""

import argparse
import json
import os
import statistics
import sys
import time

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)

import numpy as np  # noqa: E402

from structures.prototypes import orbit  # noqa: E402
from termination.bulk.crystal import build_crystal  # noqa: E402
from termination.identification.likelihood import match  # noqa: E402
from termination.identification.measurement import Measurement, Value  # noqa: E402

#: name: (Hall number, a in Å, sites, expected composition, measurement, target seconds)
CASES = {
    "spinel": (
        526,  # Fd-3m, origin choice 2
        8.08,
        [("Mg", (1 / 8, 1 / 8, 1 / 8)), ("Al", (0.5, 0.5, 0.5)), ("O", (0.262, 0.262, 0.262))],
        {"Mg": 8, "Al": 16, "O": 32},
        Measurement(
            mount=(1, 0, 0),
            tilt=Value(54.7, 2.0),
            spacings=(Value(5.71, 0.2), Value(5.71, 0.2)),
            row_angle=Value(120.0, 3.0),
            steps=(Value(4.67, 0.2),),
        ),
        0.5,
    ),
    "garnet": (
        530,  # Ia-3d
        12.0,
        [
            ("Y", (1 / 8, 0.0, 1 / 4)),
            ("Al", (0.0, 0.0, 0.0)),
            ("Al", (3 / 8, 0.0, 1 / 4)),
            ("O", (-0.0306, 0.0512, 0.1500)),
        ],
        {"Y": 24, "Al": 40, "O": 96},
        Measurement(
            mount=(1, 0, 0),
            tilt=Value(45.0, 2.0),
            spacings=(Value(10.39, 0.3), Value(12.0, 0.3)),
            steps=(Value(4.24, 0.2),),
        ),
        1.5,
    ),
}


def build(name):
    """The conventional cell of ``name`` from its Wyckoff sites; checks the composition."""
    hall, a, sites, composition, _, _ = CASES[name]
    positions, species = [], []
    for element, point in sites:
        orb = orbit(hall, point)
        positions.append(orb)
        species += [element] * len(orb)
    crystal = build_crystal(np.eye(3) * a, np.vstack(positions), species)
    got = {s: list(crystal.species).count(s) for s in composition}
    if got != composition or crystal.natoms != sum(composition.values()):
        raise SystemExit(f"{name}: composition {got} ({crystal.natoms} atoms), expected {composition}")
    return crystal


def top_rows(report, n=5):
    """[(rank, hkl, label, cell, probability), ...] of the first ``n`` rows."""
    return [[r.rank, list(r.hkl), r.label, r.cell, round(r.probability, 6)] for r in report.candidates[:n]]


def run(name, max_index, repeats):
    """(median wall s, median CPU s, all wall times, top five rows)."""
    measurement = CASES[name][4]
    match(build(name), measurement, max_index=max_index, top=5)  # warm-up: one-off imports
    wall, cpu = [], []
    rows = None
    for _ in range(repeats):
        crystal = build(name)  # fresh crystal: no warm caches
        t0, c0 = time.perf_counter(), time.process_time()
        report = match(crystal, measurement, max_index=max_index, top=5)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
        rows = top_rows(report)
    return statistics.median(wall), statistics.median(cpu), wall, rows


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-index", type=int, default=4)
    parser.add_argument("--repeats", type=int, default=5, help="timed runs per crystal (median)")
    parser.add_argument("--only", choices=sorted(CASES), action="append", help="run only this crystal")
    parser.add_argument("--save", metavar="FILE", help="write the top-five rows as JSON")
    parser.add_argument("--compare", metavar="FILE", help="check the top-five rows against a saved run")
    args = parser.parse_args(argv)
    names = args.only or list(CASES)
    print(
        f"match at max index {args.max_index}; median of {args.repeats} runs, fresh Crystal each; "
        f"load {os.getloadavg()[0]:.1f}"
    )
    saved = {}
    for name in names:
        median_wall, median_cpu, walls, rows = run(name, args.max_index, args.repeats)
        target = CASES[name][5]
        flag = "ok" if median_wall <= target else "over target"
        print(
            f"{name:<7} wall {median_wall:6.3f} s  cpu {median_cpu:6.3f} s  "
            f"(runs {', '.join(f'{t:.2f}' for t in walls)}) "
            f"target {target:g} s: {flag}",
            flush=True,
        )
        for rank, hkl, label, cell, p in rows:
            print(f"   {rank}  ({' '.join(map(str, hkl))})  {label:<12} {cell or '1×1':<14} {p:.6f}")
        saved[name] = rows
    if args.save:
        with open(args.save, "x", encoding="utf-8") as fh:  # never overwrite a saved run
            json.dump({"max_index": args.max_index, "top": saved}, fh, indent=1, ensure_ascii=False)
    if args.compare:
        with open(args.compare, encoding="utf-8") as fh:
            before = json.load(fh)
        if before["max_index"] != args.max_index:
            raise SystemExit(f"saved run is at max index {before['max_index']}, not {args.max_index}")
        for name in names:
            old = [[r[1], r[2], r[3], round(r[4], 4)] for r in before["top"].get(name, [])]
            new = [[r[1], r[2], r[3], round(r[4], 4)] for r in saved[name]]
            print(f"{name}: top five {'same as' if old == new else 'DIFFERENT from'} {args.compare}")


if __name__ == "__main__":
    main()
