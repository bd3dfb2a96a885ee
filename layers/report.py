"""Text reports for the command line: the case check, run summaries, tables.

These functions build strings; only :mod:`layers.cli` prints them.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from layers.about import CAUTION
from layers.case import Case
from layers.errors import CaseError
from layers.exchange import exchanges
from layers.formatting import display_units, format_duration
from layers.mesh import Mesh

if TYPE_CHECKING:
    import xarray as xr

    from layers.iso13786 import DynamicCharacteristics


def _constant(forcing) -> float | None:
    """The value of a constant forcing, or None for a series."""
    value = getattr(forcing, "value", None)
    if value is not None:
        return float(value)
    return None


class DesignResistance(NamedTuple):
    """Resistances in series for the U-value or the heat loss per metre [K W-1 per reference unit]."""

    inside: float
    conduction: float
    outside: float


def design_resistance(case: Case, mesh: Mesh) -> DesignResistance:
    """Film, conduction and film resistances [K W-1 per reference unit] for the U-value.

    Each film counts as :meth:`layers.exchange.Exchange.design_resistance`
    (a fixed film its own, an ``"auto"`` film on a wall its ISO 6946
    expression); other boundaries, and auto films on pipes, as zero
    (reported as such).
    """
    films = []
    for ex, area in zip(exchanges(case), (mesh.area_inside, mesh.area_outside)):
        r = ex.design_resistance() if ex.kind == "film" else None
        films.append((r or 0.0) / area)
    return DesignResistance(films[0], mesh.steady_resistance(), films[1])


#: Rough costs of the march on the 2-core machine of docs/benchmarks.md [s]:
#: per step of the exact path, and per cell-step beside it (a lone run keeping
#: its fields, 14 ns); per stage of a stepping scheme, linear (one solve) and
#: nonlinear (about three chord iterations with the films or k(T) evaluated
#: each time); per point of a sweep or sample (reading its case, its mesh and
#: modes, its record), whose marches go together at about a quarter of the
#: cost alone (measured: 2.6 ms per linear wall-year in a batch of 256, 0.2 s
#: per nonlinear one in a batch of 64, 1.8 s alone).  Only for telling a user
#: how long a run will take, to a factor of about three.
COST_EXACT_STEP, COST_EXACT_CELL_STEP = 2e-7, 1.4e-8
COST_LINEAR_STAGE, COST_NONLINEAR_STAGE = 1.5e-5, 1.2e-4
COST_POINT, BATCH_GAIN = 1.5e-3, 4.0
#: Above this estimate [s] ``check`` says how long work is shown and stopped.
LONG_WORK = 60.0


def work_estimate(case: Case, mesh: Mesh) -> str:
    """How much marching a case asks for and roughly how long it takes, in words
    (empty when the case cannot say: a scheme refused, say)."""
    from layers.schemes import resolve_scheme
    from layers.simulation import scheme_for, system_for

    plan = case.time
    try:
        system = system_for(case, mesh)
        scheme = scheme_for(case, system)
    except CaseError:
        return ""
    steps, cells = plan.n_steps, mesh.n
    if scheme == "exact":
        seconds = steps * (COST_EXACT_STEP + COST_EXACT_CELL_STEP * cells)
        how = "the exact path"
    else:
        stages = len(resolve_scheme(scheme).stage_time)
        nonlinear = system.depends_on_temperature or system.water is not None
        seconds = steps * stages * (COST_NONLINEAR_STAGE if nonlinear else COST_LINEAR_STAGE)
        how = f"stepping with {scheme}, {'nonlinear' if nonlinear else 'linear'}"
    runs, what = 1, ""
    if case.sweep:
        runs = int(np.prod([len(d.values) for d in case.sweep]))
        what = f", x {runs:,} sweep points"
    elif case.uncertainty is not None:
        runs = case.uncertainty.samples + 1
        what = f", x {runs:,} runs (the samples and the nominal case)"
    total = seconds if runs == 1 else runs * (seconds / BATCH_GAIN + COST_POINT)
    text = (f"{steps:,} steps x {cells} cells, {how}{what}: "
            + ("under a second" if total < 1.0 else f"roughly {_rough(total)}") + " on the machine of docs/benchmarks.md"
            + (" (plus the periodic start)" if plan.initial == "periodic" and scheme != "exact" else ""))
    if total > LONG_WORK:
        text += "; a progress bar shows it on a terminal, and Ctrl-C stops it cleanly (nothing is written)"
    return text


def _rough(seconds: float) -> str:
    """A duration to one or two figures, for an estimate."""
    if seconds < 1.0:
        return "under a second"
    if seconds < 90.0:
        return f"{seconds:.2g} s"
    if seconds < 5400.0:
        return f"{seconds / 60.0:.2g} min"
    return f"{seconds / 3600.0:.2g} h"


def check_report(case: Case) -> str:
    """What ``layers check`` prints: layers, mesh, steady transmittance, time plan."""
    mesh = case.mesh()
    lines = [f"case:      {case.path}", f"title:     {case.title}", f"geometry:  {case.geometry}"]
    if case.geometry != "planar":
        lines[-1] += f", inner radius {case.inner_radius * 1000:g} mm"
    if case.geometry == "cylinder":
        lines[-1] += ", horizontal" if case.orientation == "horizontal" else f", vertical, {case.height:g} m high"
    lines.append("")
    lines.append(f"{'#':>2}  {'layer':<22} {'thickness':>10} {'k':>8} {'rho':>7} {'c':>6} {'cells':>5} {'min cell':>9} {'max cell':>9}")
    lines.append(f"{'':>2}  {'':<22} {'[mm]':>10} {'[W/mK]':>8} {'[kg/m3]':>7} {'[J/kgK]':>6} {'':>5} {'[mm]':>9} {'[mm]':>9}")
    widths = mesh.x_hi - mesh.x_lo
    membranes = {vl.number: vl for vl in case.vapour_layers if vl.thermal_index is None}
    rows = sorted([(case.listed(i), i) for i in range(1, len(case.layers) + 1)] + [(n, None) for n in membranes])
    for listed, number in rows:
        if number is None:  # numbered as the case file counts, with no thermal part
            vl = membranes[listed]
            sd = f"s_d {vl.equivalent_air_thickness:g} m" if vl.equivalent_air_thickness else "s_d from its material"
            lines.append(f"{listed:>2}  {vl.name[:22]:<22} {'membrane':>10}   {sd}: vapour resistance only, no thermal part")
            continue
        spec = case.layers[number - 1]
        if spec.is_gap:
            lines.append(f"{listed:>2}  {'air gap':<22} {spec.thickness * 1000:>10.1f}   R = {spec.resistance:g} m2K/W, no heat capacity")
            continue
        sel = mesh.layer == number
        m = spec.material
        k = f"{m.conductivity:.4g}" + ("*" if not m.is_constant else "")
        lines.append(
            f"{listed:>2}  {spec.name[:22]:<22} {spec.thickness * 1000:>10.1f} {k:>8} {m.density:>7.0f} {m.specific_heat:>6.0f} "
            f"{int(sel.sum()):>5} {widths[sel].min() * 1000:>9.3f} {widths[sel].max() * 1000:>9.3f}"
        )
        if spec.contact_resistance:
            lines.append(f"{'':>2}  contact resistance to the next layer: {spec.contact_resistance:g} m2K/W")
    lines.append(f"    total {mesh.total_thickness * 1000:.1f} mm in {mesh.n} cells" + ("   (* k(T): value at 10 degC)" if not mesh.is_linear else ""))
    lines.append("")
    r_si, r_cond, r_se = design_resistance(case, mesh)
    total = r_si + r_cond + r_se
    if case.geometry == "planar" and all(sp.kind in ("film", "temperature") for sp in (case.inside, case.outside)):
        lines.append(
            f"U-value:   {1.0 / total:.4g} W/(m2*K)   (Rsi {r_si:.3g} + R {r_cond:.4g} + Rse {r_se:.3g} = {total:.4g} m2K/W, ISO 6946)"
        )
    try:
        from layers.steady import steady_state

        st = steady_state(case)
        unit = {"planar": "W/m2", "cylinder": "W/m", "sphere": "W"}[case.geometry]
        lines.append(
            f"steady:    heat flow {float(st.heat_flow[0]):.4g} {unit} inside to outside at the "
            f"{'design' if case.sizing is not None and case.sizing.design_time is not None else 'start-time'} conditions; "
            f"surfaces {float(st.surface_temperature_inside[0]):.2f} / {float(st.surface_temperature_outside[0]):.2f} degC"
        )
        if any(ex.has_sun_or_sky for ex in exchanges(case)):
            lines.append("           (without sun and sky exchange; a run's steady start includes them)")
        if case.geometry == "cylinder" and not (case.inside.auto_film or case.outside.auto_film):
            lines.append(f"           resistance per metre, fluid to air: {total:.4g} m*K/W (films as given; k at 10 degC)")
    except CaseError:
        pass  # flux or adiabatic boundaries: no steady heat flow to report
    for spec, ex in zip((case.inside, case.outside), exchanges(case)):
        lines.append(f"{spec.side + ':':<10} {_describe_boundary(spec)}")
        direction = _direction_note(case, ex)
        if direction:
            lines.append(f"           {direction}")
    plan = case.time
    end = plan.start + np.timedelta64(int(round(plan.duration)), "s")
    lines.append("")
    lines.append(
        f"time:      {np.datetime_as_string(plan.start, unit='m')}Z to {np.datetime_as_string(end, unit='m')}Z "
        f"({format_duration(plan.duration)}), step {format_duration(plan.step)} x {plan.n_steps}, "
        f"kept every {format_duration(plan.output_every)} ({plan.n_steps // plan.output_stride + 1} records)"
    )
    if case.time_zones:
        lines.append("zones:     every time here is UTC (Z); each time of the case was read so:")
        lines.extend(f"           {key}: {how}" for key, how in case.time_zones.items())
    elif plan.start_zone:
        lines.append(f"           start: {plan.start_zone}; every time here is UTC (Z)")
    lines.append(f"scheme:    {plan.scheme}; initial state: {plan.initial if isinstance(plan.initial, str) else f'{plan.initial:g} degC'}")
    work = work_estimate(case, mesh)
    if work:
        lines.append(f"work:      {work}")
    co = case.condensation
    if co is not None:
        inside = (f"humidity class {co.humidity_class} (ISO 13788 Annex A)" if co.humidity_class is not None
                  else f"relative humidity {100 * float(np.min(co.inside_relative_humidity)):.0f} to "
                       f"{100 * float(np.max(co.inside_relative_humidity)):.0f} %")
        from layers.iso13788 import vapour_stack

        try:
            stack = vapour_stack(case, co.vapour_data)
            layers_sd = f"s_d {float(np.sum(stack.sd)):.4g} m in all ({', '.join(f'{v:.3g}' for v in stack.sd)} m by layer)"
        except CaseError as exc:
            layers_sd = f"not computable: {exc.reason}"
        lines.append(f"vapour:    [condensation] monthly climate read: outside {float(np.min(co.outside_temperature)):.1f} to "
                     f"{float(np.max(co.outside_temperature)):.1f} degC, inside {inside}; {co.vapour_data} vapour data")
        lines.append(f"           {layers_sd}; `layers condensation` runs the ISO 13788 check")
    if case.series is not None:
        filled = {k: v for k, v in case.series.filled.items() if v}
        note = "; filled by fill_gaps: " + ", ".join(f"{k} {v}" for k, v in filled.items()) if filled else ""
        lines.append(f"series:    {case.series.file} ({len(case.series.time)} rows{note})")
        lines.extend(f"           gaps: {gap.describe()}" for gap in case.series.gaps)
    if case.sweep:
        points = int(np.prod([len(d.values) for d in case.sweep]))
        lines.append(f"sweep:     {points} points (`layers sweep`): " + "; ".join(
            f"{d.name} = {d.key}: {d.values[0]} .. {d.values[-1]} ({len(d.values)} values)" for d in case.sweep))
    if case.uncertainty is not None:
        u = case.uncertainty
        lines.append(f"uncertainty: {u.samples} samples (seed {u.seed}, confidence {u.confidence:g}) of "
                     + ", ".join(f"{v.key} ({v.distribution})" for v in u.vary))
    lines.append("")
    lines.append(f"caution: {CAUTION}")
    return "\n".join(lines)


def _direction_note(case: Case, ex) -> str | None:
    """How an inside ``"auto"`` film on a wall or roof takes its ISO 6946
    heat-flow direction, for ``layers check`` (None where none applies)."""
    spec = ex.spec
    if not (ex.kind == "film" and ex.auto and case.geometry == "planar" and ex.side == "inside"):
        return None
    if spec.heat_flow_direction != "auto":
        return f"heat flow {spec.heat_flow_direction} (heat_flow_direction as given; ISO 6946 inside convection)"
    if not ex.derives_direction:
        return f"heat flow horizontal (derived: tilt {spec.tilt:g} deg is within 30 deg of vertical; ISO 6946)"
    design, how = ex.design_direction()
    turned = {"up": "down", "down": "up"}.get(design)
    when = "surface is warmer than the air" if design == "up" and spec.tilt < 90 or design == "down" and spec.tilt > 90 else "air is warmer than the surface"
    text = f"heat flow {design} at the design conditions (derived: {how}; ISO 6946)"
    if turned:
        text += f"; it varies with the sign of air minus surface and turns {turned} while the {when}"
    else:
        text += "; up or down by the sign of air minus surface at each step"
    return text


def _describe_boundary(spec) -> str:
    if spec.kind == "film":
        t = _constant(spec.air_temperature)
        air = f"{t:g} degC" if t is not None else "from a series"
        if spec.auto_film:
            film = "film coefficient auto"
        else:
            film = f"Rs {spec.surface_resistance:.3g} m2K/W (h {1 / spec.surface_resistance if spec.surface_resistance else math.inf:.3g} W/m2K)"
        solar = f", solar absorptance {spec.solar_absorptance:g}" if spec.solar_irradiance is not None else ""
        if spec.solar_irradiance_on == "horizontal":
            solar += (f", sun transposed to tilt {spec.tilt:g} deg, azimuth {spec.surface_azimuth:g} deg from a {spec.solar_split}"
                      f" (albedo {spec.albedo:g}; values stamped at the {spec.irradiance_stamp} of their interval)")
        return f"film, air {air}, {film}{solar}"
    if spec.kind == "temperature":
        t = _constant(spec.surface_temperature)
        return f"surface temperature {t:g} degC" if t is not None else "surface temperature from a series"
    if spec.kind == "flux":
        q = _constant(spec.heat_flux)
        return f"heat flux {q:g} W/m2 into the construction" if q is not None else "heat flux from a series"
    if spec.kind == "contents":
        return f"stagnant {spec.contents}, initially {spec.initial_temperature:g} degC"
    return "adiabatic"


def _extreme(da: xr.DataArray, fn) -> tuple[float, str]:
    i = int(fn(da.values))
    return float(da.values[i]), str(np.datetime_as_string(da["time"].values[i], unit="m"))


def harmonic(values: np.ndarray, seconds: np.ndarray, period: float) -> complex:
    """Complex amplitude of the fundamental over whole periods: values ~ mean + Re(A e^(i w t))."""
    w = 2.0 * np.pi / period
    return complex(2.0 * np.mean(values * np.exp(-1j * w * seconds)))


class ObservedResponse(NamedTuple):
    """A run's response to a generated outside cycle, over its last whole period."""

    decrement_factor: float  # [-]
    lag: float               # delay of the inward heat flow behind the outside air [h]
    period: float            # [s]


