"""--plot DIR, --plot-format, --force and --report on the commands: files written, never overwritten, bad input."""

import numpy as np
import pytest
from typer.testing import CliRunner

from termination import cli
from termination.testing import synthetic_heightmap

runner = CliRunner()
PNG = b"\x89PNG\r\n\x1a\n"


def _ok(args):
    r = runner.invoke(cli.app, args)
    assert r.exit_code == 0, (args, r.output)
    return r


def _fails(args, message):
    r = runner.invoke(cli.app, args)
    assert r.exit_code == 2, (args, r.output)
    lines = [v for v in r.output.splitlines() if v.strip()]
    assert len(lines) == 1 and message in lines[0], r.output
    return r


def test_planes_plot_writes_the_pole_figure(tmp_path):
    out = tmp_path / "figs"
    r = _ok(["planes", "rocksalt:Na,Cl", "--max-index", "2", "--mount", "0", "0", "1", "--plot", str(out)])
    assert (out / "poles.png").read_bytes().startswith(PNG)
    assert "Faces" in r.stdout or "(0 0 1)" in r.stdout  # the table is still printed
    assert "wrote" in r.stderr


@pytest.mark.parametrize("fmt, magic", [("svg", b"<?xml"), ("pdf", b"%PDF")])
def test_plot_format(tmp_path, fmt, magic):
    _ok(["terminations", "rocksalt:Na,Cl", "--plane", "0", "0", "1", "--plot", str(tmp_path), "--plot-format", fmt])
    files = sorted(p.name for p in tmp_path.iterdir())
    assert f"steps.{fmt}" in files and f"topview_T1.{fmt}" in files and f"fourier_T1.{fmt}" in files
    assert all(p.read_bytes().startswith(magic) for p in tmp_path.iterdir())


def test_existing_figures_are_kept_without_force(tmp_path):
    args = ["polarity", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "2", "--plot", str(tmp_path)]
    _ok(args)
    target = tmp_path / "polarity_111_T1.png"
    target.write_bytes(b"mine")
    _fails(args, "polarity_111_T1.png exists; pass --force")
    assert target.read_bytes() == b"mine"
    _ok(args + ["--force"])
    assert target.read_bytes().startswith(PNG)


def test_bad_plot_options_fail_before_the_work(tmp_path):
    _fails(["planes", "rocksalt:Na,Cl", "--plot", str(tmp_path), "--plot-format", "gif"], "gif")
    afile = tmp_path / "afile"
    afile.write_text("x")
    _fails(["planes", "rocksalt:Na,Cl", "--plot", str(afile)], "not a folder")
    _fails(["planes", "rocksalt:Na,Cl", "--plot", str(tmp_path / "a" / "b")], "does not exist")


def test_corrugation_plot_with_cells(tmp_path):
    _ok(["corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "2", "--plot", str(tmp_path)])
    names = {p.name for p in tmp_path.iterdir()}
    assert {"topview_T2_2x1.png", "topograph_T2_2x1.png", "fourier_T2_2x1.png", "fourier_T1.png"} <= names


def test_match_demo_report_and_plot(tmp_path):
    report = tmp_path / "demo.html"
    _ok(["match", "--demo", "--report", str(report), "--plot", str(tmp_path / "figs")])
    page = report.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and "termination match --demo" in page and "--report" in page
    names = sorted(p.name for p in (tmp_path / "figs").iterdir())
    assert names == ["fourier_best.png", "poles.png", "steps.png", "topograph_best.png", "topview_best.png"]
    _fails(["match", "--demo", "--report", str(report)], "demo.html exists; pass --force")


def test_match_report_never_overwrites_an_input(tmp_path):
    steps = tmp_path / "steps.txt"
    steps.write_text("2.9\n1.5\n")
    _fails(
        ["match", "perovskite:Sr,Ti,O", "--steps", str(steps), "--report", str(steps), "--force"], "is an input file"
    )
    assert steps.read_text() == "2.9\n1.5\n"


def test_image_plot_and_report(tmp_path):
    z = synthetic_heightmap((128, 128), 0.25, tilt_deg=1.0, step_heights=[2.0], lattice=(3.0, 3.0, 90.0, 10.0), seed=3)
    scan = tmp_path / "scan.npy"
    np.save(scan, z)
    base = ["image", str(scan), "--pixel-size", "0.25A", "--z-unit", "A"]
    _ok(base + ["--plot", str(tmp_path / "figs"), "--report", str(tmp_path / "scan.html")])
    assert sorted(p.name for p in (tmp_path / "figs").iterdir()) == ["image.png", "spectrum.png", "steps.png"]
    assert "<svg" in (tmp_path / "scan.html").read_text(encoding="utf-8")
    _fails(base + ["--report", str(scan), "--force"], "is an input file")


def test_report_shows_the_command_as_typed(tmp_path):
    report = tmp_path / "typed.html"
    args = ["match", "--demo", "--top", "3", "--report", str(report)]
    with pytest.raises(SystemExit) as exit_info:
        cli.main(args)
    assert exit_info.value.code == 0
    page = report.read_text(encoding="utf-8")
    assert f"<pre>termination match --demo --top 3 --report {report}</pre>" in page
