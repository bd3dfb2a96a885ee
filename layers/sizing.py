"""Insulation sizing: candidate thicknesses x criteria.

Steady criteria (touch limit, dew point, heat-loss budget, the materials'
maximum service temperatures) use the one steady solver of
:mod:`layers.steady`, vectorised over the candidates, at the case's design
conditions (``[sizing] design_time``, else the run's start; without sun and
sky).  The freeze-time criterion runs the march (:mod:`layers.march`, with
the contents) once per candidate.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from layers.about import CAUTION, __version__
from layers.case import Case
from layers.errors import CaseError
from layers.results import HEAT_FLOW_UNITS, Column, Table, cf_encoding, utc_now
from layers.steady import design_time, steady_state

if TYPE_CHECKING:
    import xarray as xr

CAUTION_TOUCH = (
    "Touch limits depend on the contact time and the surface material (ISO 13732-1:2006; "
    "ASTM C1055). Typical burn thresholds, from memory: about 65-70 degC for 1 s on bare metal, "
    "51 degC for 1 min, 48 degC for 10 min and 43 degC for 8 h and longer on any material."
)
CAUTION_DEW = (
    "A cold line also needs a continuous vapour barrier: a warm outer surface does not stop "
    "vapour from condensing inside the insulation."
)
CAUTION_FREEZE = (
    "Insulation alone only delays freezing of stagnant water; it cannot prevent it. Where freezing "
    "must be prevented, keep the water flowing or add heat tracing."
)


def cautions(case: Case) -> list[str]:
    """The cautions that apply to a sizing case, general one last."""
    s = case.sizing
    out = []
    if s.max_surface_temperature is not None:
        out.append(CAUTION_TOUCH)
    if s.dew_point_margin is not None:
        out.append(CAUTION_DEW)
    if s.min_freeze_time is not None:
        out.append(CAUTION_FREEZE)
    out.append(CAUTION)
    return out


def with_thickness(case: Case, layer: int, thickness: float) -> Case:
    """A copy of ``case`` with layer ``layer`` (1-based) of the given thickness [m]."""
    layers = list(case.layers)
    layers[layer - 1] = dataclasses.replace(layers[layer - 1], thickness=float(thickness))
    return dataclasses.replace(case, layers=tuple(layers))


class FreezeTimes(NamedTuple):
    """Freeze times of one candidate [s] (NaN: not within the run)."""

    to_freezing: float       # until the contents first reach 0 degC
    to_ice_fraction: float   # until max_ice_fraction of the water is ice


def freeze_times(case: Case, thickness: float, progress: Callable[[int, int], None] | None = None) -> FreezeTimes:
    """Time to 0 degC and time to ``max_ice_fraction`` [s] for one candidate (NaN: not within the run)."""
    from layers.simulation import run_march

    trial = with_thickness(case, case.sizing.layer, thickness)
    result, _, _ = run_march(trial, trial.mesh(), progress)
    return FreezeTimes(result.time_to_freezing, result.time_to_ice_fraction)


def size(case: Case, progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Evaluate every criterion of ``[sizing]`` for every candidate thickness.

    Returns
    -------
    xarray.Dataset
        Dimension ``thickness`` [m]; variables ``surface_temperature_outside``,
        ``heat_flow``, per criterion ``passes_<criterion>`` and
        ``margin_<criterion>``; ``freeze_time`` and ``time_to_freezing`` [h]
        where asked; attribute ``recommended_thickness`` [m] (NaN if none passes).
    """
    return sizing_table(case, progress).to_dataset()


