"""Top view: the cells drawn have the areas and shapes the reports give; atoms and changed sites where they are."""

import numpy as np
import pytest
from figure_data import angle, by_gid, cell_vectors, one, polygon_area

from termination.bulk.charges import with_formal_charges
from termination.figures.topview import apparent_vectors, termination_top_view
from termination.reports import corrugation_report, terminations_report
from termination.structures import PROTOTYPES
from termination.surface.corrugation import termination_corrugation
from termination.surface.polarity import termination_polarity
from termination.surface.terminations import face_terminations


def _cell_checks(fig, mesh, apparent):
    """The mesh cell has the reported area and sides; the apparent cell the reported a, b, gamma."""
    m = one(fig, "mesh cell")
    assert polygon_area(m.get_xy()[:4]) == pytest.approx(mesh.area, rel=1e-9)
    u, v = cell_vectors(m)
    assert sorted([np.linalg.norm(u), np.linalg.norm(v)]) == pytest.approx([mesh.a, mesh.b])
    if np.isfinite(apparent.b):
        u, v = cell_vectors(one(fig, "apparent cell"))
        assert [np.linalg.norm(u), np.linalg.norm(v)] == pytest.approx([apparent.a, apparent.b])
        assert angle(u, v) == pytest.approx(apparent.gamma, abs=1e-6)


def test_rocksalt_001_cells_are_the_reported_mesh_and_apparent_lattice(proto):
    # Rock salt (001) with both ions imaging alike: mesh a/sqrt 2 = 3.99 Å, apparent square net a/2 = 2.82 Å
    # (the two ions of a cell are a half-diagonal apart) # termination.surface.corrugation notes; common practice
    c = proto("rocksalt:Na,Cl", a=5.64)
    report = terminations_report(c, (0, 0, 1))
    t = report.terminations[0]
    fig = termination_top_view(face_terminations(c, (0, 0, 1)), t.id)
    assert t.apparent_lattice.a == pytest.approx(2.82)
    _cell_checks(fig, report.mesh, t.apparent_lattice)


def test_atoms_drawn_are_the_surface_atoms_tiled_by_the_mesh(proto):
    c = proto("perovskite:Sr,Ti,O")
    ft = face_terminations(c, (0, 0, 1))
    fig = termination_top_view(ft, "TiO2", depth_angstrom=0.1)  # the top layer only
    sa = ft.surface_atoms("TiO2", 0.1)
    mesh = np.asarray(sa.mesh_inplane)
    for el in ("Ti", "O"):
        drawn = one(fig, f"atoms {el}").get_offsets()
        base = sa.inplane[[s == el for s in sa.species]]
        frac = (drawn[:, None, :] - base[None, :, :]) @ np.linalg.inv(mesh)
        assert np.all(np.min(np.abs(frac - np.rint(frac)).max(axis=-1), axis=1) < 1e-9)  # on a lattice copy of a site
    assert by_gid(fig, "atoms Sr") == []  # Sr lies 1.95 Å below: outside the depth asked for
    # TiO2 layer: 1 Ti and 2 O per 3.905 Å cell # SrTiO3 (001) stacking, common practice
    for el, n in (("Ti", 1), ("O", 2)):
        frac = one(fig, f"atoms {el}").get_offsets() @ np.linalg.inv(mesh) + 1e-9
        assert np.sum(np.all((frac >= 0) & (frac < 1), axis=1)) == n


def test_reconstruction_cell_has_the_reported_area_and_marks_its_vacancies(proto):
    # Rock salt (111) Na: compensation -1/2 of the top layer, realised by a (2×1) vacancy cell # Tasker (1979)
    crystal, _ = with_formal_charges(proto("rocksalt:Na,Cl", a=5.64), None)
    ft = face_terminations(crystal, (1, 1, 1))
    rec = termination_polarity(crystal, ft, "Na", max_cell=2).reconstructions[0]
    report = corrugation_report(crystal, (1, 1, 1), "Na", max_cell=2)
    row = report.terminations[0].reconstructions[0]
    assert row.matrix == rec.matrix
    fig = termination_top_view(ft, "Na", reconstruction=rec)
    cell = one(fig, "reconstruction cell")
    assert polygon_area(cell.get_xy()[:4]) == pytest.approx(abs(np.linalg.det(row.matrix)) * report.mesh.area)
    _cell_checks(fig, report.mesh, row.apparent_lattice)
    removed = one(fig, "removed sites").get_offsets()
    sites = np.asarray(rec.changed_atoms_inplane)
    frac = (removed[:, None, :] - sites[None, :, :]) @ np.linalg.inv(np.asarray(rec.cell_inplane))
    assert np.all(np.min(np.abs(frac - np.rint(frac)).max(axis=-1), axis=1) < 1e-6)
    top_na = one(fig, "atoms Na").get_offsets()
    assert len(removed) > 0
    # a vacancy is where an atom is not drawn
    assert np.min(np.linalg.norm(top_na[:, None, :] - removed[None, :, :], axis=-1)) > 0.1


def test_apparent_vectors_give_the_corrugation_lattice(proto):
    c = proto("hexaboride:La,B")
    ft = face_terminations(c, (0, 1, 1))
    for t in ft.terminations:
        p = termination_corrugation(ft, t.id)
        vec = apparent_vectors(p.spots, ft.atoms.mesh_inplane)
        la = p.apparent_lattice
        if len(vec) == 2:
            assert [np.linalg.norm(vec[0]), np.linalg.norm(vec[1])] == pytest.approx([la.a, la.b])
            assert angle(vec[0], vec[1]) == pytest.approx(la.gamma, abs=1e-6)


def test_scale_bar_is_a_round_length(proto):
    c = proto("fcc:Cu")
    fig = termination_top_view(face_terminations(c, (1, 1, 1)), "T1")
    x, _ = one(fig, "scale bar").get_data()
    length = x[1] - x[0]
    assert length in (1.0, 2.0, 5.0, 10.0)
    assert any(t.get_text() == f"{length:g} Å" for t in fig.axes[0].texts)


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_a_top_view_for_every_prototype_family(proto, name):
    c = proto(PROTOTYPES[name].example)
    report = terminations_report(c, (1, 1, 1))
    ft = face_terminations(c, (1, 1, 1))
    t = report.terminations[0]
    fig = termination_top_view(ft, t.id)
    _cell_checks(fig, report.mesh, t.apparent_lattice)
