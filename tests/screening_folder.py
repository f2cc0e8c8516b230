"""A folder of generated structure files of mixed families, with a few corrupt ones (tests and benchmark).

The structures are built-in prototypes with lattice constants scaled by a
random factor within ±3 %, written by ASE as CIF or POSCAR files.  They are
invented for exercising ``termination screen``: their answers are not
measured data.  Corrupt files are a truncated CIF, a POSCAR of text and an
empty CIF.
"""

import os

import numpy as np

# Prototype specs of mixed families; lattice constants (Å) are rounded room-temperature
# values (from memory), only to make realistic cells.
FAMILIES = [
    ("rocksalt:Na,Cl", 5.64),
    ("rocksalt:Mg,O", 4.21),
    ("rocksalt:K,Cl", 6.29),
    ("perovskite:Sr,Ti,O", 3.905),
    ("perovskite:Ba,Ti,O", 4.01),
    ("fluorite:Ca,F", 5.46),
    ("fluorite:Ce,O", 5.41),
    ("zincblende:Ga,As", 5.65),
    ("zincblende:Zn,S", 5.41),
    ("cesium-chloride:Cs,Cl", 4.12),
    ("half-heusler:Ti,Ni,Sn", 5.93),
    ("hexaboride:La,B", 4.157),
    ("diamond:Si", 5.431),
    ("fcc:Cu", 3.615),
    ("bcc:Fe", 2.87),
]


def write_structure_folder(folder, n, *, corrupt=3, seed=0):
    """Write ``n`` structure files (``corrupt`` of them broken) into ``folder``; return their paths, sorted.

    Parameters
    ----------
    folder : path
    n : int
        Files in all, corrupt ones included.
    corrupt : int
        How many are corrupt (spread evenly through the list).
    seed : int

    Returns
    -------
    paths : list of str
        Every file, in sorted order (the order ``termination screen`` reads a folder).
    broken : set of str
        The corrupt ones.
    """
    import ase
    import ase.io

    from termination.structures import build_prototype

    rng = np.random.default_rng(seed)
    os.makedirs(folder, exist_ok=True)
    bad_at = set(np.linspace(0, n - 1, corrupt, dtype=int).tolist()) if corrupt else set()
    paths, broken = [], set()
    for i in range(n):
        spec, a = FAMILIES[i % len(FAMILIES)]
        name = spec.split(":")[1].replace(",", "")
        if i in bad_at:
            kind = len(broken) % 3
            path = os.path.join(folder, f"s{i:05d}_{name}." + ("vasp" if kind == 1 else "cif"))
            with open(path, "w", encoding="utf-8") as fh:
                if kind == 0:
                    fh.write("data_broken\n_cell_length_a 5.0\n_cell_length_b\nloop_\n_atom_site_label\n")
                elif kind == 1:
                    fh.write("this is not a structure\n1.0\nnothing here\n")
            broken.add(path)
        else:
            crystal = build_prototype(spec, a=a * float(rng.uniform(0.97, 1.03)))
            atoms = ase.Atoms(
                symbols=list(crystal.species), scaled_positions=crystal.positions, cell=crystal.lattice, pbc=True
            )
            if i % 2:
                path = os.path.join(folder, f"s{i:05d}_{name}.vasp")
                ase.io.write(path, atoms, format="vasp", direct=True)
            else:
                path = os.path.join(folder, f"s{i:05d}_{name}.cif")
                ase.io.write(path, atoms, format="cif")
        paths.append(path)
    return sorted(paths), broken
