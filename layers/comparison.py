"""Runs side by side: ``layers compare``.

Runs are aligned in time (the common overlap, on the time stamps of the
coarsest run, others interpolated linearly) and in depth (surfaces and layer
interfaces; profiles interpolated onto the union of the cell centres).  The
headline metrics are tabulated with their differences from the first run,
and ``-o`` writes an overlay figure or one Dataset along a new ``run``
dimension labelled by what differs between the runs' case files.

Interface temperatures are the solver's own ``interface_temperature`` where
a run carries it; only older run files without it get the re-derivation of
:func:`interface_temperatures_from_cells` (a labelled fallback).

Library functions return dataclasses, text and xarray objects; only
:mod:`layers.cli` prints.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import os
import tomllib
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from layers.about import CAUTION, __version__
from layers.catalogue import not_a_run
from layers.errors import CaseError
from layers.formatting import display_units, format_utc
from layers.plots import plot_comparison, save_figure
from layers.results import cf_encoding, exists_error, read_netcdf, refuse_existing, write_output

#: Output suffixes of ``layers compare -o``.
IMAGE_SUFFIXES = (".png", ".svg", ".pdf")

# --------------------------------------------------------------------------- #
# compare: loading and case differences


def load_run(path: str | os.PathLike) -> xr.Dataset:
    """Open an archived run fully into memory.

    Raises
    ------
    CaseError
        If the file cannot be read or is not a layers run.
    """
    path = Path(path)
    ds = read_netcdf(path)
    problem = not_a_run(list(ds.attrs), list(ds.variables), ds.attrs.get("product"))
    if problem:
        raise CaseError(str(path), "(file)", problem)
    if ds.attrs.get("product") == "sweep":
        raise CaseError(
            str(path), "(file)",
            f"is a sweep of {ds.attrs.get('sweep_points', 'several')} points: compare it with sweeps of the same grid "
            "(point by point), map a result with `layers plot`, or select a point with xarray (ds.sel(NAME=VALUE))",
        )
    if "temperature" not in ds or "x" not in ds.dims:
        if "surface_temperature_outside" in ds and "x" in ds.dims:
            raise CaseError(str(path), "(file)", "this run kept no cell temperatures (keep_temperature = false under [time]), "
                                                 "which a comparison needs; run it again with keep_temperature = true")
        raise CaseError(str(path), "(file)", "not a layers run: no 'temperature' profile")
    for name in ("temperature", "surface_temperature_outside", "heat_flow_inside"):
        if name in ds and not np.isfinite(ds[name].values).any():
            raise CaseError(str(path), name, "holds no finite value (a damaged or foreign file); it cannot be compared or plotted")
    return ds


def flatten_case(data: dict[str, Any], prefix: str = "") -> dict[str, Any]:
    """Flatten parsed TOML into dotted keys: ``layers[2].thickness``, ``time.step``.

    Arrays of tables are numbered from 1, as case-file errors name them.
    """
    out: dict[str, Any] = {}
    for key, value in data.items():
        name = f"{prefix}.{key}" if prefix else str(key)
        if isinstance(value, dict):
            out.update(flatten_case(value, name))
        elif isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
            for i, item in enumerate(value, start=1):
                out.update(flatten_case(item, f"{name}[{i}]"))
        else:
            out[name] = value
    return out


_ABSENT = object()


def case_differences(case_texts: Sequence[str]) -> tuple[list[str], list[dict[str, Any]]]:
    """Keys whose values differ between case texts, and each case's flattened values.

    Parameters
    ----------
    case_texts : sequence of str
        TOML case texts (a text that does not parse counts as empty).

    Returns
    -------
    keys : list of str
        Differing dotted keys, in the order they first appear.
    flat : list of dict
        Each case flattened (see :func:`flatten_case`).
    """
    flat = []
    for text in case_texts:
        try:
            flat.append(flatten_case(tomllib.loads(text or "")))
        except tomllib.TOMLDecodeError:
            flat.append({})
    order: dict[str, None] = {}
    for f in flat:
        order.update(dict.fromkeys(f))
    keys = [k for k in order if len({repr(f.get(k, _ABSENT)) for f in flat}) > 1]
    return keys, flat


def _value_text(value: Any) -> str:
    if value is _ABSENT:
        return "(absent)"
    if isinstance(value, str):
        return value
    if isinstance(value, bool):
        return str(value).lower()
    return json.dumps(value, default=str) if isinstance(value, (list, dict)) else str(value)


def run_labels(datasets: Sequence[xr.Dataset], files: Sequence[Path]) -> tuple[list[str], list[str]]:
    """Unique labels naming what differs between the runs' archived cases.

    ``title`` and ``label`` count only when nothing else differs; runs of the
    same case are labelled by file stem.

    Returns
    -------
    labels : list of str
        ``"layers[2].thickness=30 mm"``, one per run.
    keys : list of str
        The differing case keys used.
    """
    keys, flat = case_differences([str(ds.attrs.get("case", "")) for ds in datasets])
    used = [k for k in keys if k not in ("title", "label")] or keys
    labels = []
    for f, path in zip(flat, files):
        text = ", ".join(f"{k}={_value_text(f.get(k, _ABSENT))}" for k in used)
        labels.append(text or Path(path).stem)
    seen: dict[str, int] = {}
    unique = []
    for text in labels:
        seen[text] = seen.get(text, 0) + 1
        unique.append(text if seen[text] == 1 else f"{text} ({seen[text]})")
    return unique, used


# --------------------------------------------------------------------------- #
# compare: alignment


def _check_comparable(datasets: Sequence[xr.Dataset], files: Sequence[Path]) -> None:
    geometry = str(datasets[0].attrs["geometry"])
    for ds, path in zip(datasets[1:], files[1:]):
        if str(ds.attrs["geometry"]) != geometry:
            raise CaseError(
                str(path),
                "geometry",
                f"is {ds.attrs['geometry']}, but {files[0].name} is {geometry}: runs of different geometry "
                "have heat flows per different reference units and cannot be compared",
            )


def common_window(datasets: Sequence[xr.Dataset], files: Sequence[Path]) -> tuple[np.datetime64, np.datetime64]:
    """The overlap in time of all runs [start, end].

    Raises
    ------
    CaseError
        If the runs have no common time span.
    """
    starts = [ds["time"].values[0] for ds in datasets]
    ends = [ds["time"].values[-1] for ds in datasets]
    late, early = int(np.argmax(starts)), int(np.argmin(ends))
    if ends[early] <= starts[late]:
        raise CaseError(
            str(files[late]),
            "time",
            f"no overlap in time: it runs from {format_utc(starts[late])} to {format_utc(ends[late])}, but "
            f"{files[early].name} ends at {format_utc(ends[early])}",
        )
    return starts[late], ends[early]


def common_times(datasets: Sequence[xr.Dataset], start: np.datetime64, end: np.datetime64) -> tuple[np.ndarray, int | None]:
    """Time stamps to compare on, and the run they come from (None: all runs share them).

    Identical stamps are kept.  Otherwise the stamps of the coarsest run in
    the overlap are used (every run is then compared at the same instants and
    no run is interpolated onto stamps finer than the coarsest one samples);
    with fewer than two of those, the union of all stamps in the overlap.
    """
    first = datasets[0]["time"].values
    if all(len(ds["time"]) == len(first) and np.array_equal(ds["time"].values, first) for ds in datasets):
        return first, None
    inside = [ds["time"].values[(ds["time"].values >= start) & (ds["time"].values <= end)] for ds in datasets]
    coarsest = int(np.argmin([len(t) for t in inside]))
    if len(inside[coarsest]) >= 2:
        return inside[coarsest], coarsest
    union = np.unique(np.concatenate(inside + [np.array([start, end], dtype=first.dtype)]))
    return union, None


def _interp_time(values: np.ndarray, t: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Linear interpolation along the first axis; exact at coinciding stamps."""
    ts = (t - grid[0]) / np.timedelta64(1, "s")
    gs = (grid - grid[0]) / np.timedelta64(1, "s")
    i = np.clip(np.searchsorted(ts, gs, side="right") - 1, 0, len(ts) - 1)
    j = np.minimum(i + 1, len(ts) - 1)
    span = ts[j] - ts[i]
    w = np.where(span > 0, (gs - ts[i]) / np.where(span > 0, span, 1.0), 0.0)
    w = w.reshape((-1,) + (1,) * (values.ndim - 1))
    return values[i] * (1.0 - w) + values[j] * w


