"""Faces and terminations: this project against pymatgen on the same job.

The job, for a half-Heusler (TiNiSn), a hexaboride (LaB6) and a perovskite
(SrTiO3): every symmetry-distinct face up to ``--max-index`` with every
termination.

- this project, in-process: ``distinct_faces`` and ``face_terminations`` for
  each face.  Each run starts from a freshly built ``Crystal`` (built outside
  the timer), so the per-crystal caches are cold and every run does the full
  work.  Median of ``--repeats`` runs, spread before, between and after the
  pymatgen runs so that both sides see the same machine load.
- pymatgen: ``get_symmetrically_distinct_miller_indices`` plus
  ``SlabGenerator(...).get_slabs()`` for each face (``--pymatgen-repeats``
  runs, median; it is slow).  Each run is timed inside a fresh interpreter,
  after pymatgen's imports and a warm-up at max index 1 (its lazy loading),
  because the full job slows down when repeated in one process.

The two jobs are not identical in detail: pymatgen groups faces by the
lattice's reciprocal symmetry (so (1 1 1) and (-1 -1 -1) of a half-Heusler
are one entry) and returns one two-sided slab per distinct cutting-plane
shift, while this project groups faces by the crystal's point group and lists
single-face terminations.  The face and termination counts are printed next
to the times.

Run:  python tests/benchmarks/bench_vs_pymatgen.py [--max-index 3]
The last line is ``speedup: <geometric mean>x``.
"""

import argparse
import os
import statistics
import subprocess
import sys
import time
import warnings

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)

import numpy as np  # noqa: E402

from termination.structures import build_prototype  # noqa: E402
from termination.surface.faces import distinct_faces  # noqa: E402
from termination.surface.terminations import face_terminations  # noqa: E402

#: (label, prototype spec); lattice constants are the tabulated defaults.
STRUCTURES = (
    ("TiNiSn", "half-heusler:Ti,Ni,Sn"),
    ("LaB6", "hexaboride:La,B"),
    ("SrTiO3", "perovskite:Sr,Ti,O"),
)


def ours(crystal, max_index):
    """All distinct faces with all terminations; returns (faces, terminations)."""
    faces = distinct_faces(crystal, max_index=max_index)
    n = 0
    for f in faces:
        n += len(face_terminations(crystal, f.hkl, face=f).terminations)
    return len(faces), n


def theirs(structure, max_index, slab_angstrom, vacuum_angstrom):
    """pymatgen's version of the job; returns (faces, slabs)."""
    from pymatgen.core.surface import SlabGenerator, get_symmetrically_distinct_miller_indices

    hkls = get_symmetrically_distinct_miller_indices(structure, max_index)
    n = 0
    for hkl in hkls:
        gen = SlabGenerator(structure, hkl, min_slab_size=slab_angstrom, min_vacuum_size=vacuum_angstrom)
        n += len(gen.get_slabs())
    return len(hkls), n


def time_ours_once(spec, max_index):
    crystal = build_prototype(spec)  # fresh crystal: no warm caches
    t0 = time.perf_counter()
    counts = ours(crystal, max_index)
    return time.perf_counter() - t0, counts


def pymatgen_child(spec, max_index, slab_angstrom, vacuum_angstrom):
    """One pymatgen run (after its imports); prints 'seconds faces slabs'."""
    from pymatgen.core import Lattice, Structure

    crystal = build_prototype(spec)
    structure = Structure(Lattice(crystal.lattice), list(crystal.species), crystal.positions)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        theirs(structure, 1, slab_angstrom, vacuum_angstrom)  # warm-up: lazy loading inside pymatgen
        t0 = time.perf_counter()
        faces, slabs = theirs(structure, max_index, slab_angstrom, vacuum_angstrom)
        elapsed = time.perf_counter() - t0
    print(f"{elapsed!r} {faces} {slabs}")


def time_theirs_once(spec, max_index, slab_angstrom, vacuum_angstrom):
    """One pymatgen run in a fresh interpreter.

    pymatgen's job gets slower when repeated in one process (LaB6 here: about
    15 s the first time, 45 s after), so each run starts clean.
    """
    argv = [
        sys.executable,
        os.path.abspath(__file__),
        "--pymatgen-child",
        spec,
        "--max-index",
        str(max_index),
        "--slab-angstrom",
        repr(slab_angstrom),
        "--vacuum-angstrom",
        repr(vacuum_angstrom),
    ]
    out = subprocess.run(argv, check=True, capture_output=True, text=True).stdout.split()
    return float(out[0]), (int(out[1]), int(out[2]))


def time_both(spec, max_index, repeats, pymatgen_repeats, slab_angstrom, vacuum_angstrom):
    """Medians of both sides; our runs are spread before, between and after pymatgen's.

    On a shared machine the load drifts over the minutes pymatgen takes;
    interleaving exposes both sides to the same conditions.
    """
    batches = np.array_split(np.arange(repeats), pymatgen_repeats + 1)
    t_ours, t_theirs = [], []
    for k, batch in enumerate(batches):
        for _ in batch:
            t, counts_ours = time_ours_once(spec, max_index)
            t_ours.append(t)
        if k < pymatgen_repeats:
            t, counts_theirs = time_theirs_once(spec, max_index, slab_angstrom, vacuum_angstrom)
            t_theirs.append(t)
    return statistics.median(t_ours), counts_ours, statistics.median(t_theirs), counts_theirs


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-index", type=int, default=3)
    parser.add_argument("--repeats", type=int, default=21, help="runs of this project (median)")
    parser.add_argument("--pymatgen-repeats", type=int, default=1, help="runs of pymatgen (median)")
    parser.add_argument("--slab-angstrom", type=float, default=10.0, help="pymatgen min_slab_size, Å")
    parser.add_argument("--vacuum-angstrom", type=float, default=10.0, help="pymatgen min_vacuum_size, Å")
    parser.add_argument("--pymatgen-child", metavar="SPEC", help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.pymatgen_child:
        pymatgen_child(args.pymatgen_child, args.max_index, args.slab_angstrom, args.vacuum_angstrom)
        return

    print(
        f"max index {args.max_index}; this project: median of {args.repeats} runs in-process, fresh Crystal each; "
        f"pymatgen: median of {args.pymatgen_repeats} run(s), each in a fresh interpreter after imports "
        "and a max-index-1 warm-up, "
        f"SlabGenerator(min_slab_size={args.slab_angstrom:g} Å, min_vacuum_size={args.vacuum_angstrom:g} Å)"
        ".get_slabs()"
    )
    header = (
        f"{'structure':<10} {'faces ours/pmg':>15} {'terms/slabs':>12} {'ours (ms)':>10} "
        f"{'pymatgen (s)':>13} {'ratio':>8}"
    )
    print(header)
    ratios = []
    for label, spec in STRUCTURES:
        t_ours, (nf, nt), t_theirs, (pf, ps) = time_both(
            spec, args.max_index, args.repeats, args.pymatgen_repeats, args.slab_angstrom, args.vacuum_angstrom
        )
        ratio = t_theirs / t_ours
        ratios.append(ratio)
        print(
            f"{label:<10} {f'{nf}/{pf}':>15} {f'{nt}/{ps}':>12} {1e3 * t_ours:10.2f} {t_theirs:13.2f} {ratio:7.0f}x",
            flush=True,
        )
    gmean = float(np.exp(np.mean(np.log(ratios))))
    print(f"speedup: {gmean:.0f}x")


if __name__ == "__main__":
    main()