def observed_periodic_response(ds: xr.Dataset, case: Case) -> ObservedResponse | None:
    """Observed decrement factor [-], lag [h] and period [s] over the last whole period of a run.

    Applies to planar runs whose outside air follows a generated cycle and
    whose inside air is constant; returns None otherwise.  The decrement is
    |q_inside| / (U |theta_outside|) for the fundamental harmonic, the lag the
    delay of the inward heat flow behind the outside air (ISO 13786 time
    shift with the sign reversed).
    """
    out, ins = case.outside, case.inside
    if case.geometry != "planar" or out.kind != "film" or ins.kind != "film" or out.auto_film or ins.auto_film:
        return None
    if not getattr(out.air_temperature, "is_cycle", False) or ins.air_temperature.value is None:
        return None
    if "air_temperature_outside" not in ds:
        return None
    period = out.air_temperature.period or 86400.0
    seconds = (ds["time"].values - ds["time"].values[0]) / np.timedelta64(1, "s")
    dt = float(seconds[1] - seconds[0]) if seconds.size > 1 else 0.0
    if dt <= 0 or abs(period / dt - round(period / dt)) > 1e-9 or seconds[-1] < period:
        return None
    n = int(round(period / dt))
    sel = slice(seconds.size - 1 - n, seconds.size - 1)
    t = seconds[sel]
    q_room = harmonic(-ds["heat_flow_inside"].values[sel], t, period)
    t_out = harmonic(ds["air_temperature_outside"].values[sel], t, period)
    if abs(t_out) == 0:
        return None
    mesh_r = ds.attrs.get("steady_resistance_total")
    if not mesh_r:
        return None
    y = q_room / t_out
    lag = (-np.angle(y) / (2 * np.pi) * period / 3600.0) % (period / 3600.0)
    return ObservedResponse(float(abs(y) * mesh_r), float(lag), period)


