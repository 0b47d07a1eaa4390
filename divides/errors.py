"""Exceptions and warnings of `divides`.

Every failure a user can cause raises a subclass of :class:`DividesError`
whose message names the input, the bad value and what would be accepted.
The command line turns these into one line on stderr and exit code 2;
anything else is an internal error (exit code 1).
"""

from __future__ import annotations

__all__ = [
    "DividesError",
    "InputError",
    "DemReadError",
    "CrsError",
    "GridError",
    "BandError",
    "ParameterError",
    "SideError",
    "OutputError",
    "InternalError",
    "DividesWarning",
    "ConditioningWarning",
]


class DividesError(Exception):
    """Root of every error raised on purpose by `divides`."""


class InputError(DividesError, ValueError):
    """An input (file, array, option) is unusable as given."""


class DemReadError(InputError, OSError):
    """A DEM file cannot be opened or decoded."""


class CrsError(InputError):
    """The coordinate reference system is missing or cannot be used."""


class GridError(InputError):
    """The grid geometry is unusable (rotated, sheared, too small, no valid cells)."""


class BandError(InputError):
    """A multi-band raster was given without a usable band choice."""


class ParameterError(InputError):
    """A parameter value is outside what is accepted."""


class SideError(InputError):
    """A side specification is invalid or selects nothing usable."""


class OutputError(DividesError, OSError):
    """An output location cannot be written."""


class InternalError(RuntimeError):
    """A broken invariant inside `divides` (a bug, not a user mistake): exit code 1."""


class DividesWarning(UserWarning):
    """Root of the warnings issued by `divides`."""


class ConditioningWarning(DividesWarning):
    """Conditioning changed the surface a lot (large filled area or volume)."""
