"""Sweeps: one run per point of the ``[[sweep]]`` grid, as one labelled result.

Each point is the case file with the swept keys set (:func:`layers.variation.with_values`)
and read again by the one case reader, so every value is checked as if the
user had written it.  Points whose case is linear (what ``scheme = "auto"``
runs exactly) and that share their number of cells and time plan are marched
together by :class:`layers.exact.ModalBatch`; the others run one by one
through the stepping march.  The work is cut into jobs of at most
:data:`MAX_BATCH` points, decided before anything runs, so a run on a
``dask.distributed`` cluster does exactly the same arithmetic as the serial
one and gives the same numbers bit for bit.

The result has the sweep dimensions in front of every run variable that
differs between points (a variable the points share, such as the outside
air, is kept once), the per-point totals and checks as variables on the
sweep dimensions, and each swept value as a coordinate with its units.
"""

from __future__ import annotations

import itertools
import json
import math
import warnings
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import xarray as xr

from layers.about import CAUTION
from layers.case import MAX_RECORD_BYTES, Case, parse_case, read_toml, reusing_series
from layers.catalogue import SUMMARY_PREFIX, headline_values
from layers.errors import CaseError
from layers.formatting import format_utc
from layers.march import BadConductivity, UnphysicalState
from layers.results import HEAT_FLOW_UNITS, FieldExtremes, cf_encoding, utc_now
from layers.variation import SweepDim, with_values

#: Most points marched together (and the size of a job on a cluster): fixed, so
#: that serial and distributed sweeps batch, and so round, identically.
MAX_BATCH = 256
#: Keys of a case whose change alters what drives the boundaries (points that
#: agree on all of them share one evaluation of the forcing).
BOUNDARY_KEYS = ("inside", "outside", "series", "site", "time", "geometry")


@dataclass(frozen=True)
class Point:
    """One point of the grid: its index along each dimension and the keys it sets."""

    index: tuple[int, ...]
    settings: dict[str, Any]
    label: str = ""   # how messages name the point

    def describe(self, dims: tuple[SweepDim, ...] = ()) -> str:
        return self.label or ", ".join(f"{d.name} = {d.values[i]}" for d, i in zip(dims, self.index))


@dataclass(frozen=True)
class Job:
    """Points run together: ``exact`` (one modal batch) or ``step`` (marched together
    by the stepping path: points that share their boundaries and time plan)."""

    kind: str
    points: tuple[int, ...]
    shared: tuple[tuple[int, ...], ...] = ()   # positions in ``points`` that share their boundaries


def points(case: Case) -> list[Point]:
    """Every point of the case's sweep grid, the last dimension varying fastest."""
    dims = case.sweep
    grid = itertools.product(*(range(len(d.values)) for d in dims))
    out = []
    for index in grid:
        label = ", ".join(f"{d.name} = {d.values[i]}" for d, i in zip(dims, index))
        out.append(Point(index, {d.key: d.values[i] for d, i in zip(dims, index)}, label))
    return out


def _source(case: Case) -> dict:
    if not case.text:
        raise CaseError(case.path, "sweep", "a sweep needs the case text (load the case from a file or from TOML text)")
    return read_toml(case.text, case.path)


def variant(case: Case, source: dict, point: Point, where: str = "sweep") -> Case:
    """The case of one point (``source``: the case data with the point's values),
    read by the case reader; an error names the point."""
    try:
        v = parse_case(source, file=case.path, text=case.text, base_dir=case.base_dir)
    except CaseError as exc:
        at = point.describe() if where == "uncertainty" else f"the {where} point {point.describe()}"
        raise CaseError(case.path, exc.key, f"at {at}: {exc.reason}") from None
    v.record_paths = case.record_paths
    return v


def _boundary_signature(data: dict) -> str:
    return json.dumps({k: data.get(k) for k in BOUNDARY_KEYS}, sort_keys=True, default=str)


