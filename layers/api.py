"""The public Python API: the functions ``import layers`` offers.

``layers.load_case``, ``layers.parse_case``, ``layers.simulate``,
``layers.size``, ``layers.periodic`` and ``layers.open_run`` (documented with
examples in ``docs/api.md``).  Each is a thin, documented entry to the room
that does the work (:mod:`layers.case`, :mod:`layers.simulation`,
:mod:`layers.sizing`, :mod:`layers.report` with :mod:`layers.iso13786`,
:mod:`layers.comparison`), and imports that room only when it is called, so
that ``import layers`` stays cheap (no xarray, scipy or pint until needed).

A ``[-]`` after a parameter marks a value that has no physical unit (a file
name, a case, a callable).
"""

from __future__ import annotations

import datetime as dt
import math
import numbers
import os
import re
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import TYPE_CHECKING, Any

from layers.errors import CaseError

if TYPE_CHECKING:
    import xarray as xr

    from layers.case import Case

__all__ = ["condensation", "load_case", "open_run", "parse_case", "periodic", "simulate", "size", "sweep"]


def load_case(path: str | os.PathLike) -> Case:
    """Read and validate a case file.

    Parameters
    ----------
    path : str or os.PathLike
        The case file (TOML) [-].  Series files it names are found relative
        to its folder.

    Returns
    -------
    Case
        The validated case: every quantity in SI, temperatures in [degC],
        times in UTC.

    Raises
    ------
    CaseError
        For any input the user must correct: the file, the dotted key and
        the reason.
    """
    from layers.case import load_case as _load_case

    return _load_case(path)


def parse_case(
    source: Mapping[str, Any] | str, *, file: str = "<case>", base_dir: str | os.PathLike | None = None
) -> Case:
    """Validate a case given as TOML text or as an already parsed dict.

    Parameters
    ----------
    source : dict or str
        The case: TOML text, or a mapping as :func:`tomllib.loads` returns
        it [-].  Quantities are strings with units (``"100 mm"``) or bare
        numbers in SI (temperatures in [degC]), as in a case file.
    file : str, optional
        The name error messages give the case [-].
    base_dir : str or os.PathLike, optional
        The folder series files are found in [-] (default: the current
        folder).

    Returns
    -------
    Case
        The validated case, quantities in SI, temperatures in [degC].  Its
        case text (stored with every result) is ``source`` itself, or for a
        mapping its TOML form, so results keep their provenance either way.

    Raises
    ------
    CaseError
        For any input the user must correct.
    """
    from layers.case import parse_case as _parse_case
    from layers.case import read_toml

    if isinstance(source, str):
        text = source
    elif isinstance(source, Mapping):
        text = toml_text(source, file=file)
    else:
        raise CaseError(file, "(case)", f"give TOML text or a dict, not {type(source).__name__}")
    data = read_toml(text, file)  # a mapping is parsed back from its text: the text stored is the case run
    return _parse_case(data, file=file, text=text, base_dir=Path(base_dir) if base_dir is not None else None)