#: Outside surface temperature from which a run repeats the touch caution [degC]:
#: the lowest of the burn thresholds the caution quotes (43 degC for contact
#: of 8 h and longer, ISO 13732-1:2006, from memory).
TOUCH_WATCH = 43.0
#: A wall surface closer than this to its air's dew point gets the
#: condensation caution [K] (our choice: a common-practice safety margin).
WALL_DEW_WATCH = 1.0
CAUTION_WALL_DEW = (
    "A surface near or below its dew point: check surface and interstitial condensation "
    "(e.g. by ISO 13788) and the vapour control of the construction."
)


def run_cautions(ds: xr.Dataset, case: Case) -> list[str]:
    """The cautions a run's results call for, most specific first, the general one last.

    - touch: the outside surface reaches :data:`TOUCH_WATCH`;
    - condensation: a surface with a dew point is colder than its air;
    - freezing: the bore holds stagnant contents that reach 0 degC within the run,
      or whose outside air goes below 0 degC.
    """
    from layers.sizing import CAUTION_DEW, CAUTION_FREEZE, CAUTION_TOUCH

    out = []
    hottest = float(np.nanmax(ds["surface_temperature_outside"].values))
    if hottest >= TOUCH_WATCH:
        out.append(f"the outside surface reaches {hottest:.1f} degC. {CAUTION_TOUCH}")
    for side in ("inside", "outside"):
        air, dew = f"air_temperature_{side}", f"dew_point_{side}"
        if dew not in ds or air not in ds:
            continue
        surface = ds[f"surface_temperature_{side}"].values
        if case.geometry != "planar" and np.any(surface < ds[air].values):
            out.append(CAUTION_DEW)  # a cold line or vessel
            break
        if case.geometry == "planar" and np.nanmin(surface - ds[dew].values) < WALL_DEW_WATCH:
            out.append(CAUTION_WALL_DEW)
            break
    freezes = math.isfinite(float(ds.attrs.get("time_to_freezing_h", math.nan)))
    cold_air = "air_temperature_outside" in ds and float(np.nanmin(ds["air_temperature_outside"].values)) < 0.0
    if case.inside.kind == "contents" and (freezes or cold_air):
        out.append(CAUTION_FREEZE)  # where the contents reach 0 degC, or could later under freezing air
    out.append(str(ds.attrs.get("caution", CAUTION)))
    return out