def plan_jobs(case: Case, cases: list[Case], sources: list[dict], labels: list[str] | None = None) -> list[Job]:
    """Cut the points into jobs: linear points with the same time plan in modal
    batches of up to :data:`MAX_BATCH`, the others one by one
    (``sources``: each point's case data, to tell which share their boundaries;
    ``labels``: how an error names each point)."""
    from layers.simulation import scheme_for, stepping_key, system_for

    groups: dict[tuple, list[int]] = {}
    stepping: dict[tuple, list[int]] = {}
    alone: list[int] = []
    for i, v in enumerate(cases):
        mesh = v.mesh()
        system = system_for(v, mesh)
        v.__dict__["_system"] = system  # the serial run reuses it
        try:
            scheme = scheme_for(v, system)
            key = stepping_key(v, system) if scheme != "exact" else None
        except CaseError as exc:
            raise _at_point(exc, labels[i] if labels else f"point {i + 1}") from None
        if scheme == "exact":
            plan = v.time
            key = (plan.step, plan.n_steps, plan.output_stride, str(plan.start), str(plan.initial), plan.period)
            groups.setdefault(key, []).append(i)
        elif key is None:
            alone.append(i)
        else:  # marched together only with points whose boundaries are the same
            stepping.setdefault(key + (_boundary_signature(sources[i]),), []).append(i)
    jobs = []
    for members in groups.values():
        for j in range(0, len(members), MAX_BATCH):
            part = members[j:j + MAX_BATCH]
            shared: dict[str, list[int]] = {}
            for position, i in enumerate(part):
                shared.setdefault(_boundary_signature(sources[i]), []).append(position)
            jobs.append(Job("exact", tuple(part), tuple(tuple(v) for v in shared.values())))
    for members in stepping.values():
        jobs += [Job("step", tuple(members[j:j + MAX_BATCH])) for j in range(0, len(members), MAX_BATCH)]
    jobs += [Job("step", (i,)) for i in alone]
    return sorted(jobs, key=lambda job: job.points[0])


def _at_point(exc: CaseError, label: str) -> CaseError:
    """A point's error, saying which point."""
    return CaseError(exc.file, exc.key, f"at the point {label}: {exc.reason}")


def run_job(text: str, file: str, base_dir: str | None, job: Job, settings: list[dict], record_paths: bool = False,
            cases: list[Case] | None = None, labels: list[str] | None = None) -> list[dict]:
    """Run one job and return each point's run record (with the texts of the
    warnings its run gave, ``record["warnings"]``).  A cluster worker calls
    this with the case text and the points' settings (all picklable) and reads
    the points' cases itself; the serial run passes the ``cases`` it has read.
    An error names its point (``labels``)."""
    from layers.simulation import conductivity_error, run_march, run_record, unphysical_error

    labels = labels or [f"point {i + 1}" for i in range(len(settings))]
    if cases is None:
        data = read_toml(text, file)
        with reusing_series():
            cases = [parse_case(with_values(data, s), file=file, text=text, base_dir=Path(base_dir) if base_dir else None) for s in settings]
        for v in cases:
            v.record_paths = record_paths
    try:
        if job.kind == "step" and len(cases) > 1:
            return _run_stepping(cases)
        if job.kind == "step":
            v = cases[0]
            mesh = v.mesh()
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                res, cycles, system = run_march(v, mesh)
                record = _slim(run_record(v, mesh, system, res, cycles), v)
            record["warnings"] = _texts(caught)
            return [record]
        return _run_exact(cases, [list(g) for g in job.shared])
    except _MemberError as exc:
        if isinstance(exc.cause, CaseError):
            raise _at_point(exc.cause, labels[exc.member]) from None
        if isinstance(exc.cause, BadConductivity):
            raise _at_point(conductivity_error(cases[exc.member], exc.cause), labels[exc.member]) from None
        raise _at_point(unphysical_error(cases[exc.member], exc.system, exc.cause), labels[exc.member]) from None
    except CaseError as exc:
        raise _at_point(exc, labels[0] if len(labels) == 1 else "one of " + ", ".join(labels[:3]) + ("..." if len(labels) > 3 else "")) from None


class _MemberError(Exception):
    """A member of a batch left the physical range or its k(T) law, or its case
    was refused (a start that cannot be made)."""

    def __init__(self, member: int, system, cause: UnphysicalState | BadConductivity | CaseError) -> None:
        super().__init__(str(cause))
        self.member, self.system, self.cause = member, system, cause


def _texts(caught) -> list[str]:
    """The distinct texts of caught warnings, in order."""
    out: list[str] = []
    for w in caught:
        text = str(w.message)
        if text not in out and not issubclass(w.category, DeprecationWarning):
            out.append(text)
    return out


