"""Measurement file, measured values, step lists and merging."""

import math
import tomllib

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from termination.defaults import MAX_MEASURED_VALUES
from termination.errors import MeasurementError
from termination.identification.measurement import (
    Measurement,
    Value,
    format_measurement,
    format_steps,
    merge,
    parse_value,
    read_measurement,
    read_steps,
    write_measurement,
    write_steps,
)

# The example of the file format as documented for the match command.
SPEC_EXAMPLE = """\
# termination measurement file
mount = [0, 0, 1]                          # face the crystal was mounted on
max_index = 3
tilt = { value = 54.0, sigma = 2.0 }       # inclination of the imaged terrace plane to the mount face, deg
row_angle = { value = 90.0, sigma = 4.0 }  # deg
spacings = [ { value = 4.19, sigma = 0.15 } ]  # corrugation periodicities, Å
steps = [ { value = 2.97, sigma = 0.12 } ]     # step heights, Å
[visibility]
visible = ["Sn"]
weights = { Na = 0.2 }
decay_length = 1.0                          # Å
"""

FULL = Measurement(
    mount=(0, 0, 1),
    max_index=3,
    tilt=Value(54.0, 2.0),
    row_angle=Value(90.0, 4.0),
    spacings=(Value(4.19, 0.15),),
    steps=(Value(2.97, 0.12),),
    visible=("Sn",),
    weights={"Na": 0.2},
    decay_length=1.0,
)


# ----------------------------------------------------------------- parse_value


# the spellings the measurement format specifies: "54", "54+-2", "54±2", "54 +/- 2"
@pytest.mark.parametrize(
    "text, value, sigma",
    [
        ("54", 54.0, None),
        ("54+-2", 54.0, 2.0),
        ("54±2", 54.0, 2.0),
        ("54 +/- 2", 54.0, 2.0),
        (" 2.97 ± 0.12 ", 2.97, 0.12),
        ("-5.5+-0.25", -5.5, 0.25),
        ("1e1+-2e-1", 10.0, 0.2),
        (".5", 0.5, None),
        ("4.19 +- 0", 4.19, 0.0),
    ],
)
def test_parse_value_accepts_the_documented_spellings(text, value, sigma):
    v = parse_value(text)
    assert v.value == value
    assert v.sigma == sigma


@pytest.mark.parametrize("text", ["abc", "54+-", "nan", "inf", "54+--2", "54±-2", "", "54 2", "54+-2+-1", "1,5"])
def test_parse_value_rejects_garbage_and_names_it(text):
    with pytest.raises(MeasurementError) as err:
        parse_value(text)
    assert repr(text) in str(err.value) or text.strip() == ""


def test_parse_value_rejects_non_text():
    with pytest.raises(MeasurementError, match="text"):
        parse_value(54.0)


@pytest.mark.parametrize(
    "kwargs, fragment",
    [
        (dict(value=float("nan")), "finite"),
        (dict(value=float("inf")), "finite"),
        (dict(value=1.0, sigma=-0.1), "non-negative"),
        (dict(value=1.0, sigma=float("nan")), "finite"),
        (dict(value="1.0"), "number"),
        (dict(value=True), "number"),
    ],
)
def test_value_checks_its_fields(kwargs, fragment):
    with pytest.raises(MeasurementError, match=fragment):
        Value(**kwargs)


# ----------------------------------------------------------------- reading and writing


