"""The wheel installs the termination package only, with its data, schemas and console script."""

import subprocess
import sys
import zipfile

import pytest

from termination import __version__

ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def wheel(tmp_path_factory):
    out = tmp_path_factory.mktemp("wheel")
    proc = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "--no-deps", "--quiet", "-w", str(out), str(ROOT)],
        capture_output=True,
        text=True,
        timeout=600,
    )
    if proc.returncode != 0:
        pytest.fail(proc.stderr[-2000:])
    (path,) = out.glob("termination-*.whl")
    return path


def test_wheel_holds_only_the_termination_package(wheel):
    names = zipfile.ZipFile(wheel).namelist()
    top = {n.split("/")[0] for n in names}
    assert top == {"termination", f"termination-{__version__}.dist-info"}, top
    for required in (
        "termination/cli.py",
        "termination/structures/prototypes.py",
        "termination/py.typed",
        "termination/structures/data/demo_TiNiSn_001.toml",
        "termination/schemas/match.json",
        "termination/figures/poles.py",
        "termination/htmlreport.py",
    ):
        assert required in names, required


def test_wheel_declares_the_console_script_and_one_version(wheel):
    with zipfile.ZipFile(wheel) as z:
        entry = z.read(f"termination-{__version__}.dist-info/entry_points.txt").decode()
        meta = z.read(f"termination-{__version__}.dist-info/METADATA").decode()
    assert "termination = termination.cli:main" in entry
    assert f"Version: {__version__}" in meta and "Requires-Python: >=3.11" in meta
