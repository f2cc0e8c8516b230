"""Fourier figure: every predicted spot at G = (h, k) B, the cell's domains, the turn onto a measured lattice."""

import math

import numpy as np
import pytest
from figure_data import one

from termination.bulk.charges import with_formal_charges
from termination.figures.fourier import fourier_pattern, power_spectrum, spot_positions
from termination.figures.measured import lattice_points_of, lattice_spectrum
from termination.figures.topograph import MeasuredMap
from termination.figures.topview import apparent_vectors
from termination.reports import corrugation_report
from termination.structures import PROTOTYPES
from termination.surface.corrugation import termination_corrugation
from termination.surface.terminations import face_terminations
from termination.testing import synthetic_heightmap


def _spots(fig):
    """{gid: offsets} of the predicted spots: integer-order, fractional-order and domain spots."""
    kinds = ("integer-order spots", "fractional-order spots", "domain spots")
    return {c.get_gid(): np.asarray(c.get_offsets()) for c in fig.findobj(lambda a: a.get_gid() in kinds)}


def test_every_spot_is_drawn_where_the_reciprocal_mesh_puts_it(proto):
    # Rock salt (001), both ions alike: the visible first-order spots are (1 1)-type, |G| = 1/2.82 Å # common practice
    c = proto("rocksalt:Na,Cl", a=5.64)
    ft = face_terminations(c, (0, 0, 1))
    p = termination_corrugation(ft, "NaCl")
    fig = fourier_pattern(p, ft.atoms.mesh_inplane)
    drawn = one(fig, "integer-order spots").get_offsets()
    assert len(drawn) == len(p.spots)
    expected = np.array([s.g for s in p.spots]) @ np.linalg.inv(np.asarray(ft.atoms.mesh_inplane)).T
    assert np.asarray(drawn) == pytest.approx(expected)
    assert np.linalg.norm(drawn, axis=1).min() == pytest.approx(1 / 2.82, rel=1e-6)
    assert [s.length for s in p.spots] == pytest.approx(np.linalg.norm(expected, axis=1))


def test_reconstruction_spots_with_their_domains(proto):
    # Rock salt (111) Na (2×1) on the hexagonal mesh has three rotational domains; their union shows half-order
    # spots along all three directions # Wood notation and domains, Van Hove et al., LEED (1986), ch. 2
    crystal, _ = with_formal_charges(proto("rocksalt:Na,Cl", a=5.64), None)
    report = corrugation_report(crystal, (1, 1, 1), "Na", max_cell=2)
    row = next(r for r in report.terminations[0].reconstructions if r.cell == "(2×1)")
    assert len(row.domains) == 3
    from termination.figures.commands import CellChoice, _cell_pattern, _reconstruction

    ft = face_terminations(crystal, (1, 1, 1))
    rec = _reconstruction(crystal, ft, "Na", matrix=row.matrix, max_cell=2)
    pattern, domains = _cell_pattern(crystal, ft, "Na", report.visibility, CellChoice(row.cell, row.matrix, rec))
    assert domains == 3
    assert [s.g for s in pattern.spots] == [s.g for s in row.spots]  # the figure shows the report's spots
    fig = fourier_pattern(pattern, ft.atoms.mesh_inplane, domains=domains)
    drawn = sum(len(v) for v in _spots(fig).values())
    assert drawn == len(row.spots)
    assert "fractional-order spots" in _spots(fig) or "domain spots" in _spots(fig)


