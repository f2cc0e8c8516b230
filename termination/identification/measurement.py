"""The measurement file: what was measured on a cleaved surface, with uncertainties.

A measurement collects the quantities that ``termination match`` compares
with its predictions: the face the crystal was mounted on, the inclination of
the imaged terrace plane, the corrugation periodicities and the angle between
rows, the step heights, and which species are expected to show up.
``termination image`` writes one from a height map.

File format (TOML, lengths in Å, angles in degrees, every key optional)::

    # termination measurement file
    mount = [0, 0, 1]                            # face the crystal was mounted on
    max_index = 3
    tilt = { value = 54.0, sigma = 2.0 }           # terrace plane vs mount face, deg
    row_angle = { value = 90.0, sigma = 4.0 }      # deg
    spacings = [ { value = 4.19, sigma = 0.15 } ]  # corrugation periodicities, Å
    steps = [ { value = 2.97, sigma = 0.12 } ]     # step heights, Å
    cells = ["2x1"]                                # cells of your own to try (Wood or matrix)
    [visibility]
    visible = ["Sn"]
    weights = { Na = 0.2 }
    site_weights = { Ti5c = 1.0, Ti6c = 0.2 }      # by surface coordination
    decay_length = 1.0                             # Å
    depth = 4.0                                    # atoms down to this depth image, Å

A measured value is written as a table ``{ value = 54.0, sigma = 2.0 }``;
``sigma`` may be left out, and then the consumer applies its documented
default. A bare number (``tilt = 54.0``) or a string in the command-line
syntax (``tilt = "54+-2"``) is read too.

The step list of ``termination match --steps FILE`` is a plain text file with
one height in Å per line, an optional second column with its sigma, ``#``
comments and blank lines ignored (:func:`read_steps`, :func:`write_steps`).
"""

from __future__ import annotations

import math
import os
import re
import tomllib
from collections.abc import Iterable
from dataclasses import dataclass, field, fields, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

from termination.defaults import (
    MAX_FACE_INDEX,
    MAX_INDEX_LIMIT,
    MAX_LENGTH_ANGSTROM,
    MAX_MEASURED_VALUES,
    MAX_MEASUREMENT_BYTES,
    MAX_SIGMA,
)
from termination.errors import MeasurementError, TerminationError
from termination.inputs import read_input_text
from termination.outputs import write_text
from termination.quantities import NUMBER_PATTERN
from termination.surface.corrugation import parse_site_weights
from termination.units import ANGSTROM, DEG

if TYPE_CHECKING:
    from termination.imaging.analysis import HeightMapAnalysis

__all__ = [
    "Measurement",
    "Value",
    "format_measurement",
    "format_steps",
    "measurement_from_image",
    "merge",
    "parse_value",
    "read_measurement",
    "read_steps",
    "write_measurement",
    "write_steps",
]

_VALUE_RE = re.compile(rf"^\s*(?P<value>{NUMBER_PATTERN})\s*(?:(?:\+-|\+/-|±)\s*(?P<sigma>{NUMBER_PATTERN}))?\s*$")
_SYMBOL_RE = re.compile(r"^[A-Z][a-z]{0,2}$")
_BARE_KEY_RE = re.compile(r"^[A-Za-z0-9_-]+$")


_TOP_KEYS = {"mount", "max_index", "tilt", "row_angle", "spacings", "steps", "cells", "visibility"}
_VISIBILITY_KEYS = {"visible", "weights", "decay_length", "depth", "site_weights"}


def _check_real(number: object, what: str) -> float:
    """Return ``number`` as a finite float or raise MeasurementError naming ``what``."""
    if isinstance(number, bool) or not isinstance(number, (int, float)):
        raise MeasurementError(f"{what} must be a number, got {number!r}")
    number = float(number)
    if not math.isfinite(number):
        raise MeasurementError(f"{what} must be finite, got {number!r}")
    return number


