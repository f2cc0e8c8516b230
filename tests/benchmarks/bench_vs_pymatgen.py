"""Faces and terminations: this project against pymatgen on the same job.

The job, for a half-Heusler (TiNiSn), a hexaboride (LaB6) and a perovskite
(SrTiO3): every symmetry-distinct face up to ``--max-index`` with every
termination.

- this project, in-process: ``distinct_faces`` and ``face_terminations`` for
  each face.  Each run starts from a freshly built ``Crystal`` (built outside
  the timer), so the per-crystal bond-graph cache is cold and every run does
  the full work.  Median of ``--repeats`` runs.
- pymatgen: ``get_symmetrically_distinct_miller_indices`` plus
  ``SlabGenerator(...).get_slabs()`` for each face (``--pymatgen-repeats``
  runs, median; it is slow).

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
import sys
import time
import warnings

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
sys.path.insert(0, ROOT)

import numpy as np  # noqa: E402

from structures import build_prototype  # noqa: E402
from termination.planes import distinct_faces  # noqa: E402
from termination.terminations import face_terminations  # noqa: E402

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


def time_ours(spec, max_index, repeats):
    times = []
    for _ in range(repeats):
        crystal = build_prototype(spec)  # fresh crystal: no warm caches
        t0 = time.perf_counter()
        counts = ours(crystal, max_index)
        times.append(time.perf_counter() - t0)
    return statistics.median(times), counts


def time_theirs(spec, max_index, repeats, slab_angstrom, vacuum_angstrom):
    from pymatgen.core import Lattice, Structure

    crystal = build_prototype(spec)
    structure = Structure(Lattice(crystal.lattice), list(crystal.species), crystal.positions)
    times = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for _ in range(repeats):
            t0 = time.perf_counter()
            counts = theirs(structure, max_index, slab_angstrom, vacuum_angstrom)
            times.append(time.perf_counter() - t0)
    return statistics.median(times), counts


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-index", type=int, default=3)
    parser.add_argument("--repeats", type=int, default=21, help="runs of this project (median)")
    parser.add_argument("--pymatgen-repeats", type=int, default=1, help="runs of pymatgen (median)")
    parser.add_argument("--slab-angstrom", type=float, default=10.0, help="pymatgen min_slab_size, Å")
    parser.add_argument("--vacuum-angstrom", type=float, default=10.0, help="pymatgen min_vacuum_size, Å")
    args = parser.parse_args(argv)

    # Import pymatgen before timing so that its import is not charged to the first structure.
    import pymatgen.core.surface  # noqa: F401

    print(f"max index {args.max_index}; this project: median of {args.repeats} runs, fresh Crystal each; "
          f"pymatgen: median of {args.pymatgen_repeats} run(s), SlabGenerator(min_slab_size={args.slab_angstrom:g} Å, "
          f"min_vacuum_size={args.vacuum_angstrom:g} Å).get_slabs()")
    header = f"{'structure':<10} {'faces ours/pmg':>15} {'terms/slabs':>12} {'ours (ms)':>10} {'pymatgen (s)':>13} {'ratio':>8}"
    print(header)
    ratios = []
    for label, spec in STRUCTURES:
        t_ours, (nf, nt) = time_ours(spec, args.max_index, args.repeats)
        t_theirs, (pf, ps) = time_theirs(spec, args.max_index, args.pymatgen_repeats, args.slab_angstrom,
                                         args.vacuum_angstrom)
        ratio = t_theirs / t_ours
        ratios.append(ratio)
        print(f"{label:<10} {f'{nf}/{pf}':>15} {f'{nt}/{ps}':>12} {1e3 * t_ours:10.2f} {t_theirs:13.2f} "
              f"{ratio:7.0f}x", flush=True)
    gmean = float(np.exp(np.mean(np.log(ratios))))
    print(f"speedup: {gmean:.0f}x")


if __name__ == "__main__":
    main()
