"""Arrays to a labelled Dataset (CF-1.10), and the atomic archive write.

Every variable carries ``units`` and ``long_name``; ``standard_name`` is set
only where the CF standard-name table has the name.  Values are
instantaneous at their time stamps (``cell_methods = "time: point"``).
"""

from __future__ import annotations

import datetime as dt
import math
import os
import tempfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any, NamedTuple

import numpy as np

from layers.about import CAUTION, __version__
from layers.catalogue import headline_attributes
from layers.case import Case
from layers.errors import CaseError
from layers.mesh import Mesh

if TYPE_CHECKING:
    import xarray as xr

ARCHIVE_ENV = "LAYERS_ARCHIVE"
DEFAULT_ARCHIVE = "runs"

#: Per-reference-unit heat-flow units by geometry (CF/UDUNITS spelling).
HEAT_FLOW_UNITS = {"planar": "W m-2", "cylinder": "W m-1", "sphere": "W"}
ENERGY_UNITS = {"planar": "J m-2", "cylinder": "J m-1", "sphere": "J"}


#: The attributes of the cell field ``temperature`` (time, x).
TEMPERATURE_ATTRS = {"units": "degC", "long_name": "temperature at cell centres", "cell_methods": "time: point"}


def _point(values: np.ndarray, units: str, long_name: str, **attrs: Any) -> tuple:
    return ("time", np.asarray(values, dtype=float), {"units": units, "long_name": long_name, "cell_methods": "time: point", **attrs})