def _starts_from_a_temperature(ds: xr.Dataset) -> bool:
    try:
        float(ds.attrs.get("initial", "steady"))
    except ValueError:
        return False
    return True


#: A sweep summary lists every point up to this many, else the extremes.
SWEEP_ROWS = 24


def sweep_summary(ds: xr.Dataset, case: Case | None = None) -> str:
    """What ``layers sweep`` prints: the grid, then one row per point (or the
    points with the lowest and highest mean heat flow when there are many):
    its swept values, mean heat flow and the extremes of both surfaces."""
    names = [d for d in ds.dims if d in ds.coords and d not in ("time", "interface", "cell")]
    flow_units = display_units(ds["heat_flow_inside"].attrs["units"])
    lines = [
        f"{ds.attrs.get('title', '')}: sweep of {ds.attrs['sweep_points']} points, {ds.sizes['time']} records each, "
        f"scheme {ds.attrs['scheme']}",
        f"  dimensions: {ds.attrs['sweep_dimensions']}",
    ]
    stacked = ds.stack(point=names) if len(names) > 1 else ds.rename({names[0]: "point"})
    mean = stacked["heat_flow_inside_mean"].values if "heat_flow_inside_mean" in stacked else np.full(stacked.sizes["point"], math.nan)
    order = np.argsort(mean, kind="stable")
    if order.size > SWEEP_ROWS:
        half = SWEEP_ROWS // 2
        shown = list(order[:half]) + [None] + list(order[-half:])
        lines.append(f"  the {half} points with the lowest and the {half} with the highest mean heat flow (all are in the file):")
    else:
        shown = list(range(order.size))

    def label(name: str) -> str:
        units = ds[name].attrs.get("units", "")
        return f"{name} [{units}]" if units else name

    heads = [label(n) for n in names] + [f"mean flow [{flow_units}]", "outside min/max [degC]", "inside min [degC]"]
    widths = [max(len(h), 10) for h in heads]
    lines.append("  " + "  ".join(h.rjust(w) for h, w in zip(heads, widths)))
    outside = stacked["surface_temperature_outside"]
    inside = stacked["surface_temperature_inside"]
    for i in shown:
        if i is None:
            lines.append("  " + "...".rjust(widths[0]))
            continue
        values = []
        for n in names:
            v = stacked[n].values[i] if len(names) > 1 else stacked["point"].values[i]
            values.append(f"{v:.6g}" if isinstance(v, (float, np.floating)) else str(v))
        o = outside.isel(point=i).values if "point" in outside.dims else outside.values
        t = inside.isel(point=i).values if "point" in inside.dims else inside.values
        values += [f"{mean[i]:.4g}", f"{np.nanmin(o):.2f} / {np.nanmax(o):.2f}", f"{np.nanmin(t):.2f}"]
        lines.append("  " + "  ".join(v.rjust(w) for v, w in zip(values, widths)))
    return "\n".join(lines)


