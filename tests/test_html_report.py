"""The HTML report: self-contained, complete, and it renders in a real browser (headless Chromium).

The browser test opens the report as a reader would and fails on any console
error or warning, uncaught exception, error log entry or request for
anything but the page itself and its inline data; it checks that every
figure is present, has a size, and is not blank (a screenshot of it has
ink).  It needs Chromium: .ci/run installs Debian's `chromium`; where none
can be installed the test is skipped, saying so.
"""

import html
import io
import re
import sys
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from termination import cli
from termination.figures.commands import match_figures
from termination.htmlreport import inline_svg, report_html, write_report

sys.path.insert(0, str(Path(__file__).parent))
from chromium import BrowserError, Chromium, find_browser

runner = CliRunner()


@pytest.fixture(scope="module")
def demo_report(tmp_path_factory):
    """`termination match --demo --report demo.html`, as the README promises."""
    folder = tmp_path_factory.mktemp("report")
    path = folder / "demo.html"
    r = runner.invoke(cli.app, ["match", "--demo", "--report", str(path)])
    assert r.exit_code == 0, r.output
    return path


def test_report_holds_every_part_the_issue_asks_for(demo_report):
    page = demo_report.read_text(encoding="utf-8")
    for part in (
        "<h2>Structure</h2>",
        "half-heusler:Ti,Ni,Sn",  # the structure's source
        "<h2>Measurement</h2>",
        "Ranked candidates, with residuals",
        "<h2>Fit check</h2>",
        'class="verdict',
        "<h2>Figures</h2>",
        "<h2>Cautions and notes</h2>",
        "termination match --demo --report",  # the exact command
        "<td class='left'>numpy</td>",  # the versions
    ):
        assert part in page, part
    assert page.count("<figure") == 5 and page.count("<svg") == 5
    assert html.escape("Most likely (0 0 1)") in page
    assert "σ)" in page  # residuals in the ranked table


def test_report_is_self_contained(demo_report):
    page = demo_report.read_text(encoding="utf-8")
    assert "<script" not in page and "<link" not in page and "@import" not in page and "url(http" not in page
    for attr in re.findall(r'(?:src|href)="([^"]*)"', page):
        assert attr.startswith(("#", "data:")), attr
    ids = re.findall(r'\bid="([^"]+)"', page)
    assert len(ids) == len(set(ids))  # figures never share an id (their clip paths would mix)
    for ref in re.findall(r"url\(#([^)]+)\)", page):
        assert ref in ids


def test_inline_svg_prefixes_every_reference():
    svg = '<?xml version="1.0"?>\n<!DOCTYPE svg>\n<svg><clipPath id="c1"/><g clip-path="url(#c1)"/></svg>'
    out = inline_svg(svg, "f2-")
    assert out == '<svg><clipPath id="f2-c1"/><g clip-path="url(#f2-c1)"/></svg>'


def test_image_report(tmp_path):
    from termination.testing import synthetic_heightmap

    z = synthetic_heightmap((128, 128), 0.25, tilt_deg=1.0, step_heights=[2.0], lattice=(3.0, 3.0, 90.0, 10.0), seed=3)
    scan = tmp_path / "scan.npy"
    np.save(scan, z)
    out = tmp_path / "scan.html"
    r = runner.invoke(cli.app, ["image", str(scan), "--pixel-size", "0.25A", "--z-unit", "A", "--report", str(out)])
    assert r.exit_code == 0, r.output
    page = out.read_text(encoding="utf-8")
    assert "scan.npy" in page and "<svg" in page and "What the analysis found" in page


def test_report_refuses_to_overwrite(tmp_path):
    from termination.identification.likelihood import match
    from termination.identification.measurement import read_measurement
    from termination.structures import build_prototype, bundled

    crystal = build_prototype("half-heusler:Ti,Ni,Sn")
    report = match(crystal, read_measurement(bundled("demo_TiNiSn_001.toml")), top=3)
    target = tmp_path / "r.html"
    target.write_text("mine")
    from termination.errors import TerminationError

    with pytest.raises(TerminationError, match="exists"):
        write_report(target, report, [], command="termination match")
    assert target.read_text() == "mine"
    page = report_html(report, [], command="termination match", when="2024-01-01 00:00 UTC")
    assert page == report_html(report, [], command="termination match", when="2024-01-01 00:00 UTC")


def _ink(png):
    """Fraction of pixels visibly darker than white, and the grey-level spread, of a PNG."""
    from matplotlib.image import imread

    img = imread(io.BytesIO(png))[..., :3]
    grey = img.mean(axis=2)
    return float((grey < 0.9).mean()), float(grey.std())


def test_report_renders_in_headless_chromium(demo_report):
    binary = find_browser()
    if binary is None:
        pytest.skip(
            "Chromium is not installed, so the report was not opened in a browser "
            "(.ci/run installs it with `apt-get install chromium`)"
        )
    try:
        browser = Chromium(binary)
        browser.__enter__()
    except BrowserError as exc:
        pytest.skip(f"Chromium is installed but cannot start here: {exc}")
    try:
        url = demo_report.resolve().as_uri()
        browser.open(url)
        figures = browser.evaluate(
            """Array.from(document.querySelectorAll('figure[data-figure]')).map(f => {
                 const s = f.querySelector('svg');
                 const r = s ? s.getBoundingClientRect() : null;
                 return {name: f.dataset.figure, svg: !!s,
                         x: r ? r.left + window.scrollX : 0, y: r ? r.top + window.scrollY : 0,
                         w: r ? r.width : 0, h: r ? r.height : 0,
                         marks: s ? s.querySelectorAll('path, use, image').length : 0,
                         caption: (f.querySelector('figcaption') || {}).textContent || ''};
               })"""
        )
        title = browser.evaluate("document.title")
        assert browser.problems() == []
        outside = [u for u in browser.requests() if u != url and not u.startswith("data:")]
        assert outside == []  # nothing loaded from anywhere else
        assert "TiNiSn" in title
        assert [f["name"] for f in figures] == ["poles", "steps", "topview_best", "topograph_best", "fourier_best"]
        for f in figures:
            assert f["svg"] and f["w"] > 200 and f["h"] > 150 and f["marks"] > 20, f
            assert f["caption"].startswith("Figure ")
            ink, spread = _ink(browser.screenshot(f["x"], f["y"], f["w"], f["h"]))
            assert ink > 0.02 and spread > 0.05, (f["name"], ink, spread)
    finally:
        browser.__exit__(None, None, None)


def test_the_blank_check_can_fail():
    from termination.figures.canvas import new_figure, render

    fig = new_figure(2, 2)
    ink, spread = _ink(render(fig, "png"))
    assert ink < 0.02 and spread < 0.05
    assert match_figures  # the figures module is the one the report draws with
