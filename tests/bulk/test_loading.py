import numpy as np
import pytest

from termination import StructureError
from termination.reports import planes_report
from termination.structures import load_structure
from termination.testing import minimal_cif

PARTIAL_CIF = minimal_cif(
    "partial", "P 1", (4.0,) * 3, (90,) * 3, [("Fe1", "Fe", 0, 0, 0, 0.5), ("Co1", "Co", 0, 0, 0, 0.5)]
)


def test_poscar_read_through_ase_matches_prototype(proto, tmp_path):
    import ase.io
    from ase.build import bulk

    path = tmp_path / "POSCAR"
    ase.io.write(path, bulk("Cu", "fcc", a=3.615), format="vasp")  # ASE's fcc primitive cell
    c = load_structure(str(path))
    assert c.spacegroup_number == 225 and c.natoms == 4  # spglib
    ref = planes_report(proto("fcc:Cu"), 2)
    got = planes_report(c, 2)
    assert [(p.hkl, round(p.d, 6)) for p in got.faces] == [(p.hkl, round(p.d, 6)) for p in ref.faces]


def test_partial_occupancy_is_rejected(tmp_path):
    path = tmp_path / "alloy.cif"
    path.write_text(PARTIAL_CIF)
    with pytest.raises(StructureError, match="partial occupancy"):
        load_structure(str(path))


def test_cif_oxidation_states_become_charges(proto, tmp_path):
    from pymatgen.core import Lattice, Structure
    from pymatgen.io.cif import CifWriter

    c = proto("rocksalt:Mg,O")
    s = Structure(Lattice(c.lattice), list(c.species), c.positions)
    s.add_oxidation_state_by_element({"Mg": 2, "O": -2})
    path = tmp_path / "MgO.cif"
    CifWriter(s).write_file(path)
    loaded = load_structure(str(path))
    assert loaded.charges is not None
    assert sorted(set(zip(loaded.species, loaded.charges))) == [("Mg", 2.0), ("O", -2.0)]


def test_a_with_a_file_is_rejected(tmp_path):
    path = tmp_path / "x.cif"
    path.write_text(PARTIAL_CIF)
    with pytest.raises(StructureError, match="prototypes only"):
        load_structure(str(path), a=4.0)


def test_garbage_file_names_the_file(tmp_path):
    path = tmp_path / "noise.xyz"
    path.write_bytes(np.random.default_rng(0).bytes(200))
    with pytest.raises(StructureError, match="noise.xyz"):
        load_structure(str(path))
