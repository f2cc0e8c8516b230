"""Large cells: time and peak memory of the bond search, one face's terminations and ``planes``.

Cells are rock-salt NaCl supercells of N atoms with every atom displaced by
up to 0.02 Å (so that spglib finds P1 and nothing is reduced), and a
P1 40-atom rattled cell.  Each measurement runs in a fresh interpreter and
reports its wall time and peak resident memory (``ru_maxrss``).  The bond
list of the cell-list search is compared with the dense N^2 x images search
it replaced (radius rule and 1.2 x nearest-neighbour shell; on these cells
the two rules give the same bonds), kept here as the reference; the dense
one is skipped above 600 atoms (it needs gigabytes).

Run:  python tests/benchmarks/bench_large_cells.py [--sizes 512 1000 2000] [--skip-planes]

Acceptance (hardening issue): a 2000-atom cell within 1 GB.
"""

import argparse
import json
import os
import subprocess
import sys
import tempfile

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

SETUP = r"""
import json, resource, sys, time
import numpy as np
from termination.bulk.crystal import build_crystal

def nacl_p1(n, seed=1):
    cells = max(1, round((n / 8) ** (1 / 3)))
    reps = [cells, cells, max(1, round(n / 8 / cells**2))]
    base = np.array([[0, 0, 0], [0, .5, .5], [.5, 0, .5], [.5, .5, 0]])
    frac = np.vstack([base, base + .5]) % 1.0
    species = ["Na"] * 4 + ["Cl"] * 4
    grid = np.stack(np.meshgrid(*[np.arange(r) for r in reps], indexing="ij"), -1).reshape(-1, 3)
    pos = ((frac[None] + grid[:, None]) / np.array(reps)).reshape(-1, 3)
    lattice = np.diag(reps) * 5.64
    rng = np.random.default_rng(seed)
    cart = pos @ lattice + rng.uniform(-0.02, 0.02, pos.shape)
    return lattice, cart @ np.linalg.inv(lattice), species * len(grid)
"""

JOBS = {
    "bonds": """
lattice, pos, sp = nacl_p1({n})
t0 = time.perf_counter()
c = build_crystal(lattice, pos, sp)
from termination.bulk.bonds import bond_graph
g = bond_graph(c)
dt = time.perf_counter() - t0
bonds = sorted((int(i), int(j), *np.round(v, 5).tolist()) for i, j, v in zip(g.source, g.target, g.vector))
print(json.dumps(dict(atoms=c.natoms, sg=c.spacegroup, bonds=len(bonds), seconds=dt,
    peak_mib=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, digest=hash(tuple(map(tuple, bonds))))))
""",
    "dense": """
lattice, pos, sp = nacl_p1({n})
c = build_crystal(lattice, pos, sp)
from termination.bulk.elements import covalent_radius
t0 = time.perf_counter()
radii = np.array([covalent_radius(s) for s in c.species])
pair_cut = 1.15 * (radii[:, None] + radii[None, :])
rmax = min(float(pair_cut.max()), 1.2 * float(np.linalg.norm(c.lattice, axis=1).min()))
spacing = 1.0 / np.linalg.norm(c.reciprocal, axis=1)
reach = np.ceil(rmax / spacing).astype(int) + 1
shifts = np.stack(np.meshgrid(*[np.arange(-r, r + 1) for r in reach], indexing="ij"), -1).reshape(-1, 3)
diff = c.positions[None, :, None, :] - c.positions[:, None, None, :] + shifts[None, None]
cart = diff @ c.lattice
dist = np.linalg.norm(cart, axis=-1)
dist[dist < 1e-8] = np.inf
nearest = dist.min(axis=(1, 2))
shell = 1.2 * np.maximum(nearest[:, None], nearest[None, :])
mask = (dist < pair_cut[:, :, None]) & (dist <= shell[:, :, None] * (1 + 1e-9))
i, j, s = np.nonzero(mask)
dt = time.perf_counter() - t0
bonds = sorted((int(a), int(b), *np.round(v, 5).tolist()) for a, b, v in zip(i, j, cart[i, j, s]))
print(json.dumps(dict(atoms=c.natoms, bonds=len(bonds), seconds=dt,
    peak_mib=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024, digest=hash(tuple(map(tuple, bonds))))))
""",
    "terminations": """
lattice, pos, sp = nacl_p1({n})
t0 = time.perf_counter()
c = build_crystal(lattice, pos, sp)
from termination.surface.terminations import face_terminations
ft = face_terminations(c, (0, 0, 1))
dt = time.perf_counter() - t0
print(json.dumps(dict(atoms=c.natoms, layers=len(ft.layers), terminations=len(ft.terminations), seconds=dt,
    peak_mib=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)))
""",
    "planes": """
lattice, pos, sp = nacl_p1({n})
import ase.io, ase
path = sys.argv[1]
ase.io.write(path, ase.Atoms(sp, scaled_positions=pos, cell=lattice, pbc=True), format="vasp")
del sys.modules["ase"]
t0 = time.perf_counter()
from termination import cli
try:
    cli.main(["planes", path, "--max-index", "1"])
except SystemExit as exc:
    code = exc.code
dt = time.perf_counter() - t0
print(json.dumps(dict(exit=code, seconds=dt, peak_mib=resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024)))
""",
}


def run(job, n):
    with tempfile.TemporaryDirectory() as folder:
        code = SETUP + JOBS[job].format(n=n)
        proc = subprocess.run(
            [sys.executable, "-c", code, os.path.join(folder, "POSCAR")],
            cwd=ROOT,
            capture_output=True,
            text=True,
            env={**os.environ, "PYTHONHASHSEED": "0"},
        )
    if proc.returncode != 0:
        return {"error": proc.stderr.strip().splitlines()[-1] if proc.stderr.strip() else proc.returncode}
    return json.loads([ln for ln in proc.stdout.splitlines() if ln.startswith("{")][-1])


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[512, 1000, 2000])
    parser.add_argument("--skip-planes", action="store_true")
    args = parser.parse_args()
    for n in args.sizes:
        bonds = run("bonds", n)
        line = f"{bonds.get('atoms', n):5d} atoms ({bonds.get('sg')}): bond graph {bonds.get('seconds', 0):.2f} s, "
        line += f"{bonds.get('peak_mib', 0):.0f} MiB peak, {bonds.get('bonds')} bonds"
        if n <= 600:
            dense = run("dense", n)
            same = dense.get("digest") == bonds.get("digest")
            line += f"; dense search {dense.get('seconds', 0):.2f} s, {dense.get('peak_mib', 0):.0f} MiB, "
            line += "identical bond list" if same else "DIFFERENT bond list"
        print(line, flush=True)
        t = run("terminations", n)
        print(f"      (0 0 1) terminations: {t.get('seconds', 0):.2f} s, {t.get('peak_mib', 0):.0f} MiB peak, {t}")
        if not args.skip_planes:
            p = run("planes", n)
            print(f"      planes --max-index 1: {p.get('seconds', 0):.1f} s, {p.get('peak_mib', 0):.0f} MiB peak, {p}")


if __name__ == "__main__":
    main()
