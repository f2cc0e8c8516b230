"""Polarity of a termination: its layer-charge stack, dipole, Tasker type and compensating fraction.

The left panel is the repeat unit seen from the termination, top layer at
depth 0 and depth growing downwards: one bar per layer, its length the layer
charge sigma_i per surface cell (e), positive bars hatched '//' and negative
ones '\\\\' as well as coloured, so the sign survives a grey print.  The right
panel is the running charge Q(z) = sum of sigma_i above depth z, proportional
to the field between the layers (E = Q / (eps0 A)): a polar (Tasker type III)
stack leaves a non-zero mean, the dipole mu = sum sigma_i z_i.  The dashed
line is the running charge once the top layer carries the compensating
charge dq = mu / d, whose mean over the period vanishes.

References
----------
P. W. Tasker, J. Phys. C 12, 4977 (1979).
J. Goniakowski, F. Finocchi and C. Noguera, Rep. Prog. Phys. 71, 016501 (2008).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from termination.bulk.elements import composition_label
from termination.figures.canvas import new_figure, style
from termination.figures.labels import hkl_label
from termination.figures.palette import COLOURS, MIST, SLATE
from termination.surface.polarity import FacePolarity, TerminationPolarity

__all__ = ["face_polarity_stacks", "fraction_text", "polarity_stack", "running_charge"]


def fraction_text(f: float) -> str:
    """|f| as a simple fraction ('1/4') when it is one (denominator up to 24), else as a decimal.

    >>> fraction_text(-0.25), fraction_text(0.3333333333333333), fraction_text(0.123)
    ('1/4', '1/3', '0.123')
    """
    from fractions import Fraction

    fr = Fraction(abs(f)).limit_denominator(24)
    return f"{fr.numerator}/{fr.denominator}" if abs(float(fr) - abs(f)) < 1e-6 else f"{abs(f):.4g}"


def running_charge(polarity: TerminationPolarity, d: float, extra_top: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """Running charge Q(z) below each layer of the repeat unit: (depths (L + 1,), charges (L + 1,)).

    ``depths`` are the layer depths and the bottom of the period (first
    depth + d); ``charges[i]`` is the sum of sigma over layers 0..i, plus
    ``extra_top`` (e per surface cell) on the top layer; the last entry
    repeats the total.
    """
    z = np.array([layer.depth for layer in polarity.layers], dtype=float)
    q = np.array([layer.charge for layer in polarity.layers], dtype=float)
    if len(q):
        q[0] += extra_top
    depths = np.append(z, z[0] + d if len(z) else d)
    cumulative = np.cumsum(q)
    return depths, np.append(cumulative, cumulative[-1] if len(cumulative) else 0.0)


def _vertical_steps(depths: np.ndarray, running: np.ndarray, top: float) -> tuple[np.ndarray, np.ndarray]:
    """x (charge) and y (height) of Q(z) drawn downwards: 0 above the top layer, jumping at each layer."""
    xs, ys = [0.0], [top]
    for k in range(len(depths) - 1):
        xs += [xs[-1], float(running[k])]
        ys += [-float(depths[k]), -float(depths[k])]
    xs.append(xs[-1])
    ys.append(-float(depths[-1]))
    return np.array(xs), np.array(ys)


def polarity_stack(
    polarity: TerminationPolarity,
    d: float,
    area: float,
    *,
    hkl: tuple[int, int, int] | None = None,
    title: str | None = None,
    hexagonal: bool = False,
    width_in: float = 5.6,
) -> Any:
    """The layer-charge stack of one termination with its dipole and compensating fraction.

    Parameters
    ----------
    polarity : TerminationPolarity
        From :func:`termination.surface.polarity.termination_polarity` (or a
        ``polarity`` report's face).
    d : float
        Period of the face, Å.
    area : float
        Surface cell area, Å².
    hkl : 3 ints, optional
        The face, for the title.
    title : str, optional
    hexagonal : bool
        Write the face (h k i l).
    width_in : float

    Returns
    -------
    matplotlib.figure.Figure
        Two axes.  The bars (gid 'layer charges') have widths sigma_i (e)
        and centres at -depth (Å); the running charge is the line 'running
        charge', with compensation 'compensated charge'; the summary text
        (Tasker type, dipole, dq, fraction) has the gid 'polarity summary'.
    """
    tp = polarity
    z = np.array([layer.depth for layer in tp.layers], dtype=float)
    q = np.array([layer.charge for layer in tp.layers], dtype=float)
    span = max(float(np.ptp(z)) if len(z) else 0.0, 0.5)
    height = 0.6 * min(float(np.min(np.diff(np.sort(z)))) if len(z) > 1 else span, span)
    with style():
        fig = new_figure(width_in, 2.2 + 0.25 * len(z))
        left, right = fig.subplots(1, 2, sharey=True, width_ratios=[1.25, 1.0])
        colours = [COLOURS[1] if v > 0 else COLOURS[0] if v < 0 else MIST for v in q]
        hatches = ["//" if v > 0 else "\\\\" if v < 0 else "" for v in q]
        bars = left.barh(-z, q, height=height, color=colours, edgecolor="#000000", linewidth=0.6, gid="layer charges")
        for bar, h in zip(bars, hatches):
            bar.set_hatch(h)
        qmax = max(float(np.abs(q).max()) if len(q) else 1.0, 1e-9)
        for depth, charge, layer in zip(z, q, tp.layers):
            text = f"{composition_label(layer.composition)}  {charge:+.3g} e"
            left.text(
                charge + (0.04 if charge >= 0 else -0.04) * qmax,
                -depth,
                text,
                va="center",
                ha="left" if charge >= 0 else "right",
                fontsize=6.5,
            )
        left.axvline(0.0, color=SLATE, lw=0.7)
        left.set_xlim(-1.9 * qmax, 1.9 * qmax)
        left.set_xlabel("layer charge σ (e per surface cell)")
        left.set_ylabel("height above the top layer (Å)")
        depths, running = running_charge(tp, d)
        top_y = 0.25 * span + 0.5
        xs, ys = _vertical_steps(depths, running, top_y)
        right.plot(xs, ys, color="#000000", lw=1.2, gid="running charge", label="bulk-terminated")
        if tp.tasker_type == "III":
            _, compensated = running_charge(tp, d, extra_top=tp.compensating_charge)
            xs, ys = _vertical_steps(depths, compensated, top_y)
            right.plot(
                xs,
                ys,
                color=COLOURS[2],
                lw=1.2,
                ls="--",
                gid="compensated charge",
                label=f"top layer {tp.compensating_charge:+.3g} e (compensated)",
            )
        right.axvline(0.0, color=SLATE, lw=0.7)
        right.set_xlabel("running charge Q(z) (e per cell)")
        right.legend(loc="lower right", fontsize=6)
        fraction = "—"
        if tp.compensation is not None and tp.tasker_type == "III":
            verb = "remove" if tp.compensation < 0 else "add"
            fraction = f"{verb} {fraction_text(tp.compensation)}\nof the {tp.site_kind} sites ({tp.site_label})"
        elif tp.compensation is None:
            fraction = "top unit neutral: from deeper layers"
        summary = (
            f"Tasker type {tp.tasker_type}\n"
            f"μ = {tp.dipole:+.3f} e·Å per cell ({tp.dipole_per_area:+.4f} e/Å)\n"
            f"Δq = μ/d = {tp.compensating_charge:+.3f} e per cell\n"
            f"compensation: {fraction}"
        )
        right.set_title(summary, fontsize=6.3, loc="left", gid="polarity summary")
        bottom = -(float(depths[-1]) + 0.1 * span)
        left.set_ylim(bottom, top_y)
        face = f"{hkl_label(hkl, hexagonal=hexagonal)} " if hkl else ""
        fig.suptitle(
            title or f"{face}{tp.label} ({tp.id}): layer charges of the repeat unit (d = {d:.3f} Å, A = {area:.2f} Å²)",
            fontsize=8,
        )
    return fig


def face_polarity_stacks(face: FacePolarity, *, width_in: float = 5.6) -> list[tuple[str, Any]]:
    """(termination id, figure) of every inequivalent termination of a ``polarity`` report's face."""
    return [(tp.id, polarity_stack(tp, face.d, face.area, hkl=face.hkl, width_in=width_in)) for tp in face.terminations]
