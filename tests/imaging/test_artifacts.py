"""The analysis on maps with the artifacts of raw topographs, one at a time and all together.

The maps come from :func:`termination.testing.synthetic_heightmap` with known
terraces, steps, tilt and lattice; the tolerances are those of the project's
acceptance (step heights 5 %, terrace tilt 0.3°, lattice 2 % and 1°), and
each reported number must also lie within 3 of its own sigmas of the truth.
"""

import math

import numpy as np
import pytest

from termination.errors import ImageError
from termination.imaging.analysis import analyse_heightmap
from termination.testing import synthetic_heightmap

STEP_REL, TILT_DEG, SPACING_REL, ANGLE_DEG = 0.05, 0.3, 0.02, 1.0

# A fcc(111)-like surface: hexagonal 1x1 of 3.0 Å (obtuse convention: γ = 120°), 2.0 Å steps (synthetic truth)
TRUTH = dict(
    tilt_deg=3.0,
    azimuth_deg=30.0,
    step_heights=[2.0, 2.0, 2.0],
    step_azimuth_deg=20.0,
    lattice=(3.0, 3.0, 60.0, 5.0),
    corrugation_angstrom=0.1,
    noise_angstrom=0.05,
)

ARTIFACTS = {
    "line offsets 0.5 Å rms": dict(line_offset_angstrom=0.5),
    "adsorbates and pits over 5 %": dict(adsorbate_fraction=0.05),
    "1/f background 0.2 Å rms": dict(background_angstrom=0.2),
    "meandering, bunched steps": dict(meander_angstrom=8.0, step_positions=[0.3, 0.36, 0.7]),
    "corner pieces of 300 and 600 px": dict(corner_pieces=[(0, 300, 2.0), (3, 600, -2.0)]),
    "lateral shifts between terraces": dict(lateral_shifts=True),
}
ALL = {k: v for artifact in ARTIFACTS.values() for k, v in artifact.items()}


def check(r, truth, *, steps=True):
    tilt = r.tilt
    assert tilt.terrace is not None, r.notes
    err = abs(tilt.terrace - truth["tilt_deg"])
    assert err <= TILT_DEG and err <= 3 * tilt.terrace_sigma, (tilt, r.notes)
    lat = r.lattice
    assert lat is not None, r.notes
    a = truth["lattice"][0]
    gamma = 180.0 - truth["lattice"][2] if truth["lattice"][2] < 90 else truth["lattice"][2]  # obtuse convention
    for value, sigma in ((lat.a, lat.sigma_a), (lat.b, lat.sigma_b)):
        assert abs(value - a) <= SPACING_REL * a and abs(value - a) <= 3 * sigma, lat
    assert abs(lat.gamma - gamma) <= ANGLE_DEG and abs(lat.gamma - gamma) <= 3 * lat.sigma_gamma, lat
    if steps:
        h = abs(truth["step_heights"][0])
        assert r.steps, r.notes
        for s in r.steps:
            assert abs(s.height - h) <= STEP_REL * h and abs(s.height - h) <= 3 * s.sigma, (s, r.steps)


@pytest.mark.parametrize("name", list(ARTIFACTS))
def test_each_artifact_alone(name):
    z = synthetic_heightmap((384, 384), 0.5, seed=11, **TRUTH, **ARTIFACTS[name])
    check(analyse_heightmap(z, 0.5), TRUTH)


def test_all_artifacts_together():
    z = synthetic_heightmap((512, 512), 0.5, seed=3, **TRUTH, **ALL)
    r = analyse_heightmap(z, 0.5)
    check(r, TRUTH)
    assert r.background and r.line_offset_rms > 0.3 and 0.6 < r.fitted_fraction < 0.95
    assert any("background" in n for n in r.notes) and any("adsorbates" in n for n in r.notes)


def test_line_offsets_keep_the_y_tilt():
    # a pure y tilt survives the line offsets: the offsets are constrained to carry no trend in y
    truth = dict(TRUTH, azimuth_deg=90.0)
    z = synthetic_heightmap((384, 384), 0.5, seed=2, line_offset_angstrom=0.5, **truth)
    r = analyse_heightmap(z, 0.5)
    check(r, truth)
    assert abs(r.tilt.terrace_azimuth - 90.0) < 2.0


def test_small_pieces_are_never_merged_into_another_level():
    # corner pieces of 150 and 400 px at other levels than the terrace around them: each is kept as a
    # terrace of its own or left out, and no step comes out wrong
    z = synthetic_heightmap((256, 256), 0.5, seed=4, corner_pieces=[(1, 150, 2.0), (2, 400, -2.0)], **TRUTH)
    r = analyse_heightmap(z, 0.5)
    check(r, TRUTH)
    assert r.terraces in (4, 5, 6)