#: Where interface temperatures come from (the ``comment`` of :func:`interface_temperatures`).
_OWN = "the run's own interface_temperature (from the solver's face fluxes)"
_REDERIVED = (
    "re-derived (the run file has no interface_temperature): extrapolated from the two "
    "nearest cell centres on each side; mean of the sides"
)


def interface_temperatures(ds: xr.Dataset) -> xr.DataArray:
    """Temperatures at the internal layer faces of a run [degC].

    The run's own ``interface_temperature`` (written by the solver from its
    face fluxes; dims ``time, interface`` with 0 the inside surface and the
    last the outside surface), its internal faces only.  Old run files
    without that variable get :func:`interface_temperatures_from_cells`, a
    re-derivation from the cell-centre profile, and say so in the
    ``comment`` attribute.

    Returns
    -------
    xarray.DataArray
        Dims ``(time, interface)``; ``interface`` = 1 is the face between
        layers 1 and 2.
    """
    n_faces = len(ds["layer_interface"])
    stored = ds.get("interface_temperature")
    if stored is None or stored.sizes.get("interface") != n_faces:
        return interface_temperatures_from_cells(ds)
    other = [d for d in stored.dims if d not in ("time", "interface")]
    values = np.asarray(stored.transpose("time", "interface", *other).values, dtype=float)[:, 1:-1]
    return _interface_array(ds, values, _OWN)