@dataclass(frozen=True)
class Value:
    """A measured number with an optional standard uncertainty.

    Parameters
    ----------
    value : float
        The measured value (Å or degrees, depending on the quantity).
    sigma : float or None
        One standard uncertainty in the same unit, non-negative. None means
        "not stated": the consumer applies its own documented default.

    Examples
    --------
    >>> Value(54.0, 2.0)
    Value(value=54.0, sigma=2.0)
    """

    value: float
    sigma: float | None = None

    def __post_init__(self) -> None:
        object.__setattr__(self, "value", _check_real(self.value, "value"))
        if self.sigma is not None:
            sigma = _check_real(self.sigma, "sigma")
            if sigma < 0:
                raise MeasurementError(f"sigma must be non-negative, got {sigma!r}")
            object.__setattr__(self, "sigma", sigma)

    def __str__(self) -> str:
        if self.sigma is None:
            return f"{self.value:g}"
        return f"{self.value:g}±{self.sigma:g}"


@dataclass(frozen=True)
class Measurement:
    """Everything measured on one imaged surface; every field is optional.

    Parameters
    ----------
    mount : tuple of 3 or 4 int or None
        Miller indices of the face the crystal was mounted on; four are a
        Miller-Bravais index (h k i l) of a lattice with hexagonal axes.
    max_index : int or None
        Largest Miller index of the candidate faces to consider.
    tilt : Value or None
        Inclination of the imaged terrace plane to the mount face, degrees,
        in [0, 90].
    row_angle : Value or None
        Angle between the two corrugation row directions, degrees, in (0, 180).
    spacings : tuple of Value
        Corrugation periodicities, Å, positive. From a height map these are
        the two shortest real-space lattice vectors of the visible lattice.
    steps : tuple of Value
        Step heights, Å, positive.
    visible : tuple of str
        Element symbols expected to show up in the corrugation.
    weights : dict of str to float
        Visibility weights per element symbol, non-negative.
    decay_length : float or None
        Decay length of the visibility with depth, Å, positive.
    depth : float or None
        Atoms down to this depth below the top layer image, Å (default: the top unit).
    site_weights : dict of str to float
        Visibility weights per site, by element and surface coordination ('Ti5c').
    cells : tuple of str
        Cells of your own to try as candidates: Wood notation or a matrix ('2x1', 'c(2x2)', '2 0 0 1').
    """

    mount: tuple[int, ...] | None = None
    max_index: int | None = None
    tilt: Value | None = field(default=None, metadata=DEG)
    row_angle: Value | None = field(default=None, metadata=DEG)
    spacings: tuple[Value, ...] = field(default=(), metadata=ANGSTROM)
    steps: tuple[Value, ...] = field(default=(), metadata=ANGSTROM)
    visible: tuple[str, ...] = ()
    weights: dict[str, float] = field(default_factory=dict)
    decay_length: float | None = field(default=None, metadata=ANGSTROM)
    depth: float | None = field(default=None, metadata=ANGSTROM)
    site_weights: dict[str, float] = field(default_factory=dict)
    cells: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        _check_measurement(self)


def _check_mount(mount: Any, what: str = "mount") -> tuple[int, ...]:
    wanted = "three integers (h, k, l) or four (h, k, i, l)"
    if isinstance(mount, (str, bytes)) or not hasattr(mount, "__len__") or len(mount) not in (3, 4):
        raise MeasurementError(f"{what} must be {wanted}, got {mount!r}")
    out = []
    for m in mount:
        if isinstance(m, bool) or not isinstance(m, int):
            if isinstance(m, float) and m.is_integer():
                m = int(m)
            else:
                raise MeasurementError(f"{what} must be {wanted}, got {list(mount)!r}")
        out.append(int(m))
    if len(out) == 4 and out[2] != -(out[0] + out[1]):
        raise MeasurementError(
            f"{what} {out}: in a Miller-Bravais index (h, k, i, l) i must be -(h + k) = {-(out[0] + out[1])}"
        )
    if out in ([0, 0, 0], [0, 0, 0, 0]):
        raise MeasurementError(f"{what} (0 0 0) is not a face; give three integers not all zero")
    if any(abs(v) > MAX_FACE_INDEX for v in out):
        raise MeasurementError(
            f"{what} {out}: Miller indices must lie within ±{MAX_FACE_INDEX} (MAX_FACE_INDEX), got {max(out, key=abs)}"
        )
    return tuple(out)


def _check_value(
    v: object,
    what: str,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
) -> Value:
    if not isinstance(v, Value):
        raise MeasurementError(f"{what} must be a Value, got {v!r}")
    x = v.value
    bad_low = low is not None and (x <= low if low_open else x < low)
    bad_high = high is not None and (x >= high if high_open else x > high)
    if bad_low or bad_high:
        lb = "(" if low_open else "["
        hb = ")" if high_open else "]"
        raise MeasurementError(f"{what} must lie in {lb}{low:g}, {high:g}{hb}, got {x:g}")
    return v


