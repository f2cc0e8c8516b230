"""The figures' palette: colours, markers and line styles readable in greyscale and by colour-blind readers.

Six series colours, chosen for this package, in the order a figure uses them:

=====  =========  =======  =====================================
index  name       hex      CIE L* (lightness, the greyscale value)
=====  =========  =======  =====================================
0      ink        #182670  19
1      amber      #d4832c  62
2      plum       #9a3070  38
3      sky        #9fc6ee  78
4      moss       #3b7a4a  46
5      straw      #eedc55  87
=====  =========  =======  =====================================

Two rules make them readable without colour vision:

- every pair differs by at least 20 CIELAB units (ΔE*ab, 1976) in normal
  vision and in simulated protanopia, deuteranopia and tritanopia (the
  severity-1 matrices of Machado, Oliveira and Fernandes), and
- a figure never tells series apart by colour alone: each series also has its
  own marker (:data:`MARKERS`) and line style (:data:`LINESTYLES`), and the
  lightness of the first three colours is far apart (19, 62, 38), so the first
  series stay distinct when printed in grey.

Greys (:data:`SLATE`, :data:`MIST`) draw what is not highlighted.  Images
(topographs, Fourier power) use :func:`relief_colormap`, whose lightness
rises monotonically from black to near-white, so a greyscale print keeps the
order of heights.  Atoms of a species keep one colour and marker in every
figure (:func:`species_styles`: by electronegativity, most electropositive
first, as the package writes compositions).

Nothing here imports matplotlib; :func:`relief_colormap` does, when called.

References
----------
G. M. Machado, M. M. Oliveira and L. A. F. Fernandes, IEEE Trans. Vis.
Comput. Graph. 15, 1291 (2009) (simulation of colour vision deficiency).
CIE 15:2004, Colorimetry (sRGB to CIELAB through XYZ, D65 white).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from termination.arrays import FloatArray

__all__ = [
    "COLOURS",
    "COLOUR_NAMES",
    "LINESTYLES",
    "MARKERS",
    "MIST",
    "RELIEF",
    "SLATE",
    "SeriesStyle",
    "cielab",
    "deficient",
    "hex_rgb",
    "relief_colormap",
    "series_style",
    "species_styles",
    "tint",
]

#: Series colours, in the order figures use them.
COLOURS: tuple[str, ...] = ("#182670", "#d4832c", "#9a3070", "#9fc6ee", "#3b7a4a", "#eedc55")
#: Their names, for the documentation and legends.
COLOUR_NAMES: tuple[str, ...] = ("ink", "amber", "plum", "sky", "moss", "straw")
#: Markers of the series (matplotlib codes): circle, square, triangle, diamond, down triangle, pentagon, hexagon, star.
MARKERS: tuple[str, ...] = ("o", "s", "^", "D", "v", "p", "h", "*")
#: Line styles of the series: solid, dashed, dotted, dash-dot, dash-dot-dot (5: coprime with the 6 colours).
LINESTYLES: tuple[Any, ...] = ("-", "--", ":", "-.", (0, (3, 1, 1, 1, 1, 1)))
#: Dark grey: text, outlines and what is not highlighted.
SLATE = "#5f5f5f"
#: Light grey: bands, guides, background marks.
MIST = "#cfcfcf"
#: Stops of the image colour map, lightness rising monotonically (L* 6, 26, 47, 69, 87, 97).
RELIEF: tuple[str, ...] = ("#0b1030", "#1e3a78", "#2f7a80", "#8db46a", "#eedc55", "#fbf6d8")


@dataclass(frozen=True)
class SeriesStyle:
    """How one series is drawn: colour, marker and line style (matplotlib arguments)."""

    colour: str
    marker: str
    linestyle: Any


def series_style(index: int) -> SeriesStyle:
    """Style of series ``index`` (0, 1, ...): colour, marker and line style cycle independently.

    The colour cycle has 6 entries, the marker cycle 8 and the line-style
    cycle 5, so the first 24 series have distinct (colour, marker) pairs and
    the first 30 distinct (colour, line style) pairs.

    >>> series_style(0)
    SeriesStyle(colour='#182670', marker='o', linestyle='-')
    >>> series_style(6).colour == series_style(0).colour, series_style(6).marker
    (True, 'h')
    """
    i = int(index)
    return SeriesStyle(COLOURS[i % len(COLOURS)], MARKERS[i % len(MARKERS)], LINESTYLES[i % len(LINESTYLES)])


def species_styles(species: Iterable[str]) -> dict[str, SeriesStyle]:
    """One style per element, most electropositive first (the order of the package's composition labels).

    >>> list(species_styles(["Cl", "Na", "Cl"]))
    ['Na', 'Cl']
    """
    from termination.bulk.elements import atomic_number, electronegativity

    unique = sorted(set(species), key=lambda s: (electronegativity(s), atomic_number(s)))
    return {s: series_style(i) for i, s in enumerate(unique)}


def tint(colour: str, fraction: float) -> str:
    """``colour`` mixed with white: 0 keeps it, 1 gives white (deeper atoms are drawn paler).

    >>> tint("#000000", 0.5)
    '#808080'
    """
    f = min(max(float(fraction), 0.0), 1.0)
    rgb = hex_rgb(colour) * (1 - f) + f
    return "#" + "".join(f"{int(round(v * 255)):02x}" for v in rgb)


def hex_rgb(colour: str) -> FloatArray:
    """(3,) sRGB components in [0, 1] of a '#rrggbb' colour.

    >>> hex_rgb("#ff8000").round(3).tolist()
    [1.0, 0.502, 0.0]
    """
    h = colour.lstrip("#")
    if len(h) != 6:
        raise ValueError(f"colour must be '#rrggbb', got {colour!r}")
    return np.array([int(h[i : i + 2], 16) / 255.0 for i in (0, 2, 4)])


def _linear(rgb: FloatArray) -> FloatArray:
    """sRGB components to linear light (IEC 61966-2-1)."""
    c = np.asarray(rgb, dtype=float)
    out: FloatArray = np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)
    return out


def _encoded(linear: FloatArray) -> FloatArray:
    c = np.clip(np.asarray(linear, dtype=float), 0.0, 1.0)
    out: FloatArray = np.where(c <= 0.0031308, 12.92 * c, 1.055 * c ** (1 / 2.4) - 0.055)
    return out


_XYZ = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]])
_WHITE = _XYZ @ np.ones(3)

#: Machado et al. (2009), severity 1: linear-RGB matrices that simulate each dichromacy.
_DEFICIENCY = {
    "protanopia": np.array(
        [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]]
    ),
    "deuteranopia": np.array(
        [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]]
    ),
    "tritanopia": np.array(
        [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]]
    ),
}


def deficient(rgb: FloatArray, kind: str) -> FloatArray:
    """(3,) sRGB colour as seen with the dichromacy ``kind`` ('protanopia', 'deuteranopia', 'tritanopia').

    Notes
    -----
    c' = encode(M_kind decode(c)) with the severity-1 matrices of Machado et
    al. (2009) acting on linear RGB.
    """
    return _encoded(_DEFICIENCY[kind] @ _linear(rgb))


def cielab(rgb: FloatArray) -> FloatArray:
    """(3,) CIELAB (L*, a*, b*) of an sRGB colour (D65 white).

    Notes
    -----
    XYZ = M linear(c); f(t) = t^(1/3) above (6/29)^3, else t/(3 (6/29)^2) + 4/29;
    L* = 116 f(Y/Yn) - 16, a* = 500 (f(X/Xn) - f(Y/Yn)), b* = 200 (f(Y/Yn) - f(Z/Zn)).

    >>> cielab(hex_rgb("#ffffff")).round(1).tolist()
    [100.0, 0.0, 0.0]
    """
    t = (_XYZ @ _linear(rgb)) / _WHITE
    f = np.where(t > (6 / 29) ** 3, np.cbrt(t), t / (3 * (6 / 29) ** 2) + 4 / 29)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def relief_colormap() -> Any:
    """The image colour map (a matplotlib ``LinearSegmentedColormap`` through :data:`RELIEF`)."""
    from matplotlib.colors import LinearSegmentedColormap

    return LinearSegmentedColormap.from_list("termination-relief", list(RELIEF), N=256)
