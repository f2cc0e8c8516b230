"""Structure files: the POSCAR and extended XYZ readers against ASE's, and every CIF defect named."""

import json
import os
import subprocess
import sys

import numpy as np
import pytest

from termination import StructureError
from termination.structures import load_structure
from termination.structures.extxyz import read_extxyz
from termination.structures.poscar import read_poscar
from termination.testing import minimal_cif

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))


def _cells():
    from ase.build import bulk
    from ase.spacegroup import crystal

    wurtzite = crystal(
        ["Zn", "O"],
        [(1 / 3, 2 / 3, 0), (1 / 3, 2 / 3, 0.382)],
        spacegroup=186,
        cellpar=[3.25, 3.25, 5.207, 90, 90, 120],
    )
    cells = [bulk("Cu", "fcc", a=3.615), bulk("GaAs", "zincblende", a=5.653), wurtzite * (2, 1, 1)]
    for k, c in enumerate(cells):
        c.rattle(0.01, seed=k)
    return cells


@pytest.mark.parametrize("options", [{"direct": True}, {"direct": False}, {"direct": True, "sort": True}])
def test_poscar_reader_agrees_with_ase(tmp_path, options):
    import ase.io

    for k, atoms in enumerate(_cells()):
        path = tmp_path / f"POSCAR{k}"
        ase.io.write(path, atoms, format="vasp", **options)
        ref = ase.io.read(path, format="vasp")  # ASE's own reader
        lattice, positions, species = read_poscar(path.read_text(), path.name)
        assert np.allclose(lattice, ref.cell[:], atol=1e-12)
        assert np.allclose(positions, ref.get_scaled_positions(wrap=False), atol=1e-9)
        assert species == ref.get_chemical_symbols()


def test_poscar_selective_dynamics_scale_and_vasp4(tmp_path):
    import ase.io
    from ase.constraints import FixAtoms

    atoms = _cells()[1]
    atoms.set_constraint(FixAtoms(indices=[0]))
    path = tmp_path / "CONTCAR"
    ase.io.write(path, atoms, format="vasp")
    ref = ase.io.read(path, format="vasp")
    lattice, positions, species = read_poscar(path.read_text(), "CONTCAR")
    assert "Selective" in path.read_text() and species == ref.get_chemical_symbols()
    assert np.allclose(positions @ lattice, ref.positions, atol=1e-9)
    # Scale 2 on half-length vectors, and a negative scale (target volume): the same cell.
    text = "Cu\n2.0\n0 0.90375 0.90375\n0.90375 0 0.90375\n0.90375 0.90375 0\nCu\n1\nDirect\n0 0 0\n"
    lat2, _, _ = read_poscar(text, "POSCAR")
    vol = 3.615**3 / 4  # fcc primitive cell
    lat3, _, _ = read_poscar(text.replace("\n2.0\n", f"\n-{vol}\n"), "POSCAR")
    assert np.allclose(lat2, lat3) and abs(np.linalg.det(lat2)) == pytest.approx(vol)
    # VASP 4: no symbols line, the elements in the comment line (as ASE reads them)
    old = "Ga As\n5.653\n1 0 0\n0 1 0\n0 0 1\n1 1\nDirect\n0 0 0\n0.25 0.25 0.25\n"
    assert read_poscar(old, "POSCAR")[2] == ["Ga", "As"]


@pytest.mark.parametrize(
    "edit, message",
    [
        (lambda t: t.replace("Na Cl\n1 1\n", "Na Cl\n1\n"), r"line 7: 1 atom count for 2 elements \(Na Cl\)"),
        (lambda t: t.replace("Na Cl\n1 1\n", "Na Cl\n1 1 1\n"), "3 atom counts for 2 elements"),
        (lambda t: t.replace("1 1\n", "1 x\n"), "atom counts must be positive integers"),
        (lambda t: t.replace("1 1\n", "1 0\n"), "atom counts must be positive integers"),
        (lambda t: t.replace("Na Cl", "Na Qq"), "'Qq' is not an element symbol"),
        (lambda t: t.replace("0.5 0.5 0.5\n", ""), "2 atoms declared but only 1 coordinate lines"),
        (lambda t: t.replace("Direct", "Fractional"), "expected 'Direct' or 'Cartesian'"),
        (lambda t: t.replace("5.64\n", "0\n"), "scale factor must not be zero"),
        (lambda t: t.replace("0 1 0", "0 nan 0"), "line 4: a lattice vector must be finite"),
        (lambda t: t.replace("0 0 1", "0 0 0"), "span no volume"),
        (lambda t: "\n".join(t.splitlines()[:5]), "at least 8 lines"),
    ],
)
def test_poscar_defects_name_the_line(tmp_path, edit, message):
    good = "NaCl\n5.64\n1 0 0\n0 1 0\n0 0 1\nNa Cl\n1 1\nDirect\n0 0 0\n0.5 0.5 0.5\n"
    assert read_poscar(good, "POSCAR")[2] == ["Na", "Cl"]
    path = tmp_path / "POSCAR"
    path.write_text(edit(good))
    with pytest.raises(StructureError, match=message):
        load_structure(str(path))