def _check_measurement(m: Measurement) -> None:
    """Validate and normalise the fields of a Measurement in place (one check)."""
    set_ = object.__setattr__
    if m.mount is not None:
        set_(m, "mount", _check_mount(m.mount))
    if m.max_index is not None:
        if isinstance(m.max_index, bool) or not isinstance(m.max_index, int) or not 1 <= m.max_index <= MAX_INDEX_LIMIT:
            raise MeasurementError(f"max_index must be an integer from 1 to {MAX_INDEX_LIMIT}, got {m.max_index!r}")
    if m.tilt is not None:
        _check_value(m.tilt, "tilt (deg)", 0.0, 90.0)
    if m.row_angle is not None:
        _check_value(m.row_angle, "row_angle (deg)", 0.0, 180.0, True, True)
    for name in ("spacings", "steps"):
        values = tuple(getattr(m, name))
        unit = "spacing" if name == "spacings" else "step height"
        if len(values) > MAX_MEASURED_VALUES:
            raise MeasurementError(f"at most {MAX_MEASURED_VALUES} {name} can be matched, got {len(values)}")
        for v in values:
            _check_value(v, f"{unit} (Å)", 0.0, MAX_LENGTH_ANGSTROM, True, False)
        set_(m, name, values)
    for name in ("tilt", "row_angle", "spacings", "steps"):
        value = getattr(m, name)
        for v in value if isinstance(value, tuple) else (value,):
            if v is not None and v.sigma is not None and v.sigma > MAX_SIGMA:
                raise MeasurementError(f"sigma of {name} must be at most {MAX_SIGMA:g}, got {v.sigma:g}")
    visible = tuple(m.visible)
    for s in visible:
        if not isinstance(s, str) or not _SYMBOL_RE.match(s):
            raise MeasurementError(f"visible species must be element symbols like 'Sn', got {s!r}")
    set_(m, "visible", visible)
    if not isinstance(m.weights, dict):
        raise MeasurementError(f"weights must map element symbols to numbers, got {m.weights!r}")
    weights = {}
    for s, w in m.weights.items():
        if not isinstance(s, str) or not _SYMBOL_RE.match(s):
            raise MeasurementError(f"weights keys must be element symbols like 'Na', got {s!r}")
        w = _check_real(w, f"weight of {s}")
        if w < 0:
            raise MeasurementError(f"weight of {s} must be non-negative, got {w:g}")
        weights[s] = w
    set_(m, "weights", weights)
    if m.decay_length is not None:
        d = _check_real(m.decay_length, "decay_length (Å)")
        if d <= 0:
            raise MeasurementError(f"decay_length must be positive, got {d:g} Å")
        set_(m, "decay_length", d)
    if m.depth is not None:
        d = _check_real(m.depth, "depth (Å)")
        if not 0 <= d <= MAX_LENGTH_ANGSTROM:
            raise MeasurementError(f"depth must lie in [0, {MAX_LENGTH_ANGSTROM:g}] Å, got {d:g}")
        set_(m, "depth", d)
    if not isinstance(m.site_weights, dict):
        raise MeasurementError(f"site_weights must map sites such as 'Ti5c' to numbers, got {m.site_weights!r}")

    try:
        sites = parse_site_weights(
            [f"{k}={_check_real(w, f'site weight of {k}')!r}" for k, w in m.site_weights.items()], "site_weights"
        )
    except TerminationError as exc:
        raise MeasurementError(str(exc)) from None
    if any(w < 0 for w in sites.values()):
        raise MeasurementError(f"site weights must be non-negative, got {m.site_weights!r}")
    set_(m, "site_weights", sites)
    cells = tuple(m.cells)
    for c in cells:
        if not isinstance(c, str) or not c.strip():
            raise MeasurementError(f"cells must be written as text such as '2x1' or '2 0 0 1', got {c!r}")
    set_(m, "cells", cells)