def run_summary(ds: xr.Dataset, case: Case | None = None) -> str:
    """What ``layers run`` prints after a run: extremes, heat flows, energy through each surface,
    and for a periodic outside cycle the observed decrement and lag beside ISO 13786."""
    flow_units = ds["heat_flow_inside"].attrs["units"].replace(" ", "/").replace("-2", "2").replace("/-1", "").replace("m-1", "m")
    lines = [f"{ds.attrs.get('title', '')}: {ds.sizes['time']} records, {ds.sizes['x']} cells, scheme {ds.attrs['scheme']}"]
    for side in ("inside", "outside"):
        s = ds[f"surface_temperature_{side}"]
        lo, t_lo = _extreme(s, np.argmin)
        hi, t_hi = _extreme(s, np.argmax)
        q = ds[f"heat_flow_{side}"].values
        seconds = (ds["time"].values - ds["time"].values[0]) / np.timedelta64(1, "s")
        # A run that starts from a given temperature has a jump at the surfaces
        # at t = 0 whose flux depends on the mesh; the peak is taken after it.
        first = 1 if _starts_from_a_temperature(ds) and len(q) > 1 else 0
        hi_i = first + int(np.argmax(q[first:]))
        lo_i = first + int(np.argmin(q[first:]))
        stamp = ds["time"].values
        lines.append(
            f"  {side:<7} surface  min {lo:7.2f} degC at {t_lo}Z   max {hi:7.2f} degC at {t_hi}Z"
        )
        # The mean is the run's step-by-step total over the duration (the
        # same figure `layers list` shows), not a mean of the kept samples.
        total = ds.attrs.get("heat_in_inside_total" if side == "inside" else "heat_out_outside_total")
        if total is not None and seconds[-1] > 0:
            mean = float(total) / float(seconds[-1])
        else:
            mean = float(np.trapezoid(q, seconds) / seconds[-1]) if seconds[-1] > 0 else float(q[0])
        # positive outward: the maximum is the largest outward flow, the minimum the largest inward one
        lines.append(
            f"          heat flow mean {mean:9.3g} {flow_units}   max {q[hi_i]:.3g} {flow_units} at {np.datetime_as_string(stamp[hi_i], unit='m')}Z"
            f"   min {q[lo_i]:.3g} {flow_units} at {np.datetime_as_string(stamp[lo_i], unit='m')}Z"
            + (" (kept samples after the start)" if first else "")
        )
        if not q[lo_i] - 1e-9 * abs(mean) <= mean <= q[hi_i] + 1e-9 * abs(mean):
            # the mean is the energy over the whole run, the extremes are of the kept samples
            lines.append(f"          (the mean is the energy through the surface over the run divided by its duration: it "
                         f"includes the start transient{' and the steps between the kept samples' if first else ''}, "
                         "which the kept samples miss)")
    lines.append("  heat flows are positive from inside to outside: max is the largest outward flow, min the largest inward one")
    if "surface_temperature_outside_quantile" in ds:
        n = ds.attrs.get("uncertainty_samples", "?")
        lines.append(f"  with the input tolerances of [uncertainty] ({n} samples): the extremes over the run of the")
        lines.append("  5 % / 50 % / 95 % quantiles taken at each kept time:")
        for side in ("inside", "outside"):
            band = ds[f"surface_temperature_{side}_quantile"].values
            lines.append(
                f"  {side:<7} surface  max {band[0].max():7.2f} / {band[1].max():7.2f} / {band[2].max():7.2f} degC"
                f"   min {band[0].min():7.2f} / {band[1].min():7.2f} / {band[2].min():7.2f} degC"
            )
        if "heat_flow_inside_mean_quantile" in ds:
            m = ds["heat_flow_inside_mean_quantile"].values
            lines.append(f"          heat flow mean {m[0]:.4g} / {m[1]:.4g} / {m[2]:.4g} {flow_units}")
    per = ds.attrs.get("heat_total_units", "J m-2")
    scale, unit = (3.6e6, "kWh/m2") if per == "J m-2" else ((3.6e6, "kWh/m") if per == "J m-1" else (3.6e6, "kWh"))
    lines.append(
        f"  energy in through the inside surface {ds.attrs['heat_in_inside_total'] / scale:.4g} {unit}, "
        f"out through the outside surface {ds.attrs['heat_out_outside_total'] / scale:.4g} {unit}"
    )
    if "heat_from_contents_total" in ds.attrs:
        lines[-1] = (
            f"  heat given up by the contents {ds.attrs['heat_from_contents_total'] / scale:.4g} {unit}, "
            f"out through the outside surface {ds.attrs['heat_out_outside_total'] / scale:.4g} {unit}"
        )
    if "freeze_time_h" in ds.attrs:
        def _h(v: float) -> str:
            return f"{v:.2f} h" if math.isfinite(v) else "not within the run"

        if math.isfinite(float(ds.attrs["time_to_freezing_h"])):
            lines.append(
                f"  contents: first at 0 degC after {_h(ds.attrs['time_to_freezing_h'])}; "
                f"{ds.attrs['max_ice_fraction']:g} ice after {_h(ds.attrs['freeze_time_h'])}"
            )
        else:
            lines.append(f"  contents: do not reach 0 degC within the run (lowest {float(np.nanmin(ds['contents_temperature'].values)):.2f} degC)")
    lines.append(f"  energy balance error (relative): {ds.attrs['energy_balance_error']:.1e}")
    if ds.attrs.get("series_filled"):
        lines.append(f"  series values filled by fill_gaps (linear in time): {ds.attrs['series_filled']}")
    for side in ("inside", "outside"):
        if f"dew_point_{side}" not in ds:
            continue
        margin = ds[f"surface_temperature_{side}"].values - ds[f"dew_point_{side}"].values
        i = int(np.argmin(margin))
        when = np.datetime_as_string(ds["time"].values[i], unit="m")
        if margin[i] >= 0:
            wanted = case.sizing.dew_point_margin if case is not None and case.sizing is not None else None
            short = f"; less than the case's dew_point_margin of {wanted:g} K" if wanted and margin[i] < wanted else ""
            lines.append(f"  {side} surface stays at least {margin[i]:.2f} K above the air's dew point (closest at {when}Z){short}")
        else:
            below = ds["time"].values[margin < 0]
            lines.append(
                f"  CONDENSATION RISK: the {side} surface falls below the air's dew point "
                f"(by up to {-margin[i]:.2f} K, at {when}Z; {below.size} of {margin.size} records)"
            )
    if case is not None:
        observed = observed_periodic_response(ds, case)
        if observed is not None:
            decrement, lag, period = observed
            try:
                dc, _ = periodic_report(case, period)
                lines.append(
                    f"  {'daily cycle' if period == 86400.0 else 'cycle'} (last {period / 3600:g} h): observed decrement factor {decrement:.4f}, lag {lag:.2f} h;"
                    f" ISO 13786 predicts {dc.decrement_factor:.4f}, {dc.time_lag:.2f} h"
                )
            except CaseError:
                pass
    return "\n".join(lines)


