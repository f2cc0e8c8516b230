"""Simulated topograph: the model's own sites, the apparent lattice's period, maxima on the bright sites."""

import numpy as np
import pytest
from figure_data import one

from termination.bulk.charges import with_formal_charges
from termination.figures.topograph import MeasuredMap, corrugation_heights, simulated_topograph
from termination.figures.topview import apparent_vectors
from termination.structures import PROTOTYPES
from termination.surface.corrugation import (
    Visibility,
    imaging_sites,
    pattern_from_sites,
    reconstruction_corrugation,
    termination_corrugation,
)
from termination.surface.polarity import termination_polarity
from termination.surface.terminations import face_terminations
from termination.testing import synthetic_heightmap


def _same_spots(sites, pattern, visibility=None):
    visibility = visibility or Visibility()
    mine = pattern_from_sites(
        sites.inplane, sites.amplitudes, sites.cell, sites.mesh, threshold=visibility.threshold
    ).spots
    assert [s.g for s in mine] == [s.g for s in pattern.spots]
    assert [s.intensity for s in mine] == pytest.approx([s.intensity for s in pattern.spots], abs=1e-12)


@pytest.mark.parametrize("spec, hkl", [("rocksalt:Na,Cl", (0, 0, 1)), ("hexaboride:La,B", (0, 0, 1))])
def test_sites_give_the_library_pattern(proto, spec, hkl):
    c = proto(spec)
    ft = face_terminations(c, hkl)
    for v in (Visibility(), Visibility(decay_length_angstrom=2.0, max_depth_angstrom=3.0)):
        for t in ft.terminations:
            _same_spots(imaging_sites(ft, t.id, v), termination_corrugation(ft, t.id, v), v)


def test_sites_of_every_reconstruction_give_the_library_pattern(proto):
    crystal, _ = with_formal_charges(proto("rocksalt:Na,Cl", a=5.64), None)
    ft = face_terminations(crystal, (1, 1, 1))
    for key in ("Na", "Cl"):
        for rec in termination_polarity(crystal, ft, key, max_cell=4).reconstructions:
            _same_spots(imaging_sites(ft, key, reconstruction=rec), reconstruction_corrugation(ft, key, rec))


def test_sites_with_site_weights_give_the_library_pattern(proto):
    c = proto("perovskite:Sr,Ti,O")
    ft = face_terminations(c, (0, 0, 1))
    v = Visibility(site_weights={"Ti5": 0.2}, max_depth_angstrom=2.0)  # Ti of the TiO2 top layer keeps 5 bonds
    pattern = termination_corrugation(ft, "TiO2", v, crystal=c)
    _same_spots(imaging_sites(ft, "TiO2", v, crystal=c), pattern, v)
    plain = imaging_sites(ft, "TiO2", Visibility(max_depth_angstrom=2.0))
    weighted = imaging_sites(ft, "TiO2", v, crystal=c)
    assert not np.allclose(plain.amplitudes, weighted.amplitudes)  # the weights did change the model


def test_topograph_repeats_with_the_apparent_lattice_and_peaks_on_bright_sites(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    ft = face_terminations(c, (0, 0, 1))
    pattern = termination_corrugation(ft, "Ni")
    sites = imaging_sites(ft, "Ni")
    vec = apparent_vectors(pattern.spots, ft.atoms.mesh_inplane)
    rng = np.random.default_rng(5)
    r = rng.uniform(-10, 10, size=(200, 2))
    z = corrugation_heights(sites, pattern, r)
    for v in vec:
        assert corrugation_heights(sites, pattern, r + v) == pytest.approx(z, abs=1e-9)
    # the highest point of a fine grid over one cell lies on the brightest site (the top Ni), modulo the lattice
    g = np.linspace(0, 1, 121)
    grid = np.stack(np.meshgrid(g, g), -1).reshape(-1, 2) @ np.asarray(ft.atoms.mesh_inplane)
    top = grid[np.argmax(corrugation_heights(sites, pattern, grid))]
    bright = sites.inplane[np.argmax(sites.amplitudes)]
    frac = (top - bright) @ np.linalg.inv(np.asarray(ft.atoms.mesh_inplane))
    assert np.abs(frac - np.rint(frac)).max() * 4.19 < 0.1  # within 0.1 Å


def test_figure_holds_the_simulation_and_the_measured_window(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    ft = face_terminations(c, (0, 0, 1))
    z = synthetic_heightmap(
        (128, 128), 0.25, tilt_deg=1.0, step_heights=[2.96], lattice=(4.19, 4.19, 90.0, 0.0), seed=2
    )
    fig = simulated_topograph(ft, "Ni", measured=MeasuredMap(z, (0.25, 0.25)), pixels=40)
    sim = one(fig, "simulated topograph")
    data = np.asarray(sim.get_array())
    assert data.shape == (40, 40) and data.min() == pytest.approx(0.0) and data.max() == pytest.approx(1.0)
    left, right, _, _ = sim.get_extent()
    span = right - left
    pattern = termination_corrugation(ft, "Ni")
    axis = (np.arange(40) + 0.5) / 40 * span
    xx, yy = np.meshgrid(axis, axis)
    expected = corrugation_heights(imaging_sites(ft, "Ni"), pattern, np.column_stack([xx.ravel(), yy.ravel()]))
    expected = (expected - expected.min()) / np.ptp(expected)
    assert data.ravel() == pytest.approx(expected, abs=1e-9)
    measured = one(fig, "measured topograph")
    assert measured.get_extent()[1] == pytest.approx(span, abs=0.25)


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_a_topograph_for_every_prototype_family(proto, name):
    c = proto(PROTOTYPES[name].example)
    ft = face_terminations(c, (0, 1, 1))
    fig = simulated_topograph(ft, ft.terminations[0].id, pixels=24)
    assert np.asarray(one(fig, "simulated topograph").get_array()).shape == (24, 24)
