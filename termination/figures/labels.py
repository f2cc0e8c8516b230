"""How figures write Miller indices, terminations and lengths, and the scale bar they draw.

Indices are written as crystallographers print them, with a bar over negative
entries: ``(1 -1 0)`` becomes (11̅0), the bar being the combining overline
U+0305 after each digit (plain text, not mathtext, which is slow to lay out
for the hundreds of labels of a pole figure).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any, SupportsInt

__all__ = ["hkl_label", "nice_length", "scale_bar"]


def hkl_label(hkl: Iterable[SupportsInt], brackets: str = "()", hexagonal: bool = False) -> str:
    """A Miller index with bars over negative entries (combining overline, U+0305).

    Entries are run together unless one has two digits, then spaces separate
    them.  With ``hexagonal`` (a lattice with hexagonal axes) a face is
    written (h k i l) and a direction (``brackets="[]"``) [u v t w].

    >>> hkl_label((1, -1, 0)) == "(11\u03050)"
    True
    >>> hkl_label((10, 0, -1), brackets="")
    '10 0 1\u0305'
    >>> hkl_label((1, 0, 0), hexagonal=True) == "(101\u03050)"
    True
    """
    from termination.surface.miller import to_four_index, uvtw

    values = [int(v) for v in hkl]
    if hexagonal and len(values) == 3:
        values = list(uvtw(values) if brackets == "[]" else to_four_index(values))
    parts = ["".join(ch + "\u0305" for ch in str(abs(v))) if v < 0 else str(v) for v in values]
    sep = " " if any(abs(v) > 9 for v in values) else ""
    opening, closing = (brackets[0], brackets[1]) if len(brackets) == 2 else ("", "")
    return f"{opening}{sep.join(parts)}{closing}"


def nice_length(span: float) -> float:
    """A round length (1, 2 or 5 times a power of ten) of about a quarter of ``span``.

    >>> nice_length(20.0), nice_length(10.0), nice_length(0.3)
    (5.0, 2.0, 0.05)
    """
    target = max(float(span), 1e-12) / 4
    power = 10 ** math.floor(math.log10(target))
    for step in (5, 2, 1):
        if step * power <= target:
            return float(round(step * power, 12))
    return float(power)


def scale_bar(ax: Any, length: float, unit: str = "Å", *, colour: str = "#000000", where: str = "lower left") -> None:
    """Draw a scale bar of ``length`` (data units) in a corner of ``ax``; its line has the gid 'scale bar'.

    The axes must have equal aspect and their final limits.
    """
    x0, x1 = ax.get_xlim()
    y0, y1 = ax.get_ylim()
    pad_x, pad_y = 0.05 * (x1 - x0), 0.06 * (y1 - y0)
    left = x0 + pad_x if "left" in where else x1 - pad_x - length
    y = y0 + pad_y if "lower" in where else y1 - pad_y
    from matplotlib import patheffects

    light = colour.lower() in ("#ffffff", "white")
    # A halo of the opposite tone keeps the bar readable over atoms and images.
    halo = [patheffects.withStroke(linewidth=3, foreground="#000000" if light else "#ffffff")]
    ax.plot(
        [left, left + length],
        [y, y],
        color=colour,
        lw=2.5,
        solid_capstyle="butt",
        gid="scale bar",
        zorder=20,
        path_effects=halo,
    )
    text = f"{length:g} {unit}"
    ax.text(
        left + length / 2,
        y + 0.015 * (y1 - y0),
        text,
        ha="center",
        va="bottom",
        color=colour,
        zorder=20,
        path_effects=halo,
    )
