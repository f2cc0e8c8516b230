"""Time of the faces-and-terminations job against the largest Miller index.

For max index 1 .. ``--upto`` (default 10) it times ``distinct_faces`` plus
``face_terminations`` for every face (median of ``--repeats`` runs, each on a
freshly built Crystal so no per-crystal cache is warm) and prints the number
of faces, the median time and the time per face.  The last line per
structure is the exponent p of a least-squares fit time ~ faces^p over the
indices with at least 20 faces: p close to 1 means linear in the number of
faces.

Run:  python tests/benchmarks/bench_scaling.py [--upto 10] [--structure SPEC]
"""

import argparse
import os
import statistics
import sys
import time

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)

import numpy as np  # noqa: E402

from termination.structures import build_prototype  # noqa: E402
from termination.surface.faces import distinct_faces  # noqa: E402
from termination.surface.terminations import face_terminations  # noqa: E402

DEFAULT_STRUCTURES = ("half-heusler:Ti,Ni,Sn", "hexaboride:La,B", "perovskite:Sr,Ti,O")


def job(crystal, max_index):
    faces = distinct_faces(crystal, max_index=max_index)
    for f in faces:
        face_terminations(crystal, f.hkl, face=f)
    return len(faces)


def median_time(spec, max_index, repeats):
    times = []
    for _ in range(repeats):
        crystal = build_prototype(spec)
        t0 = time.perf_counter()
        n = job(crystal, max_index)
        times.append(time.perf_counter() - t0)
    return statistics.median(times), n


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--upto", type=int, default=10, help="largest max index")
    parser.add_argument("--repeats", type=int, default=5)
    parser.add_argument("--structure", action="append", help="prototype spec (repeatable)")
    args = parser.parse_args(argv)
    for spec in args.structure or DEFAULT_STRUCTURES:
        print(f"{spec}: median of {args.repeats} runs, fresh Crystal each")
        print(f"{'max index':>9} {'faces':>6} {'time (ms)':>10} {'ms/face':>8}")
        faces, times = [], []
        for n in range(1, args.upto + 1):
            t, nf = median_time(spec, n, args.repeats)
            faces.append(nf)
            times.append(t)
            print(f"{n:9d} {nf:6d} {1e3 * t:10.1f} {1e3 * t / nf:8.2f}", flush=True)
        big = np.array(faces) >= 20
        if big.sum() >= 2:
            p = np.polyfit(np.log(np.array(faces)[big]), np.log(np.array(times)[big]), 1)[0]
            print(f"time ~ faces^{p:.2f} (faces >= 20)")
        print()


if __name__ == "__main__":
    main()