def to_dataset(
    case: Case,
    mesh: Mesh,
    *,
    seconds: np.ndarray,
    temperature: np.ndarray | None,
    interface_temperature: np.ndarray,
    surface_temperature_inside: np.ndarray,
    surface_temperature_outside: np.ndarray,
    heat_flow_inside: np.ndarray,
    heat_flow_outside: np.ndarray,
    stored_energy: np.ndarray,
    energy_balance_error: float,
    heat_in_total: float,
    heat_out_total: float,
    extra: dict[str, np.ndarray] | None = None,
    periodic_cycles: int = 0,
) -> xr.Dataset:
    """Assemble the result Dataset of a run.

    Parameters
    ----------
    seconds : (m,) output times from the start [s]
    temperature : (m, n) cell temperatures [degC], or None (``keep_temperature = false``)
    interface_temperature : (m, layers + 1) layer faces, from the march's face fluxes [degC]
    heat_flow_inside, heat_flow_outside : (m,)
        Positive from inside to outside [W per reference unit].
    stored_energy : (m,) [J per reference unit], relative to 0 degC
    energy_balance_error : float
        Relative error of the run's energy balance [-].
    """
    flow_units = HEAT_FLOW_UNITS[case.geometry]
    per = {"planar": "per square metre of wall", "cylinder": "per metre of pipe", "sphere": "whole sphere"}[case.geometry]
    times = case.datetimes(seconds).astype("datetime64[ns]")
    data_vars: dict[str, tuple] = {
        "interface_temperature": (
            ("time", "interface"),
            interface_temperature,
            {
                "units": "degC",
                "long_name": "temperature of each layer face (0 = inside surface), from the solver's face fluxes",
                "cell_methods": "time: point",
            },
        ),
        "surface_temperature_inside": _point(surface_temperature_inside, "degC", "inside surface temperature"),
        "surface_temperature_outside": _point(surface_temperature_outside, "degC", "outside surface temperature"),
        "heat_flow_inside": _point(
            heat_flow_inside, flow_units, f"heat flow through the inside surface, positive outward, {per}"
        ),
        "heat_flow_outside": _point(
            heat_flow_outside, flow_units, f"heat flow through the outside surface, positive outward, {per}"
        ),
        "stored_energy": _point(
            stored_energy, ENERGY_UNITS[case.geometry], f"heat stored in the construction (and any contents, latent heat included) relative to 0 degC and liquid water, {per}"
        ),
    }
    if temperature is not None:
        data_vars["temperature"] = (("time", "x"), temperature, dict(TEMPERATURE_ATTRS))
    names = {
        # In the bore of a pipe or vessel the "air" is the process fluid (steam,
        # oil, water): no CF standard name applies there.
        "air_temperature_inside": (
            ("degC", "inside air temperature", {"standard_name": "air_temperature"})
            if case.geometry == "planar"
            else ("degC", "temperature of the fluid in the bore, beyond its film", {})
        ),
        "air_temperature_outside": ("degC", "outside air temperature", {"standard_name": "air_temperature"}),
        "sol_air_temperature_inside": ("degC", "inside sol-air temperature", {}),
        "sol_air_temperature_outside": ("degC", "outside sol-air temperature", {}),
    }
    for name, values in (extra or {}).items():
        units, long_name, attrs = names.get(name, ("1", name.replace("_", " "), {}))
        if isinstance(values, tuple):
            units, long_name, values = values
            attrs = {}
        data_vars[name] = _point(values, units, long_name, **attrs)
    coords: dict[str, tuple] = {
        "time": ("time", times, {"long_name": "time", "standard_name": "time", "axis": "T"}),
        "x": ("x", mesh.x, {"units": "m", "long_name": "distance of the cell centre from the inside surface", "bounds": "x_bounds"}),
        "layer": ("x", mesh.layer.astype(np.int32), {"long_name": "layer number from the inside (1-based)", "units": "1"}),
        "material": ("x", np.array([m.name for m in mesh.materials], dtype=object), {"long_name": "material name"}),
    }
    if case.geometry != "planar":
        coords["radius"] = ("x", mesh.radius, {"units": "m", "long_name": "radius of the cell centre"})
    import xarray as xr

    ds = xr.Dataset(data_vars=data_vars, coords=coords)
    # CF cell bounds: the faces of each cell, as the solver used them
    ds["x_bounds"] = (("x", "nv"), np.stack([mesh.x_lo, mesh.x_hi], axis=1), {"units": "m", "long_name": "faces of each cell (distance from the inside surface)"})
    ds = ds.assign_coords(
        interface=("interface", np.arange(mesh.interfaces.size, dtype=np.int32), {"long_name": "layer face number (0 = inside surface)", "units": "1"}),
        layer_interface=("interface", mesh.interfaces, {"units": "m", "long_name": "distance of each layer face from the inside surface"}),
    )
    ds.attrs = {
        "Conventions": "CF-1.10",
        "title": case.title,
        "product": "run",
        "label": case.label,
        "institution": "",
        "source": f"layers {__version__} finite-volume heat conduction",
        "history": f"{utc_now()} layers run {Path(case.path).name}",
        "case": case.text,
        "case_file": Path(case.path).name,
        "case_sha256": case.sha256,
        "software_version": __version__,
        "created": utc_now(),
        "geometry": case.geometry,
        "reference_unit": case.reference_unit,
        "scheme": case.time.scheme,
        "time_step": float(case.time.step),
        "time_step_units": "s",
        "output_every": float(case.time.output_every),
        "initial": str(case.time.initial),
        "periodic_cycles": int(periodic_cycles),
        "cells": int(mesh.n),
        "energy_balance_error": float(energy_balance_error),
        "heat_in_inside_total": float(heat_in_total),
        "heat_out_outside_total": float(heat_out_total),
        "heat_total_units": ENERGY_UNITS[case.geometry],
        "caution": CAUTION,
    }
    if case.series is not None:
        ds.attrs["series_file"] = Path(case.series.file).name
        ds.attrs["series_sha256"] = case.series.sha256
        if case.record_paths:
            ds.attrs["series_path"] = str(Path(case.series.file).resolve())
        if case.series.embedded is not None:
            ds.attrs["series_embedded"] = case.series.embedded
        filled = {k: v for k, v in case.series.filled.items() if v}
        if filled:
            ds.attrs["series_filled"] = ", ".join(f"{k}: {v} values" for k, v in filled.items())
        if case.series.gaps:  # every gap filled or bridged, as the warning said it
            ds.attrs["series_gaps"] = "; ".join(gap.describe() for gap in case.series.gaps)
    if case.time_zones:  # how each time of the case was read (layers check prints the same)
        ds.attrs["time_zones"] = "; ".join(f"{key}: {how}" for key, how in case.time_zones.items())
    if case.record_paths:
        ds.attrs["case_path"] = str(Path(case.path).resolve())
    if case.provenance:
        ds.attrs.update(case.provenance)
        ds.attrs["history"] = f"{utc_now()} layers run --again {Path(case.provenance['rerun_of']).name}"
    ds.attrs = {k: v for k, v in ds.attrs.items() if v != ""}
    # Headline results as attributes, so that `layers list` reads headers only.
    ds.attrs.update(headline_attributes(ds))
    cf_encoding(ds)
    ds["time"].encoding.update({"units": f"seconds since {np.datetime_as_string(times[0], unit='s')}", "calendar": "proleptic_gregorian", "dtype": "float64"})
    return ds


