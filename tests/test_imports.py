"""Heavy libraries stay off the prototype paths (issue 8: fast start-up).

Each check runs a fresh interpreter, does the work, and reports which of
pymatgen, ASE and matplotlib ended up in ``sys.modules``.  They are needed
for reading structure files and for drawing, never for a built-in prototype.
"""

import json
import os
import subprocess
import sys

import pytest

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
HEAVY = ("pymatgen", "ase", "matplotlib")

REPORT = f"""
import json, sys
heavy = sorted({{m.split(".")[0] for m in sys.modules}} & set({HEAVY!r}))
print("HEAVY=" + json.dumps(heavy))
"""

LIBRARY_JOB = """
from termination.structures import build_prototype
from termination.surface.faces import distinct_faces
from termination.surface.terminations import face_terminations

crystal = build_prototype("half-heusler:Ti,Ni,Sn")
faces = distinct_faces(crystal, max_index=2)
n = sum(len(face_terminations(crystal, f.hkl, face=f).terminations) for f in faces)
assert n > 0
"""


def cli_job(*args):
    return f"""
from termination import cli
try:
    cli.main({list(args)!r})
except SystemExit as exc:
    assert exc.code in (0, None), exc.code
"""


def heavy_modules_after(code):
    env = {**os.environ, "PYTHONPATH": ROOT + os.pathsep + os.environ.get("PYTHONPATH", "")}
    proc = subprocess.run(
        [sys.executable, "-c", code + REPORT], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120
    )
    assert proc.returncode == 0, proc.stderr[-2000:]
    line = next(v for v in proc.stdout.splitlines() if v.startswith("HEAVY="))
    return json.loads(line[len("HEAVY=") :])


def test_prototype_faces_and_terminations_import_no_heavy_library():
    assert heavy_modules_after(LIBRARY_JOB) == []


def test_planes_command_on_a_prototype_imports_no_heavy_library():
    assert heavy_modules_after(cli_job("planes", "rocksalt:Na,Cl", "--max-index", "1")) == []


def test_match_demo_imports_no_heavy_library():
    from termination import cli

    if not hasattr(cli, "match"):
        pytest.skip("cli.py has no match command")
    assert heavy_modules_after(cli_job("match", "--demo")) == []


@pytest.mark.parametrize(
    "args",
    [
        ("terminations", "rocksalt:Na,Cl", "--plane", "0", "0", "1"),
        ("polarity", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "2"),
        ("corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "2"),
    ],
)
def test_commands_without_plot_or_report_do_not_import_matplotlib(args):
    assert "matplotlib" not in heavy_modules_after(cli_job(*args))


def test_plot_imports_matplotlib(tmp_path):
    # The probe sees matplotlib when a figure is asked for, so the checks above can fail.
    job = cli_job("planes", "rocksalt:Na,Cl", "--max-index", "1", "--plot", str(tmp_path))
    assert "matplotlib" in heavy_modules_after(job)
    assert (tmp_path / "poles.png").exists()


def test_the_check_sees_a_heavy_import():
    # The probe itself must be able to fail: a (stand-in) matplotlib module is reported.
    code = "import sys, types\nsys.modules['matplotlib.pyplot'] = types.ModuleType('matplotlib.pyplot')\n"
    assert heavy_modules_after(code) == ["matplotlib"]
