"""Exception types raised by the library.

Only ``cli.py`` catches them; it prints the message as one line on stderr and
exits with code 2.  Messages name the bad value and say what would be valid.
"""

__all__ = [
    "ChargeError",
    "ImageError",
    "MeasurementError",
    "PlaneError",
    "StructureError",
    "TerminationError",
]


class TerminationError(ValueError):
    """Base class of every error the library raises on bad input."""


class StructureError(TerminationError):
    """A bulk structure is malformed, impossible or unreadable."""


class PlaneError(TerminationError):
    """A Miller index or face request is invalid (e.g. (0 0 0))."""


class MeasurementError(TerminationError):
    """A measured value, uncertainty or measurement file is invalid."""


class ChargeError(TerminationError):
    """Formal charges are missing, unknown or not charge-neutral."""


class ImageError(TerminationError):
    """A height map is unreadable, uncalibrated or carries no usable signal."""
