"""Stereographic projection: every variant within 90° of the mount, at r = tan(tilt/2), the measured tilt as a ring."""

import math

import numpy as np
import pytest
from figure_data import by_gid, one

from termination.figures.poles import pole_figure, poles_within, stereographic_projection
from termination.structures import PROTOTYPES
from termination.surface.faces import face_variants, interplanar_angle


def _plotted(fig):
    return np.vstack([c.get_offsets() for c in by_gid(fig, "poles (", prefix=True)])


def test_cubic_families_from_001_have_the_textbook_number_of_poles(proto):
    # Cubic interplanar angles to (001): {100} 0° and 90° (5 poles in the upper hemisphere, rim included),
    # {110} 45° and 90° (4 + 4), {111} 54.74° (4)
    # Cullity and Stock, Elements of X-Ray Diffraction (interplanar angles)
    c = proto("rocksalt:Na,Cl", a=5.64)
    poles = poles_within(c, (0, 0, 1), [(1, 0, 0), (1, 1, 0), (1, 1, 1)])
    counts = {f: sum(p.hkl == f for p in poles) for f in [(1, 0, 0), (1, 1, 0), (1, 1, 1)]}
    assert counts == {(1, 0, 0): 5, (1, 1, 0): 8, (1, 1, 1): 4}
    tilts = sorted({round(p.tilt, 2) for p in poles if p.hkl == (1, 1, 1)})
    assert tilts == [54.74]  # arccos(1/sqrt 3) # common practice


def test_poles_lie_at_tan_half_tilt_and_their_azimuth_follows_the_frame(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    for p in poles_within(c, (0, 0, 1), [(1, 1, 3), (1, 2, 3)]):
        assert p.tilt == pytest.approx(interplanar_angle(c, p.variant, (0, 0, 1)), abs=1e-9)
        assert math.hypot(p.x, p.y) == pytest.approx(math.tan(math.radians(p.tilt) / 2), abs=1e-12)
    # fcc (001): the mesh vector e1 is along [1 -1 0] (a/2 <110>), so the pole (1 -1 0) sits at azimuth 0
    # and (1 1 0) at 90° # common practice (fcc (001) surface mesh)
    az = {p.variant: p.azimuth for p in poles_within(c, (0, 0, 1), [(1, 1, 0)])}
    assert az[(1, -1, 0)] == pytest.approx(0.0, abs=1e-9)
    assert az[(1, 1, 0)] == pytest.approx(90.0, abs=1e-9)


def test_the_figure_plots_every_variant_within_90_degrees_once_and_labels_each(proto):
    c = proto("perovskite:Sr,Ti,O")
    faces = [(0, 0, 1), (0, 1, 1), (1, 1, 1), (0, 1, 2)]
    fig = stereographic_projection(c, (0, 1, 1), faces, tilt=20.0, tilt_sigma=3.0)
    expected = 0
    for f in faces:  # independent count: every symmetry variant, the angle from the metric
        expected += sum(interplanar_angle(c, v, (0, 1, 1)) <= 90 + 1e-6 for v in face_variants(c, f))
    xy = _plotted(fig)
    assert len(xy) == expected
    assert len(np.unique(np.round(xy, 9), axis=0)) == expected  # no pole drawn twice
    assert len(by_gid(fig, "pole label")) == expected
    assert np.all(np.hypot(*xy.T) <= 1 + 1e-12)


def test_the_tilt_ring_and_band_are_at_the_measured_tilt(proto):
    c = proto("fcc:Cu")
    fig = stereographic_projection(c, (0, 0, 1), [(1, 1, 1)], tilt=35.0, tilt_sigma=2.0)
    assert one(fig, "tilt ring").get_radius() == pytest.approx(math.tan(math.radians(35 / 2)))
    band = one(fig, "tilt band")
    assert band.get_radii()[0] == pytest.approx(math.tan(math.radians(37 / 2)))
    assert band.get_radii()[0] - band.get_width() == pytest.approx(math.tan(math.radians(33 / 2)))


def test_match_poles_highlight_the_most_probable_faces(demo_match):
    crystal, report = demo_match
    fig = pole_figure(report, crystal, top=2)
    highlighted = [c.get_gid() for c in by_gid(fig, "poles (", prefix=True) if c.get_gid().endswith("highlighted")]
    best = [f"poles ({' '.join(map(str, f.hkl))}) highlighted" for f in report.faces[:2]]
    assert highlighted == best
    legend = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert any(f"p = {report.faces[0].probability:.2f}" in t for t in legend)
    assert one(fig, "tilt ring").get_radius() == pytest.approx(
        math.tan(math.radians(report.measurement.tilt.value / 2))
    )


def test_planes_with_a_tilt_window_shade_it(proto):
    from termination.reports import planes_report

    c = proto("rocksalt:Na,Cl", a=5.64)
    report = planes_report(c, max_index=2, mount=(0, 0, 1), tilt_window=(40.0, 60.0))
    fig = pole_figure(report, c)
    window = one(fig, "tilt window")
    assert window.get_radii()[0] == pytest.approx(math.tan(math.radians(30)))
    assert len(_plotted(fig)) == sum(
        interplanar_angle(c, v, (0, 0, 1)) <= 90 + 1e-6 for f in report.faces for v in face_variants(c, f.hkl)
    )


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_a_pole_figure_for_every_prototype_family(proto, name):
    from termination.reports import planes_report

    c = proto(PROTOTYPES[name].example)
    report = planes_report(c, max_index=1, mount=(0, 0, 1))
    fig = pole_figure(report, c)
    assert len(_plotted(fig)) >= 1


def test_hexagonal_poles_are_labelled_with_four_indices(proto):
    # hcp from (0 0 0 1): the six {1 0 -1 0} prism faces lie on the rim (90°), the mount at the centre
    # # common practice (hexagonal prism and basal planes)
    c = proto("hcp:Mg")
    fig = stereographic_projection(c, (0, 0, 1), [(0, 0, 1), (1, 0, 0)])
    texts = {t.get_text() for t in by_gid(fig, "pole label")}
    assert "0001" in texts and "101\u03050" in texts  # (1 0 -1 0) written with a bar over the 1
    prism = [p for p in poles_within(c, (0, 0, 1), [(1, 0, 0)])]
    assert len(prism) == 6 and all(p.tilt == pytest.approx(90.0) for p in prism)
    assert "(0 0 0 1)" in fig.axes[0].get_title()