def interface_temperatures_from_cells(ds: xr.Dataset) -> xr.DataArray:
    """FALLBACK for old run files without ``interface_temperature``: the internal
    layer faces' temperatures re-derived from the cell-centre profile [degC].

    Each side's two cells nearest the face are extrapolated linearly to it
    (second order in the cell size for a smooth profile within a layer, the
    order of the finite-volume scheme); the value is the mean of the two
    sides, or the one side with cells next to an air gap.  At a contact
    resistance the two sides differ and the mean lies between them.

    Returns
    -------
    xarray.DataArray
        Dims ``(time, interface)``; ``interface`` = 1 is the face between
        layers 1 and 2.
    """
    faces = np.asarray(ds["layer_interface"].values, dtype=float)
    x = np.asarray(ds["x"].values, dtype=float)
    layer = np.asarray(ds["layer"].values)
    temp = np.asarray(ds["temperature"].transpose("time", "x").values, dtype=float)
    n_faces = max(len(faces) - 2, 0)
    out = np.full((temp.shape[0], n_faces), np.nan)
    for j in range(1, len(faces) - 1):
        xf = faces[j]
        sides = []
        for number, pick in ((j, slice(-2, None)), (j + 1, slice(0, 2))):
            cells = np.flatnonzero(layer == number)[pick]
            if len(cells) == 0:
                continue
            if len(cells) == 1:
                sides.append(temp[:, cells[0]])
                continue
            a, b = cells if number == j else cells[::-1]  # b is the cell next to the face
            slope = (temp[:, b] - temp[:, a]) / (x[b] - x[a])
            sides.append(temp[:, b] + slope * (xf - x[b]))
        if sides:
            out[:, j - 1] = np.mean(sides, axis=0)
    return _interface_array(ds, out, _REDERIVED)


def _interface_array(ds: xr.Dataset, values: np.ndarray, comment: str) -> xr.DataArray:
    """Internal-face temperatures [degC] (time, interface from 1) labelled with where they come from."""
    return xr.DataArray(
        values,
        dims=("time", "interface"),
        coords={"time": ds["time"].values, "interface": np.arange(1, values.shape[1] + 1, dtype=np.int32)},
        attrs={"units": "degC", "long_name": "temperature at the layer interface", "comment": comment,
               "cell_methods": "time: point"},
    )


def _profile(ds: xr.Dataset, grid_x: np.ndarray, temp: np.ndarray, t_in: np.ndarray, t_out: np.ndarray) -> np.ndarray:
    """A run's profile (cell centres plus both surfaces) interpolated linearly onto ``grid_x``; NaN beyond its thickness."""
    faces = np.asarray(ds["layer_interface"].values, dtype=float)
    nodes = np.concatenate([[faces[0]], np.asarray(ds["x"].values, dtype=float), [faces[-1]]])
    values = np.concatenate([t_in[:, None], temp, t_out[:, None]], axis=1)
    out = np.empty((temp.shape[0], len(grid_x)))
    for k in range(temp.shape[0]):
        out[k] = np.interp(grid_x, nodes, values[k], left=np.nan, right=np.nan)
    return out


# --------------------------------------------------------------------------- #
# compare: metrics


@dataclass(frozen=True)
class Metric:
    """One headline metric of every run over the common window.

    Attributes
    ----------
    name : str
    units : str
    values : tuple of float
        One per run, in the order the runs were given.
    times : tuple of str, optional
        For a maximum or a minimum, when each run reached it (UTC).
    """

    name: str
    units: str
    values: tuple[float, ...]
    times: tuple[str, ...] = ()

    @property
    def differences(self) -> tuple[float, ...]:
        """Each run minus the first run [``units``; K for temperatures]."""
        return tuple(v - self.values[0] for v in self.values)


