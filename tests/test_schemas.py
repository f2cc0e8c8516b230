"""Every command's --json follows its shipped JSON Schema, and the schemas follow one convention."""

import json

import jsonschema
import numpy as np
import pytest
from typer.testing import CliRunner

from termination import cli
from termination.reports import command_reports
from termination.serialise import SCHEMA_VERSION, shipped_schema, write_schemas
from termination.testing import synthetic_heightmap
from termination.units import SUFFIXES

runner = CliRunner()

RUNS = {
    "structures": [["structures"]],
    "planes": [
        ["planes", "rocksalt:Na,Cl", "--max-index", "2", "--mount", "0", "0", "1"],
        ["planes", "half-heusler:Ti,Ni,Sn", "--max-index", "1"],
        ["planes", "hcp:Zn", "--max-index", "1", "--mount", "0", "0", "0", "1"],  # hkil, mount_hkil, ...
        ["planes", "rocksalt:Na,Cl", "--max-index", "2", "--mount", "0", "0", "1", "--tilt-window", "0", "60"],
    ],
    "terminations": [
        ["terminations", "diamond:Si", "--plane", "0", "0", "1"],
        ["terminations", "hexaboride:La,B", "--plane", "0", "0", "1"],
        ["terminations", "tetradymite:Bi,Se", "--plane", "0", "0", "0", "1"],
    ],
    "polarity": [
        ["polarity", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "2"],
        ["polarity", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--max-cell", "4"],
    ],
    "corrugation": [
        ["corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--weight", "Na=0.5"],
        ["corrugation", "diamond:Si", "--plane", "0", "0", "1", "--cell", "2x1", "--site-weight", "Si3c=0.5"],
        ["corrugation", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--visible", "Cl", "--termination", "Na"],
    ],
    "screen": [["screen", "rocksalt:Na,Cl", "half-heusler:Ti,Ni,Sn", "bad:Xx", "--max-index", "1", "--workers", "1"]],
    "slab": [
        ["slab", "rocksalt:Na,Cl", "--plane", "1", "1", "1", "--termination", "Na", "--cell", "2x1", "--symmetric"],
        ["slab", "half-heusler:Ti,Ni,Sn", "--plane", "0", "0", "1", "--termination", "T1", "--layers", "2"],
    ],
    "match": [
        ["match", "--demo"],
        ["match", "perovskite:Sr,Ti,O", "--mount", "0", "0", "1", "--tilt", "1+-1", "--step", "1.95", "--top", "3"],
        ["match", "diamond:Si", "--spacing", "7.68", "--cell", "2x1", "--depth", "2", "--top", "3"],
    ],
}


@pytest.fixture(scope="module")
def scan(tmp_path_factory):
    z = synthetic_heightmap(
        (192, 192), 0.25, tilt_deg=1.0, step_heights=[2.0], lattice=(3.0, 3.0, 90.0, 10.0), noise_angstrom=0.02, seed=3
    )
    path = tmp_path_factory.mktemp("image") / "scan.npy"
    np.save(path, z)
    return path


def _outputs(scan):
    for command, runs in RUNS.items():
        for args in runs:
            yield command, args
    yield "image", ["image", str(scan), "--pixel-size", "0.25A", "--z-unit", "A"]


def test_every_command_has_a_shipped_schema_that_is_up_to_date(tmp_path):
    written = {p.stem: json.loads(p.read_text(encoding="utf-8")) for p in write_schemas(tmp_path)}
    assert set(written) == set(command_reports()) == {*RUNS, "image"}
    for command, schema in written.items():
        assert shipped_schema(command) == schema, f"run `python -m termination.serialise` to update {command}.json"
        jsonschema.Draft202012Validator.check_schema(schema)


def test_every_command_output_validates_against_its_schema(scan):
    for command, args in _outputs(scan):
        r = runner.invoke(cli.app, [*args, "--json"])
        assert r.exit_code == 0, (args, r.output)
        data = json.loads(r.stdout)
        assert data["schema_version"] == SCHEMA_VERSION and data["command"] == command
        jsonschema.validate(data, shipped_schema(command), cls=jsonschema.Draft202012Validator)


def test_the_validation_can_fail():
    data = json.loads(runner.invoke(cli.app, ["planes", "fcc:Cu", "--max-index", "1", "--json"]).stdout)
    data["faces"][0]["d"] = 2.0  # a key without its unit is not in the schema
    with pytest.raises(jsonschema.ValidationError):
        jsonschema.validate(data, shipped_schema("planes"), cls=jsonschema.Draft202012Validator)


def _properties(schema):
    """(record, key, property schema) for every property of every record of a schema."""
    for name, body in [("top", schema), *schema.get("$defs", {}).items()]:
        for key, prop in body.get("properties", {}).items():
            yield name, key, prop


# Keys that hold numbers without a physical unit: counts, indices, fractions, probabilities,
# intensities relative to F(0), residuals in units of sigma, log-probabilities.
DIMENSIONLESS = {
    "max_index",
    "multiplicity",
    "natoms",
    "spacegroup_number",
    "max_cell",
    "compensation",
    "probability",
    "log_likelihood",
    "log_prior",
    "residual",
    "intensity",
    "threshold",
    "max_order",
    "maximum_fraction",
    "weighted_bonds_per_nm2",
    "broken_bonds_per_nm2",
    "sites",
    "changed",
    "patterns",
    "rank",
    "terraces",
    "peaks",
    "free_parameter_x",
    "nx",
    "ny",
    "layers",
    "g",
    "matrix",
    "hnf",
    "measured",
    "sigma",
    "predicted",
    "value",
    "composition",
    "weights",
    "free_parameter",
    "n",
    "chi_square",
    "p_value",
    "alpha",
    "fractions",
    "nan_fraction",
    "outlier_fraction",
    "fitted_fraction",
    "bulk_units",
}
# Records whose numbers are all dimensionless (log-likelihood terms; drift shear and stretch).
DIMENSIONLESS_RECORDS = {"Terms", "DriftCorrection"}


def test_one_key_per_concept_and_units_on_every_dimensional_key():
    forbidden = {"plane", "planes", "apparent_lattices", "termination_id"}
    for command in command_reports():
        for record, key, prop in _properties(shipped_schema(command)):
            assert key not in forbidden, (command, record, key)
            types = prop.get("type", [])
            numeric = "number" in (types if isinstance(types, list) else [types])
            suffixed = any(key.endswith(suffix) for suffix, _ in SUFFIXES.values())
            if numeric and key not in DIMENSIONLESS and not suffixed and record not in DIMENSIONLESS_RECORDS:
                assert "description" in prop, f"{command}: {record}.{key} is a number without a unit"
