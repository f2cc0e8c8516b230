"""The palette stays readable in greyscale and by colour-blind readers; its colour science matches the references."""

import itertools

import numpy as np
import pytest

from termination.figures.palette import (
    COLOURS,
    LINESTYLES,
    MARKERS,
    RELIEF,
    cielab,
    deficient,
    hex_rgb,
    relief_colormap,
    series_style,
    species_styles,
    tint,
)

VISIONS = ("normal", "protanopia", "deuteranopia", "tritanopia")


def _seen(colour, vision):
    rgb = hex_rgb(colour)
    return cielab(rgb if vision == "normal" else deficient(rgb, vision))


def test_cielab_of_reference_colours():
    # sRGB primaries in CIELAB (D65): red (53.24, 80.09, 67.20), green (87.73, -86.18, 83.18) # common practice
    assert cielab(hex_rgb("#ff0000")) == pytest.approx([53.24, 80.09, 67.20], abs=0.05)
    assert cielab(hex_rgb("#00ff00")) == pytest.approx([87.73, -86.18, 83.18], abs=0.05)
    # mid grey #777777 has L* 50.0 (the sRGB curve) # common practice
    assert cielab(hex_rgb("#777777"))[0] == pytest.approx(50.0, abs=0.1)


def test_dichromat_simulation_keeps_greys_and_merges_red_and_green():
    # Machado et al. 2009: the simulation maps greys onto themselves and makes red and green alike for
    # protanopes and deuteranopes # Machado, Oliveira and Fernandes, IEEE TVCG 15, 1291 (2009)
    for kind in VISIONS[1:]:
        assert deficient(hex_rgb("#808080"), kind) == pytest.approx(hex_rgb("#808080"), abs=0.01)
    for kind in ("protanopia", "deuteranopia"):
        red, green = (cielab(deficient(hex_rgb(c), kind)) for c in ("#d62728", "#2ca02c"))
        assert abs(red[1] - green[1]) < 25  # red-green axis collapsed
    normal = np.linalg.norm(cielab(hex_rgb("#d62728")) - cielab(hex_rgb("#2ca02c")))
    assert normal > 80  # and the test can tell: they are far apart in normal vision


@pytest.mark.parametrize("vision", VISIONS)
def test_series_colours_differ_by_20_units_in_every_vision(vision):
    lab = [_seen(c, vision) for c in COLOURS]
    closest = min(np.linalg.norm(a - b) for a, b in itertools.combinations(lab, 2))
    assert closest >= 20.0, vision


def test_first_series_are_far_apart_in_grey():
    lightness = [cielab(hex_rgb(c))[0] for c in COLOURS]
    first = sorted(lightness[:3])
    assert min(np.diff(first)) >= 15  # the first three series print as three distinct greys
    assert min(np.diff(sorted(lightness))) >= 7


def test_relief_colour_map_lightness_rises():
    lightness = [cielab(hex_rgb(c))[0] for c in RELIEF]
    assert np.all(np.diff(lightness) > 9)
    cmap = relief_colormap()
    samples = [cielab(np.asarray(cmap(x)[:3]))[0] for x in np.linspace(0, 1, 64)]
    assert np.all(np.diff(samples) > 0)  # monotonic all along the map, not only at the stops


def test_series_styles_are_distinct_pairs():
    styles = [series_style(i) for i in range(24)]
    assert len({(s.colour, s.marker) for s in styles}) == 24
    assert len({(s.colour, str(s.linestyle)) for s in [series_style(i) for i in range(30)]}) == 30
    assert len(set(MARKERS)) == len(MARKERS) and len({str(v) for v in LINESTYLES}) == len(LINESTYLES)


def test_species_keep_their_style_by_electronegativity():
    a = species_styles(["O", "Sr", "Ti", "O"])
    b = species_styles(["Ti", "Sr", "O"])
    # Pauling: Sr 0.95 < Ti 1.54 < O 3.44 # CRC Handbook
    assert list(a) == ["Sr", "Ti", "O"] and a == b


def test_tint_goes_to_white():
    assert tint("#182670", 0.0) == "#182670"
    assert tint("#182670", 1.0) == "#ffffff"
    assert cielab(hex_rgb(tint("#182670", 0.5)))[0] > cielab(hex_rgb("#182670"))[0]