@dataclass(frozen=True)
class Comparison:
    """Runs aligned in time and depth, with their headline metrics.

    Attributes
    ----------
    files : tuple of Path
    labels : tuple of str
        What differs between the runs' cases (the ``run`` coordinate).
    differing_keys : tuple of str
        Case keys whose values differ.
    start, end : numpy.datetime64
        The common window.
    time_source : int or None
        Index of the run whose time stamps are used (None: all runs share
        their stamps, or their union is used).
    same_mesh : bool
        All runs have the same cell centres.
    interfaces_compared : int
        Internal layer faces compared (0 when the layer counts differ).
    exact_heat_flow_means : bool
        Mean heat flows come from the runs' step-by-step totals (every run
        spans the window), not from the kept samples.
    metrics : tuple of Metric
        Over the common window.
    largest_differences : tuple of Metric
        The largest absolute difference from the first run at any compared
        time, per series (0 for the first run).
    dataset : xarray.Dataset
        The runs along a new ``run`` dimension (time-aligned series,
        depth-aligned ``temperature``, ``temperature_interface``).
    """

    files: tuple[Path, ...]
    labels: tuple[str, ...]
    differing_keys: tuple[str, ...]
    start: np.datetime64
    end: np.datetime64
    time_source: int | None
    same_mesh: bool
    interfaces_compared: int
    exact_heat_flow_means: bool
    metrics: tuple[Metric, ...]
    largest_differences: tuple[Metric, ...]
    dataset: xr.Dataset = field(repr=False)


def _mean_over(values: np.ndarray, seconds: np.ndarray) -> float:
    if seconds[-1] > seconds[0]:
        return float(np.trapezoid(values, seconds) / (seconds[-1] - seconds[0]))
    return float(values[0])




def _metrics(
    combined: xr.Dataset,
    exact_means: dict[str, list[float]] | None = None,
    run_attrs: Sequence[dict] = (),
) -> tuple[tuple[Metric, ...], tuple[Metric, ...]]:
    """Headline metrics over the common window, and the largest differences from the first run.

    ``exact_means`` (per heat-flow variable, one value per run) replaces the
    trapezoidal mean of the kept samples when every run spans the window.
    ``run_attrs`` (each run's global attributes) add the freeze times of
    runs with contents (over each whole run, NaN where not reached).
    """
    seconds = (combined["time"].values - combined["time"].values[0]) / np.timedelta64(1, "s")
    stamps = combined["time"].values
    metrics: list[Metric] = []
    largest: list[Metric] = []

    def add(name: str, units: str, fn, data: np.ndarray) -> None:
        metrics.append(Metric(name, units, tuple(float(fn(row)) for row in data)))

    def extreme(name: str, units: str, pick, data: np.ndarray) -> None:
        """A maximum or minimum of each run, with when it was reached."""
        at = [int(pick(row)) if np.isfinite(row).any() else -1 for row in data]
        metrics.append(Metric(name, units, tuple(float(row[i]) if i >= 0 else math.nan for row, i in zip(data, at)),
                              tuple(format_utc(stamps[i]) if i >= 0 else "" for i in at)))

    for side in ("outside", "inside"):
        var = f"surface_temperature_{side}"
        data = combined[var].values
        extreme(f"{side} surface temperature, max", "degC", np.nanargmax, data)
        extreme(f"{side} surface temperature, min", "degC", np.nanargmin, data)
        add(f"{side} surface temperature, mean", "degC", lambda r: _mean_over(r, seconds), data)
    for side in ("inside", "outside"):
        var = f"heat_flow_{side}"
        units = str(combined[var].attrs.get("units", ""))
        data = combined[var].values
        # a flow that reverses has a largest value each way: both, not one "peak"
        extreme(f"heat flow, {side} surface, max (outward)", units, np.nanargmax, data)
        extreme(f"heat flow, {side} surface, min", units, np.nanargmin, data)
        if exact_means and var in exact_means:
            metrics.append(Metric(f"heat flow, {side} surface, mean", units, tuple(exact_means[var])))
        else:
            add(f"heat flow, {side} surface, mean", units, lambda r: _mean_over(r, seconds), data)
    if "temperature_interface" in combined and combined.sizes.get("interface", 0):
        materials = combined.attrs.get("comparison_interface_names", "").split("; ")
        for k in range(combined.sizes["interface"]):
            data = combined["temperature_interface"].values[:, k, :]
            where = materials[k] if k < len(materials) and materials[k] else f"interface {k + 1}"
            extreme(f"interface {k + 1} ({where}), max", "degC", np.nanargmax, data)
            extreme(f"interface {k + 1} ({where}), min", "degC", np.nanargmin, data)
    if "contents_temperature" in combined:
        extreme("contents temperature, min", "degC", np.nanargmin, combined["contents_temperature"].values)
    if "ice_fraction" in combined:
        extreme("ice fraction, max", "1", np.nanargmax, combined["ice_fraction"].values)
    for key, name in (("time_to_freezing_h", "contents reach 0 degC after"), ("freeze_time_h", "freeze time (max_ice_fraction)")):
        if run_attrs and any(key in a for a in run_attrs):
            metrics.append(Metric(name, "h", tuple(float(a.get(key, math.nan)) for a in run_attrs)))
    for var, name in (
        ("surface_temperature_outside", "outside surface temperature"),
        ("surface_temperature_inside", "inside surface temperature"),
        ("heat_flow_inside", "heat flow, inside surface"),
    ):
        data = combined[var].values
        units = "K" if "temperature" in var else str(combined[var].attrs.get("units", ""))
        largest.append(Metric(name, units, tuple(float(np.nanmax(np.abs(row - data[0]))) for row in data)))
    if "temperature_interface" in combined and combined.sizes.get("interface", 0):
        data = combined["temperature_interface"].values
        for k in range(combined.sizes["interface"]):
            largest.append(
                Metric(f"interface {k + 1} temperature", "K", tuple(float(np.nanmax(np.abs(row[k] - data[0][k]))) for row in data))
            )
    return tuple(metrics), tuple(largest)