def test_extxyz_reader_agrees_with_ase(tmp_path):
    import ase.io

    for k, atoms in enumerate(_cells()):
        atoms.info["energy"] = -1.5
        atoms.arrays["charge"] = np.arange(len(atoms), dtype=float)  # an extra column to skip
        path = tmp_path / f"cell{k}.extxyz"
        ase.io.write(path, [atoms, atoms], format="extxyz")  # two frames: the last is read
        ref = ase.io.read(path)  # ASE: the last frame
        lattice, positions, species = read_extxyz(path.read_text(), path.name)
        assert np.allclose(lattice, ref.cell[:]) and np.allclose(positions @ lattice, ref.positions)
        assert species == ref.get_chemical_symbols()


@pytest.mark.parametrize(
    "text, message",
    [
        ("1\nPo\nPo 0 0 0\n", "no Lattice"),
        ('1\nLattice="3 0 0 0 3 0 0 0 3" pbc="T T F"\nPo 0 0 0\n', "periodic in 3D"),
        ('1\nLattice="3 0 0 0 3 0"\nPo 0 0 0\n', "nine finite numbers"),
        ('2\nLattice="3 0 0 0 3 0 0 0 3"\nPo 0 0 0\n', "only 1 atom lines"),
        ('1\nLattice="3 0 0 0 3 0 0 0 3"\nXx 0 0 0\n', "'Xx' is not an element"),
        ('1\nLattice="3 0 0 0 3 0 0 0 3" Properties=pos:R:3\n0 0 0\n', "no species:S:1"),
        ('x\nLattice="3 0 0 0 3 0 0 0 3"\nPo 0 0 0\n', "expected the number of atoms"),
        ('1\nLattice="3 0 0 0 3 0 0 0 3"\nPo 0 0\n', "4 columns expected, got 3"),
    ],
)
def test_extxyz_defects_name_the_line(tmp_path, text, message):
    path = tmp_path / "bad.xyz"
    path.write_text(text)
    with pytest.raises(StructureError, match=message):
        load_structure(str(path))


NACL = minimal_cif("NaCl", "F m -3 m", (5.64,) * 3, (90,) * 3, [("Na1", "Na", 0, 0, 0), ("Cl1", "Cl", 0.5, 0.5, 0.5)])
OPS = "loop_\n_symmetry_equiv_pos_as_xyz\n'x, y, z'\n'-x, -y, -z'\n"


@pytest.mark.parametrize(
    "edit, message",
    [
        # each defect of the hardening issue, named with its field
        (lambda t: t.replace("Na1 Na", "Na1 11"), "_atom_site_type_symbol '11' is not an element symbol"),
        (lambda t: t.replace("Na1 Na", "Na1 Uuo"), "_atom_site_type_symbol 'Uuo' is not an element symbol"),
        (lambda t: t.replace("F m -3 m", "F m -3 x"), "unknown space-group symbol 'F m -3 x'"),
        (lambda t: t.replace("a 5.64", "a -5.64"), "_cell_length_a = -5.64 Å: a cell length must be positive"),
        (lambda t: t.replace("alpha 90", "alpha 200"), "_cell_angle_alpha = 200°"),
        (
            lambda t: (
                t.replace("alpha 90", "alpha 120").replace("beta 90", "beta 120").replace("gamma 90", "gamma 120")
            ),
            "make no cell",
        ),
        (lambda t: t.replace("a 5.64", "a five"), "_cell_length_a = 'five' is not a number"),
        # an operation list without the F centring: the atoms are CsCl-like, Pm-3m, not Fm-3m
        (
            lambda t: t.replace("'F m -3 m'\n", "'F m -3 m'\n" + OPS),
            "declares space group 225 but its atoms have "
            r"the symmetry of Pm-3m \(221\)",
        ),
        (lambda t: t.replace("_cell_length_a", "_space_group_IT_number 221\n_cell_length_a"), "also declares 221"),
        (lambda t: t.split("loop_")[0], "no block with atom sites"),
    ],
)
def test_cif_defects_name_the_file_and_field(tmp_path, edit, message):
    path = tmp_path / "NaCl.cif"
    path.write_text(edit(NACL))
    before = path.read_bytes()
    with pytest.raises(StructureError, match=message) as exc:
        load_structure(str(path))
    assert "NaCl.cif" in str(exc.value) and "\n" not in str(exc.value)
    assert path.read_bytes() == before  # inputs are never modified


