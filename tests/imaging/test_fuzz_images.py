"""Seeded fast subset of the image fuzz corpus: every bad input gives exit code 2, one stderr line, and
leaves the input unchanged (the full corpus with random mutations: tests/benchmarks/fuzz_images.py)."""

import pytest
from typer.testing import CliRunner

from termination import cli
from tests.imaging.image_corpus import cases

runner = CliRunner()
CASES = cases()


def _snapshot(path):
    return path.read_bytes() if path.is_file() else None


@pytest.mark.parametrize("name, build, options", CASES, ids=[c[0] for c in CASES])
def test_bad_image_input_is_one_clear_error(tmp_path, name, build, options):
    pytest.importorskip("h5py")
    path = build(tmp_path)
    before = _snapshot(path)
    r = runner.invoke(cli.app, ["image", str(path), *options])
    assert r.exit_code == 2, (name, r.exit_code, r.output, repr(r.exception))
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("termination: "), (name, r.stderr)
    assert "Traceback" not in r.output
    assert _snapshot(path) == before