def _exact_means(datasets: Sequence[xr.Dataset], start: np.datetime64, end: np.datetime64) -> dict[str, list[float]] | None:
    """Mean heat flows from the runs' step-by-step totals, when every run spans exactly the window.

    The totals (``heat_in_inside_total``, ``heat_out_outside_total``) are
    summed from the scheme's own fluxes at every step, so they are exact for
    the discrete model; ``layers list`` shows the same value.  If any run
    spans more than the window, every run uses the trapezoidal mean of its
    samples instead, so that all columns are computed the same way.
    """
    full = all(ds["time"].values[0] == start and ds["time"].values[-1] == end for ds in datasets)
    names = {"heat_flow_inside": "heat_in_inside_total", "heat_flow_outside": "heat_out_outside_total"}
    if not full or not all(total in ds.attrs for ds in datasets for total in names.values()):
        return None
    duration = (end - start) / np.timedelta64(1, "s")
    return {var: [float(ds.attrs[total]) / duration for ds in datasets] for var, total in names.items()}


def compare_runs(paths: Sequence[str | os.PathLike]) -> Comparison:
    """Load, check and align runs; compute their headline metrics.

    Parameters
    ----------
    paths : sequence of str or Path
        Two or more archived runs; the first is the reference for differences.

    Returns
    -------
    Comparison

    Raises
    ------
    CaseError
        Fewer than two runs, an unreadable or foreign file, runs of different
        geometry, or runs with no overlap in time.
    """
    files = tuple(Path(p) for p in paths)
    if len(files) < 2:
        raise CaseError("(command line)", "RUNS", "give at least two runs to compare")
    datasets = [load_run(p) for p in files]
    _check_comparable(datasets, files)
    start, end = common_window(datasets, files)
    grid, source = common_times(datasets, start, end)
    labels, keys = run_labels(datasets, files)
    combined, same_mesh, n_interfaces = _combine(datasets, files, labels, keys, grid, source)
    exact = _exact_means(datasets, start, end)
    metrics, largest = _metrics(combined, exact, [dict(ds.attrs) for ds in datasets])
    return Comparison(
        files=files,
        labels=tuple(labels),
        differing_keys=tuple(keys),
        start=grid[0],
        end=grid[-1],
        time_source=source,
        same_mesh=same_mesh,
        interfaces_compared=n_interfaces,
        exact_heat_flow_means=exact is not None,
        metrics=metrics,
        largest_differences=largest,
        dataset=combined,
    )


