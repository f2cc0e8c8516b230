import os
import stat

import pytest

from termination.errors import TerminationError
from termination.outputs import check_outputs, write_text


def test_written_file_has_the_mode_the_umask_gives(tmp_path):
    # A report is meant for colleagues: not private unless the umask says so (common practice).
    old = os.umask(0o022)
    try:
        path = write_text(tmp_path / "report.txt", "x\n")
    finally:
        os.umask(old)
    assert stat.S_IMODE(path.stat().st_mode) == 0o644


def test_existing_file_is_kept_without_force(tmp_path):
    path = tmp_path / "out.json"
    path.write_text("old")
    with pytest.raises(TerminationError, match="exists"):
        write_text(path, "new")
    assert path.read_text() == "old"
    write_text(path, "new", force=True)
    assert path.read_text() == "new"
    assert [p.name for p in tmp_path.iterdir()] == ["out.json"]  # no temporary file left


def test_a_hard_link_of_an_input_is_refused_even_with_force(tmp_path):
    src = tmp_path / "in.cif"
    src.write_text("data_x\n")
    link = tmp_path / "link.cif"
    os.link(src, link)
    with pytest.raises(TerminationError, match="link.cif"):
        check_outputs([link], inputs=[src], force=True)
    assert src.read_text() == "data_x\n"