def materials_table(word: str | None) -> tuple[str, int]:
    """The material library as a table, filtered by ``word``."""
    from layers.materials import search

    from layers.materials import load_membranes

    rows = search(word)
    lines = [
        f"{'name':<22} {'k [W/(m*K)]':>12} {'rho [kg/m3]':>12} {'c [J/(kg*K)]':>13} {'mu [-]':>10}  description; source",
    ]
    for m in rows:
        k = f"{m.conductivity:.4g}" + ("(T)" if not m.is_constant else "")
        lines.append(f"{m.name:<22} {k:>12} {m.density:>12.0f} {m.specific_heat:>13.0f} {_mu_text(m):>10}  {m.description}; {m.source}")
    curves = [m for m in rows if not m.is_constant]
    if curves:
        lines.append("(T): temperature-dependent conductivity; the value shown is at 10 degC, the law at other temperatures:")
        for m in curves:
            top = m.max_temperature if m.max_temperature is not None else 400.0
            at = [t for t in (-20.0, 10.0, 50.0, 100.0, 200.0, 300.0, 400.0, 600.0, 800.0) if t <= top]
            values = np.asarray(m.law.at(np.array(at)), dtype=float)
            lines.append(f"  {m.name}: " + ", ".join(f"{v:.4g} at {t:g}" for t, v in zip(at, values)) + " degC [W/(m*K)]")
    if any(m.vapour_resistance_factor is not None for m in rows):
        lines.append("mu: water vapour resistance factor, dry cup / wet cup where they differ (ISO 10456 where the source says so)")
    needle = (word or "").lower()
    membranes = [mb for name, mb in sorted(load_membranes().items())
                 if not needle or needle in name.lower() or needle in mb.description.lower()]
    if membranes:
        lines.append("")
        lines.append(f"{'membrane':<22} {'s_d [m]':>12}  description; source   (layer kind = \"membrane\": vapour resistance only)")
        for mb in membranes:
            lines.append(f"{mb.name:<22} {mb.equivalent_air_thickness:>12.4g}  {mb.description}; {mb.source}")
    return "\n".join(lines), len(rows) + len(membranes)