def _run_exact(cases: list[Case], groups: list[list[int]]) -> list[dict]:
    """March linear points together (:class:`layers.exact.ModalBatch`); ``groups``
    lists the points that share their boundaries."""
    from layers.exact import ModalBatch, ModalSystem
    from layers.simulation import initial_state, run_record, system_for

    meshes = [v.mesh() for v in cases]
    systems = [v.__dict__.pop("_system", None) or system_for(v, m) for v, m in zip(cases, meshes)]
    plan = cases[0].time
    batch = ModalBatch([ModalSystem(s) for s in systems], plan.step, groups=groups)
    cycles = 0
    try:
        if plan.initial == "periodic":
            initial = batch.periodic_start(int(round(plan.period / plan.step)))
            cycles = 1
        elif plan.initial == "steady":  # every member's steady state in one pass (exact.ModalBatch.steady_start)
            initial = batch.steady_start()
        else:
            initial = batch.padded([initial_state(v, m, s, "exact")[0] for v, m, s in zip(cases, meshes, systems)])
        res = batch.run(initial, plan.n_steps, output_every=plan.output_stride, keep_fields=plan.keep_temperature is True)
    except UnphysicalState as exc:
        member = getattr(exc, "member", 0)
        raise _MemberError(member, systems[member], exc) from None
    records = []
    for i, (v, mesh, system) in enumerate(zip(cases, meshes, systems)):
        one = res.member(i, system, plan.step)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            record = _slim(run_record(v, mesh, system, one, cycles), v, mesh)
        record["warnings"] = _texts(caught)
        records.append(record)
    return records


def _run_stepping(cases: list[Case]) -> list[dict]:
    """March points that share their boundaries and time plan together
    (:func:`layers.simulation.march_together`, one tridiagonal system).  Each
    point's start is made on its own, so that its error names it and its
    warnings are its own; the iteration's convergence warning is each point's."""
    from layers.march import warn_unconverged
    from layers.simulation import initial_state, march_together, run_record, scheme_for, system_for

    meshes = [v.mesh() for v in cases]
    systems = [v.__dict__.pop("_system", None) or system_for(v, m) for v, m in zip(cases, meshes)]
    starts, own = [], []
    for member, (v, mesh, system) in enumerate(zip(cases, meshes, systems)):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                starts.append(initial_state(v, mesh, system, scheme_for(v, system)))
            except (UnphysicalState, BadConductivity, CaseError) as exc:
                raise _MemberError(member, system, exc) from None
        own.append(_texts(caught))
    # the points' cell fields, unless kept, only as the extremes the checks need (a
    # batch would otherwise hold every point's whole field at once)
    sinks = None if cases[0].time.keep_temperature is True else [FieldExtremes(mesh) for mesh in meshes]
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            results, cycles = march_together(cases, meshes, systems, starts, sinks)
        except (UnphysicalState, BadConductivity) as exc:
            member = getattr(exc, "member", 0)
            raise _MemberError(member, systems[member], exc) from None
        except CaseError as exc:  # a member's auto film beyond its correlations: ``member`` names it
            if not hasattr(exc, "member"):
                raise
            raise _MemberError(exc.member, systems[exc.member], exc) from None
    shared = _texts(caught)  # said once for the batch: each point would say them alone
    records = []
    for m, (v, mesh, system, res, n, texts) in enumerate(zip(cases, meshes, systems, results, cycles, own)):
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            warn_unconverged(res.unconverged_steps, v.time.n_steps)
            record = _slim(run_record(v, mesh, system, res, n, field_sink=sinks[m] if sinks else None), v, mesh)
        texts = texts + [t for t in shared if t not in texts]
        record["warnings"] = texts + [t for t in _texts(caught) if t not in texts]
        records.append(record)
    return records


def _slim(record, v: Case, mesh=None) -> dict:
    """A run record as the sweep result takes it (with the point's mesh faces)."""
    mesh = mesh or v.mesh()
    if v.time.keep_temperature is not True:  # a sweep keeps the cell field only when asked
        record.fields["temperature"] = None
    return {"fields": record.fields, "extra": record.extra, "attrs": record.attrs,
            "x": mesh.x, "layer_interface": mesh.interfaces}


def _check_size(case: Case, n_points: int, cases: list[Case]) -> None:
    """Refuse a sweep whose kept results would not fit in memory, before any work."""
    plan = case.time
    records = plan.n_steps // max(plan.output_stride, 1) + 1
    per_point = 12 + len(case.layers) + 1 + (max(v.mesh().n for v in cases) if plan.keep_temperature else 0)
    size = n_points * records * per_point * 8
    if size > MAX_RECORD_BYTES:
        raise CaseError(
            case.path, "time.output_every",
            f"the sweep keeps {records:.3g} records at each of {n_points} points, about {size / 2**30:.3g} GiB "
            f"(the limit is {MAX_RECORD_BYTES / 2**30:g} GiB); keep fewer records with a longer output_every, or sweep fewer points",
        )