def _combine(
    datasets: Sequence[xr.Dataset],
    files: Sequence[Path],
    labels: Sequence[str],
    keys: Sequence[str],
    grid: np.ndarray,
    source: int | None,
) -> tuple[xr.Dataset, bool, int]:
    """The runs on the common time stamps and depth grid, along a new ``run`` dimension."""
    n = len(datasets)
    first = datasets[0]
    # series on time only, present in any run (NaN where a run lacks one)
    series: dict[str, dict[str, Any]] = {}
    for ds in datasets:
        for name, var in ds.data_vars.items():
            if var.dims == ("time",) and name not in series:
                series[name] = dict(var.attrs)
    data_vars: dict[str, tuple] = {}
    interpolated = source is not None or not all(np.array_equal(ds["time"].values, grid) for ds in datasets)
    for name, attrs in series.items():
        stack = np.full((n, len(grid)), np.nan)
        for i, ds in enumerate(datasets):
            if name in ds:
                stack[i] = _interp_time(np.asarray(ds[name].values, dtype=float), ds["time"].values, grid)
        if interpolated:
            attrs = {**attrs, "comment": "interpolated linearly in time onto the common time stamps"}
        data_vars[name] = (("run", "time"), stack, attrs)

    # depth: identical meshes keep their cells; otherwise the union of the cell centres
    same_mesh = all(
        len(ds["x"]) == len(first["x"]) and np.allclose(ds["x"].values, first["x"].values, rtol=0, atol=1e-12)
        for ds in datasets
    )
    if same_mesh:
        grid_x = np.asarray(first["x"].values, dtype=float)
    else:
        grid_x = np.unique(np.round(np.concatenate([ds["x"].values for ds in datasets]), 12))
    profiles = np.empty((n, len(grid), len(grid_x)))
    for i, ds in enumerate(datasets):
        temp = _interp_time(np.asarray(ds["temperature"].transpose("time", "x").values, dtype=float), ds["time"].values, grid)
        if same_mesh:
            profiles[i] = temp
        else:
            t_in = data_vars["surface_temperature_inside"][1][i]
            t_out = data_vars["surface_temperature_outside"][1][i]
            profiles[i] = _profile(ds, grid_x, temp, t_in, t_out)
    t_attrs = dict(first["temperature"].attrs)
    if not same_mesh:
        t_attrs["comment"] = (
            "each run's cell-centre and surface temperatures interpolated linearly onto the union of the "
            "runs' cell centres; NaN beyond a run's thickness"
        )
    data_vars["temperature"] = (("run", "time", "x"), profiles, t_attrs)

    # interfaces: compared by number when the runs have the same number of layers
    layer_counts = {len(ds["layer_interface"]) for ds in datasets}
    n_interfaces = 0
    interface_names = ""
    if len(layer_counts) == 1:
        n_interfaces = layer_counts.pop() - 2
    if n_interfaces > 0:
        stack = np.empty((n, len(grid), n_interfaces))
        faces = [interface_temperatures(ds) for ds in datasets]
        for i, (ds, face) in enumerate(zip(datasets, faces)):
            stack[i] = _interp_time(face.values, ds["time"].values, grid)
        attrs = dict(faces[0].attrs)
        derived = [f.name for f, face in zip(files, faces) if face.attrs["comment"] == _REDERIVED]
        if derived and len(derived) < n:  # some runs carry their own, older ones do not
            attrs["comment"] = (
                "each run's own interface_temperature (from the solver's face fluxes); re-derived from the "
                "cell centres for the older run files without it: " + ", ".join(derived)
            )
        # CF 2.4: dimensions other than T, Z, Y, X go left of time
        data_vars["temperature_interface"] = (("run", "interface", "time"), stack.transpose(0, 2, 1), attrs)
        # named by its materials when every run has the same ones there,
        # else by each run's pair in run order ("brick | eps / brick | mineral-wool")
        names = []
        for k in range(1, n_interfaces + 1):
            pairs = list(dict.fromkeys(_interface_name(ds, k) for ds in datasets))
            names.append(" / ".join(pairs))
        interface_names = "; ".join(names)
    faces = max(len(ds["layer_interface"]) for ds in datasets)
    positions = np.full((n, faces), np.nan)
    for i, ds in enumerate(datasets):
        positions[i, : len(ds["layer_interface"])] = ds["layer_interface"].values
    data_vars["layer_interface"] = (("run", "face"), positions, dict(first["layer_interface"].attrs))

    coords: dict[str, Any] = {
        "run": ("run", np.array(labels, dtype=object), {"long_name": "run, labelled by the case keys that differ"}),
        "file": ("run", np.array([f.name for f in files], dtype=object), {"long_name": "archived run file"}),
        "title": ("run", np.array([str(ds.attrs.get("title", "")) for ds in datasets], dtype=object), {"long_name": "case title"}),
        "label": ("run", np.array([str(ds.attrs.get("label", "")) for ds in datasets], dtype=object), {"long_name": "run label"}),
        "case_sha256": ("run", np.array([str(ds.attrs.get("case_sha256", "")) for ds in datasets], dtype=object), {"long_name": "SHA-256 of the case text"}),
        "cells": ("run", np.array([ds.sizes["x"] for ds in datasets], dtype=np.int32), {"long_name": "number of cells", "units": "1"}),
        "time": ("time", grid, dict(first["time"].attrs)),
        "x": ("x", grid_x, dict(first["x"].attrs) if same_mesh else {
            "units": "m", "long_name": "distance from the inside surface (union of the runs' cell centres)", "axis": "X"}),
    }
    if same_mesh:
        for name in ("layer", "material", "radius"):
            if name in first.coords:
                coords[name] = ("x", first[name].values, dict(first[name].attrs))
    if n_interfaces > 0:
        coords["interface"] = ("interface", np.arange(1, n_interfaces + 1, dtype=np.int32), {"long_name": "internal layer face, from the inside (1: between layers 1 and 2)", "units": "1"})
    combined = xr.Dataset(data_vars=data_vars, coords=coords)
    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    combined.attrs = {
        "Conventions": "CF-1.10",
        "title": f"Comparison of {n} layers runs",
        "product": "comparison",
        "source": f"layers {__version__} compare",
        "history": f"{stamp} layers compare " + " ".join(f.name for f in files),
        "software_version": __version__,
        "created": stamp,
        "geometry": str(first.attrs["geometry"]),
        "comparison_files": ", ".join(f.name for f in files),
        "comparison_differing_keys": ", ".join(keys) if keys else "(none)",
        "comparison_time_stamps": "identical in all runs" if source is None and not interpolated else (
            f"those of {files[source].name}; the others interpolated linearly" if source is not None else
            "union of all runs' stamps in the overlap; interpolated linearly"
        ),
        "comparison_depth": "identical meshes" if same_mesh else "meshes differ: profiles interpolated linearly onto the union of the cell centres",
        "comparison_interface_names": interface_names,
        "caution": CAUTION,
    }
    combined.attrs = {k: v for k, v in combined.attrs.items() if v != ""}
    cf_encoding(combined)
    combined["time"].encoding.update({
        "units": f"seconds since {np.datetime_as_string(grid[0], unit='s')}",
        "calendar": "proleptic_gregorian",
        "dtype": "float64",
    })
    return combined, same_mesh, max(n_interfaces, 0)


