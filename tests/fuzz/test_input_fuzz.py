"""Bad measurement files, step lists and option values (a seeded sample of the corpus): exit code 2, one line
on stderr, every input unchanged.

The full corpus, with random byte edits of good files, runs with ``python tests/fuzz/run_input_corpus.py``.
"""

import pytest
from input_corpus import cases, corpus, run

SAMPLE = corpus(seed=20251, n=60)


@pytest.mark.parametrize("case", SAMPLE, ids=[f"{i}-{c[0]}-{c[1][:40]}" for i, c in enumerate(SAMPLE)])
def test_bad_measurement_input_is_one_clean_error(tmp_path, case):
    code, lines, unchanged = run(case, tmp_path)
    assert code == 2, (case[1], code, lines)
    assert len(lines) == 1 and lines[0].startswith("termination") and "unexpected" not in lines[0], (case[1], lines)
    assert unchanged, case[1]


def test_the_corpus_is_reproducible_and_covers_every_channel():
    assert corpus(seed=20251, n=60) == SAMPLE
    assert {c[0] for c in SAMPLE} == {"measurement", "steps", "option"}
    assert len(cases()) > 140  # every named defect of the three channels