def sweep(
    case: Case,
    *,
    client: Any = None,
    progress: Callable[[int, int], None] | None = None,
) -> xr.Dataset:
    """Run every point of the case's ``[[sweep]]`` grid.

    Parameters
    ----------
    case : Case
        A case with ``[[sweep]]`` tables.
    client : dask.distributed.Client, optional
        Run the jobs on this cluster; the numbers are the serial run's exactly.
    progress : callable, optional
        ``progress(points_done, points_total)``.

    Returns
    -------
    xarray.Dataset
        The run variables with the sweep dimensions in front (see the module
        docstring), ``product = "sweep"``.
    """
    if not case.sweep:
        raise CaseError(case.path, "sweep", "the case has no [[sweep]] table")
    grid = points(case)
    cases, records = run_points(case, grid, client=client, progress=progress)
    return assemble(case, grid, cases, records)


#: ``layers check`` reads every point of a sweep up to this many, else its corners.
CHECK_ALL_POINTS = 2000


def check_points(case: Case, grid: list[Point], where: str = "sweep") -> str:
    """Read the case of every point (or, for a large grid, of each corner of it)
    and plan the jobs, so that ``layers check`` refuses what ``layers sweep``
    would; returns what was checked, in words."""
    _check_size(case, len(grid), [case])
    if len(grid) > CHECK_ALL_POINTS:
        corners = {tuple(0 if c == "0" else len(d.values) - 1 for c, d in zip(bits, case.sweep))
                   for bits in itertools.product("01", repeat=len(case.sweep))}
        chosen = [p for p in grid if p.index in corners]
        said = f"the {len(chosen)} corner points of {len(grid)} read"
    else:
        chosen = grid
        said = f"all {len(grid)} points read"
    sources, cases = _read_points(case, chosen, len(grid), where)
    plan_jobs(case, cases, sources, [p.describe() for p in chosen])
    return said


def _read_points(case: Case, chosen: list[Point], n_points: int, where: str) -> tuple[list[dict], list[Case]]:
    """Each chosen point's case data and case, read by the case reader (the series
    read once), with the sweep's size and each point's time plan checked (shared
    by ``check`` and the run)."""
    data = _source(case)
    sources = [with_values(data, p.settings) for p in chosen]
    with reusing_series():
        cases = [variant(case, src, p, where) for src, p in zip(sources, chosen)]
    _check_size(case, n_points, cases)
    for v in cases:
        _check_plan(case, v)
    return sources, cases


def run_points(
    case: Case, grid: list[Point], *, client: Any = None, progress: Callable[[int, int], None] | None = None, where: str = "sweep"
) -> tuple[list[Case], list[dict]]:
    """Run the case at each point (its settings written into the case file):
    each point's case and run record, in the order of ``grid``.  Shared by
    sweeps and uncertainty sampling."""
    _check_size(case, len(grid), [case])  # before reading every point: a grid far too large is refused at once
    sources, cases = _read_points(case, grid, len(grid), where)
    labels = [p.describe() for p in grid]
    jobs = plan_jobs(case, cases, sources, labels)
    settings = [[grid[i].settings for i in job.points] for job in jobs]
    records: list[dict | None] = [None] * len(grid)
    # absolute: a worker on another machine resolves the series file from it, not from its own folder
    base = str(Path(case.base_dir).resolve()) if case.base_dir is not None else str(Path(".").resolve())
    done = 0
    if client is None:
        results = (run_job(case.text, case.path, base, job, s, case.record_paths, [cases[i] for i in job.points],
                           [labels[i] for i in job.points]) for job, s in zip(jobs, settings))
    else:
        futures = client.map(run_job, [case.text] * len(jobs), [case.path] * len(jobs), [base] * len(jobs), jobs, settings,
                             [case.record_paths] * len(jobs), [None] * len(jobs), [[labels[i] for i in job.points] for job in jobs],
                             pure=False)
        results = (future.result() for future in futures)
    for job, result in zip(jobs, results):
        for i, record in zip(job.points, result):
            records[i] = record
        done += len(job.points)
        if progress is not None:
            progress(done, len(grid))
    # each warning once, with how many points gave it and the first of them
    seen: dict[str, list[int]] = {}
    for i, record in enumerate(records):
        for text in record.get("warnings", ()):
            seen.setdefault(text, []).append(i)
    for text, where_ in seen.items():
        warnings.warn(f"{text} [at {len(where_)} of {len(grid)} {where} points, the first {labels[where_[0]]}]", UserWarning, stacklevel=3)
    return cases, records