#: Chunk cache of a streamed field [bytes]: it is read and written in order.
CHUNK_CACHE = 4 * 2**20
#: Where a Dataset's encoding names the FieldSink that holds its cell fields.
STREAMED_FIELDS = "layers_streamed_fields"


class FieldExtremes:
    """Takes the kept cell fields as the march makes them and keeps only what
    the checks after a run need: the coldest and hottest cell (``low``,
    ``high`` [degC]) and, for each kept state, the hottest cell of each layer
    (``layer_hottest``, (m, layers)).  A run that keeps no fields
    (``keep_temperature = false``) uses it so that they never fill memory."""

    def __init__(self, mesh: Mesh) -> None:
        self.layer = mesh.layer
        self.layers = int(mesh.layer.max()) if mesh.n else 0
        self.rows = 0
        self.low, self.high = math.inf, -math.inf
        self._hottest: list[np.ndarray] = []

    def write(self, rows: np.ndarray) -> None:
        rows = np.atleast_2d(np.asarray(rows, dtype=float))
        if rows.shape[0] == 0:
            return
        self._store(rows)
        self.rows += rows.shape[0]
        self.low, self.high = min(self.low, float(rows.min())), max(self.high, float(rows.max()))
        hottest = np.full((rows.shape[0], self.layers), -math.inf)
        for number in range(1, self.layers + 1):
            cells = self.layer == number
            if cells.any():
                hottest[:, number - 1] = rows[:, cells].max(axis=1)
        self._hottest.append(hottest)

    def _store(self, rows: np.ndarray) -> None:
        """Nothing to keep here (a FieldSink writes the rows)."""

    @property
    def layer_hottest(self) -> np.ndarray:
        return np.concatenate(self._hottest) if self._hottest else np.empty((0, self.layers))


class FieldSink(FieldExtremes):
    """Kept cell fields written to a scratch netCDF file as the march makes them,
    so that a run's memory does not grow with its length.  The Dataset of such
    a run has no ``temperature`` in memory; its encoding names the sink
    (:meth:`attach`), and :func:`write_new` copies the fields from the sink
    into the file it writes, block by block (:meth:`append_to`).
    """

    #: Rows per chunk of the scratch file (and of the written file's field).
    BLOCK = 256

    def __init__(self, mesh: Mesh, folder: str | os.PathLike | None = None) -> None:
        import netCDF4

        super().__init__(mesh)
        fd, name = tempfile.mkstemp(prefix=".layers-field-", suffix=".nc", dir=folder)
        os.close(fd)
        self.path = Path(name)
        self._nc = netCDF4.Dataset(self.path, "w", format="NETCDF4")
        self._nc.createDimension("time", None)
        self._nc.createDimension("x", mesh.n)
        self._var = self._nc.createVariable("temperature", "f8", ("time", "x"), chunksizes=(self.BLOCK, mesh.n))
        self._var.set_var_chunk_cache(size=CHUNK_CACHE)  # written in order: a small cache (the library's default grows to 64 MiB)

    def _store(self, rows: np.ndarray) -> None:
        self._var[self.rows:self.rows + rows.shape[0], :] = rows

    def attach(self, ds: xr.Dataset) -> xr.Dataset:
        """Name this sink as the holder of ``ds``'s cell fields (the march is done)."""
        if self._nc.isopen():
            self._nc.close()
        if self.rows != ds.sizes.get("time", -1):
            raise ValueError(f"the sink holds {self.rows} states, the Dataset {ds.sizes.get('time')}")
        ds.encoding[STREAMED_FIELDS] = self
        return ds

    def append_to(self, path: str | os.PathLike) -> None:
        """Add the fields as the variable ``temperature`` (time, x) of the netCDF
        file at ``path`` (written from the Dataset), copying block by block."""
        import netCDF4

        with netCDF4.Dataset(self.path, "r") as source, netCDF4.Dataset(path, "a") as target:
            field = source.variables["temperature"]
            field.set_var_chunk_cache(size=CHUNK_CACHE)
            rows, n = field.shape
            var = target.createVariable("temperature", "f8", ("time", "x"), chunksizes=(min(self.BLOCK, max(rows, 1)), n))
            var.set_var_chunk_cache(size=CHUNK_CACHE)
            var.setncatts(TEMPERATURE_ATTRS)
            for start in range(0, rows, 8 * self.BLOCK):
                stop = min(rows, start + 8 * self.BLOCK)
                var[start:stop, :] = field[start:stop, :]

    def close(self) -> None:
        """Close and remove the scratch file (after the result is written)."""
        if self._nc.isopen():
            self._nc.close()
        self.path.unlink(missing_ok=True)


