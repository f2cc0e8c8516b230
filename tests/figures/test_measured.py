"""Figures of a measured map show the maps the analysis levelled, not a filtering of their own."""

import numpy as np
import pytest
from figure_data import one

from termination.figures.fourier import power_spectrum
from termination.figures.measured import lattice_spectrum, map_overview
from termination.figures.topograph import MeasuredMap
from termination.imaging.analysis import analyse_heightmap, levelled_maps
from termination.testing import synthetic_heightmap

# synthetic truth: a 3° tilt, one 2.0 Å step, scan-line offsets of 0.3 Å rms, a hexagonal 3.0 Å lattice
Z = synthetic_heightmap(
    (128, 128),
    0.25,
    tilt_deg=3.0,
    azimuth_deg=30.0,
    step_heights=[2.0],
    lattice=(3.0, 3.0, 60.0, 5.0),
    line_offset_angstrom=0.3,
    noise_angstrom=0.02,
    seed=0,
)


@pytest.fixture(scope="module")
def analysed():
    return analyse_heightmap(Z, 0.25), levelled_maps(Z, 0.25), MeasuredMap(Z, (0.25, 0.25))


def test_overview_shows_the_terrace_model_levelling(analysed):
    analysis, maps, measured = analysed
    fig = map_overview(measured, analysis)
    shown = np.asarray(one(fig, "levelled map").get_array())
    assert np.allclose(shown + np.nanpercentile(maps.terraces, 0.5), maps.terraces, equal_nan=True)
    # plane and scan-line offsets are gone: each terrace is one level within the corrugation (0.1 Å cosines)
    levels = np.nanpercentile(maps.terraces, [5, 95])
    assert abs(np.diff(levels)[0] - 2.0 / np.cos(np.radians(3.0))) < 0.5  # the step remains as two levels
    # the raw rows scatter by the 0.3 Å line offsets; the levelled rows of the lower level do not
    lower = maps.terraces < np.nanmedian(maps.terraces)
    row_means = np.array([np.nanmean(np.where(lower[i], maps.terraces[i], np.nan)) for i in range(128)])
    assert np.nanstd(row_means) < 0.05


def test_window_is_a_crop_of_the_lattice_image(analysed):
    analysis, maps, measured = analysed
    fig = map_overview(measured, analysis)
    crop = np.asarray(np.ma.filled(one(fig, "measured topograph").get_array(), np.nan))
    image = maps.lattice_image
    ny, nx = crop.shape
    # the documented rule: the window with the most pixels kept, the first of equals
    counts = np.lib.stride_tricks.sliding_window_view(np.isfinite(image), (ny, nx)).sum(axis=(2, 3))
    r, c = np.unravel_index(np.argmax(counts), counts.shape)
    assert np.allclose(image[r : r + ny, c : c + nx], crop, equal_nan=True)


def test_spectrum_is_that_of_the_lattice_image(analysed):
    analysis, maps, measured = analysed
    assert analysis.lattice is not None
    fig = lattice_spectrum(measured, analysis.lattice)
    power, _, _ = power_spectrum(maps.lattice_image, (0.25, 0.25))
    shown = np.asarray(one(fig, "measured power").get_array())
    assert np.allclose(shown, np.log10(power + power.max() * 1e-12))


def test_maps_follow_the_analysis_parameters():
    # a larger smallest step merges nothing here but must reach the terrace model (same maps as the analysis)
    m = MeasuredMap(Z, (0.25, 0.25), parameters=(("min_step_angstrom", 0.8),))
    assert np.allclose(m.levelled.terraces, levelled_maps(Z, 0.25, min_step_angstrom=0.8).terraces, equal_nan=True)
    assert m.levelled is m.levelled  # computed once


def test_spectrum_of_terraces_shifted_laterally_keeps_its_spot():
    # Two terraces split by a missing strip, the second shifted by half a period: a transform across both
    # cancels the first-order spot (geometry), the largest terrace alone keeps it at 1/period.
    from termination.figures.fourier import SPECTRUM_DECADES, power_spectrum, spectrum_limits

    n, px, period = 256, 0.25, 4.0
    x = np.arange(n) * px
    z = np.tile(np.cos(2 * np.pi * x / period), (n, 1))
    z[:, 150:] = np.cos(2 * np.pi * (x[150:] - period / 2) / period)
    z[:, 140:150] = np.nan
    power, kx, ky = power_spectrum(z, (px, px))
    row = power[np.argmin(np.abs(ky)), :]
    spot = row[np.argmin(np.abs(kx - 1 / period))]
    assert spot > 0.5 * row.max()
    whole = np.nan_to_num(z)
    across = np.abs(np.fft.fftshift(np.fft.fft2(whole * np.outer(np.hanning(n), np.hanning(n))))) ** 2
    assert across[n // 2, np.argmin(np.abs(kx - 1 / period))] < 0.5 * across.max()  # what the selection avoids
    lo, hi = spectrum_limits(np.log10(power + 1e-30), kx, ky, 0.6)
    assert hi - lo <= SPECTRUM_DECADES