def _interface_name(ds: xr.Dataset, k: int) -> str:
    """``brick | mineral-wool`` for internal face k (between layers k and k+1)."""
    names = []
    for number in (k, k + 1):
        sel = np.flatnonzero(np.asarray(ds["layer"].values) == number)
        names.append(str(ds["material"].values[sel[0]]) if len(sel) and "material" in ds.coords else "air gap")
    return " | ".join(names)


# --------------------------------------------------------------------------- #
# compare: output


def _letters(n: int) -> list[str]:
    return [chr(ord("A") + i) for i in range(n)] if n <= 26 else [str(i + 1) for i in range(n)]


#: Per-point figures of two sweeps set side by side: (name, how to get it, units or the variable it takes them from).
SWEEP_FIGURES = (
    ("mean heat flow, inside surface", lambda ds: ds["heat_flow_inside_mean"], "heat_flow_inside_mean"),
    ("outside surface, maximum", lambda ds: ds["surface_temperature_outside"].max("time"), "surface_temperature_outside"),
    ("outside surface, minimum", lambda ds: ds["surface_temperature_outside"].min("time"), "surface_temperature_outside"),
    ("inside surface, maximum", lambda ds: ds["surface_temperature_inside"].max("time"), "surface_temperature_inside"),
    ("inside surface, minimum", lambda ds: ds["surface_temperature_inside"].min("time"), "surface_temperature_inside"),
)


def is_sweep_file(path: str | os.PathLike) -> bool:
    """A file written by ``layers sweep`` (read from its header)."""
    from layers.catalogue import read_entry

    return read_entry(path).product == "sweep"


def compare_sweeps(paths: Sequence[str | os.PathLike]) -> str:
    """Sweeps of the same grid, point by point: for each figure, its range over
    the points in each file and the largest difference from the first file,
    with the point where it occurs.

    Raises
    ------
    CaseError
        When a file is not a sweep, or the grids differ.
    """
    files = [Path(p) for p in paths]
    datasets = [read_netcdf(f) for f in files]
    for f, ds in zip(files, datasets):
        if ds.attrs.get("product") != "sweep":
            raise CaseError(str(f), "(file)", "is not a sweep: sweeps compare with sweeps of the same grid, runs with runs")
    first = datasets[0]
    names = [d for d in first.dims if d in first.coords and d not in ("time", "interface", "cell", "x", "quantile")]
    for f, ds in zip(files[1:], datasets[1:]):
        other = [d for d in ds.dims if d in ds.coords and d not in ("time", "interface", "cell", "x", "quantile")]
        same = other == names and all(np.array_equal(ds[d].values, first[d].values) for d in names)
        if not same:
            what = (f"other values of {', '.join(d for d in names if not np.array_equal(ds[d].values, first[d].values))}"
                    if other == names else f"other dimensions ({', '.join(other)} against {', '.join(names)})")
            raise CaseError(str(f), "(file)", f"has {what} than {files[0].name}: sweeps compare point by point over the same grid")
    tags = _letters(len(files))
    lines = [f"comparing {len(files)} sweeps point by point over {first.attrs.get('sweep_points', '?')} points "
             f"({first.attrs.get('sweep_dimensions', '')})"]
    for tag, f, ds in zip(tags, files, datasets):
        lines.append(f"  {tag}  {f.name}   {ds.attrs.get('title', '')}")
    lines.append("")
    head = f"{'figure per point':<32}  {'units':<6}"
    for i, tag in enumerate(tags):
        head += f"  {tag + ' over the points':>22}" + (f"  {'largest ' + tag + '-' + tags[0]:>14}  at the point" if i else "")
    lines.append(head)
    for label, get, source in SWEEP_FIGURES:
        if any(source not in ds for ds in datasets):
            continue
        values = [get(ds).transpose(*names).values for ds in datasets]
        units = display_units(first[source].attrs.get("units", ""))
        row = f"{label:<32}  {units:<6}"
        for i, v in enumerate(values):
            row += f"  {_num(float(np.nanmin(v))) + ' .. ' + _num(float(np.nanmax(v))):>22}"
            if i:
                diff = v - values[0]
                where = np.unravel_index(int(np.nanargmax(np.abs(diff))), diff.shape)
                point = ", ".join(f"{n} = {first[n].values[k]}" for n, k in zip(names, where))
                row += f"  {_num(float(diff[where]), signed=True):>14}  {point}"
        lines.append(row)
    lines.append("(temperature differences in K; each sweep's own figures, from its file)")
    return "\n".join(lines)