class Column(NamedTuple):
    """One variable of a :class:`Table`: its values and attributes."""

    values: np.ndarray
    attrs: dict


@dataclass
class Table:
    """A small result on one dimension (a sizing: candidates x criteria), kept
    as plain arrays so that a command can print and archive it without
    importing xarray (about 0.2 s of a short command); :meth:`to_dataset` gives
    the labelled Dataset the API returns, and :meth:`to_netcdf` writes the file
    that Dataset would write (the same variables, attributes and CF encoding:
    float NaN as ``_FillValue``, booleans as ``int8`` with ``dtype = "bool"``,
    no ``_FillValue`` on the coordinate; ``tests/test_sizing.py`` reads both
    back and compares them).

    Attributes
    ----------
    dim : str
        The dimension (and its coordinate variable's name).
    coordinate : Column
        The coordinate's values and attributes.
    variables : dict
        name -> (dimension, values, attributes), as ``xarray.Dataset`` takes them.
    attrs : dict
        Global attributes.
    """

    dim: str
    coordinate: Column
    variables: dict[str, tuple[str, np.ndarray, dict]]
    attrs: dict[str, Any]
    encoding: dict[str, Any] = field(default_factory=dict)

    # the few reads of a Dataset the text reports make
    @property
    def data_vars(self) -> list[str]:
        return list(self.variables)

    def __contains__(self, name: str) -> bool:
        return name in self.variables or name == self.dim

    def __getitem__(self, name: str) -> Column:
        if name == self.dim:
            return self.coordinate
        _, values, attrs = self.variables[name]
        return Column(np.asarray(values), attrs)

    def to_dataset(self) -> xr.Dataset:
        """The same result as an ``xarray.Dataset`` (with :func:`cf_encoding`'s encoding)."""
        import xarray as xr

        ds = xr.Dataset(
            {name: (dim, np.asarray(values), dict(attrs)) for name, (dim, values, attrs) in self.variables.items()},
            coords={self.dim: (self.dim, np.asarray(self.coordinate.values), dict(self.coordinate.attrs))},
        )
        ds.attrs = dict(self.attrs)
        ds[self.dim].encoding["_FillValue"] = None
        return ds

    def to_netcdf(self, path: str | os.PathLike, engine: str = "netcdf4") -> None:
        """Write the table as a netCDF-4 file, with netCDF4 directly (see the class docstring)."""
        import netCDF4

        with netCDF4.Dataset(path, "w", format="NETCDF4") as nc:
            nc.createDimension(self.dim, len(self.coordinate.values))
            coordinate = nc.createVariable(self.dim, "f8", (self.dim,))
            coordinate.setncatts(_netcdf_attrs(self.coordinate.attrs))
            coordinate[:] = np.asarray(self.coordinate.values, dtype=float)
            for name, (dim, values, attrs) in self.variables.items():
                values = np.asarray(values)
                if values.dtype == bool:
                    var = nc.createVariable(name, "i1", (dim,))
                    var.setncatts({**_netcdf_attrs(attrs), "dtype": "bool"})
                    var[:] = values.astype(np.int8)
                else:
                    var = nc.createVariable(name, "f8", (dim,), fill_value=np.nan)
                    var.setncatts(_netcdf_attrs(attrs))
                    var.set_auto_mask(False)
                    var[:] = values.astype(float)
            nc.setncatts(_netcdf_attrs(self.attrs))


