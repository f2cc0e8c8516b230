"""Step figure: the ladders hold the heights `terminations` reports; the histogram and density hold the steps."""

import numpy as np
import pytest
from figure_data import by_gid, one

from termination.figures.steps import candidate_ladder, match_step_figure, step_histogram, terminations_step_figure
from termination.reports import terminations_report
from termination.structures import PROTOTYPES


def _ladder_heights(fig):
    """{gid: sorted x positions} of every tick collection of the ladders."""
    out = {}
    for coll in by_gid(fig, "allowed steps ", prefix=True):
        xs = sorted({round(float(seg[0][0]), 9) for seg in coll.get_segments()})
        out[coll.get_gid()] = xs
    return out


def test_terminations_ladder_marks_every_reported_height_of_every_pair(proto):
    c = proto("half-heusler:Ti,Ni,Sn")
    report = terminations_report(c, (1, 1, 1))
    fig = terminations_step_figure(report)
    drawn = _ladder_heights(fig)
    for s in report.steps:
        gid = f"allowed steps from {s.from_label}: {s.from_label} → {s.to_label}"
        assert drawn[gid] == sorted(round(h, 9) for h in s.heights)
    assert len(drawn) == len(report.steps)


def test_half_heusler_001_steps_are_quarter_and_half_cells(proto):
    # TiNiSn (001): Ni and TiSn layers alternate every a/4, so a step between unlike terraces is a/4 + n a/2
    # and between like ones n a/2 (a = 5.93 Å) # half-Heusler C1b stacking, common practice
    c = proto("half-heusler:Ti,Ni,Sn")
    a = 5.93
    lad = candidate_ladder(c, (0, 0, 1), ["Ni", "TiSn"], max_height=7.0)
    heights = {(s.from_label, s.to_label): s.heights for s in lad.steps}
    assert heights[("Ni", "TiSn")] == pytest.approx([a / 4, a / 4 + a / 2], abs=1e-6)
    assert heights[("Ni", "Ni")] == pytest.approx([a / 2, a], abs=1e-6)
    single = candidate_ladder(c, (0, 0, 1), ["Ni"], max_height=7.0)
    assert [(s.from_label, s.to_label) for s in single.steps] == [("Ni", "Ni")]


def test_match_figure_lanes_are_the_top_candidates_steps(demo_match):
    crystal, report = demo_match
    fig = match_step_figure(report, crystal, top=3)
    top_edge = fig.axes[0].get_xlim()[1]
    drawn = _ladder_heights(fig)
    for row in report.candidates[:3]:
        labels = {t.label for t in row.terraces}
        t = terminations_report(crystal, row.hkl, max_multiple=10)
        name = f"#{row.rank} "
        for s in t.steps:
            mine = [
                g
                for g in drawn
                if g.startswith(f"allowed steps {name}") and g.endswith(f": {s.from_label} → {s.to_label}")
            ]
            if s.from_label in labels and s.to_label in labels:
                assert len(mine) == 1
                assert drawn[mine[0]] == sorted(round(h, 9) for h in s.heights if h <= top_edge + 1e-9)
            else:
                assert mine == []


def test_histogram_and_density_hold_every_measured_step():
    steps = [(1.5, 0.1), (1.45, 0.1), (2.98, 0.12), (4.41, None)]
    fig = step_histogram(steps)
    bars = by_gid(fig, "measured histogram")
    assert sum(p.get_height() for p in bars) == len(steps)
    density = one(fig, "measured density")
    x, y = density.get_data()
    width = bars[0].get_width()
    area = float(np.sum((y[1:] + y[:-1]) / 2 * np.diff(x)))
    assert area / width == pytest.approx(len(steps), rel=1e-3)  # each step a normal curve of area 1
    ticks = one(fig, "measured steps").get_xdata()
    assert sorted(ticks) == sorted(v for v, _ in steps)


@pytest.mark.parametrize("name", sorted(PROTOTYPES))
def test_a_step_figure_for_every_prototype_family(proto, name):
    c = proto(PROTOTYPES[name].example)
    report = terminations_report(c, (1, 1, 0))
    fig = terminations_step_figure(report)
    assert len(_ladder_heights(fig)) == len(report.steps)
