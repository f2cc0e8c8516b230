"""The image lattice over the full grid of synthetic topographs (not a test; run by hand).

    python tests/benchmarks/sweep_image_lattice.py [--seeds 2] [--workers 2] [--show wrong] [--only 128px,2steps]

Every case of ``tests/imaging/lattice_grid.py`` (sizes 128² and 256², 0-2
steps, tilts 1° and 6°, pixels 0.2-0.4 Å, square 4.19 Å, hexagonal 2.95 Å and
rectangular 3.6 x 2.55 Å lattices, each artifact alone and all together) is
analysed; the lattice must come out within 2 % and 2° or be reported as not
found. Prints the counts of right / not found / wrong, the not-found rate per
axis value, and lists every wrong lattice. Exit code 1 when any is wrong.
"""

import argparse
import sys
import time
from collections import Counter, defaultdict
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.imaging.lattice_grid import full_grid, outcome  # noqa: E402


def run(case):
    kind, r = outcome(case)
    lat = r.lattice
    got = None
    if lat is not None:
        rel = max(lat.sigma_a / lat.a, lat.sigma_b / lat.b)
        got = (round(lat.a, 3), round(lat.b, 3), round(lat.gamma, 2), f"sigma {rel:.1%} {lat.sigma_gamma:.1f} deg")
    reason = next((n for n in r.notes if "lattice" in n and ("no " in n or "disagree" in n)), "")
    return case, kind, got, reason


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seeds", type=int, default=2, help="seeds per combination")
    ap.add_argument("--workers", type=int, default=2, help="processes (one pool)")
    ap.add_argument("--show", choices=["wrong", "missed", "all"], default="wrong", help="cases to list")
    ap.add_argument("--only", default="", help="keep the cases whose name contains every comma-separated part")
    args = ap.parse_args()
    parts = [p for p in args.only.split(",") if p]
    cases = [c for c in full_grid(seeds=tuple(range(args.seeds))) if all(p in c.name for p in parts)]
    t0 = time.perf_counter()
    with ProcessPoolExecutor(args.workers) as pool:
        results = list(pool.map(run, cases, chunksize=4))
    elapsed = time.perf_counter() - t0
    counts = Counter(kind for _, kind, _, _ in results)
    tally = ", ".join(f"{counts[k]} {k}" for k in ("right", "not found", "wrong"))
    print(f"{len(cases)} maps in {elapsed:.0f} s: {tally}")
    axes = ("size", "steps", "tilt_deg", "pixel_size", "lattice", "artifact")
    for axis in axes:
        per = defaultdict(Counter)
        for case, kind, _, _ in results:
            per[getattr(case, axis)][kind] += 1
        cells = [f"{v}: {c['not found']}/{sum(c.values())} missed, {c['wrong']} wrong" for v, c in per.items()]
        print(f"  {axis:10s} " + "; ".join(cells))
    for kind in ("right", "wrong"):
        rels = [float(got[3].split()[1][:-1]) for _, k, got, _ in results if k == kind]
        if rels:
            q = np.percentile(rels, [50, 90, 99, 100])
            print(
                f"  relative sigma of a, b when {kind}: median {q[0]:.2f} %, 90 % {q[1]:.2f} %, "
                f"99 % {q[2]:.2f} %, max {q[3]:.2f} %"
            )
    show = {"wrong": {"wrong"}, "missed": {"wrong", "not found"}, "all": {"wrong", "not found", "right"}}[args.show]
    for case, kind, got, reason in results:
        if kind in show:
            print(f"{kind:9s} {case.name}: {got} {reason}")
    return 1 if counts["wrong"] else 0


if __name__ == "__main__":
    sys.exit(main())