def _check_plan(case: Case, v: Case) -> None:
    """Every point keeps the same output times (one time axis for the result)."""
    a, b = case.time, v.time
    if (a.start, a.n_steps * a.step, a.output_every) != (b.start, b.n_steps * b.step, b.output_every):
        raise CaseError(case.path, "sweep", "every point must keep the same output times; sweep time keys that keep them (scheme, step dividing output_every)")


def assemble(case: Case, grid: list[Point], cases: list[Case], records: list[dict]) -> xr.Dataset:
    """One Dataset from the points' run records (see the module docstring)."""
    from layers.simulation import RunRecord, record_dataset

    dims = case.sweep
    shape = tuple(len(d.values) for d in dims)
    names = tuple(d.name for d in dims)
    first = records[0]
    # the variables of a run come from to_dataset (one place for their names and
    # metadata); points may differ in which series they have (e.g. a sol-air
    # temperature only where there is sun), so one template per kind of point
    templates: list[xr.Dataset] = []
    kinds: set[tuple] = set()
    for v, r in zip(cases, records):
        kind = tuple(sorted(r["extra"]))
        if kind not in kinds:
            kinds.add(kind)
            templates.append(record_dataset(v, v.mesh(), RunRecord(r["fields"], r["extra"], r["attrs"])))
    template = templates[0]
    same_mesh = all(np.array_equal(r["x"], first["x"]) for r in records)

    def stacked(get: Callable[[dict], np.ndarray]) -> np.ndarray:
        values = [np.asarray(get(r), dtype=float) for r in records]
        if len({v.shape for v in values}) > 1:  # e.g. meshes of different sizes: pad with NaN
            width = max(v.shape[-1] for v in values)
            values = [np.concatenate([v, np.full(v.shape[:-1] + (width - v.shape[-1],), math.nan)], axis=-1) for v in values]
        return np.stack(values).reshape(shape + values[0].shape)

    field_of = ("interface_temperature", "surface_temperature_inside", "surface_temperature_outside", "heat_flow_inside",
                "heat_flow_outside", "stored_energy", "temperature")
    times = template.sizes["time"]

    def extra(r: dict, key: str) -> np.ndarray:
        if key not in r["extra"]:
            return np.full(times, math.nan)  # a point without this series
        value = r["extra"][key]
        return value[2] if isinstance(value, tuple) else value

    ds = xr.Dataset()
    order = list(dict.fromkeys(name for t in templates for name in t.data_vars))
    for name in order:
        var = next(t[name] for t in templates if name in t.data_vars)
        if name == "x_bounds":
            continue
        if name in field_of:
            get = (lambda r, key=name: r["fields"][key])
        elif any(name in r["extra"] for r in records):
            get = (lambda r, key=name: extra(r, key))
        else:
            continue
        values = stacked(get)
        flat = values.reshape((-1,) + values.shape[len(shape):])
        vdims = ("time", "cell") if name == "temperature" and not same_mesh else var.dims
        if name != "temperature" and np.array_equal(flat, np.broadcast_to(flat[:1], flat.shape), equal_nan=True):
            ds[name] = (var.dims, flat[0], dict(var.attrs))          # the same at every point: kept once
        else:
            ds[name] = (names + tuple(vdims), values, dict(var.attrs))
    # per-point totals and checks
    flow_units = HEAT_FLOW_UNITS[case.geometry]
    energy = template.attrs["heat_total_units"]
    scalar = {
        "energy_balance_error": ("1", "relative error of the run's energy balance", lambda r: r["fields"]["energy_balance_error"]),
        "heat_in_inside_total": (energy, "heat into the construction through the inside surface over the run", lambda r: r["fields"]["heat_in_total"]),
        "heat_out_outside_total": (energy, "heat out through the outside surface over the run", lambda r: r["fields"]["heat_out_total"]),
    }
    for name, (units, long_name, get) in scalar.items():
        ds[name] = (names, stacked(get), {"units": units, "long_name": long_name})
    duration = case.time.n_steps * case.time.step
    if duration > 0:
        ds["heat_flow_inside_mean"] = (names, ds["heat_in_inside_total"].values / duration,
                                       {"units": flow_units, "long_name": "mean heat flow through the inside surface over the run, positive outward"})
    for name in ("steady_resistance_total", "time_to_freezing_h", "freeze_time_h", "nonlinear_unconverged_steps"):
        if name in first["attrs"]:
            units = {"steady_resistance_total": "m2 K W-1", "time_to_freezing_h": "h", "freeze_time_h": "h"}.get(name, "1")
            ds[name] = (names, stacked(lambda r, key=name: r["attrs"].get(key, math.nan)), {"units": units, "long_name": name.replace("_", " ")})
    schemes = sorted({r["attrs"]["scheme"] for r in records})
    if len(schemes) > 1:
        ds["scheme"] = (names, np.array([r["attrs"]["scheme"] for r in records], dtype=object).reshape(shape), {"long_name": "scheme each point ran with"})
    over = [f"{p.describe()}: {r['attrs']['service_temperature_exceeded']}" for p, r in zip(grid, records) if "service_temperature_exceeded" in r["attrs"]]
    # coordinates: time, interface, the swept values
    ds = ds.assign_coords(time=template["time"], interface=template["interface"])
    faces = stacked(lambda r: r["layer_interface"])
    flat = faces.reshape(-1, faces.shape[-1])
    if np.array_equal(flat, np.broadcast_to(flat[:1], flat.shape)):
        ds = ds.assign_coords(layer_interface=template["layer_interface"])
    else:
        ds["layer_interface"] = (names + ("interface",), faces, dict(template["layer_interface"].attrs))
    if "temperature" in ds and same_mesh:  # one mesh: the run's own cell coordinates
        ds = ds.assign_coords({name: template[name] for name in ("x", "layer", "material") + (("radius",) if "radius" in template.coords else ())})
        ds["x_bounds"] = template["x_bounds"]
    elif "temperature" in ds:
        ds["x"] = (names + ("cell",), stacked(lambda r: r["x"]), dict(template["x"].attrs, long_name="distance of each cell centre from the inside surface (NaN: no such cell at this point)"))
    for d in dims:
        attrs = {"long_name": f"swept {d.key}"}
        if d.units:
            attrs["units"] = d.units
        elif d.coordinate.dtype != object:
            attrs["comment"] = "bare numbers as written in the case file (SI; temperatures in degC)"
        ds = ds.assign_coords({d.name: (d.name, d.coordinate, attrs)})
    attrs = {k: v for k, v in template.attrs.items() if not k.startswith(SUMMARY_PREFIX)}
    for k in ("energy_balance_error", "heat_in_inside_total", "heat_out_outside_total", "steady_resistance_total", "scheme",
              "smoothed_steps", "cells", "service_temperature_exceeded", "time_to_freezing_h", "freeze_time_h", "heat_from_contents_total",
              "nonlinear_unconverged_steps", "nonlinear_max_iterations", "scheme_requested"):
        attrs.pop(k, None)
    attrs.update({
        "product": "sweep",
        "history": f"{utc_now()} layers sweep {Path(case.path).name}",
        "sweep_dimensions": "; ".join(f"{d.name} = {d.key} ({len(d.values)} values)" for d in dims),
        "sweep_points": len(grid),
        "scheme": schemes[0] if len(schemes) == 1 else "per point (variable scheme)",
        "caution": CAUTION,
    })
    said = list(dict.fromkeys(text for r in records for text in r.get("warnings", ())))
    if said:
        attrs["point_warnings"] = " | ".join(said[:10]) + (f" | and {len(said) - 10} more" if len(said) > 10 else "")
    if over:
        attrs["service_temperature_exceeded"] = "; ".join(over[:20]) + (f"; and {len(over) - 20} more points" if len(over) > 20 else "")
    ds.attrs = attrs
    # headline attributes for `layers list`: the extremes over every point
    seconds = (ds["time"].values - ds["time"].values[0]) / np.timedelta64(1, "s")
    head = headline_values(
        seconds=seconds.astype(float), start=format_utc(ds["time"].values[0]), end=format_utc(ds["time"].values[-1]),
        outside=ds["surface_temperature_outside"].values, inside=ds["surface_temperature_inside"].values,
        flow=None, flow_units=flow_units, heat_in_total=None,
    )
    if "heat_flow_inside_mean" in ds:
        head[f"{SUMMARY_PREFIX}heat_flow_inside_mean"] = float(np.mean(ds["heat_flow_inside_mean"].values))
    ds.attrs.update(head)
    cf_encoding(ds)
    ds["time"].encoding.update(template["time"].encoding)
    return ds