def _mu_text(m) -> str:
    """A material's vapour resistance factor for the library table: dry/wet cup, or - when not known."""
    dry, wet = m.vapour_resistance_factor, m.vapour_resistance_factor_wet_cup
    if dry is None:
        return "-"
    if wet is None or wet == dry:
        return f"{dry:.4g}"
    return f"{dry:.4g}/{wet:.4g}"


def periodic_elements(case: Case):
    """The case's layers as ISO 13786 elements, with contact resistances as resistive elements."""
    from layers.iso13786 import PeriodicElement

    out = []
    for spec in case.layers:
        if spec.is_gap:
            out.append(PeriodicElement.resistive(spec.resistance, name=spec.name))
            continue
        m = spec.material
        if not m.is_constant:
            raise CaseError(case.path, "layers", f"{m.name} has a temperature-dependent conductivity; ISO 13786 needs constant properties")
        out.append(PeriodicElement.layer(spec.thickness, m.conductivity, m.density, m.specific_heat, name=spec.name))
        if spec.contact_resistance:
            out.append(PeriodicElement.resistive(spec.contact_resistance, name="contact"))
    return out


def surface_resistances(case: Case) -> tuple[float, float]:
    """Rsi and Rse [m2 K W-1] of a planar case for ISO 13786.

    A fixed film gives its own resistance. An ``"auto"`` film, whose
    coefficient varies in a run, gets the ISO 6946 expression at the case's
    emissivity (:meth:`layers.exchange.Exchange.design_resistance`; see
    :func:`auto_film_note`).
    """
    out = []
    for ex in exchanges(case):
        r = ex.design_resistance()
        if r is None:
            raise CaseError(case.path, f"{ex.side}.type", f"ISO 13786 needs a film or temperature boundary, not {ex.kind!r}")
        out.append(r)
    return out[0], out[1]