def parse_value(text: str) -> Value:
    """Parse a measured value written as ``54``, ``54+-2``, ``54±2`` or ``54 +/- 2``.

    Parameters
    ----------
    text : str
        The value, optionally followed by ``+-``, ``+/-`` or ``±`` and a
        non-negative standard uncertainty.

    Returns
    -------
    Value
        ``sigma`` is None when no uncertainty was written.

    Raises
    ------
    MeasurementError
        For text that is not a number, NaN or infinite values, or a negative sigma.

    Examples
    --------
    >>> parse_value("54+-2")
    Value(value=54.0, sigma=2.0)
    >>> parse_value("2.97 ± 0.12")
    Value(value=2.97, sigma=0.12)
    >>> parse_value("4.19")
    Value(value=4.19, sigma=None)
    """
    if not isinstance(text, str):
        raise MeasurementError(f"a measured value must be text like '54+-2', got {text!r}")
    match = _VALUE_RE.match(text)
    if match is None:
        raise MeasurementError(f"cannot read {text!r} as a measured value; write e.g. '54', '54+-2' or '54±2'")
    value = float(match["value"])
    sigma = match["sigma"]
    if sigma is not None:
        sigma = float(sigma)
        if sigma < 0 or match["sigma"].startswith("-"):
            raise MeasurementError(f"sigma must be non-negative in {text!r}")
    if not math.isfinite(value) or (sigma is not None and not math.isfinite(sigma)):
        raise MeasurementError(f"{text!r} is not a finite value")
    return Value(value, sigma)


# --------------------------------------------------------------------------- reading


def _value_from_toml(obj: object, what: str) -> Value:
    if isinstance(obj, str):
        try:
            return parse_value(obj)
        except MeasurementError as exc:
            raise MeasurementError(f"{what}: {exc}") from None
    if isinstance(obj, dict):
        unknown = set(obj) - {"value", "sigma"}
        if unknown:
            raise MeasurementError(f"{what}: unknown key {sorted(unknown)[0]!r}; use 'value' and 'sigma'")
        if "value" not in obj:
            raise MeasurementError(f"{what}: missing 'value'")
        try:
            return Value(obj["value"], obj.get("sigma"))
        except MeasurementError as exc:
            raise MeasurementError(f"{what}: {exc}") from None
    if isinstance(obj, (int, float)) and not isinstance(obj, bool):
        try:
            return Value(obj)
        except MeasurementError as exc:
            raise MeasurementError(f"{what}: {exc}") from None
    raise MeasurementError(f"{what} must be {{ value = ..., sigma = ... }}, got {obj!r}")


def _values_from_toml(obj: object, what: str) -> tuple[Value, ...]:
    if not isinstance(obj, list):
        raise MeasurementError(f"{what} must be a list of {{ value = ..., sigma = ... }}, got {obj!r}")
    return tuple(_value_from_toml(v, f"{what}[{i}]") for i, v in enumerate(obj))


def _measurement_from_dict(data: dict[str, Any], source: str) -> Measurement:
    unknown = set(data) - _TOP_KEYS
    if unknown:
        raise MeasurementError(
            f"{source}: unknown key {sorted(unknown)[0]!r}; known keys are {', '.join(sorted(_TOP_KEYS))}"
        )
    # Raw TOML values: Measurement checks each one and names the bad key.
    kw: dict[str, Any] = {}
    try:
        if "mount" in data:
            kw["mount"] = _check_mount(data["mount"])
        if "max_index" in data:
            kw["max_index"] = data["max_index"]
        for key in ("tilt", "row_angle"):
            if key in data:
                kw[key] = _value_from_toml(data[key], key)
        for key in ("spacings", "steps"):
            if key in data:
                kw[key] = _values_from_toml(data[key], key)
        vis = data.get("visibility", {})
        if not isinstance(vis, dict):
            raise MeasurementError(f"[visibility] must be a table, got {vis!r}")
        unknown = set(vis) - _VISIBILITY_KEYS
        if unknown:
            raise MeasurementError(
                f"unknown key {sorted(unknown)[0]!r} in [visibility]; known keys are "
                f"{', '.join(sorted(_VISIBILITY_KEYS))}"
            )
        if "visible" in vis:
            if not isinstance(vis["visible"], list):
                raise MeasurementError(f"visibility.visible must be a list of symbols, got {vis['visible']!r}")
            kw["visible"] = tuple(vis["visible"])
        if "weights" in vis:
            kw["weights"] = vis["weights"]
        if "decay_length" in vis:
            kw["decay_length"] = vis["decay_length"]
        if "depth" in vis:
            kw["depth"] = vis["depth"]
        if "site_weights" in vis:
            kw["site_weights"] = vis["site_weights"]
        if "cells" in data:
            if not isinstance(data["cells"], list):
                raise MeasurementError(f"cells must be a list of cells such as ['2x1'], got {data['cells']!r}")
            kw["cells"] = tuple(data["cells"])
        return Measurement(**kw)
    except MeasurementError as exc:
        raise MeasurementError(f"{source}: {exc}") from None


