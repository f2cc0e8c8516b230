"""Faces and terminations: this project against pymatgen on the same job, both timed from the same arrays.

The job: every symmetry-distinct face up to ``--max-index`` with every
termination, for TiNiSn (half-Heusler), LaB6 (hexaboride), SrTiO3
(perovskite), MgAl2O4 (spinel, 56 atoms), TiO2 (rutile), ZnO (wurtzite) and a
rattled 40-atom P1 cell.  Both sides start from the same plain arrays (lattice
rows in Å, fractional positions, element symbols), and both timers include
turning them into a crystal with its symmetry:

- this project, in-process: ``build_crystal`` (spglib standardisation),
  ``distinct_faces`` and ``face_terminations`` for each face.  Median of
  ``--repeats`` runs, spread before, between and after the pymatgen runs so
  that both sides see the same machine load.
- pymatgen: ``Structure(...)``, ``get_symmetrically_distinct_miller_indices``
  (its symmetry analysis) and ``SlabGenerator(...).get_slabs()`` for each
  face, with two slab settings: 10 Å slabs and 10 Å vacuum, and the thinnest
  slabs it allows (``in_unit_planes=True``, one oriented unit cell of slab and
  one of vacuum).  ``--pymatgen-repeats`` runs of each (median; it is slow),
  each inside a fresh interpreter after pymatgen's imports and a warm-up at
  max index 1 (its lazy loading), because the full job slows down when
  repeated in one process.

The strict figure is the geometric mean of (pymatgen with its thinnest slabs)
/ (this project) over TiNiSn, LaB6, SrTiO3, spinel, rutile and wurtzite; the
P1 cell (``--p1-max-index``, default 1: pymatgen takes minutes on it at 2) is
reported beside it, not in the mean.

The two jobs are not identical in detail: pymatgen groups faces by the
lattice's reciprocal symmetry (so (1 1 1) and (-1 -1 -1) of a half-Heusler
are one entry) and returns one two-sided slab per distinct cutting-plane
shift, while this project groups faces by the crystal's point group and lists
single-face terminations.  The face and termination counts are printed next
to the times.

Run:  python tests/benchmarks/bench_vs_pymatgen.py [--max-index 3] [--pymatgen-repeats 1]
The last line is ``strict speedup: <geometric mean>x``.
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

from structures.prototypes import orbit  # noqa: E402
from termination.bulk.crystal import build_crystal  # noqa: E402
from termination.structures import build_prototype  # noqa: E402
from termination.surface.faces import distinct_faces  # noqa: E402
from termination.surface.terminations import face_terminations  # noqa: E402

#: (label, source): a prototype spec at its tabulated lattice constants, or the name of a builder below.
STRUCTURES = (
    ("TiNiSn", "half-heusler:Ti,Ni,Sn"),
    ("LaB6", "hexaboride:La,B"),
    ("SrTiO3", "perovskite:Sr,Ti,O"),
    ("MgAl2O4", "spinel"),
    ("TiO2", "rutile:Ti,O"),
    ("ZnO", "wurtzite:Zn,O"),
    ("P1-40", "rattled-p1"),
)
#: The structures of the strict geometric mean (the P1 cell is reported beside it).
MEAN_OVER = ("TiNiSn", "LaB6", "SrTiO3", "MgAl2O4", "TiO2", "ZnO")
#: pymatgen slab settings: (name, min_slab_size, min_vacuum_size, in_unit_planes).
SETTINGS = (("10 Å", 10.0, 10.0, False), ("thinnest", 1.0, 1.0, True))


def _spinel():
    """MgAl2O4, Fd-3m origin choice 2, a = 8.08 Å, O x = 0.262 (from memory); 56 atoms."""
    sites = [("Mg", (1 / 8, 1 / 8, 1 / 8)), ("Al", (0.5, 0.5, 0.5)), ("O", (0.262, 0.262, 0.262))]
    positions, species = [], []
    for element, point in sites:
        orb = orbit(526, point)
        positions.append(orb)
        species += [element] * len(orb)
    return np.eye(3) * 8.08, np.vstack(positions), species


def _rattled_p1(seed=7):
    """40 atoms without symmetry: rock-salt NaCl (a = 5.64 Å) 1x1x5 on a sheared (triclinic) lattice, every atom
    moved by up to 0.2 Å (seeded).  The shear keeps pymatgen from grouping faces by a tetragonal lattice."""
    base = np.array([[0, 0, 0], [0, 0.5, 0.5], [0.5, 0, 0.5], [0.5, 0.5, 0]])
    frac = np.vstack([base, (base + 0.5) % 1.0])
    cells = np.arange(5)[:, None, None] * np.array([0, 0, 1.0])
    positions = ((frac[None] + cells) / np.array([1, 1, 5.0])).reshape(-1, 3)
    lattice = np.array([[5.64, 0.0, 0.0], [0.60, 5.70, 0.0], [0.50, -0.40, 5 * 5.64]])
    rng = np.random.default_rng(seed)
    cart = positions @ lattice + rng.uniform(-0.2, 0.2, positions.shape)
    return lattice, cart @ np.linalg.inv(lattice), (["Na"] * 4 + ["Cl"] * 4) * 5


def arrays(source):
    """(lattice rows Å, fractional positions, species) of a structure: the common starting point."""
    if source == "spinel":
        return _spinel()
    if source == "rattled-p1":
        return _rattled_p1()
    crystal = build_prototype(source)
    return np.array(crystal.lattice), np.array(crystal.positions), list(crystal.species)


def ours(lattice, positions, species, max_index):
    """Crystal from the arrays, all distinct faces with all terminations; returns (faces, terminations)."""
    crystal = build_crystal(lattice, positions, species)
    faces = distinct_faces(crystal, max_index=max_index)
    n = 0
    for f in faces:
        n += len(face_terminations(crystal, f.hkl, face=f).terminations)
    return len(faces), n


def theirs(lattice, positions, species, max_index, setting):
    """pymatgen's version of the job from the same arrays; returns (faces, slabs)."""
    from pymatgen.core import Lattice, Structure
    from pymatgen.core.surface import SlabGenerator, get_symmetrically_distinct_miller_indices

    _, slab, vacuum, unit_planes = setting
    structure = Structure(Lattice(lattice), list(species), positions)
    hkls = get_symmetrically_distinct_miller_indices(structure, max_index)
    n = 0
    for hkl in hkls:
        gen = SlabGenerator(structure, hkl, min_slab_size=slab, min_vacuum_size=vacuum, in_unit_planes=unit_planes)
        n += len(gen.get_slabs())
    return len(hkls), n


