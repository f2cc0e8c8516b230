"""match on hexagonal and layered crystals: edge-on views rank a prismatic face first, cleaved ones the basal face.

Each measurement is built from the crystal's tabulated cell by textbook geometry (sources next to each),
not from this package's predictions; the faces are written with Miller-Bravais indices in the verdict.
"""

import math

import pytest

from termination.identification.likelihood import match
from termination.identification.measurement import Measurement, Value
from termination.structures import build_prototype

S3 = math.sqrt(3)


def V(value, sigma=None):
    return Value(value, sigma)


def test_hcp_zinc_seen_edge_on_is_the_first_order_prism():
    # The case of the verdict issue: Zn (a = 2.665, c = 4.947 Å, Wyckoff), mounted on (0 0 0 1) and
    # imaged at 90°: rows a and c at 90° and steps a sqrt3/2 = 2.31 Å, the (1 0 -1 0) geometry.
    m = Measurement(
        mount=(0, 0, 0, 1),
        tilt=V(90, 1),
        spacings=(V(2.66), V(4.95)),
        row_angle=V(90),
        steps=(V(2.31),),
    )
    report = match(build_prototype("hcp:Zn"), m, top=5, reconstructions=False)
    assert report.candidates[0].hkl == (1, 0, 0)
    assert report.faces[0].hkl == (1, 0, 0) and report.faces[0].probability > 0.9
    assert "(1 0 -1 0)" in report.verdict and report.fit.fits


def test_mos2_seen_edge_on_is_the_first_order_prism():
    # 2H-MoS2 (a = 3.160, c = 12.295 Å; Bronsema et al. 1986) from a (0 0 0 1) mount at 90°: the
    # (1 0 -1 0) edge shows the rectangle a x c and steps a sqrt3/2 = 2.74 Å (geometry).
    a, c = 3.1604, 12.295
    m = Measurement(
        mount=(0, 0, 1),
        tilt=V(90, 1),
        spacings=(V(a), V(c)),
        row_angle=V(90),
        steps=(V(a * S3 / 2),),
    )
    report = match(build_prototype("2H-MX2:Mo,S"), m, top=5)
    assert report.faces[0].hkl == (1, 0, 0) and report.faces[0].probability > 0.9
    assert report.verdict.startswith("Most likely (1 0 -1 0)")


@pytest.mark.parametrize("full", [True, False])
def test_cleaved_bi2se3_is_the_basal_quintuple_layer(full):
    # Bi2Se3 cleaves between quintuple layers: steps of one QL, 0.95 nm, on a flat terrace and the
    # hexagonal Se net a = 4.14 Å (common practice in STM of topological insulators).  With tilt and
    # steps only, the van der Waals prior must not be needed to be right, but it must not hurt either.
    m = Measurement(
        mount=(0, 0, 0, 1),
        tilt=V(0, 1),
        steps=(V(9.55), V(19.1)),
        spacings=(V(4.14), V(4.14)) if full else (),
        row_angle=V(120) if full else None,
    )
    report = match(build_prototype("tetradymite:Bi,Se"), m, top=5)
    best = report.candidates[0]
    assert best.hkl == (0, 0, 1) and best.label == "Bi2Se3" and best.probability > 0.9
    assert "(0 0 0 1)" in report.verdict


def test_cleaved_graphite_is_the_basal_face():
    # HOPG: 3.35 Å steps (and double steps) on terraces showing the 2.46 Å triangular lattice (common practice).
    m = Measurement(
        mount=(0, 0, 1),
        tilt=V(0, 1),
        spacings=(V(2.46), V(2.46)),
        row_angle=V(120),
        steps=(V(3.35), V(6.7)),
    )
    report = match(build_prototype("graphite:C"), m, top=5)
    assert report.faces[0].hkl == (0, 0, 1) and report.faces[0].probability > 0.9
    assert "(0 0 0 1)" in report.verdict


def test_the_van_der_waals_prior_favours_the_gap_without_excluding_other_faces():
    # Only a step of one quintuple layer and no tilt: the prior decides, and it favours (0 0 0 1),
    # while every other face keeps a finite probability.
    m = Measurement(mount=(0, 0, 1), steps=(V(9.55),))
    report = match(build_prototype("tetradymite:Bi,Se"), m, top=None, reconstructions=False)
    assert report.faces[0].hkl == (0, 0, 1)
    assert all(f.probability > 0 for f in report.faces)


def test_a_four_index_mount_on_a_cubic_crystal_is_an_error():
    from termination.errors import PlaneError

    with pytest.raises(PlaneError, match="four .*hexagonal and trigonal lattices only.*cubic"):
        match(build_prototype("fcc:Cu"), Measurement(mount=(1, 0, -1, 0), tilt=V(10, 1)))