def read_measurement(path: str | os.PathLike[str]) -> Measurement:
    """Read a measurement file (TOML, Å and degrees).

    Parameters
    ----------
    path : str or path-like
        The file; its format is described in the module docstring.

    Returns
    -------
    Measurement

    Raises
    ------
    MeasurementError
        If the file is missing or is not valid TOML, has an unknown key, a
        value of the wrong type, NaN, a negative sigma or a (0 0 0) mount.
    """
    path = Path(path)
    text = read_input_text(path, what="measurement file", error=MeasurementError, max_bytes=MAX_MEASUREMENT_BYTES)
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise MeasurementError(f"{path}: malformed TOML: {exc}") from None
    except RecursionError:
        raise MeasurementError(f"{path}: malformed TOML: nested too deeply") from None
    return _measurement_from_dict(data, str(path))


# --------------------------------------------------------------------------- writing


def _toml_float(x: float) -> str:
    # repr gives the shortest text that reads back to the same float.
    text = repr(float(x))
    return text if any(c in text for c in ".en") else text + ".0"


def _toml_value(v: Value) -> str:
    if v.sigma is None:
        return f"{{ value = {_toml_float(v.value)} }}"
    return f"{{ value = {_toml_float(v.value)}, sigma = {_toml_float(v.sigma)} }}"


