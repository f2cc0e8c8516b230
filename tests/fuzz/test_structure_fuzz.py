"""Malformed structure files (a seeded sample of the corpus) give one line on stderr, exit code 2, and stay unchanged.

The full corpus runs with ``python tests/fuzz/run_structure_corpus.py``.
"""

import pytest
from structure_corpus import corpus
from typer.testing import CliRunner

from termination import cli

runner = CliRunner()
SAMPLE = corpus(seed=20240, n=80)


@pytest.mark.parametrize("name, content, defect", SAMPLE, ids=[f"{i}-{d}" for i, (_, _, d) in enumerate(SAMPLE)])
def test_malformed_structure_file_is_one_clean_error(tmp_path, name, content, defect):
    path = tmp_path / name
    path.write_bytes(content)
    r = runner.invoke(cli.app, ["planes", str(path), "--max-index", "1"])
    lines = r.stderr.strip().splitlines()
    assert r.exit_code == 2, (defect, r.output, r.stderr)
    assert len(lines) == 1 and "Traceback" not in r.output and "unexpected" not in lines[0], (defect, r.stderr)
    assert path.read_bytes() == content  # the input is never modified


def test_the_corpus_is_reproducible_and_varied():
    again = corpus(seed=20240, n=80)
    assert again == SAMPLE
    kinds = {d.split()[0] for _, _, d in SAMPLE}
    assert kinds == {"cif", "poscar", "xyz", "junk"}