def format_comparison(comparison: Comparison) -> str:
    """The ``layers compare`` table: metrics side by side, differences from the first run."""
    c = comparison
    tags = _letters(len(c.files))
    hours = (c.end - c.start) / np.timedelta64(1, "h")
    lines = [f"comparing {len(c.files)} runs over {format_utc(c.start)} to {format_utc(c.end)} ({hours:g} h)"]
    for tag, path, label in zip(tags, c.files, c.labels):
        lines.append(f"  {tag}  {path.name}   {label}")
    lines.append(f"time:  {c.dataset.attrs['comparison_time_stamps']}")
    if c.same_mesh:
        lines.append("depth: identical meshes")
    else:
        cells = " and ".join(str(int(v)) for v in c.dataset["cells"].values)
        lines.append(
            f"depth: meshes differ ({cells} cells); compared at the surfaces"
            + (f" and at {c.interfaces_compared} interface{'s' * (c.interfaces_compared != 1)}" if c.interfaces_compared else "")
            + "; profiles interpolated"
        )
    if not c.interfaces_compared and len({np.isfinite(r).sum() for r in c.dataset["layer_interface"].values}) > 1:
        lines.append("       (the runs have different numbers of layers: interfaces not compared)")
    lines.append("")
    name_w = max(len(m.name) for m in (*c.metrics, *c.largest_differences))
    units_w = max(6, *(len(display_units(m.units)) for m in (*c.metrics, *c.largest_differences)))
    head = f"{'metric over the common window':<{name_w}}  {'units':<{units_w}}"
    for i, tag in enumerate(tags):
        head += f"  {tag:>10}" + (f"  {tag + '-' + tags[0]:>10}" if i else "")
    lines.append(head)
    for m in c.metrics:
        row = f"{m.name:<{name_w}}  {display_units(m.units):<{units_w}}"
        for i, (v, d) in enumerate(zip(m.values, m.differences)):
            row += f"  {_num(v):>10}" + (f"  {_num(d, signed=True):>10}" if i else "")
        lines.append(row)
        if m.times:  # when each run reached it
            lines.append(f"{'':<{name_w}}  {'':<{units_w}}  at " + ", ".join(
                f"{tag} {t.replace('T', ' ').rstrip('Z')[:16]}" for tag, t in zip(tags, m.times) if t))
    lines.append("")
    lines.append(f"largest difference from {tags[0]} at any compared time")
    for m in c.largest_differences:
        row = f"{m.name:<{name_w}}  {display_units(m.units):<{units_w}}"
        for i, v in enumerate(m.values):
            row += f"  {'':>10}" + (f"  {_num(v):>10}" if i else "")
        lines.append(row)
    lines.append(
        "(temperature differences in K; heat-flow means "
        + ("from each run's step-by-step totals)" if c.exact_heat_flow_means else "from the compared samples, trapezoidal)")
    )
    return "\n".join(lines)


def _num(value: float, signed: bool = False) -> str:
    if not math.isfinite(value):
        return "-"
    if value == 0:
        return "0"
    text = f"{value:+.4g}" if signed else f"{value:.4g}"
    return text


def check_comparison_output(out: str | os.PathLike) -> None:
    """Refuse a ``compare -o`` target before any work: unknown kind or existing file."""
    suffix = Path(out).suffix.lower()
    if suffix not in (*IMAGE_SUFFIXES, ".nc"):
        raise CaseError(str(out), "-o", "use a .png, .svg or .pdf file for a plot, or .nc for the combined Dataset")
    refuse_existing(out, (*IMAGE_SUFFIXES, ".nc"))


def write_comparison(comparison: Comparison, out: str | os.PathLike) -> Path:
    """Write the combined Dataset (.nc) or the overlay figure (.png, .svg, .pdf), never over a file."""
    check_comparison_output(out)
    if Path(out).suffix.lower() == ".nc":
        return write_output(comparison.dataset, out)
    labels = [f"{t}: {lab}" for t, lab in zip(_letters(len(comparison.files)), comparison.labels)]
    fig = plot_comparison(comparison.dataset, labels)
    try:
        return save_figure(fig, out, {"title": str(comparison.dataset.attrs.get("title", "")), "caution": CAUTION})
    except FileExistsError:
        raise exists_error(out) from None