def test_the_documented_example_reads_as_written(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text(SPEC_EXAMPLE, encoding="utf-8")
    assert read_measurement(path) == FULL


def test_round_trip_of_a_full_measurement(tmp_path):
    path = write_measurement(tmp_path / "m.toml", FULL, comment="from scan 17\nsecond line")
    text = path.read_text(encoding="utf-8")
    assert text.startswith("# termination measurement file\n# from scan 17\n# second line\n")
    assert read_measurement(path) == FULL


def test_round_trip_of_an_empty_measurement(tmp_path):
    path = write_measurement(tmp_path / "m.toml", Measurement())
    assert read_measurement(path) == Measurement()


def test_missing_sigma_reads_as_none(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text('tilt = { value = 12.5 }\nsteps = [ { value = 2.0 }, 3.1, "4.2+-0.3" ]\n')
    m = read_measurement(path)
    assert m.tilt == Value(12.5, None)
    assert m.steps == (Value(2.0), Value(3.1), Value(4.2, 0.3))
    assert read_measurement(write_measurement(tmp_path / "again.toml", m)) == m


finite = st.floats(min_value=1e-6, max_value=1e3, allow_nan=False, allow_infinity=False)  # lengths within the bound
sigmas = st.one_of(st.none(), st.floats(min_value=0, max_value=1e3, allow_nan=False))
values = st.builds(Value, finite, sigmas)
symbols = st.sampled_from(["Na", "Cl", "Sn", "Ti", "Ni", "O", "Sr"])


@st.composite
def measurements(draw):
    mount = draw(st.one_of(st.none(), st.tuples(*[st.integers(-4, 4)] * 3).filter(lambda t: any(t))))
    angle = st.floats(min_value=0.001, max_value=179.999, allow_nan=False)
    return Measurement(
        mount=mount,
        max_index=draw(st.one_of(st.none(), st.integers(1, 12))),
        tilt=draw(st.one_of(st.none(), st.builds(Value, st.floats(0, 90, allow_nan=False), sigmas))),
        row_angle=draw(st.one_of(st.none(), st.builds(Value, angle, sigmas))),
        spacings=tuple(draw(st.lists(values, max_size=4))),
        steps=tuple(draw(st.lists(values, max_size=6))),
        visible=tuple(draw(st.lists(symbols, max_size=3, unique=True))),
        weights=draw(st.dictionaries(symbols, st.floats(0, 10, allow_nan=False), max_size=3)),
        decay_length=draw(st.one_of(st.none(), finite)),
    )


@settings(max_examples=60, deadline=None)
@given(measurements())
def test_round_trip_is_exact_for_random_measurements(tmp_path_factory, m):
    path = tmp_path_factory.mktemp("rt") / "m.toml"
    write_measurement(path, m)
    assert read_measurement(path) == m
    # the text is valid TOML on its own (written by hand, checked by the standard parser)
    tomllib.loads(format_measurement(m))


def test_write_refuses_to_overwrite_without_force(tmp_path):
    path = tmp_path / "m.toml"
    path.write_text("keep me\n")
    with pytest.raises(MeasurementError, match="exists"):
        write_measurement(path, FULL)
    assert path.read_text() == "keep me\n"
    write_measurement(path, FULL, force=True)
    assert read_measurement(path) == FULL


@pytest.mark.parametrize(
    "text, fragment",
    [
        ("mount = [0, 0, 1", "malformed TOML"),
        ("surface = 3", "unknown key 'surface'"),
        ("[visibility]\nshow = ['Sn']", "unknown key 'show'"),
        ("tilt = { value = 3, error = 1 }", "unknown key 'error'"),
        ("tilt = { sigma = 1 }", "missing 'value'"),
        ("tilt = 'abc'", "abc"),
        ("tilt = [54]", "tilt"),
        ("tilt = { value = 54, sigma = -2 }", "non-negative"),
        ("tilt = { value = nan }", "finite"),
        ("tilt = { value = 95 }", "[0, 90]"),
        ("row_angle = { value = 180 }", "(0, 180)"),
        ("spacings = 4.19", "list"),
        ("spacings = [ { value = -4.19 } ]", "spacing"),
        ("steps = [ { value = 0 } ]", "step height"),
        ("mount = [0, 0, 0]", "(0 0 0)"),
        ("mount = [1, 2]", "three integers"),
        ("mount = [1, 2, 0.5]", "three integers"),
        ("max_index = 0", "an integer from 1 to 12"),
        ("max_index = true", "an integer from 1 to 12"),
        ("[visibility]\nvisible = 'Sn'", "list"),
        ("[visibility]\nvisible = ['sn']", "'sn'"),
        ("[visibility]\nweights = { Na = -1 }", "non-negative"),
        ("[visibility]\nweights = { Na = 'x' }", "number"),
        ("[visibility]\ndecay_length = 0", "positive"),
        ("visibility = 3", "table"),
    ],
)
def test_bad_files_give_one_clear_error(tmp_path, text, fragment):
    path = tmp_path / "bad.toml"
    path.write_text(text + "\n", encoding="utf-8")
    with pytest.raises(MeasurementError) as err:
        read_measurement(path)
    message = str(err.value)
    assert fragment in message
    assert "bad.toml" in message
    assert "\n" not in message.strip() or "malformed" in message


def test_missing_file_is_a_measurement_error(tmp_path):
    with pytest.raises(MeasurementError, match="nowhere.toml"):
        read_measurement(tmp_path / "nowhere.toml")


def test_measurement_checks_fields_when_built_in_code():
    with pytest.raises(MeasurementError, match=r"\(0 0 0\)"):
        Measurement(mount=(0, 0, 0))
    with pytest.raises(MeasurementError, match="step height"):
        Measurement(steps=(Value(-1.0),))


# ----------------------------------------------------------------- step lists


def test_read_steps_reads_the_plain_list_format(tmp_path):
    path = tmp_path / "steps.txt"
    path.write_text(
        "# heights from line profiles\n2.97\n\n2.50 0.05   # with sigma\n3.75, 0.1\n   1.3±0.2\n1.4 +- 0.1\n",
        encoding="utf-8",
    )
    assert read_steps(path) == (
        Value(2.97),
        Value(2.5, 0.05),
        Value(3.75, 0.1),
        Value(1.3, 0.2),
        Value(1.4, 0.1),
    )


@pytest.mark.parametrize(
    "line, fragment",
    [
        ("-2.97", "positive"),
        ("2.97 0.1 7", "optional sigma"),
        ("one", "'one'"),
        ("2.97 -0.1", "non-negative"),
        ("nan", "'nan'"),
    ],
)
def test_read_steps_names_file_and_line_of_a_bad_entry(tmp_path, line, fragment):
    path = tmp_path / "steps.txt"
    path.write_text("1.0\n" + line + "\n", encoding="utf-8")
    with pytest.raises(MeasurementError) as err:
        read_steps(path)
    assert "steps.txt:2" in str(err.value)
    assert fragment in str(err.value)


def test_step_list_round_trip(tmp_path):
    steps = (Value(2.97, 0.01), Value(2.5), Value(0.7, 0.0))
    path = write_steps(tmp_path / "s.txt", steps, comment="from scan.npy")
    assert read_steps(path) == steps
    with pytest.raises(MeasurementError, match="exists"):
        write_steps(path, steps)
    assert format_steps([(1.0, 0.5)]).splitlines()[-1] == "1.0 0.5"


# ----------------------------------------------------------------- merge


def test_merge_lets_non_empty_override_fields_win():
    base = FULL
    override = Measurement(tilt=Value(12.0, 1.0), steps=(Value(2.0),), weights={"Sn": 1.0})
    m = merge(base, override)
    assert m.tilt == Value(12.0, 1.0)
    assert m.steps == (Value(2.0),)
    assert m.weights == {"Sn": 1.0}
    # everything the override left empty comes from the base
    assert (m.mount, m.max_index, m.row_angle, m.spacings, m.visible, m.decay_length) == (
        base.mount,
        base.max_index,
        base.row_angle,
        base.spacings,
        base.visible,
        base.decay_length,
    )


def test_merge_with_empty_is_identity_and_idempotent():
    assert merge(FULL, Measurement()) == FULL
    assert merge(Measurement(), FULL) == FULL
    assert merge(FULL, FULL) == FULL
    assert merge(merge(FULL, Measurement(max_index=5)), Measurement(max_index=5)) == merge(
        FULL, Measurement(max_index=5)
    )


def test_merge_rejects_other_types():
    with pytest.raises(MeasurementError, match="Measurement"):
        merge(FULL, {"tilt": 3})


def test_value_text_form():
    assert str(Value(54.0, 2.0)) == "54±2"
    assert str(Value(4.19)) == "4.19"
    assert math.isclose(parse_value(str(Value(2.97, 0.1))).sigma, 0.1)


# ----------------------------------------------------------------- input guards


def test_a_fifo_or_device_is_refused_without_reading(tmp_path):
    import os

    fifo = tmp_path / "pipe.toml"
    os.mkfifo(fifo)
    for reader in (read_measurement, read_steps):
        with pytest.raises(MeasurementError, match="not a regular file"):
            reader(fifo)  # would block if it were opened
    with pytest.raises(MeasurementError, match="not a regular file"):
        read_steps("/dev/zero")  # would read without end


def test_oversized_and_overlong_inputs_are_refused(tmp_path):
    big = tmp_path / "big.txt"
    big.write_bytes(b"1.0\n" * 300_000)  # 1.2 MB
    with pytest.raises(MeasurementError, match="bytes"):
        read_steps(big)
    many = tmp_path / "many.txt"
    many.write_text("2.0\n" * (MAX_MEASURED_VALUES + 1), encoding="utf-8")
    with pytest.raises(MeasurementError, match=f"{MAX_MEASURED_VALUES + 1} step heights"):
        read_steps(many)


def test_deeply_nested_toml_is_a_one_line_error(tmp_path):
    f = tmp_path / "nested.toml"
    f.write_text("x = " + "[" * 5000 + "]" * 5000 + "\n", encoding="utf-8")
    with pytest.raises(MeasurementError, match="nested.toml"):
        read_measurement(f)


def test_cells_depth_and_site_weights_round_trip(tmp_path):
    # The options of match that shape the candidates travel in the measurement file too.
    m = Measurement(mount=(1, 1, 0), cells=("2x1", "c(2x2)"), depth=4.0, site_weights={"Ti5": 1.0, "Ti6c": 0.2})
    assert m.site_weights == {"Ti5c": 1.0, "Ti6c": 0.2}  # one spelling of a site
    path = tmp_path / "m.toml"
    write_measurement(path, m)
    back = read_measurement(path)
    assert back == m
    with pytest.raises(MeasurementError, match="depth"):
        Measurement(depth=-1.0)
    bad = tmp_path / "bad.toml"
    bad.write_text("cells = 2\n", encoding="utf-8")
    with pytest.raises(MeasurementError, match="cells"):
        read_measurement(bad)