def test_turned_onto_the_measured_lattice_direction(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    ft = face_terminations(c, (0, 0, 1))
    p = termination_corrugation(ft, "Ni")
    z = synthetic_heightmap((128, 128), 0.25, tilt_deg=0.5, lattice=(4.19, 4.19, 90.0, 25.0), seed=4)
    fig = fourier_pattern(p, ft.atoms.mesh_inplane, measured=MeasuredMap(z, (0.25, 0.25)), measured_direction_deg=25.0)
    drawn = np.asarray(one(fig, "integer-order spots").get_offsets())
    plain = spot_positions(p, ft.atoms.mesh_inplane)
    assert sorted(np.linalg.norm(drawn, axis=1)) == pytest.approx(sorted(np.linalg.norm(plain, axis=1)))
    a = apparent_vectors(p.spots, ft.atoms.mesh_inplane)[0]
    turn = 25.0 - math.degrees(math.atan2(a[1], a[0]))
    assert drawn == pytest.approx(spot_positions(p, ft.atoms.mesh_inplane, turn))
    assert one(fig, "measured power") is not None


@pytest.mark.parametrize("direction, seed", [(25.0, 4), (12.0, 7), (37.0, 1)])
def test_without_a_direction_the_prediction_is_turned_onto_the_spectrum(proto, direction, seed):
    # the generator's lattice direction is the known answer (termination.testing.synthetic_heightmap)
    c = proto("half-heusler:Ti,Ni,Sn")
    ft = face_terminations(c, (0, 0, 1))
    p = termination_corrugation(ft, "Ni")
    z = synthetic_heightmap(
        (192, 192), 0.25, tilt_deg=0.5, step_heights=[2.96], lattice=(4.19, 4.19, 90.0, direction), seed=seed
    )
    fig = fourier_pattern(p, ft.atoms.mesh_inplane, measured=MeasuredMap(z, (0.25, 0.25)))
    drawn = np.asarray(one(fig, "integer-order spots").get_offsets())
    plain = spot_positions(p, ft.atoms.mesh_inplane)
    turn = math.degrees(math.atan2(drawn[0, 1], drawn[0, 0]) - math.atan2(plain[0, 1], plain[0, 0]))
    a = apparent_vectors(p.spots, ft.atoms.mesh_inplane)[0]
    expected = direction - math.degrees(math.atan2(a[1], a[0]))
    off = (turn - expected + 45.0) % 90.0 - 45.0  # a square pattern repeats every 90°
    assert abs(off) < 2.5  # the spectrum's pixels are 1/48 Å^-1 at |G| = 0.24 Å^-1: about 5° wide


def test_power_spectrum_peaks_at_the_generated_lattice():
    # a square lattice of 4 Å generated at 0°: first-order peaks at |k| = 1/4 Å^-1 along x and y
    # (the generator's known answer, termination.testing.synthetic_heightmap)
    z = synthetic_heightmap((128, 128), 0.25, lattice=(4.0, 4.0, 90.0, 0.0), noise_angstrom=0.005, seed=1)
    power, kx, ky = power_spectrum(z, (0.25, 0.25))
    power[np.hypot(*np.meshgrid(kx, ky)) < 0.1] = 0  # leave out the mean and slow relief
    r, col = np.unravel_index(np.argmax(power), power.shape)
    assert math.hypot(kx[col], ky[r]) == pytest.approx(0.25, abs=1 / 32)


def test_measured_lattice_points_fall_on_the_spectrum_peaks():
    from types import SimpleNamespace

    z = synthetic_heightmap((128, 128), 0.25, lattice=(3.0, 4.0, 90.0, 30.0), noise_angstrom=0.005, seed=1)
    lattice = SimpleNamespace(a=3.0, b=4.0, gamma=90.0, direction=30.0)
    fig = lattice_spectrum(MeasuredMap(z, (0.25, 0.25)), lattice)
    pts = one(fig, "measured lattice").get_offsets()
    assert len(pts) == len(lattice_points_of(lattice, 1, fig.axes[0].get_xlim()[1]))
    power, kx, ky = power_spectrum(z, (0.25, 0.25))
    first = pts[np.argsort(np.linalg.norm(pts, axis=1))[:2]]
    for g in first:  # the nearest pixels to the first-order points are bright
        col, row = np.argmin(np.abs(kx - g[0])), np.argmin(np.abs(ky - g[1]))
        assert power[row - 1 : row + 2, col - 1 : col + 2].max() > 100 * np.median(power)


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_a_fourier_pattern_for_every_prototype_family(proto, name):
    c = proto(PROTOTYPES[name].example)
    ft = face_terminations(c, (1, 1, 1))
    p = termination_corrugation(ft, ft.terminations[0].id)
    fig = fourier_pattern(p, ft.atoms.mesh_inplane)
    assert sum(len(v) for v in _spots(fig).values()) == len(p.spots)
