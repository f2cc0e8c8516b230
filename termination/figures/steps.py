"""Step heights: the measured histogram and density against the heights each candidate allows.

The upper panel shows the measured step heights as a histogram and as a
kernel density in which each step is a normal curve of its own sigma (so the
area is the number of steps).  The lower panel is a ladder, one lane per
candidate: a tick at every allowed height delta + n d between its terraces
(:mod:`termination.surface.steps`), one style per pair of terminations
(lower → upper terrace), the same pair drawn alike in every lane.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any, SupportsFloat

import numpy as np

from termination.bulk.crystal import Crystal
from termination.defaults import FIGURE_TOP, MAX_MULTIPLE_LIMIT
from termination.figures.canvas import new_figure, style
from termination.figures.labels import hkl_label
from termination.figures.palette import MIST, SLATE, series_style
from termination.surface.steps import StepHeights
from termination.surface.terminations import face_terminations

__all__ = ["StepLadder", "candidate_ladder", "match_step_figure", "step_histogram", "terminations_step_figure"]


@dataclass(frozen=True)
class StepLadder:
    """The allowed steps of one candidate: its name and the heights between each pair of its terraces."""

    name: str
    steps: tuple[StepHeights, ...]


def _multiples(d: float, max_height: float) -> int:
    """Extra periods n that reach ``max_height`` (Å) on a face of period ``d``."""
    return int(min(MAX_MULTIPLE_LIMIT, max(1, math.ceil(max_height / d) + 1)))


def candidate_ladder(
    crystal: Crystal,
    hkl: Iterable[SupportsFloat],
    labels: Sequence[str],
    *,
    name: str | None = None,
    max_height: float = 10.0,
    termination_options: Mapping[str, Any] | None = None,
) -> StepLadder:
    """The steps between the terraces ``labels`` of the face ``hkl``, up to ``max_height`` Å.

    Parameters
    ----------
    crystal : Crystal
    hkl : 3 ints
    labels : sequence of str
        Termination labels (or ids) of the terraces: one for a single
        termination (steps between its own terraces only), two for a mixed
        surface (steps within and between them).
    name : str, optional
        Lane title; default the face and labels.
    max_height : float
        Largest height kept, Å.
    termination_options : mapping, optional
        Passed to :func:`termination.surface.terminations.face_terminations`
        (use those of the report the ladder belongs to).

    Returns
    -------
    StepLadder
        The :class:`~termination.surface.steps.StepHeights` that
        ``terminations`` reports for these pairs, cut at ``max_height``.
    """
    options = dict(termination_options or {})
    options.pop("max_multiple", None)
    probe = face_terminations(crystal, hkl, **options)
    ft = face_terminations(crystal, hkl, max_multiple=_multiples(probe.d, max_height), face=probe.face, **options)
    wanted = {ft.termination(label).label for label in labels}
    steps = tuple(
        StepHeights(s.from_label, s.to_label, s.from_ids, s.to_ids, tuple(h for h in s.heights if h <= max_height))
        for s in ft.steps
        if s.from_label in wanted and s.to_label in wanted
    )
    face = hkl_label(ft.face.hkl, hexagonal=crystal.hexagonal_axes)
    return StepLadder(name or f"{face} {'+'.join(labels)}", steps)


def _normal_sum(x: np.ndarray, values: np.ndarray, sigmas: np.ndarray) -> np.ndarray:
    """sum_i N(x; v_i, s_i): the kernel density of the steps (area = number of steps), (X,)."""
    z = (x[:, None] - values[None, :]) / sigmas[None, :]
    out: np.ndarray = (np.exp(-0.5 * z * z) / (sigmas[None, :] * math.sqrt(2 * math.pi))).sum(axis=1)
    return out


def step_histogram(
    measured: Sequence[tuple[float, float | None]] = (),
    ladders: Sequence[StepLadder] = (),
    *,
    max_height: float | None = None,
    title: str | None = None,
    width_in: float = 5.6,
) -> Any:
    """Measured step heights against the allowed heights of candidates.

    Parameters
    ----------
    measured : sequence of (height, sigma)
        Measured steps, Å; a sigma of None counts as 5 % of the height (at
        least 0.05 Å) for the density.
    ladders : sequence of StepLadder
        Candidates, best first; one lane each.
    max_height : float, optional
        Right end of the axis, Å; default a quarter beyond the largest
        measured step plus 3 sigma, or the largest listed height.
    title : str, optional
    width_in : float

    Returns
    -------
    matplotlib.figure.Figure
        Histogram bars (gid 'measured histogram'), density line ('measured
        density'), one tick collection per lane and pair (gid
        'allowed steps <lane>: <lower> → <upper>', its x positions the
        heights) and guide lines of the first lane in the upper panel.
    """
    values = np.array([float(v) for v, _ in measured], dtype=float)
    sigmas = np.array([max(0.05 * abs(float(v)), 0.05) if s is None else float(s) for v, s in measured], dtype=float)
    listed = [h for lad in ladders for s in lad.steps for h in s.heights]
    if max_height is None:
        if len(values):
            max_height = 1.25 * float(np.max(values + 3 * sigmas))
        else:
            max_height = 1.05 * max(listed) if listed else 10.0
    top = float(max_height)
    pairs: list[tuple[str, str]] = []
    for lad in ladders:
        for s in lad.steps:
            if (s.from_label, s.to_label) not in pairs:
                pairs.append((s.from_label, s.to_label))
    lanes = len(ladders)
    with style():
        if len(values) and lanes:
            fig = new_figure(width_in, 2.6 + 0.42 * lanes)
            upper, lower = fig.subplots(2, 1, sharex=True, height_ratios=[2.4, 0.5 + 0.42 * lanes])
        elif len(values):
            fig = new_figure(width_in, 2.8)
            upper, lower = fig.add_subplot(), None
        else:
            fig = new_figure(width_in, 1.2 + 0.5 * max(lanes, 1))
            upper, lower = None, fig.add_subplot()
        if upper is not None:
            width = max(0.05, float(np.median(sigmas)))
            bins = np.arange(0.0, top + width, width)
            upper.hist(values, bins=bins, color=MIST, edgecolor=SLATE, linewidth=0.5, gid="measured histogram")
            x = np.linspace(0.0, top, 600)
            upper.plot(
                x,
                _normal_sum(x, values, sigmas) * width,
                color="#000000",
                lw=1.0,
                gid="measured density",
                label=f"{len(values)} measured steps:\nhistogram, and density\n(each a normal of its σ)",
            )
            upper.plot(values, np.zeros_like(values), "|", color="#000000", ms=8, mew=1.0, gid="measured steps")
            if ladders:
                for s in ladders[0].steps:
                    st = series_style(pairs.index((s.from_label, s.to_label)))
                    for h in s.heights:
                        upper.axvline(h, color=st.colour, ls=st.linestyle, lw=0.8, alpha=0.7, zorder=0)
            upper.set_ylabel("steps per bin")
            upper.set_xlim(0.0, top)
            upper.legend(loc="upper left", bbox_to_anchor=(1.01, 1.0), fontsize=6.5)
            if lower is None:
                upper.set_xlabel("step height (Å)")
        if lower is not None:
            labelled: set[tuple[str, str]] = set()
            for lane, lad in enumerate(ladders):
                y = lanes - 1 - lane
                lower.axhline(y, color=MIST, lw=0.5, zorder=0)
                n = max(len(lad.steps), 1)
                for j, s in enumerate(lad.steps):
                    k = pairs.index((s.from_label, s.to_label))
                    st = series_style(k)
                    centre = y + 0.36 - (j + 0.5) * 0.72 / n  # one sub-row per pair, so equal heights stay visible
                    half = 0.3 / n
                    pair = (s.from_label, s.to_label)
                    lower.vlines(
                        list(s.heights),
                        centre - half,
                        centre + half,
                        colors=st.colour,
                        linestyles=st.linestyle,
                        lw=1.8,
                        gid=f"allowed steps {lad.name}: {s.from_label} → {s.to_label}",
                        label=None if pair in labelled else f"{s.from_label} → {s.to_label}",
                    )
                    labelled.add(pair)
            lower.set_yticks(range(lanes), [lad.name for lad in reversed(ladders)])
            lower.set_ylim(-0.6, lanes - 0.4)
            lower.set_xlim(0.0, top)
            lower.set_xlabel("step height (Å)")
            lower.spines["left"].set_visible(False)
            lower.tick_params(axis="y", length=0)
            if pairs:
                lower.legend(
                    title="lower → upper\nterrace",
                    loc="center left",
                    bbox_to_anchor=(1.01, 0.5),
                    ncols=1 if len(pairs) <= 6 else 2,
                    title_fontsize=6.5,
                    handlelength=2.4,
                )
        first = upper if upper is not None else lower
        first.set_title(title or "Step heights")
    return fig


def match_step_figure(
    report: Any,
    crystal: Crystal,
    *,
    top: int = FIGURE_TOP,
    termination_options: Mapping[str, Any] | None = None,
    width_in: float = 5.6,
) -> Any:
    """The measured steps of a ``match`` report against the allowed steps of its ``top`` candidates.

    ``termination_options`` must be those ``match`` ran with, so the ladders
    hold the heights its candidates allowed.
    """
    steps = [(v.value, v.sigma) for v in report.measurement.steps]
    values = [v for v, _ in steps]
    max_height = 1.25 * max(v + 3 * (s or 0.0) for v, s in steps) if steps else None
    limit = max_height if max_height is not None else 3 * max((r.d for r in report.candidates[:top]), default=3.0)
    ladders = [
        candidate_ladder(
            crystal,
            row.hkl,
            [t.label for t in row.terraces],
            name=f"#{row.rank} {hkl_label(row.hkl, hexagonal=crystal.hexagonal_axes)} {row.label}"
            + (f" {row.cell}" if row.cell else ""),
            max_height=limit,
            termination_options=termination_options,
        )
        for row in report.candidates[:top]
    ]
    title = f"{report.structure.formula}: measured steps and the heights the top candidates allow"
    if not values:
        title = f"{report.structure.formula}: heights the top candidates allow (no steps measured)"
    return step_histogram(steps, ladders, max_height=max_height, title=title, width_in=width_in)


def terminations_step_figure(report: Any, *, width_in: float = 5.6) -> Any:
    """The allowed steps of a ``terminations`` report: one lane per lower terrace, every pair marked."""
    by_lower: dict[str, list[StepHeights]] = {}
    for s in report.steps:
        by_lower.setdefault(s.from_label, []).append(s)
    ladders = [StepLadder(f"from {label}", tuple(steps)) for label, steps in by_lower.items()]
    return step_histogram(
        (),
        ladders,
        title=f"{report.structure.formula} {hkl_label(report.hkl, hexagonal=report.structure.hexagonal_axes)}: "
        f"allowed step heights (d = {report.d:.3f} Å)",
        width_in=width_in,
    )