def _netcdf_attrs(attrs: dict[str, Any]) -> dict[str, Any]:
    """Attribute values as netCDF stores them (numpy scalars, str, arrays)."""
    out = {}
    for key, value in attrs.items():
        if isinstance(value, bool | np.bool_):
            value = np.int8(value)
        elif isinstance(value, int) and not isinstance(value, bool):
            value = np.int64(value)
        out[key] = value
    return out


def cf_encoding(ds: xr.Dataset | Table, history: str | None = None) -> xr.Dataset | Table:
    """CF details every written Dataset needs: no _FillValue on coordinates, a history line."""
    for name in getattr(ds, "coords", ()):  # a Table writes its coordinate without one
        ds[name].encoding["_FillValue"] = None
    if history is not None or not ds.attrs.get("history"):
        ds.attrs["history"] = f"{utc_now()} {history or 'layers'}"
    return ds


def utc_now() -> str:
    """The present moment, UTC, ISO 8601 to the second (``created``, ``history``)."""
    return dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def archive_dir(explicit: str | os.PathLike | None = None) -> Path:
    """The archive folder: ``--archive``, else ``$LAYERS_ARCHIVE``, else ``runs/``."""
    if explicit:
        return Path(explicit)
    return Path(os.environ.get(ARCHIVE_ENV) or DEFAULT_ARCHIVE)


def write_new(ds: xr.Dataset, path: str | os.PathLike) -> Path:
    """Write ``ds`` to ``path`` atomically, never overwriting an existing file.

    Raises
    ------
    FileExistsError
        If ``path`` exists.
    """
    sink = ds.encoding.get(STREAMED_FIELDS)

    def write(tmp: str) -> None:
        ds.to_netcdf(tmp, engine="netcdf4")
        if sink is not None:  # the cell fields, from where the march streamed them
            sink.append_to(tmp)

    return write_once(path, write)


def exists_error(path: str | os.PathLike) -> CaseError:
    """The one message for an output that would overwrite a file (key ``-o``)."""
    return CaseError(str(path), "-o", "exists already; layers never overwrites a file (choose another name)")


def read_netcdf(path: str | os.PathLike, key: str = "(file)") -> xr.Dataset:
    """Open a file the tool wrote, fully into memory (the file is closed again).

    Raises
    ------
    CaseError
        If the file is missing or no netCDF file (a case file gets a hint to run it first).
    """
    path = Path(path)
    if not path.is_file():
        raise CaseError(str(path), key, "no such file")
    import xarray as xr

    try:
        with xr.open_dataset(path, engine="netcdf4") as ds:
            ds = ds.load()
    except Exception:  # noqa: BLE001 - whatever the reader says, the file is not one of ours
        hint = "; it looks like a case file: run it first (layers run CASE.toml)" if path.suffix.lower() == ".toml" else ""
        raise CaseError(str(path), key, f"is not a netCDF file layers can read{hint}") from None
    ds.encoding["source"] = str(path)
    return ds


def refuse_existing(path: str | os.PathLike | None, suffixes: tuple[str, ...] = (".nc",)) -> None:
    """Refuse an output path that exists, or whose suffix is not one the command
    writes (a netCDF run under a .png name), before any work is done."""
    if path and Path(path).suffix.lower() not in suffixes:
        raise CaseError(str(path), "-o", f"this command writes {' or '.join(suffixes)} files; give the name such a suffix")
    if path and Path(path).exists():
        raise exists_error(path)
    if path:
        folder = Path(path).parent
        if not folder.is_dir():
            raise CaseError(str(path), "-o", f"the folder {folder} does not exist")
        if not os.access(folder, os.W_OK | os.X_OK):
            raise CaseError(str(path), "-o", f"cannot write in the folder {folder}")


def write_output(ds: xr.Dataset, out: str | os.PathLike | None) -> Path | None:
    """The ``-o`` copy of a command's Dataset, if asked for (never over a file).

    Raises
    ------
    CaseError
        If ``out`` exists (key ``-o``).
    """
    if not out:
        return None
    try:
        return write_new(ds, out)
    except FileExistsError:
        raise exists_error(out) from None
    except OSError as exc:  # a folder that refuses the write after all (a special file system)
        raise CaseError(str(out), "-o", f"cannot write the copy ({exc.strerror or exc}); the archived result is complete") from None