def simulate(case: Case, progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Run a case: the transient temperatures and heat flows through the construction.

    Parameters
    ----------
    case : Case
        From :func:`load_case` or :func:`parse_case` [-].
    progress : callable, optional
        ``progress(steps_done, steps_total)`` [-], called now and then
        during the march (both counts in time steps).

    Returns
    -------
    xarray.Dataset
        The run as the product contract lists it: ``temperature`` on
        (time, x) [degC], surface temperatures [degC], heat flows [W m-2]
        (planar; [W m-1] per metre of pipe, [W] for a sphere),
        ``stored_energy`` [J per reference unit], ``interface_temperature``
        [degC]; ``x`` [m] from the inside surface; each variable carries its
        ``units``.  With ``[uncertainty]``, also ``<variable>_quantile`` on
        (quantile, time): the 0.05 / 0.5 / 0.95 quantiles of the surface
        temperatures and heat flows over the samples.  Nothing is written
        to disk.
    """
    return run_case(case, progress)


def run_case(case: Case, progress: Callable[[int, int], None] | None = None, field_sink: Any = None, client: Any = None) -> xr.Dataset:
    """:func:`simulate`, with the cell fields optionally streamed to a
    :class:`layers.results.FieldSink` and the uncertainty samples optionally
    run on a dask ``client`` (what ``layers run`` does; internal)."""
    from layers.simulation import simulate as _simulate

    if case.uncertainty is not None:  # a tolerance that makes a sample impossible: refused before any run
        from layers.uncertainty import check_samples

        check_samples(case)
    ds = _simulate(case, progress=progress, field_sink=field_sink)
    if case.uncertainty is not None:
        from layers.uncertainty import run_quantiles

        ds = run_quantiles(case, ds, client=client)
    return ds


def size(case: Case, progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Size insulation: every criterion of the case's ``[sizing]`` for every candidate thickness.

    Parameters
    ----------
    case : Case
        A case with a ``[sizing]`` table [-].
    progress : callable, optional
        ``progress(done, total)`` [-], for the runs a freeze criterion needs.

    Returns
    -------
    xarray.Dataset
        Dimension ``thickness`` [m]; ``surface_temperature_outside`` [degC],
        ``heat_flow`` [W m-2] (planar; [W m-1] pipe, [W] sphere), a boolean
        ``passes_<criterion>`` [-] per criterion, ``freeze_time`` and
        ``time_to_freezing`` [h] where asked; the attribute
        ``recommended_thickness`` [m] (NaN when no candidate passes).

    Raises
    ------
    CaseError
        If the case has no ``[sizing]`` table.
    """
    from layers.sizing import size as _size

    return _size(case, progress=progress)


def sweep(case: Case, client: Any = None, progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Run every point of the case's ``[[sweep]]`` grid as one result.

    Parameters
    ----------
    case : Case
        A case with ``[[sweep]]`` tables (name, key, values or range) [-].
    client : dask.distributed.Client, optional
        Run the work on this cluster [-]; the numbers equal the serial run's
        exactly.  None (the default) runs in this process.
    progress : callable, optional
        ``progress(points_done, points_total)`` [-].

    Returns
    -------
    xarray.Dataset
        The run variables with the sweep dimensions in front (a variable
        the points share is kept once), ``temperature`` only with
        ``keep_temperature = true`` under ``[time]``; per point
        ``heat_in_inside_total`` [J per reference unit],
        ``heat_flow_inside_mean`` [W m-2, W m-1 or W] and
        ``energy_balance_error`` [-]; each swept value as a coordinate with
        its units; ``product = "sweep"``.

    Raises
    ------
    CaseError
        If the case has no ``[[sweep]]``, or a point's case is not valid
        (the message names the point).
    """
    from layers.sweeps import sweep as _sweep

    return _sweep(case, client=client, progress=progress)


def periodic(case: Case, period: str | float = "24 h") -> xr.Dataset:
    """ISO 13786 dynamic thermal characteristics of the case's (planar) construction.

    What ``layers periodic`` computes and writes with ``-o``.

    Parameters
    ----------
    case : Case
        A planar case [-]; its surface resistances come from its boundaries.
    period : str or float, optional
        The period of the cycle [s]: a string with a unit (``"24 h"``,
        ``"1 d"``) or a number of seconds.

    Returns
    -------
    xarray.Dataset
        ``thermal_transmittance`` U [W m-2 K-1], ``periodic_transmittance``
        |Y12| [W m-2 K-1] with its ``time_shift`` [h], ``decrement_factor``
        [-], ``areal_heat_capacity_inside`` and ``_outside`` [J m-2 K-1],
        and the case's provenance in the attributes.

    Raises
    ------
    CaseError
        For a period that is not a positive duration, or a case that is not
        planar.
    """
    from layers.report import periodic_dataset, periodic_report
    from layers.units import parse_period

    seconds = parse_period(period, file="(argument)", key="period")
    return periodic_dataset(case, periodic_report(case, seconds))


def condensation(case: Case) -> xr.Dataset:
    """ISO 13788 monthly interstitial condensation (Glaser method) of a plane construction.

    What ``layers condensation`` computes and archives.

    Parameters
    ----------
    case : Case
        A planar case with a ``[condensation]`` table (monthly inside and
        outside climate, January first), film or temperature boundaries, and
        a ``vapour_resistance_factor`` for every solid layer (the library's,
        a ``[materials]`` entry's or the layer's own) [-].

    Returns
    -------
    xarray.Dataset
        Dimensions ``month`` (1-12) and ``interface`` (0 = inside surface ...
        n = outside surface, membranes included): ``condensation_rate``
        [kg m-2 s-1] (positive condensing, negative drying),
        ``accumulated_moisture`` [kg m-2] at the end of each month,
        ``vapour_pressure`` and ``saturation_vapour_pressure`` [Pa],
        ``interface_temperature`` [degC]; attributes ``first_month`` (the
        ISO 13788 starting month, 0 when no month condenses), ``verdict``
        (``no condensation``, ``dries out within the year`` or
        ``accumulates``), ``max_accumulated_moisture`` [kg m-2], the surface
        resistances used [m2 K W-1], provenance and the caution.

    Raises
    ------
    CaseError
        No ``[condensation]`` table, a cylinder or sphere (the method is for
        plane elements), a layer without vapour data, a flux, adiabatic or
        contents boundary.
    """
    from layers.iso13788 import assess

    return assess(case)


def open_run(path: str | os.PathLike) -> xr.Dataset:
    """Open an archived run file: loaded into memory, the file closed.

    Parameters
    ----------
    path : str or os.PathLike
        A run's netCDF file, as ``layers run`` writes [-].

    Returns
    -------
    xarray.Dataset
        The run, with the variables and units :func:`simulate` returns
        (temperatures [degC], heat flows [W m-2], ...).

    Raises
    ------
    CaseError
        For a missing file, a file that is not netCDF, or a netCDF file that
        is not a layers run (a sizing or periodic result names itself).
    """
    from layers.comparison import load_run

    return load_run(path)


# --------------------------------------------------------------------------- #
# a parsed case (a mapping) back to TOML text, for the case text results keep

_BARE_KEY = re.compile(r"[A-Za-z0-9_-]+")


def _toml_key(key: Any, file: str, where: str) -> str:
    if not isinstance(key, str):
        raise CaseError(file, where or "(case)", f"keys must be strings, got {key!r}")
    return key if _BARE_KEY.fullmatch(key) else _toml_string(key)


def _toml_string(text: str) -> str:
    import json

    # a JSON string is a TOML basic string, except that TOML also wants DEL escaped
    return json.dumps(text, ensure_ascii=False).replace("\x7f", "\\u007f")


def _toml_value(value: Any, file: str, where: str) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, numbers.Integral):
        return str(int(value))
    if isinstance(value, numbers.Real):
        number = float(value)
        if math.isnan(number):
            return "nan"
        if math.isinf(number):
            return "inf" if number > 0 else "-inf"
        return repr(number)
    if isinstance(value, str):
        return _toml_string(value)
    if isinstance(value, (dt.datetime, dt.date, dt.time)):
        return value.isoformat()
    if isinstance(value, Mapping):
        items = (f"{_toml_key(k, file, where)} = {_toml_value(v, file, f'{where}.{k}')}" for k, v in value.items())
        return "{" + ", ".join(items) + "}"
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(_toml_value(v, file, f"{where}[{i + 1}]") for i, v in enumerate(value)) + "]"
    raise CaseError(file, where or "(case)", f"a {type(value).__name__} cannot be written in a case; use a string, number, boolean, date, list or table")


def _is_table_array(value: Any) -> bool:
    return isinstance(value, (list, tuple)) and bool(value) and all(isinstance(v, Mapping) for v in value)


def _toml_lines(table: Mapping[str, Any], path: tuple[str, ...], where: str, file: str) -> list[str]:
    """Lines of one table: its plain keys, then its sub-tables. ``path`` names the
    table in headers (``layers``), ``where`` in messages (``layers[2]``)."""
    inner = (lambda k: f"{where}.{k}") if where else str
    lines = [
        f"{_toml_key(k, file, where)} = {_toml_value(v, file, inner(k))}"
        for k, v in table.items()
        if not isinstance(v, Mapping) and not _is_table_array(v)
    ]
    for key, value in table.items():
        header = ".".join(_toml_key(k, file, where) for k in (*path, key))
        if isinstance(value, Mapping):
            lines += ["", f"[{header}]", *_toml_lines(value, (*path, key), inner(key), file)]
        elif _is_table_array(value):
            for i, item in enumerate(value):  # a sub-table header after [[a]] belongs to the last element, as wanted
                lines += ["", f"[[{header}]]", *_toml_lines(item, (*path, key), f"{inner(key)}[{i + 1}]", file)]
    return lines


def toml_text(data: Mapping[str, Any], *, file: str = "<case>") -> str:
    """A parsed case (a mapping, as :func:`tomllib.loads` returns) as TOML text.

    Tables become ``[table]`` sections and lists of tables ``[[table]]``
    sections, so the text reads like a case file; ``tomllib.loads`` of the
    text gives the mapping back.

    Parameters
    ----------
    data : mapping
        The case [-]: strings, numbers, booleans, dates and times, lists and
        tables, as TOML holds them.
    file : str, optional
        The name error messages give the case [-].

    Returns
    -------
    str
        TOML text [-].

    Raises
    ------
    CaseError
        For a value TOML cannot hold (``None``, an object), naming its key.
    """
    return "\n".join(_toml_lines(data, (), "", file)).lstrip("\n") + "\n"
