"""Text formatting shared by every report and listing: one function per kind of value."""

from __future__ import annotations

import datetime as dt
from typing import Any

import numpy as np

#: Units a duration is written in, largest first: (symbol, seconds per unit).
_DURATION_UNITS = (("d", 86400.0), ("h", 3600.0), ("min", 60.0))


def format_duration(seconds: float, *, approximate: bool = False) -> str:
    """A duration as text in the largest unit that holds it a whole number of times.

    ``7 d``, ``36 h``, ``90 min``, ``45 s``; a duration that is no whole number
    of minutes is written in seconds (``5430 s``), or, with ``approximate``,
    in hours to three significant digits once it is an hour or longer
    (``1.51 h``: the short form of a table column).

    Parameters
    ----------
    seconds : float
        The duration [s].  Zero and negative durations are written in
        seconds (``0 s``, ``-3600 s``).
    approximate : bool, optional
        Round a duration of an hour or more that is no whole number of
        minutes to three significant digits in hours, instead of writing
        every second of it.

    Returns
    -------
    str
        The number (``:g`` format) and a unit symbol, separated by a space.

    Examples
    --------
    >>> format_duration(86400.0), format_duration(5400.0), format_duration(10.0)
    ('1 d', '90 min', '10 s')
    >>> format_duration(5430.0), format_duration(5430.0, approximate=True)
    ('5430 s', '1.51 h')
    """
    for unit, size in _DURATION_UNITS:
        if seconds >= size and abs(seconds / size - round(seconds / size)) < 1e-9:
            return f"{seconds / size:g} {unit}"
    if approximate and seconds >= 3600.0:
        return f"{seconds / 3600.0:.3g} h"
    return f"{seconds:g} s"


def format_utc(value: Any) -> str:
    """A time stamp as UTC ISO 8601 to the second: ``2026-07-20T00:00:00Z``.

    Parameters
    ----------
    value : numpy.datetime64 or datetime.datetime
        A time in UTC (a naive datetime is taken as UTC; an aware one is
        written with its own clock time, as the netCDF reader gives UTC).

    Returns
    -------
    str

    Examples
    --------
    >>> format_utc(np.datetime64("2026-07-20T06:30:15.25"))
    '2026-07-20T06:30:15Z'
    """
    if isinstance(value, dt.datetime):
        return value.strftime("%Y-%m-%dT%H:%M:%SZ")
    return f"{np.datetime_as_string(np.datetime64(value, 's'), unit='s')}Z"


#: CF/UDUNITS unit strings as the text tables write them (plain ASCII).
_DISPLAY_UNITS = {"W m-2": "W/m2", "W m-1": "W/m", "W": "W", "degC": "degC", "K": "K"}


def display_units(units: str) -> str:
    """A unit for a plain-text table: ``W m-2`` -> ``W/m2``; others unchanged.

    Figures use :func:`layers.plots.pretty_units` instead (superscripts, degree sign).

    Examples
    --------
    >>> display_units("W m-1"), display_units("h")
    ('W/m', 'h')
    """
    return _DISPLAY_UNITS.get(units, units)