def sizing_table(case: Case, progress: Callable[[int, int], None] | None = None) -> Table:
    """:func:`size` as a :class:`layers.results.Table` (what ``layers size``
    prints and archives without importing xarray)."""
    s = case.sizing
    if s is None:
        raise CaseError(case.path, "sizing", "the case has no [sizing] table")
    if case.uncertainty is not None and s.min_freeze_time is not None:
        raise CaseError(
            case.path, "uncertainty",
            "sampling a freeze-time criterion is not supported yet (each sample would need a transient run per candidate); "
            "sample the steady criteria, or run the freeze sizing at the worst plausible values",
        )
    if case.uncertainty is not None:
        sized = f"layers.{s.listed}.thickness"
        if any(v.key == sized for v in case.uncertainty.vary):
            raise CaseError(
                case.path, f"uncertainty.vary.{sized}",
                "is the thickness being sized (each candidate replaces it); give the tolerance of the other inputs",
            )
    thick = np.asarray(s.thicknesses, dtype=float)
    data, attrs, passes = _evaluate(case, thick, progress)
    for name, ok in passes.items():
        data[f"passes_{name}"] = ("thickness", ok.astype(bool), {"long_name": f"candidate meets {name.replace('_', ' ')}"})
    all_ok = np.logical_and.reduce(list(passes.values())) if passes else np.zeros(thick.size, bool)
    data["passes_all"] = ("thickness", all_ok, {"long_name": "candidate meets every criterion"})
    recommended = float(thick[np.argmax(all_ok)]) if all_ok.any() else math.nan
    attrs["recommended_thickness_units"] = "m"
    if case.uncertainty is not None:
        from layers.uncertainty import size_probabilities

        probabilities, extra = size_probabilities(case, lambda sample: _evaluate(sample, thick, None)[2], thick, progress=progress)
        n = case.uncertainty.samples
        for name, p in probabilities.items():
            key = "probability_passes" if name == "all" else f"probability_passes_{name}"
            what = "every criterion" if name == "all" else name.replace("_", " ")
            data[key] = ("thickness", p, {"units": "1", "long_name": f"share of the {n} uncertainty samples in which the candidate meets {what}"})
        attrs.update(extra)
    ds = Table(
        "thickness",
        Column(thick, {"units": "m", "long_name": f"thickness of layer {s.listed} ({case.layers[s.layer - 1].name})"}),
        data,
        {},
    )
    ds.attrs = {
        "Conventions": "CF-1.10",
        "title": case.title,
        "product": "sizing",
        "case": case.text,
        "case_sha256": case.sha256,
        "software_version": __version__,
        "created": utc_now(),
        "geometry": case.geometry,
        "sized_layer": s.listed,
        "recommended_thickness": recommended,
        "design_conditions": _design_conditions(case),
        "caution": " ".join(cautions(case)),
        **attrs,
    }
    return cf_encoding(ds, f"layers size {case.path}")


def _design_conditions(case: Case) -> str:
    """Which boundary values the steady criteria use, in words: a moment only
    where some boundary value changes with time."""
    from layers.series import Forcing

    varying = [f"{spec.side}.{name}" for spec in (case.inside, case.outside) for name, forcing in spec.values.items()
               if isinstance(forcing, Forcing) and forcing.value is None]
    if not varying:
        return "the case's constant boundary values"
    when = np.datetime_as_string(design_time(case), unit="m") + "Z"
    return (f"boundary values at {when}" + (" ([sizing] design_time)" if case.sizing.design_time is not None else " (the run's start)")
            + f" ({', '.join(varying)} vary with time)")