def _toml_string(s: str) -> str:
    out = ['"']
    for ch in s:
        if ch in '"\\':
            out.append("\\" + ch)
        elif ord(ch) < 0x20 or ord(ch) == 0x7F:
            out.append(f"\\u{ord(ch):04x}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_key(k: str) -> str:
    return k if _BARE_KEY_RE.match(k) else _toml_string(k)


def format_measurement(measurement: Measurement, *, comment: str | None = None) -> str:
    """The TOML text of a measurement, as written by :func:`write_measurement`.

    Parameters
    ----------
    measurement : Measurement
    comment : str, optional
        Extra lines written as ``#`` comments under the header line.

    Returns
    -------
    str

    Examples
    --------
    >>> print(format_measurement(Measurement(mount=(0, 0, 1), steps=(Value(2.97, 0.12),))), end="")
    # termination measurement file
    mount = [0, 0, 1]
    steps = [ { value = 2.97, sigma = 0.12 } ]  # Å
    """
    if not isinstance(measurement, Measurement):
        raise MeasurementError(f"expected a Measurement, got {type(measurement).__name__}")
    m = measurement
    lines = ["# termination measurement file"]
    if comment:
        lines += [("# " + line).rstrip() for line in str(comment).splitlines()]
    if m.mount is not None:
        lines.append(f"mount = [{', '.join(str(v) for v in m.mount)}]")
    if m.max_index is not None:
        lines.append(f"max_index = {m.max_index}")
    if m.tilt is not None:
        lines.append(f"tilt = {_toml_value(m.tilt)}  # deg")
    if m.row_angle is not None:
        lines.append(f"row_angle = {_toml_value(m.row_angle)}  # deg")
    for name in ("spacings", "steps"):
        values = getattr(m, name)
        if values:
            items = ", ".join(_toml_value(v) for v in values)
            lines.append(f"{name} = [ {items} ]  # Å")
    if m.cells:
        lines.append("cells = [" + ", ".join(_toml_string(c) for c in m.cells) + "]")
    if m.visible or m.weights or m.decay_length is not None or m.depth is not None or m.site_weights:
        lines.append("")
        lines.append("[visibility]")
        if m.visible:
            lines.append("visible = [" + ", ".join(_toml_string(s) for s in m.visible) + "]")
        if m.weights:
            items = ", ".join(f"{_toml_key(k)} = {_toml_float(w)}" for k, w in m.weights.items())
            lines.append(f"weights = {{ {items} }}")
        if m.site_weights:
            items = ", ".join(f"{_toml_key(k)} = {_toml_float(w)}" for k, w in m.site_weights.items())
            lines.append(f"site_weights = {{ {items} }}")
        if m.decay_length is not None:
            lines.append(f"decay_length = {_toml_float(m.decay_length)}  # Å")
        if m.depth is not None:
            lines.append(f"depth = {_toml_float(m.depth)}  # Å")
    return "\n".join(lines) + "\n"


def _write_new(path: str | os.PathLike[str], text: str, force: bool, error: type[TerminationError]) -> Path:
    return write_text(path, text, force=force, error=error)


def write_measurement(
    path: str | os.PathLike[str], measurement: Measurement, *, force: bool = False, comment: str | None = None
) -> Path:
    """Write a measurement file that :func:`read_measurement` reads back unchanged.

    Parameters
    ----------
    path : str or path-like
    measurement : Measurement
    force : bool, default False
        Overwrite an existing file. Without it an existing file is left alone.
    comment : str, optional
        Extra ``#`` comment lines (e.g. the image the values came from).

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    MeasurementError
        If the file exists and ``force`` is False, or it cannot be written.

    Notes
    -----
    The TOML is written by hand (no extra dependency). Floats are written with
    ``repr``, the shortest text that reads back to the same binary value, so a
    round trip is exact.
    """
    text = format_measurement(measurement, comment=comment)
    return _write_new(path, text, force, MeasurementError)


# --------------------------------------------------------------------------- step lists


def read_steps(path: str | os.PathLike[str]) -> tuple[Value, ...]:
    """Read a step-height list: one height in Å per line, optional sigma column.

    Parameters
    ----------
    path : str or path-like
        Text file. Each non-blank line holds a height and optionally its
        sigma, separated by whitespace or a comma; ``2.97+-0.12`` and
        ``2.97 ± 0.12`` are read too. ``#`` starts a comment.

    Returns
    -------
    tuple of Value

    Raises
    ------
    MeasurementError
        Naming the file and line of a value that is not a positive finite
        number, a negative sigma or a line with more than two columns.
    """
    path = Path(path)
    text = read_input_text(path, what="step list", error=MeasurementError, max_bytes=MAX_MEASUREMENT_BYTES)
    lines = text.splitlines()
    values = sum(1 for line in lines if line.split("#", 1)[0].strip())
    if values > MAX_MEASURED_VALUES:
        raise MeasurementError(f"{path}: {values} step heights; at most {MAX_MEASURED_VALUES} are matched")
    steps = []
    for lineno, line in enumerate(lines, 1):
        body = line.split("#", 1)[0].strip()
        if not body:
            continue
        where = f"{path}:{lineno}"
        try:
            if any(tok in body for tok in ("+-", "±", "+/-")):
                v = parse_value(body)
            else:
                cols = [c for c in re.split(r"[\s,;]+", body) if c]
                if len(cols) > 2:
                    raise MeasurementError(f"expected a height and an optional sigma, got {body!r}")
                v = parse_value(cols[0])
                if len(cols) == 2:
                    s = parse_value(cols[1])
                    if s.sigma is not None:
                        raise MeasurementError(f"cannot read sigma {cols[1]!r}")
                    if s.value < 0:
                        raise MeasurementError(f"sigma must be non-negative, got {cols[1]!r}")
                    v = Value(v.value, s.value)
            if v.value <= 0:
                raise MeasurementError(f"a step height must be positive, got {v.value:g} Å")
        except MeasurementError as exc:
            raise MeasurementError(f"{where}: {exc}") from None
        steps.append(v)
    return tuple(steps)


def format_steps(
    steps: Iterable[Value | tuple[float, ...] | list[float] | float], *, comment: str | None = None
) -> str:
    """The text of a step list as read by :func:`read_steps`.

    Examples
    --------
    >>> print(format_steps([Value(2.97, 0.01), Value(5.9)]), end="")
    # step height (Å)  sigma (Å)
    2.97 0.01
    5.9
    """
    lines = []
    if comment:
        lines += [("# " + line).rstrip() for line in str(comment).splitlines()]
    lines.append("# step height (Å)  sigma (Å)")
    for v in steps:
        if not isinstance(v, Value):
            v = Value(*v) if isinstance(v, (tuple, list)) else Value(v)
        if v.value <= 0:
            raise MeasurementError(f"a step height must be positive, got {v.value:g} Å")
        lines.append(repr(v.value) if v.sigma is None else f"{v.value!r} {v.sigma!r}")
    return "\n".join(lines) + "\n"


def write_steps(
    path: str | os.PathLike[str],
    steps: Iterable[Value | tuple[float, ...] | list[float] | float],
    *,
    force: bool = False,
    comment: str | None = None,
) -> Path:
    """Write a step list for ``termination match --steps FILE``.

    Parameters
    ----------
    path : str or path-like
    steps : sequence of Value or (height, sigma) pairs
        Heights and sigmas in Å.
    force : bool, default False
        Overwrite an existing file.
    comment : str, optional
        Extra ``#`` comment lines at the top.

    Returns
    -------
    pathlib.Path

    Raises
    ------
    MeasurementError
        If the file exists and ``force`` is False, or a height is not positive.
    """
    return _write_new(path, format_steps(steps, comment=comment), force, MeasurementError)


# --------------------------------------------------------------------------- merging


def merge(base: Measurement, override: Measurement) -> Measurement:
    """Combine two measurements; every non-empty field of ``override`` wins.

    Used to let command-line values override a measurement file. A field is
    empty when it is None, an empty tuple or an empty dict.

    Parameters
    ----------
    base, override : Measurement

    Returns
    -------
    Measurement

    Examples
    --------
    >>> m = merge(Measurement(mount=(0, 0, 1), max_index=3), Measurement(max_index=5))
    >>> m.mount, m.max_index
    ((0, 0, 1), 5)
    """
    for name, m in (("base", base), ("override", override)):
        if not isinstance(m, Measurement):
            raise MeasurementError(f"{name} must be a Measurement, got {type(m).__name__}")
    changes = {}
    for f in fields(Measurement):
        v = getattr(override, f.name)
        if v is None or (isinstance(v, (tuple, dict)) and len(v) == 0):
            continue
        changes[f.name] = v
    return replace(base, **changes)


# --------------------------------------------------------------------------- from a height map


def _rounded(value: float, sigma: float | None) -> Value:
    """A Value with the sigma to two significant digits and the value to 1e-4.

    >>> _rounded(1.2497828713, 0.0055775785)
    Value(value=1.2498, sigma=0.0056)
    """
    if sigma is not None and sigma > 0:
        sigma = float(f"{sigma:.2g}")
    return Value(round(float(value), 4), sigma)


def measurement_from_image(
    analysis: HeightMapAnalysis, *, mount: Iterable[int] | None = None, max_index: int | None = None
) -> Measurement:
    """The measurement a height map supports, for ``termination match``.

    Parameters
    ----------
    analysis : termination.imaging.analysis.HeightMapAnalysis
    mount : (3,) sequence of int, optional
        Face the crystal was mounted on.
    max_index : int, optional

    Returns
    -------
    Measurement
        ``tilt`` is the terrace tilt (relative to the scanner plane, taken
        as the mount face) with its measured sigma; ``spacings`` are the
        lattice a and b and ``row_angle`` its gamma in the obtuse convention
        (90-120°; ``match`` compares gamma or 180° - gamma, whichever is
        closer), when a lattice was found; ``steps`` are the step heights.
        Anything not found is left empty, and so is ``row_angle`` when a
        drift correction fixed gamma from the stated lattice type (then it
        was assumed, not measured). Values are rounded to 1e-4 (Å or
        degrees) and sigmas to two significant digits.
    """
    from termination.imaging.analysis import HeightMapAnalysis

    if not isinstance(analysis, HeightMapAnalysis):
        raise MeasurementError(f"expected a HeightMapAnalysis, got {type(analysis).__name__}")
    t = analysis.tilt
    tilt = None
    if t.terrace is not None:
        sigma = t.terrace_sigma if t.terrace_sigma is not None and math.isfinite(t.terrace_sigma) else None
        tilt = _rounded(min(max(t.terrace, 0.0), 90.0), sigma)
    lat = analysis.lattice
    spacings: tuple[Value, ...] = ()
    row_angle: Value | None = None
    if lat is not None:
        spacings = (_rounded(lat.a, lat.sigma_a), _rounded(lat.b, lat.sigma_b))
        if analysis.drift is None:
            row_angle = _rounded(lat.gamma, lat.sigma_gamma)
    steps = tuple(_rounded(s.height, s.sigma) for s in analysis.steps)
    return Measurement(
        mount=tuple(mount) if mount is not None else None,
        max_index=max_index,
        tilt=tilt,
        row_angle=row_angle,
        spacings=spacings,
        steps=steps,
    )