def auto_film_note(case: Case) -> str | None:
    """How ``layers periodic`` treats ``"auto"`` films, or None without any."""
    parts = []
    for ex in exchanges(case):
        spec = ex.spec
        if ex.kind == "film" and ex.auto:
            how = f"heat flow {ex.design_direction()[0]}" if ex.side == "inside" else f"wind {ex.design_wind_speed:g} m/s"
            parts.append(f"{ex.side}: ISO 6946 expression, emissivity {spec.emissivity:g}, {how}")
        if ex.kind == "film" and ex.has_sun_or_sky:
            parts.append(f"{ex.side}: sun and sky do not enter the dynamic characteristics")
    if not parts:
        return None
    heading = "auto films as fixed resistances" if any(ex.kind == "film" and ex.auto for ex in exchanges(case)) else "left out"
    return f"  ({heading}: " + "; ".join(parts) + ")"


class PeriodicReport(NamedTuple):
    """What ``layers periodic`` computes and prints."""

    characteristics: DynamicCharacteristics
    text: str


def periodic_report(case: Case, period: float) -> PeriodicReport:
    """Dynamic characteristics of the case's construction and their text table."""
    from layers.iso13786 import dynamic_characteristics

    if case.geometry != "planar":
        raise CaseError(case.path, "geometry.kind", "ISO 13786 dynamic characteristics are for planar constructions only")
    r_si, r_se = surface_resistances(case)
    dc = dynamic_characteristics(periodic_elements(case), r_si, r_se, period)
    lines = [
        f"ISO 13786 dynamic thermal characteristics, period {format_duration(period)}  (Rsi {r_si:.3g}, Rse {r_se:.3g} m2K/W)",
        f"  thermal transmittance U            {dc.thermal_transmittance:10.4g} W/(m2*K)",
        f"  periodic transmittance |Y12|       {abs(dc.periodic_transmittance):10.4g} W/(m2*K)   time shift {dc.time_shift:7.2f} h"
        f"   (lag {dc.time_lag:.2f} h: the inside heat flow follows the outside cycle that much later)",
        f"  decrement factor f                 {dc.decrement_factor:10.4g}",
        f"  internal admittance |Y11|          {abs(dc.internal_admittance):10.4g} W/(m2*K)   time shift {dc.admittance_time_shift_inside:7.2f} h",
        f"  external admittance |Y22|          {abs(dc.external_admittance):10.4g} W/(m2*K)   time shift {dc.admittance_time_shift_outside:7.2f} h",
        f"  areal heat capacity inside  k1     {dc.areal_heat_capacity_inside / 1000:10.4g} kJ/(m2*K)",
        f"  areal heat capacity outside k2     {dc.areal_heat_capacity_outside / 1000:10.4g} kJ/(m2*K)",
        "  (time shifts follow ISO 13786: negative is a delay; a lag is the same delay as a positive number, as `layers run` reports it)",
        *([note] if (note := auto_film_note(case)) else []),
    ]
    return PeriodicReport(dc, "\n".join(lines))


def periodic_dataset(case: Case, report: PeriodicReport) -> xr.Dataset:
    """What ``layers periodic -o`` writes: the characteristics with the case's provenance."""
    from layers.about import __version__
    from layers.results import utc_now, cf_encoding

    ds = report.characteristics.to_dataset(title=case.title)
    ds.attrs.update({
        "product": "periodic",
        "case": case.text,
        "case_sha256": case.sha256,
        "software_version": __version__,
        "created": utc_now(),
        "geometry": case.geometry,
        "caution": CAUTION,
    })
    return cf_encoding(ds, f"layers periodic {case.path}")