def _evaluate(case: Case, thick: np.ndarray, progress) -> tuple[dict, dict, dict[str, np.ndarray]]:
    """Every criterion of ``[sizing]`` at each thickness: the variables, the
    attributes and each criterion's pass/fail (shared by the nominal sizing
    and each uncertainty sample)."""
    s = case.sizing
    flow_units = HEAT_FLOW_UNITS[case.geometry]
    data: dict[str, tuple] = {}
    attrs: dict[str, object] = {}
    passes: dict[str, np.ndarray] = {}
    # The steady block is always written (a freeze-only sizing too: contents
    # held at their initial temperature), so every sizing file has the
    # surface temperature and heat flow of each candidate.
    st = steady_state(case, s.layer, thick)
    if case.inside.kind == "contents":
        attrs["steady_conditions"] = "contents held at their initial_temperature (the moment the flow stops)"
    ts = st.surface_temperature_outside
    q = st.heat_flow
    data["surface_temperature_outside"] = ("thickness", ts, {"units": "degC", "long_name": "outside surface temperature at steady design conditions"})
    data["heat_flow"] = ("thickness", q, {"units": flow_units, "long_name": "steady heat flow from inside to outside at design conditions"})
    data["surface_temperature_inside"] = ("thickness", st.surface_temperature_inside, {"units": "degC", "long_name": "inside surface temperature at steady design conditions"})
    for side, film in (("inside", st.film_inside), ("outside", st.film_outside)):
        if np.isfinite(film).any():  # the film coefficient each candidate was sized with
            data[f"film_coefficient_{side}"] = ("thickness", film, {"units": "W m-2 K-1", "long_name": f"{side} surface film coefficient at steady design conditions (convection plus radiation)"})
    if s.max_surface_temperature is not None:
        margin = s.max_surface_temperature - ts
        passes["max_surface_temperature"] = margin >= 0
        data["margin_max_surface_temperature"] = ("thickness", margin, {"units": "K", "long_name": "touch limit minus outside surface temperature"})
        attrs["max_surface_temperature"] = s.max_surface_temperature
        attrs["max_surface_temperature_units"] = "degC"
    if s.dew_point_margin is not None:
        from layers.exchange import in_seconds
        from layers.psychrometrics import dew_point

        at = case.seconds(np.array([design_time(case)]))
        t_air = float(in_seconds(case, case.outside.air_temperature)(at)[0])
        rh = float(in_seconds(case, case.outside.relative_humidity)(at)[0])
        td = float(dew_point(t_air, rh))
        margin = ts - (td + s.dew_point_margin)
        passes["dew_point_margin"] = margin >= 0
        data["margin_dew_point_margin"] = ("thickness", margin, {"units": "K", "long_name": "outside surface temperature minus (dew point + margin)"})
        attrs["dew_point"] = td
        attrs["dew_point_units"] = "degC"
        attrs["dew_point_margin"] = s.dew_point_margin
        attrs["dew_point_margin_units"] = "K"
        attrs["dew_point_source"] = "ISO 13788:2012 saturation vapour pressure (over water, over ice below 0 degC)"
    if s.max_heat_loss is not None:
        margin = s.max_heat_loss - np.abs(q)
        passes["max_heat_loss"] = margin >= 0
        data["margin_max_heat_loss"] = ("thickness", margin, {"units": flow_units, "long_name": "heat-loss budget minus the magnitude of the heat flow"})
        attrs["max_heat_loss"] = s.max_heat_loss
        attrs["max_heat_loss_units"] = flow_units
    limited = [(j, spec) for j, spec in enumerate(case.layers) if not spec.is_gap and spec.material.max_temperature is not None]
    if limited:
        # the hottest face of each layer with a service limit, against that limit
        # (on by default: a candidate that overheats its insulation does not pass)
        over = np.stack([st.face_temperature[:, j, :].max(axis=1) - spec.material.max_temperature for j, spec in limited])
        worst = over.max(axis=0)
        passes["service_temperature"] = worst <= 0
        data["margin_service_temperature"] = ("thickness", -worst, {"units": "K", "long_name": "smallest margin of a layer's hottest face below its material's maximum service temperature"})
        attrs["service_temperature_limits"] = "; ".join(
            f"layer {case.listed(j + 1)} {spec.material.name} {spec.material.max_temperature:g} degC" for j, spec in limited
        )
    if s.min_freeze_time is not None:
        if case.time.duration < s.min_freeze_time:
            raise CaseError(case.path, "time.duration", "must be at least sizing.min_freeze_time to test the freeze time")
        t0 = np.empty(thick.size)
        tf = np.empty(thick.size)
        total = thick.size * case.time.n_steps
        for i, d in enumerate(thick):
            cb = (lambda done, _n, i=i: progress(i * case.time.n_steps + done, total)) if progress else None
            t0[i], tf[i] = freeze_times(case, d, cb)
        hours_f = tf / 3600.0
        data["freeze_time"] = ("thickness", hours_f, {"units": "h", "long_name": f"time until {s.max_ice_fraction:g} of the water is ice (NaN: not within the run)"})
        data["time_to_freezing"] = ("thickness", t0 / 3600.0, {"units": "h", "long_name": "time until the contents first reach 0 degC (NaN: not within the run)"})
        reached = np.where(np.isnan(tf), np.inf, tf)
        margin = (reached - s.min_freeze_time) / 3600.0
        passes["min_freeze_time"] = reached >= s.min_freeze_time
        data["margin_min_freeze_time"] = ("thickness", np.where(np.isfinite(margin), margin, np.nan), {"units": "h", "long_name": "freeze time minus the required time (NaN: no freezing within the run)"})
        attrs["min_freeze_time_h"] = s.min_freeze_time / 3600.0
        attrs["min_freeze_time_h_units"] = "h"
        attrs["max_ice_fraction"] = s.max_ice_fraction
        attrs["run_duration_h"] = case.time.duration / 3600.0
        attrs["scheme"] = case.time.scheme
        attrs["time_step"] = float(case.time.step)
        attrs["time_step_units"] = "s"
    return data, attrs, passes


#: Candidates a criteria table prints in full; beyond, the rows around each change of verdict.
TABLE_ROWS = 40


def _rows_shown(passes: dict[str, np.ndarray], n: int) -> list[int | None]:
    """Every row of a short table; of a long one the first and last two and the
    two rows on each side of every change of a pass/fail verdict (None: rows left out)."""
    if n <= TABLE_ROWS:
        return list(range(n))
    keep = {0, 1, n - 2, n - 1}
    for ok in passes.values():
        for i in np.flatnonzero(np.diff(np.asarray(ok, dtype=int)) != 0):
            keep.update(range(max(0, i - 1), min(n, i + 3)))
    out: list[int | None] = []
    for i in sorted(keep):
        if out and out[-1] is not None and i > out[-1] + 1:
            out.append(None)
        out.append(i)
    return out


