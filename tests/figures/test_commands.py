"""Figures of each command: planned cheaply, checked before drawing, written all or nothing, never over a file."""

import pytest

from termination.errors import TerminationError
from termination.figures.canvas import render
from termination.figures.commands import (
    PlannedFigure,
    check_plot_folder,
    corrugation_figures,
    match_figures,
    planes_figures,
    polarity_figures,
    terminations_figures,
    write_figures,
)
from termination.reports import corrugation_report, planes_report, polarity_report, terminations_report

PNG = b"\x89PNG\r\n\x1a\n"


def _figure():
    from termination.figures.canvas import new_figure

    fig = new_figure(1.0, 1.0)
    fig.add_subplot().plot([0, 1], [0, 1])
    return fig


def test_render_gives_each_format_and_the_same_bytes_twice():
    fig = _figure()
    assert render(fig, "png").startswith(PNG)
    assert render(fig, "pdf").startswith(b"%PDF")
    svg = render(fig, "svg")
    assert b"<svg" in svg and render(fig, "svg") == svg  # no date, fixed ids, one layout
    assert render(_figure(), "svg") == svg  # the same figure made again gives the same file
    with pytest.raises(TerminationError, match="jpeg"):
        render(fig, "jpeg")


def test_plot_folder_checks(tmp_path):
    assert check_plot_folder(tmp_path / "new", "SVG") == "svg"
    (tmp_path / "file").write_text("x")
    with pytest.raises(TerminationError, match="not a folder"):
        check_plot_folder(tmp_path / "file", "png")
    with pytest.raises(TerminationError, match="does not exist"):
        check_plot_folder(tmp_path / "no" / "such", "png")
    with pytest.raises(TerminationError, match="png, svg, pdf"):
        check_plot_folder(tmp_path, "gif")


def test_write_figures_never_overwrites_and_writes_all_or_nothing(tmp_path):
    plans = [PlannedFigure("a", "", _figure), PlannedFigure("b", "", _figure)]
    written = write_figures(plans, tmp_path / "out", "png")
    assert [p.name for p in written] == ["a.png", "b.png"]
    assert (tmp_path / "out" / "a.png").read_bytes().startswith(PNG)
    before = (tmp_path / "out" / "b.png").stat().st_mtime_ns
    with pytest.raises(TerminationError, match="exists; pass --force"):
        write_figures(plans, tmp_path / "out", "png")
    assert (tmp_path / "out" / "b.png").stat().st_mtime_ns == before
    write_figures(plans, tmp_path / "out", "png", force=True)

    def broken():
        raise TerminationError("cannot draw this one")

    with pytest.raises(TerminationError, match="cannot draw"):
        write_figures([PlannedFigure("c", "", _figure), PlannedFigure("d", "", broken)], tmp_path / "out", "png")
    assert not (tmp_path / "out" / "c.png").exists()  # nothing written when one figure fails


def test_write_figures_refuses_an_input_and_too_many(tmp_path):
    target = tmp_path / "poles.png"
    target.write_bytes(b"an input")
    with pytest.raises(TerminationError, match="input file"):
        write_figures([PlannedFigure("poles", "", _figure)], tmp_path, "png", force=True, inputs=[target])
    many = [PlannedFigure(f"f{i}", "", _figure) for i in range(101)]
    with pytest.raises(TerminationError, match="more than 100"):
        write_figures(many, tmp_path / "many", "png")
    assert not (tmp_path / "many").exists()


def test_plans_of_each_command_are_cheap_and_named_once(proto, demo_match):
    c = proto("rocksalt:Na,Cl", a=5.64)
    plans = {
        "planes": planes_figures(planes_report(c, max_index=2, mount=(0, 0, 1)), c),
        "terminations": terminations_figures(terminations_report(c, (1, 1, 1)), c),
        "polarity": polarity_figures(polarity_report(c, plane=(1, 1, 1), max_cell=2)),
        "corrugation": corrugation_figures(corrugation_report(c, (1, 1, 1), max_cell=2), c, max_cell=2),
        "match": match_figures(demo_match[1], demo_match[0]),
    }
    assert [p.name for p in plans["planes"]] == ["poles"]
    assert [p.name for p in plans["terminations"]][0] == "steps"
    assert {p.name for p in plans["polarity"]} == {"polarity_111_T1", "polarity_111_T2"}
    assert "topview_T2_2x1" in {p.name for p in plans["corrugation"]}
    assert [p.name for p in plans["match"]] == ["poles", "steps", "topview_best", "topograph_best", "fourier_best"]
    for name, found in plans.items():
        names = [p.name for p in found]
        assert len(names) == len(set(names)), name
        assert all(p.caption.endswith(".") for p in found), name


def test_every_match_figure_draws(demo_match):
    crystal, report = demo_match
    for plan in match_figures(report, crystal):
        fig = plan.make()
        assert fig.axes, plan.name


def test_corrugation_figures_of_a_cell_given_by_the_user(proto):
    c = proto("rocksalt:Na,Cl", a=5.64)
    report = corrugation_report(c, (0, 0, 1), cells=["2x2"], reconstructions=False)
    plans = corrugation_figures(report, c)
    names = [p.name for p in plans]
    assert "topview_T1_2x2" in names and "fourier_T1_2x2" in names
    assert "topograph_T1_2x2" not in names  # a cell without atoms has the 1x1 topograph
    for plan in plans:
        assert plan.make().axes


def test_match_figures_with_a_measured_map(tmp_path, demo_match):
    import numpy as np
    from figure_data import one

    from termination.figures.commands import read_measured
    from termination.testing import synthetic_heightmap

    z = synthetic_heightmap(
        (128, 128), 0.25, tilt_deg=1.0, step_heights=[2.96], lattice=(4.19, 4.19, 90.0, 8.0), seed=5
    )
    np.save(tmp_path / "scan.npy", z)
    measured = read_measured(tmp_path / "scan.npy", "0.25A", "A")
    assert measured.map.pixel_size == (0.25, 0.25) and measured.map.heights == pytest.approx(z)
    crystal, report = demo_match
    plans = {p.name: p for p in match_figures(report, crystal, measured=measured)}
    assert "beside the measured terrace" in plans["topograph_best"].caption
    assert one(plans["topograph_best"].make(), "measured topograph") is not None
    assert one(plans["fourier_best"].make(), "measured power") is not None