def time_ours_once(source, max_index):
    lattice, positions, species = arrays(source)
    t0 = time.perf_counter()
    counts = ours(lattice, positions, species, max_index)  # a fresh crystal each run: no warm caches
    return time.perf_counter() - t0, counts


def pymatgen_child(source, max_index, setting_index):
    """One pymatgen run (after its imports); prints 'seconds faces slabs'."""
    setting = SETTINGS[setting_index]
    lattice, positions, species = arrays(source)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        theirs(lattice, positions, species, 1, setting)  # warm-up: lazy loading inside pymatgen
        t0 = time.perf_counter()
        faces, slabs = theirs(lattice, positions, species, max_index, setting)
        elapsed = time.perf_counter() - t0
    print(f"{elapsed!r} {faces} {slabs}")


def time_theirs_once(source, max_index, setting_index):
    """One pymatgen run in a fresh interpreter.

    pymatgen's job gets slower when repeated in one process (LaB6 here: about
    15 s the first time, 45 s after), so each run starts clean.
    """
    argv = [sys.executable, os.path.abspath(__file__), "--pymatgen-child", source, "--max-index", str(max_index)]
    argv += ["--setting", str(setting_index)]
    out = subprocess.run(argv, check=True, capture_output=True, text=True).stdout.split()
    return float(out[0]), (int(out[1]), int(out[2]))