def test_a_good_cif_and_a_p1_description_of_higher_symmetry_are_read(tmp_path):
    path = tmp_path / "NaCl.cif"
    path.write_text(NACL.replace("5.64\n", "5.640(2)\n"))  # a standard uncertainty in brackets
    assert load_structure(str(path)).spacegroup_number == 225  # spglib
    path.write_text(NACL.replace("F m -3 m", "P 1"))  # P1, atoms of Pm-3m (CsCl type): higher symmetry is fine
    assert load_structure(str(path)).spacegroup_number == 221


def test_a_fifo_is_refused_without_blocking(tmp_path):
    fifo = tmp_path / "POSCAR"
    os.mkfifo(fifo)
    with pytest.raises(StructureError, match="not a regular file"):
        load_structure(str(fifo))


def test_rhombohedral_input_is_converted_to_hexagonal_axes_with_a_note():
    from ase.spacegroup import crystal

    from termination.bulk.crystal import build_crystal

    # Bi2Se3 in its rhombohedral primitive cell, from the hexagonal one (Nakajima 1963) by the obverse
    # transformation a_r = (2a + b + c)/3, (-a + b + c)/3, (-a - 2b + c)/3 (International Tables Vol. A).
    hexagonal = crystal(
        ["Bi", "Se", "Se"],
        [(0, 0, 0.4008), (0, 0, 0), (0, 0, 0.2117)],
        spacegroup=166,
        cellpar=[4.1396, 4.1396, 28.636, 90, 90, 120],
    )
    lattice = np.array([[2, 1, 1], [-1, 1, 1], [-1, -2, 1]]) / 3 @ hexagonal.cell[:]
    frac = hexagonal.positions @ np.linalg.inv(lattice) % 1.0
    keys = {tuple(np.round(f, 6) % 1.0): s for f, s in zip(frac, hexagonal.get_chemical_symbols())}
    assert len(keys) == 5
    c = build_crystal(lattice, list(keys), list(keys.values()))
    assert c.natoms == 15 and c.hexagonal_axes and "hexagonal axes" in c.note
    assert c.cell_parameters[2] == pytest.approx(28.636, abs=1e-3)


def test_poscar_and_extxyz_import_neither_ase_nor_scipy(tmp_path):
    poscar = tmp_path / "POSCAR"
    poscar.write_text("NaCl\n5.64\n0 .5 .5\n.5 0 .5\n.5 .5 0\nNa Cl\n1 1\nDirect\n0 0 0\n.5 .5 .5\n")
    xyz = tmp_path / "NaCl.xyz"
    xyz.write_text('2\nLattice="0 2.82 2.82 2.82 0 2.82 2.82 2.82 0"\nNa 0 0 0\nCl 2.82 2.82 2.82\n')
    code = (
        "import json, sys\nfrom termination.structures import load_structure\n"
        f"a = load_structure({str(poscar)!r}); b = load_structure({str(xyz)!r})\n"
        "print(json.dumps([a.spacegroup_number, b.spacegroup_number, sorted({m.split('.')[0] for m in sys.modules} "
        "& {'ase', 'scipy', 'pymatgen'})]))\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert json.loads(proc.stdout.splitlines()[-1]) == [225, 225, []]


def test_left_handed_axes_keep_the_atoms_and_say_so():
    from termination.bulk.crystal import build_crystal

    lattice = np.diag([5.653, 5.653, 5.653])[[1, 0, 2]]  # axes a and b swapped: left-handed
    frac = np.array([[0, 0, 0], [0.5, 0.5, 0], [0.5, 0, 0.5], [0, 0.5, 0.5]])
    positions = np.vstack([frac, frac + 0.25])[:, [1, 0, 2]]
    c = build_crystal(lattice, positions, ["Ga"] * 4 + ["As"] * 4)
    assert "left-handed" in c.note and c.spacegroup_number == 216
