"""Screening many structures: equal to the per-structure commands, on any executor, resumable, errors as rows."""

import concurrent.futures as cf
import csv
import json
import sys
from pathlib import Path

import jsonschema
import pytest

from termination.errors import StructureError
from termination.reports import planes_report, polarity_report
from termination.screening import CSV_COLUMNS, find_structures, read_done, screen
from termination.serialise import shipped_schema
from termination.structures import load_structure

sys.path.insert(0, str(Path(__file__).parent))
from screening_folder import write_structure_folder

SPECS = ["rocksalt:Na,Cl", "perovskite:Sr,Ti,O", "hexaboride:La,B", "half-heusler:Ti,Ni,Sn", "zincblende:Ga,As"]


class CountingExecutor(cf.Executor):
    """Runs tasks in this thread and counts the structures it was given."""

    def __init__(self):
        self.structures = []

    def submit(self, fn, /, *args, **kwargs):
        self.structures.extend(args[0])
        future = cf.Future()
        future.set_result(fn(*args, **kwargs))
        return future


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    root = tmp_path_factory.mktemp("structures")
    paths, broken = write_structure_folder(root, 200, corrupt=4, seed=1)
    return root, paths, broken


def test_rows_equal_the_per_structure_commands():
    report = screen(SPECS, max_index=2)
    for spec in SPECS:
        crystal = load_structure(spec)
        rows = [r for r in report.results if r.structure == spec]
        planes = planes_report(crystal, max_index=2)
        assert [r.hkl for r in rows] == [f.hkl for f in planes.faces]
        for row, face in zip(rows, planes.faces):
            assert row.d == face.d and row.multiplicity == face.multiplicity
            assert row.termination_count == len(face.terminations) and row.smallest_step == face.smallest_step
            assert row.polar == face.polar
        if planes.charges is None:  # TiNiSn: no formal charges, so no Tasker types (as `planes`)
            assert all(t.tasker_type is None for r in rows for t in r.terminations)
            continue
        polarity = polarity_report(crystal, max_index=2, use_pymatgen=False)
        for row, fp in zip(rows, polarity.faces):
            assert [(t.id, t.label, t.tasker_type) for t in row.terminations] == [
                (t.id, t.label, t.tasker_type) for t in fp.terminations
            ]
            for mine, theirs in zip(row.terminations, fp.terminations):
                assert mine.compensation == theirs.compensation
                best = theirs.reconstructions[0] if theirs.reconstructions else None
                assert mine.cell_matrix == (None if best is None else best.matrix)


def test_a_folder_with_corrupt_files_completes_with_error_rows(folder, tmp_path):
    root, paths, broken = folder
    out = tmp_path / "screen.jsonl"
    with cf.ProcessPoolExecutor(max_workers=2) as pool:
        report = screen([root], out=out, max_index=1, executor=pool)
    assert report.structures == 200 and report.failed == len(broken) == 4
    lines = out.read_text(encoding="utf-8").splitlines()
    header, rows = json.loads(lines[0]), [json.loads(ln) for ln in lines[1:]]
    assert header["command"] == "screen" and header["settings"]["max_index"] == 1
    assert report.rows == len(rows)
    errors = {r["structure"] for r in rows if r["error"]}
    assert errors == broken
    assert {r["structure"] for r in rows} == set(paths)  # every file, in the order of the folder
    assert [r["structure"] for r in rows] == sorted(r["structure"] for r in rows)
    schema = shipped_schema("screen")
    row_schema = {"$ref": "#/$defs/ScreenRow", "$defs": schema["$defs"]}
    for r in rows[:40]:
        jsonschema.validate(r, row_schema, cls=jsonschema.Draft202012Validator)


def test_an_interrupted_run_resumes_without_doing_any_structure_twice(folder, tmp_path):
    _, paths, _ = folder
    chosen = paths[:40]
    out = tmp_path / "screen.csv"

    def stop_after_15(done, total):
        if done >= 15:
            raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        screen(chosen, out=out, max_index=1, chunk_size=5, progress=stop_after_15)
    first = read_done(out, "csv")
    assert len(first) == 15
    with open(out, "a", encoding="utf-8") as fh:
        fh.write(f"{chosen[15]},Na")  # a partial last line, as a kill in the middle of a write leaves
    counting = CountingExecutor()
    report = screen(chosen, out=out, resume=True, max_index=1, executor=counting, workers=2)
    assert report.skipped == 15 and report.screened == 25
    assert sorted(counting.structures) == sorted(set(chosen) - first)  # nothing done twice
    fresh = tmp_path / "fresh.csv"
    screen(chosen, out=fresh, max_index=1)
    assert out.read_text(encoding="utf-8") == fresh.read_text(encoding="utf-8")
    again = screen(chosen, out=out, resume=True, max_index=1, executor=CountingExecutor())
    assert again.screened == 0 and again.skipped == 40
    with open(out, newline="", encoding="utf-8") as fh:
        assert tuple(next(csv.reader(fh))) == CSV_COLUMNS


def test_a_process_pool_gives_the_serial_rows(folder):
    _, paths, _ = folder
    chosen = paths[:24]
    serial = screen(chosen, max_index=2)
    with cf.ProcessPoolExecutor(max_workers=2) as pool:
        parallel = screen(chosen, max_index=2, executor=pool, chunk_size=3)
    assert parallel.results == serial.results and parallel.workers == 2


def test_a_local_dask_cluster_gives_the_serial_rows(folder):
    distributed = pytest.importorskip("distributed")
    _, paths, _ = folder
    chosen = paths[:20] + ["rocksalt:Na,Cl", "nonsense:Xx"]
    serial = screen(chosen, max_index=2)
    with (
        distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, dashboard_address=None) as cluster,
        distributed.Client(cluster) as client,
    ):
        on_dask = screen(chosen, max_index=2, executor=client.get_executor(), workers=2, chunk_size=4)
    assert on_dask.results == serial.results
    assert on_dask.failed == serial.failed == 2  # the first generated file and the unknown prototype


def test_outputs_are_never_overwritten_or_mixed(tmp_path):
    out = tmp_path / "screen.jsonl"
    screen(["fcc:Cu"], out=out, max_index=1)
    with pytest.raises(StructureError, match="--resume"):
        screen(["fcc:Cu"], out=out, max_index=1)
    with pytest.raises(StructureError, match="other settings"):
        screen(["fcc:Cu"], out=out, max_index=2, resume=True)
    assert screen(["fcc:Cu", "bcc:Fe"], out=out, max_index=2, force=True).screened == 2
    source = tmp_path / "NaCl.csv"  # an input named like an output
    source.write_text("data_x\n", encoding="utf-8")
    with pytest.raises(StructureError, match="input"):
        screen([source], out=source, force=True)
    with pytest.raises(StructureError, match=r"\*.jsonl or \*.csv"):
        screen(["fcc:Cu"], out=tmp_path / "screen.txt")


def test_finding_structures(tmp_path):
    (tmp_path / "a.cif").write_text("x", encoding="utf-8")
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "POSCAR").write_text("x", encoding="utf-8")
    (tmp_path / "notes.txt").write_text("x", encoding="utf-8")
    (tmp_path / ".hidden.cif").write_text("x", encoding="utf-8")
    found = find_structures([tmp_path, str(tmp_path / "*.cif"), "fcc:Cu"])
    assert found == (str(tmp_path / "a.cif"), str(tmp_path / "sub" / "POSCAR"), "fcc:Cu")
    for bad in (tmp_path / "missing.cif", str(tmp_path / "*.xyz")):
        with pytest.raises(StructureError, match="missing.cif|matches"):
            find_structures([bad])