def time_both(source, max_index, repeats, pymatgen_repeats):
    """Medians of both sides (pymatgen for each setting); our runs are spread before, between and after pymatgen's.

    On a shared machine the load drifts over the minutes pymatgen takes;
    interleaving exposes both sides to the same conditions.
    """
    pmg_runs = [k for _ in range(pymatgen_repeats) for k in range(len(SETTINGS))]
    batches = np.array_split(np.arange(repeats), len(pmg_runs) + 1)
    t_ours = []
    t_theirs = {k: [] for k in range(len(SETTINGS))}
    counts_theirs = {}
    for b, batch in enumerate(batches):
        for _ in batch:
            t, counts_ours = time_ours_once(source, max_index)
            t_ours.append(t)
        if b < len(pmg_runs):
            k = pmg_runs[b]
            t, counts_theirs[k] = time_theirs_once(source, max_index, k)
            t_theirs[k].append(t)
    medians = {k: statistics.median(v) for k, v in t_theirs.items()}
    return statistics.median(t_ours), counts_ours, medians, counts_theirs


def gmean(values):
    return float(np.exp(np.mean(np.log(values))))


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-index", type=int, default=3)
    parser.add_argument("--p1-max-index", type=int, default=1, help="max index for the P1 cell")
    parser.add_argument("--repeats", type=int, default=21, help="runs of this project (median)")
    parser.add_argument("--pymatgen-repeats", type=int, default=1, help="runs of pymatgen per setting (median)")
    parser.add_argument("--only", action="append", metavar="LABEL", help="run only this structure (repeatable)")
    parser.add_argument("--pymatgen-child", metavar="SOURCE", help=argparse.SUPPRESS)
    parser.add_argument("--setting", type=int, default=0, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.pymatgen_child:
        pymatgen_child(args.pymatgen_child, args.max_index, args.setting)
        return

    print(
        f"max index {args.max_index} (P1 cell {args.p1_max_index}); both timers start from the same arrays.  "
        f"This project: build_crystal + distinct_faces + face_terminations, median of {args.repeats} runs "
        f"in-process.  pymatgen: Structure + get_symmetrically_distinct_miller_indices + "
        f"SlabGenerator(...).get_slabs(), median of {args.pymatgen_repeats} run(s) per setting, each in a fresh "
        "interpreter after imports and a max-index-1 warm-up; settings: "
        "10 Å = min_slab_size=10 Å, min_vacuum_size=10 Å; thinnest = in_unit_planes=True, 1 unit plane of each"
    )
    header = (
        f"{'structure':<9} {'faces ours/pmg':>15} {'terms/slabs 10Å/thin':>22} {'ours (ms)':>10} "
        f"{'pmg 10 Å (s)':>13} {'ratio':>7} {'pmg thin (s)':>13} {'ratio':>7}"
    )
    print(header)
    strict, loose = [], []
    for label, source in STRUCTURES:
        if args.only and label not in args.only:
            continue
        max_index = args.p1_max_index if source == "rattled-p1" else args.max_index
        t_ours, (nf, nt), t_theirs, counts = time_both(source, max_index, args.repeats, args.pymatgen_repeats)
        r10, rthin = t_theirs[0] / t_ours, t_theirs[1] / t_ours
        if label in MEAN_OVER:
            loose.append(r10)
            strict.append(rthin)
        pf = counts[1][0]
        slabs = f"{nt}/{counts[0][1]}/{counts[1][1]}"
        print(
            f"{label:<9} {f'{nf}/{pf}':>15} {slabs:>22} {1e3 * t_ours:10.1f} {t_theirs[0]:13.2f} {r10:6.0f}x "
            f"{t_theirs[1]:13.2f} {rthin:6.0f}x" + ("" if label in MEAN_OVER else f"  (max index {max_index})"),
            flush=True,
        )
    if strict:
        print(f"geometric mean over {len(strict)} structures, pymatgen with 10 Å slabs: {gmean(loose):.0f}x")
        print(f"strict speedup: {gmean(strict):.0f}x")


if __name__ == "__main__":
    main()