def criteria_table(ds: xr.Dataset | Table) -> str:
    """Text table: one row per candidate, one column per criterion (pass/fail and margin)."""
    names = [v[len("passes_"):] for v in ds.data_vars if v.startswith("passes_") and v != "passes_all"]
    labels = {
        "max_surface_temperature": "touch limit",
        "dew_point_margin": "dew point",
        "max_heat_loss": "heat loss",
        "min_freeze_time": "freeze time",
        "service_temperature": "service temp.",
    }
    head = f"{'thickness':>10} "
    if "surface_temperature_outside" in ds:
        head += f"{'surface':>9} {'heat flow':>11} "
    if "freeze_time" in ds:
        head += f"{'to 0 degC':>10} {'to ice':>9} "
    head += " ".join(f"{labels.get(n, n):>18}" for n in names)
    chance = ds["probability_passes"].values if "probability_passes" in ds else None
    if chance is not None:
        head += f" {'P(all pass)':>12}"
    flow_units = ds["heat_flow"].attrs["units"].replace("W m-1", "W/m").replace("W m-2", "W/m2") if "heat_flow" in ds else ""
    unit = f"{'[mm]':>10} "
    if "surface_temperature_outside" in ds:
        unit += f"{'[degC]':>9} {'[' + flow_units + ']':>11} "
    if "freeze_time" in ds:
        unit += f"{'[h]':>10} {'[h]':>9} "
    unit += " ".join(f"{'(margin)':>18}" for _ in names)
    if chance is not None:
        unit += f" {'[%]':>12}"
    lines = [head, unit]
    limits = []
    if "max_surface_temperature" in ds.attrs:
        limits.append(f"touch limit {float(ds.attrs['max_surface_temperature']):g} degC")
    if "dew_point" in ds.attrs:
        limits.append(
            f"dew point of the outside air {float(ds.attrs['dew_point']):.2f} degC (ISO 13788), "
            f"surface at least {float(ds.attrs['dew_point_margin']):g} K above it"
        )
    if "max_heat_loss" in ds.attrs:
        limits.append(f"heat-loss budget {float(ds.attrs['max_heat_loss']):g} {flow_units}")
    if "service_temperature_limits" in ds.attrs:
        limits.append(f"maximum service temperature: {ds.attrs['service_temperature_limits']}")
    if "min_freeze_time_h" in ds.attrs:
        limits.append(f"{float(ds.attrs['max_ice_fraction']):g} ice not before {float(ds.attrs['min_freeze_time_h']):g} h")
    if limits:
        lines.insert(0, "criteria: " + "; ".join(limits))
    margin_units = {n: ds[f"margin_{n}"].attrs["units"].replace("W m-1", "W/m").replace("W m-2", "W/m2") for n in names}
    run_h = ds.attrs.get("run_duration_h", math.nan)
    # plain arrays once (indexing xarray element by element cost seconds for 10,000 rows)
    thick = ds["thickness"].values
    surface = ds["surface_temperature_outside"].values if "surface_temperature_outside" in ds else None
    flow = ds["heat_flow"].values if "heat_flow" in ds else None
    freeze = (ds["time_to_freezing"].values, ds["freeze_time"].values) if "freeze_time" in ds else None
    passes = {n: ds[f"passes_{n}"].values for n in names}
    margins = {n: ds[f"margin_{n}"].values for n in names}
    fine = thick.size > 1 and float(np.min(np.diff(thick))) < 1e-4 - 1e-12   # steps below 0.1 mm: two decimals
    for i in _rows_shown(passes, thick.size):
        if i is None:
            said = any(line.lstrip().startswith("...  (") for line in lines)
            lines.append(f"{'...':>10}" + ("" if said else f"  ({thick.size} candidates: the rows around each change of verdict; all are in the file)"))
            continue
        d = thick[i]
        row = f"{d * 1000:>10.{2 if fine else 1}f} "
        if surface is not None:
            row += f"{surface[i]:>9.2f} {flow[i]:>11.2f} "
        if freeze is not None:
            t0, tf = float(freeze[0][i]), float(freeze[1][i])
            row += f"{(f'{t0:.2f}' if math.isfinite(t0) else f'>{run_h:g}'):>10} {(f'{tf:.2f}' if math.isfinite(tf) else f'>{run_h:g}'):>9} "
        cells = []
        for n in names:
            m = float(margins[n][i])
            mtxt = f"{m:+.2f} {margin_units[n]}" if math.isfinite(m) else "not reached"
            cells.append(f"{('pass' if passes[n][i] else 'FAIL') + ' (' + mtxt + ')':>18}")
        row += " ".join(cells)
        if chance is not None:
            row += f" {100.0 * float(chance[i]):>12.1f}"
        lines.append(row)
    return "\n".join(lines)
