"""Records in notebooks: to_dataframe() has one row per record row with the JSON keys; _repr_html_ shows them."""

import html
import subprocess
import sys

import pytest

from termination.errors import TerminationError
from termination.reports import (
    corrugation_report,
    planes_report,
    polarity_report,
    structures_report,
    terminations_report,
)
from termination.serialise import to_jsonable
from termination.tabular import flat_row, record_rows

pd = pytest.importorskip("pandas")


def test_planes_frame_has_a_row_per_face_and_unit_suffixed_columns(proto):
    report = planes_report(proto("rocksalt:Na,Cl", a=5.64), max_index=2, mount=(0, 0, 1))
    df = report.to_dataframe()
    assert len(df) == len(report.faces)
    assert {"hkl", "d_angstrom", "tilt_deg", "mesh.a_angstrom", "mesh.area_angstrom2"} <= set(df.columns)
    # the values are the JSON's: (0 0 1) of rock salt has d = a/2 = 2.82 Å # common practice
    first = to_jsonable(report.faces[0])
    assert df.loc[0, "d_angstrom"] == first["d_angstrom"] == pytest.approx(2.82)
    assert df.loc[0, "mesh.gamma_deg"] == first["mesh"]["gamma_deg"]
    assert report.table_names() == ("faces", "window")


def test_nested_tables_repeat_the_parent_columns(proto):
    report = polarity_report(proto("rocksalt:Na,Cl", a=5.64), max_index=1, max_cell=2)
    df = report.to_dataframe()
    assert len(df) == sum(len(f.terminations) for f in report.faces)
    assert {"hkl", "d_angstrom", "id", "label", "tasker_type", "dipole_e_angstrom"} <= set(df.columns)
    polar = df[df["tasker_type"] == "III"]
    assert set(polar["hkl"]) == {(1, 1, 1)}  # rock salt: only (1 1 1) is polar up to index 1 # Tasker (1979)
    faces = report.to_dataframe("faces")
    assert len(faces) == len(report.faces)


def test_other_tables_of_a_record(proto):
    report = terminations_report(proto("perovskite:Sr,Ti,O"), (0, 0, 1))
    assert len(report.to_dataframe("steps")) == len(report.steps)
    assert len(report.to_dataframe("layers")) == len(report.layers)
    with pytest.raises(TerminationError, match="has the tables terminations, layers, steps"):
        report.to_dataframe("faces")
    corrugation = corrugation_report(proto("rocksalt:Na,Cl", a=5.64), (1, 1, 1), max_cell=2)
    cells = corrugation.to_dataframe("terminations.reconstructions")
    assert len(cells) == sum(len(t.reconstructions) for t in corrugation.terminations)
    assert "matrix" in cells.columns


def test_match_frame_and_html(demo_match_report):
    report = demo_match_report
    df = report.to_dataframe()
    assert list(df["rank"]) == [r.rank for r in report.candidates]
    assert df.loc[0, "probability"] == pytest.approx(report.candidates[0].probability)
    assert "tilt_deg.residual" in df.columns and "d_angstrom" in df.columns
    page = report._repr_html_()
    assert page.startswith("<div>") and "<table>" in page and "candidates (10 rows)" in page
    assert html.escape(report.verdict) in page  # the record's text fields come first


def test_flat_rows_follow_the_json():
    rows = record_rows(structures_report(), "prototypes")
    assert rows[0] == flat_row(structures_report().prototypes[0])
    assert set(rows[0]) == set(to_jsonable(structures_report().prototypes[0]))


def test_html_does_not_import_pandas():
    code = (
        "import sys\n"
        "from termination.reports import structures_report\n"
        "assert '<table>' in structures_report()._repr_html_()\n"
        "print('pandas' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip() == "False"


@pytest.fixture(scope="module")
def demo_match_report():
    from termination.identification.likelihood import match
    from termination.identification.measurement import read_measurement
    from termination.structures import build_prototype, bundled

    return match(build_prototype("half-heusler:Ti,Ni,Sn"), read_measurement(bundled("demo_TiNiSn_001.toml")), top=10)
