"""Numbers and lengths written as text: the one number pattern and the length units in Å.

Every parser of the package that reads a number from text (measured values,
charges, weights, pixel sizes) uses :data:`NUMBER_PATTERN` and
:func:`parse_number`, so that ``1e-3``, ``.5`` and ``-1/3`` mean the same
everywhere.
"""

from __future__ import annotations

import math
import re
from decimal import Decimal, InvalidOperation

__all__ = ["LENGTH_UNITS_ANGSTROM", "NUMBER_PATTERN", "parse_number", "scaled"]

#: A decimal number with optional sign and exponent (``-1.5e-3``, ``.5``, ``12``).
NUMBER_PATTERN = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"

_NUMBER_RE = re.compile(rf"^\s*(?P<num>{NUMBER_PATTERN})\s*(?:/\s*(?P<den>{NUMBER_PATTERN}))?\s*$")

#: Length units and their size in Å (keys lower case).
LENGTH_UNITS_ANGSTROM: dict[str, str] = {
    "pm": "0.01",
    "a": "1",
    "å": "1",
    "angstrom": "1",
    "ang": "1",
    "nm": "10",
    "um": "1e4",
    "µm": "1e4",
    "μm": "1e4",
    "m": "1e10",
}


def parse_number(text: str, *, fractions: bool = True) -> float:
    """A finite number from text: ``3``, ``-0.5``, ``1e-3`` or, with ``fractions``, ``-1/3``.

    Raises ``ValueError`` with the text quoted; callers turn it into their
    own error type naming the option.

    Examples
    --------
    >>> parse_number("-1/2"), parse_number(" 2.5e1 ")
    (-0.5, 25.0)
    """
    match = _NUMBER_RE.match(str(text))
    if match is None or (match["den"] is not None and not fractions):
        raise ValueError(f"{text!r} is not a number")
    value = float(match["num"])
    if match["den"] is not None:
        den = float(match["den"])
        if den == 0:
            raise ValueError(f"{text!r} divides by zero")
        value /= den
    if not math.isfinite(value):
        raise ValueError(f"{text!r} is not finite")
    return value


def scaled(number_text: str, unit: str) -> float:
    """``number_text`` times the size of ``unit`` in Å, computed in decimal.

    Decimal arithmetic keeps ``0.05 nm`` at exactly 0.5 Å instead of
    0.5000000000000001.

    Examples
    --------
    >>> scaled("0.05", "nm"), scaled("0.564", "nm")
    (0.5, 5.64)
    """
    try:
        return float(Decimal(number_text) * Decimal(LENGTH_UNITS_ANGSTROM[unit.lower()]))
    except (InvalidOperation, KeyError):
        raise ValueError(f"cannot scale {number_text!r} {unit!r}") from None