@pytest.mark.parametrize(
    "mask",
    [
        lambda z: z[::7].fill(np.nan),  # every 7th scan line lost (issue 18)
        lambda z: z[:, ::5].fill(np.nan),  # every 5th column lost
        lambda z: z[100].fill(np.nan),  # one line lost
        lambda z: z[60:140, 30:110].fill(np.nan),  # a block
    ],
    ids=["every 7th row", "every 5th column", "one row", "a block"],
)
@pytest.mark.parametrize("seed", [0, 1])
def test_missing_pixels_change_nothing(mask, seed):
    truth = dict(TRUTH, lattice=(4.0, 4.0, 90.0, 10.0), step_heights=[1.5, 1.5, 1.5], tilt_deg=5.0)
    z = synthetic_heightmap((256, 256), 0.5, seed=seed, **truth)
    clean = analyse_heightmap(z, 0.5)
    mask(z)
    r = analyse_heightmap(z, 0.5)
    check(r, truth)
    assert r.terraces == clean.terraces and len(r.steps) == len(clean.steps)
    assert r.nan_fraction > 0 and any("missing" in n for n in r.notes)


def test_too_many_missing_pixels_are_refused():
    z = synthetic_heightmap((128, 128), 0.5, seed=1, **TRUTH)
    z[::2] = np.nan
    z[1::4] = np.nan
    with pytest.raises(ImageError, match="75.0% of the pixels are missing"):
        analyse_heightmap(z, 0.5)
    assert analyse_heightmap(z, 0.5, max_nan_fraction=0.8).nan_fraction == pytest.approx(0.75)


# ----------------------------------------------------------------- drift


@pytest.mark.parametrize(
    "lattice, kind",
    [((3.0, 3.0, 60.0, 5.0), "hexagonal"), ((3.5, 3.5, 90.0, 20.0), "square")],
)
def test_drift_is_estimated_from_the_stated_lattice_type_and_removed(lattice, kind):
    shear, stretch = 0.03, 0.02  # the synthetic drift: pixel (x, y) shows the surface at (x + s y, (1 + e) y)
    truth = dict(TRUTH, lattice=lattice, step_heights=[2.0])
    z = synthetic_heightmap((256, 256), 0.5, seed=1, drift=(shear, stretch), **truth)
    plain = analyse_heightmap(z, 0.5)
    assert plain.drift is None  # never by default
    gamma = 120.0 if kind == "hexagonal" else 90.0
    assert abs(plain.lattice.gamma - gamma) > 1.0  # the drift distorts the lattice beyond the tolerance
    r = analyse_heightmap(z, 0.5, drift_lattice=kind)
    d = r.drift
    assert d.lattice_type == kind
    assert abs(d.shear - shear) <= max(3 * d.sigma_shear, 0.003)
    assert abs(d.y_scale - stretch) <= max(3 * d.sigma_y_scale, 0.003)
    lat = r.lattice
    assert lat.gamma == pytest.approx(gamma, abs=1e-6)
    assert abs(lat.a - lattice[0]) <= 0.01 * lattice[0] and abs(lat.b - lattice[0]) <= 0.01 * lattice[0]
    assert any("drift corrected" in n for n in r.notes)


def test_drift_correction_of_a_rectangular_lattice_fixes_the_shear_only():
    z = synthetic_heightmap(
        (256, 256), 0.5, seed=1, drift=(0.03, 0.0), **dict(TRUTH, lattice=(2.6, 4.1, 90.0, 20.0), step_heights=[2.0])
    )
    r = analyse_heightmap(z, 0.5, drift_lattice="rectangular")
    assert r.drift.y_scale == 0.0 and abs(r.drift.shear - 0.03) <= max(3 * r.drift.sigma_shear, 0.003)
    assert r.lattice.gamma == pytest.approx(90.0, abs=1e-6)
    assert math.isclose(r.lattice.b, 4.1, rel_tol=0.01)


def test_unknown_drift_lattice_type_is_an_error():
    with pytest.raises(ImageError, match="drift_lattice"):
        analyse_heightmap(np.random.default_rng(0).normal(size=(32, 32)), 0.5, drift_lattice="cubic")


@pytest.mark.parametrize(
    "lattice",
    [(2.5, 4.43, 90.0, 20.0), (2.556, 2.556, 60.0, 15.0)],
    ids=["rectangular 2.5 x 4.43 (the biased (311) case)", "hexagonal 2.556 (the biased (111) case)"],
)
def test_lateral_shifts_between_terraces_do_not_bias_the_lattice(lattice):
    # issue 14: across three steps the whole-image transform gave b = 4.18 for 4.43 Å and γ = 62° for 60°
    truth = dict(TRUTH, lattice=lattice, step_heights=[2.08] * 3, step_azimuth_deg=35.0, tilt_deg=2.0)
    z = synthetic_heightmap(
        (384, 384), 0.25, seed=0, lateral_shifts=True, meander_angstrom=4.0, **dict(truth, corrugation_angstrom=0.08)
    )
    r = analyse_heightmap(z, 0.25)
    lat = r.lattice
    a, b = sorted(lattice[:2])
    gamma = 180.0 - lattice[2] if lattice[2] < 90 else lattice[2]
    assert lat.terraces >= 2
    for value, sigma, true in ((lat.a, lat.sigma_a, a), (lat.b, lat.sigma_b, b)):
        assert abs(value - true) <= SPACING_REL * true and abs(value - true) <= 3 * sigma, lat
    assert abs(lat.gamma - gamma) <= ANGLE_DEG and abs(lat.gamma - gamma) <= 3 * lat.sigma_gamma, lat