def write_once(path: str | os.PathLike, write: Callable[[str], None]) -> Path:
    """Create ``path`` with ``write(tmp)``, atomically and never over an existing file.

    ``write`` fills a temporary file in the same folder, which is then
    hard-linked into place (``link`` fails if the name exists meanwhile), so
    an interrupted write leaves no partial file under the final name, only a
    hidden ``.<stem>.<host>-<pid>.<random>.partial`` that the next write to
    the folder removes once it is sure the writer is gone: same host, process
    no longer running, file older than :data:`STALE_PARTIAL_AGE`.  A folder
    shared by several hosts never loses another host's write in progress.

    Raises
    ------
    FileExistsError
        If ``path`` exists.
    """
    path = Path(path)
    if path.exists():
        raise FileExistsError(str(path))
    path.parent.mkdir(parents=True, exist_ok=True)
    _remove_stale_partials(path.parent)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.stem}.{_host()}-{os.getpid()}.", suffix=".partial", dir=path.parent)
    os.close(fd)
    try:
        write(tmp)
        # mkstemp makes the file private (0600); give it the mode an ordinary
        # new file gets, so that colleagues can read a shared archive.
        os.chmod(tmp, 0o666 & ~_umask())
        os.link(tmp, path)
    finally:
        try:
            os.unlink(tmp)
        except FileNotFoundError:
            pass
    return path


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


#: A partial file younger than this is never removed, whoever wrote it [s].
STALE_PARTIAL_AGE = 600.0


def _host() -> str:
    """This host's name, reduced to letters, digits and hyphens (it goes into file names)."""
    import re
    import socket

    return re.sub(r"[^A-Za-z0-9]+", "-", socket.gethostname()).strip("-") or "host"


def _remove_stale_partials(folder: Path) -> None:
    """Delete temporary files left by killed writers of this host (older than
    :data:`STALE_PARTIAL_AGE`, their process gone); other hosts' are left alone."""
    import time

    host = _host()
    now = time.time()
    for stale in folder.glob(".*.partial"):
        owner = stale.name.split(".")
        if len(owner) < 4:
            continue
        their_host, _, pid_text = owner[-3].rpartition("-")
        if their_host != host or not pid_text.isdigit() or int(pid_text) == os.getpid():
            continue
        try:
            if now - stale.stat().st_mtime < STALE_PARTIAL_AGE:
                continue
            os.kill(int(pid_text), 0)
        except ProcessLookupError:
            stale.unlink(missing_ok=True)
        except OSError:
            continue


def archive(ds: xr.Dataset, stem: str, folder: str | os.PathLike | None = None) -> Path:
    """Write a run to the archive as ``<stem>-<UTC timestamp>.nc``, never overwriting.

    Returns
    -------
    Path
        The file written.
    """
    folder = archive_dir(folder)
    usable_folder(folder)
    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y%m%dT%H%M%SZ")
    for n in range(1, 10000):
        suffix = "" if n == 1 else f"-{n}"
        candidate = folder / f"{stem}-{stamp}{suffix}.nc"
        try:
            return write_new(ds, candidate)
        except FileExistsError:
            continue
        except OSError as exc:
            raise CaseError(str(folder), "--archive", f"cannot write the run there ({exc.strerror or exc})") from None
    raise CaseError(str(folder), "--archive", f"no free name for {stem}-{stamp} after 9999 tries")


def usable_folder(folder: Path, make: bool = True) -> None:
    """Refuse an archive folder that is a file or cannot be made (key ``--archive``);
    with ``make`` false, only look (before a run, so that a bad folder costs no work)."""
    folder = Path(folder)
    for part in (folder, *folder.parents):
        if part.exists():
            if not part.is_dir():
                raise CaseError(str(folder), "--archive", f"{'is' if part == folder else f'lies under {part}, which is'} a file, not a folder")
            break
    if not make:
        return
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CaseError(str(folder), "--archive", f"cannot make the folder ({exc.strerror or exc})") from None
