"""The one entry point: a case in, a labelled result out.

Data flow: case -> mesh -> exchanges (:mod:`layers.exchange`) -> initial
state (:mod:`layers.steady`, or the periodic start of :mod:`layers.march`)
-> :func:`layers.march.march` -> arrays -> :func:`layers.results.to_dataset`.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable
from typing import TYPE_CHECKING, NamedTuple

import numpy as np

from layers.case import Case
from layers.series import Forcing
from layers.errors import CaseError
from layers.constants import ABSOLUTE_ZERO_CELSIUS
from layers.contents import WaterNode
from layers.exact import exact_march, exact_periodic_start, is_exact_ready
from layers.exchange import exchanges, in_seconds
from layers.march import TOLERANCE, BadConductivity, MarchResult, System, UnphysicalState, march, march_batch, periodic_start, settle
from layers.schemes import resolve_scheme
from layers.mesh import Mesh
from layers.results import FieldExtremes, to_dataset
from layers.steady import cell_temperatures, steady_state

if TYPE_CHECKING:
    import xarray as xr

#: Default ice fraction for the freeze time: a common design allowance (ISO 12241 and
#: handbook practice allow a partly frozen pipe; 25 % is usual, common practice).
DEFAULT_ICE_FRACTION = 0.25
#: A start this far from a fixed boundary temperature counts as a step [K].
STEP_WARNING = 1.0


def system_for(case: Case, mesh: Mesh) -> System:
    """Cells, boundaries and contents of a case, as the march integrates them."""
    ex_in, ex_out = exchanges(case)
    water = WaterNode.for_bore(case.geometry, case.inner_radius) if ex_in.kind == "contents" else None
    system = System(mesh, ex_in, ex_out, water)
    _tabulate_films(case, system)
    return system


def _tabulate_films(case: Case, system: System) -> None:
    """Tabulate auto-film convection once per run where the wind is constant."""
    plan = case.time
    seconds = np.linspace(0.0, plan.duration, min(plan.n_steps + 1, 20001))
    for ex, diameter in ((system.inside, system.diameter_in), (system.outside, system.diameter_out)):
        if ex.auto and case.geometry != "planar":
            forcing = ex.forcing(seconds)
            ex.tabulate(forcing["air"], forcing["wind"], diameter)


def _ice_target(case: Case) -> float:
    return case.sizing.max_ice_fraction if case.sizing is not None else DEFAULT_ICE_FRACTION


def _mean_forcing(case: Case, system: System) -> tuple[dict, dict]:
    """Each boundary's forcing averaged over the first period (the periodic start's first guess)."""
    plan = case.time
    steps = int(round(plan.period / plan.step))
    seconds = np.arange(steps) * plan.step
    out = []
    for ex in (system.inside, system.outside):
        out.append({name: np.array([np.mean(values)]) for name, values in ex.forcing(seconds).items()})
    return out[0], out[1]


def scheme_for(case: Case, system: System) -> str:
    """The scheme a run uses: ``exact`` where asked for or where ``auto`` finds a
    linear case (:func:`layers.exact.is_exact_ready`), else the stepping scheme."""
    requested = case.time.scheme
    if requested in ("auto", "exact") and is_exact_ready(system):
        plan = case.time
        rough = [
            f"{spec.side}.{name}"
            for spec in (case.inside, case.outside)
            for name, forcing in spec.values.items()
            if isinstance(forcing, Forcing) and not forcing.linear_between_steps(plan.start, plan.step, plan.n_steps)
        ]
        if not rough:
            return "exact"
        if requested == "exact":
            warnings.warn(
                f"{case.path}: the exact path takes {', '.join(rough)} linear between steps of {plan.step:g} s, but it is a "
                "generated cycle or a series sampled between the steps; its error is that interpolation's "
                "(a step on the series' own times, or tr-bdf2, avoids it)",
                UserWarning,
                stacklevel=4,
            )
            return "exact"
    if requested == "exact":
        what = "contents in the bore" if system.water is not None else (
            "an automatic film" if (system.inside.auto or system.outside.auto) else "a temperature-dependent conductivity")
        raise CaseError(case.path, "time.scheme", f"exact needs a linear case, and this one has {what}; use auto (tr-bdf2 here) or a stepping scheme")
    return resolve_scheme(requested).name


def initial_state(case: Case, mesh: Mesh, system: System, scheme: str | None = None) -> tuple[np.ndarray, int]:
    """Initial cell temperatures [degC] and the number of periodic cycles used."""
    plan = case.time
    scheme = scheme or scheme_for(case, system)
    if isinstance(plan.initial, float):
        return np.full(mesh.n, plan.initial), 0
    if plan.initial == "steady":
        at_start = tuple(ex.forcing(np.array([0.0])) for ex in (system.inside, system.outside))
        exact = cell_temperatures(mesh, steady_state(case, forcing=at_start))
        if system.depends_on_temperature:
            return settle(system, exact, 0.0, case.inside.initial_temperature), 0
        return exact, 0
    steps = int(round(plan.period / plan.step))
    if scheme == "exact":  # the periodic state itself, mode by mode
        return exact_periodic_start(system, plan.step, steps), 1
    # "periodic": repeat the first period from the steady state of its mean forcing
    state = cell_temperatures(mesh, steady_state(case, forcing=_mean_forcing(case, system)))
    return periodic_start(system, state, plan.step, steps, scheme)


def _starts_with_a_step(case: Case, system: System) -> float:
    """How far [K] a start from a temperature lies from what drives either
    boundary at the start (:meth:`layers.exchange.Exchange.drive_temperature`); 0 otherwise."""
    if not isinstance(case.time.initial, float):
        return 0.0
    return max(
        (abs(float(ex.drive_temperature(ex.forcing(np.array([0.0])))[0]) - case.time.initial)
         for ex in (system.inside, system.outside) if ex.kind != "adiabatic"),
        default=0.0,
    )


def run_march(case: Case, mesh: Mesh, progress: Callable[[int, int], None] | None = None, field_sink=None) -> tuple[MarchResult, int, System]:
    """Initial state and march of a case: the march result, the periodic cycles used and the system marched.

    Raises
    ------
    CaseError
        When the state leaves the physical range, naming the boundary that drives it.
    """
    system = system_for(case, mesh)
    try:
        return _run_march(case, mesh, system, progress, field_sink)
    except UnphysicalState as exc:
        raise unphysical_error(case, system, exc) from None
    except BadConductivity as exc:
        raise conductivity_error(case, exc) from None


def conductivity_error(case: Case, exc: BadConductivity) -> CaseError:
    """A k(T) law used where it does not hold, as a CaseError naming the layer."""
    return CaseError(
        case.path, f"layers[{exc.layer}].material",
        f"the conductivity of {exc.material} comes out as {exc.conductivity:.3g} W/(m*K) at {exc.temperature:.4g} degC: "
        "its k(T) law does not hold there; give it values over the whole temperature range of the run",
    )


def _run_march(case: Case, mesh: Mesh, system: System, progress, field_sink=None) -> tuple[MarchResult, int, System]:
    scheme = scheme_for(case, system)
    initial, cycles = initial_state(case, mesh, system, scheme)
    plan = case.time
    total = plan.n_steps
    callback = (lambda done: progress(done, total)) if progress else None
    if scheme == "exact":
        return exact_march(system, initial, plan.step, total, output_every=plan.output_stride, progress=callback,
                           field_sink=field_sink), cycles, system
    step_size = _stepping_start(case, system, scheme)
    water0 = case.inside.initial_temperature if system.water is not None else None
    result = march(
        system, initial, plan.step, total,
        output_every=plan.output_stride, scheme=scheme, initial_water=water0,
        smooth_start=step_size > 0.0, ice_target=_ice_target(case), progress=callback, field_sink=field_sink,
    )
    _warn_jumps(case, scheme, step_size, result)
    return result, cycles, system


def _stepping_start(case: Case, system: System, scheme: str) -> float:
    """How far [K] a start from a temperature lies from what drives the boundaries
    (the start is smoothed when it is not 0); warns for Crank-Nicolson."""
    step_size = _starts_with_a_step(case, system)
    if scheme == "crank-nicolson" and step_size > STEP_WARNING:
        warnings.warn(
            f"{case.path}: crank-nicolson after a {step_size:.3g} K step at the start is smoothed by "
            "backward-Euler half steps but still rings wherever a boundary changes abruptly; "
            "tr-bdf2 (the default) damps it",
            UserWarning,
            stacklevel=5,
        )
    return step_size


def _warn_jumps(case: Case, scheme: str, step_size: float, result: MarchResult) -> None:
    """Crank-Nicolson: say how many steps after a jump in a boundary were smoothed."""
    jumps = result.smoothed_steps - (min(resolve_scheme(scheme).smoothing_steps, case.time.n_steps) if step_size > 0.0 else 0)
    if scheme == "crank-nicolson" and jumps > 0:
        warnings.warn(
            f"{case.path}: crank-nicolson met {jumps} step(s) where a boundary jumps; they were taken as "
            "backward-Euler half steps, but its fluxes ring after sudden changes: tr-bdf2 (the default) damps them",
            UserWarning,
            stacklevel=5,
        )


def stepping_key(case: Case, system: System) -> tuple | None:
    """What cases must agree on to be marched together by the stepping path
    (:func:`layers.march.march_batch`), besides their boundaries: None for a
    case that is marched alone (contents in the bore, or the exact path)."""
    scheme = scheme_for(case, system)
    if scheme == "exact" or system.water is not None:
        return None
    plan = case.time
    return (scheme, plan.step, plan.n_steps, plan.output_stride, str(plan.start), str(plan.initial), plan.period,
            _starts_with_a_step(case, system) > 0.0)


def march_together(cases: list[Case], meshes: list[Mesh], systems: list[System],
                   starts: list[tuple[np.ndarray, int]] | None = None,
                   field_sinks: list | None = None) -> tuple[list[MarchResult], list[int]]:
    """March cases with the same :func:`stepping_key` and the same boundaries
    together (one tridiagonal system, :func:`layers.march.march_batch`): each
    result is the one its case gets alone, to the stages' iteration tolerance.
    Returns the results and the periodic cycles each case's start used.

    ``starts``: each case's :func:`initial_state` where the caller made them
    (one case at a time, so that an error or a warning of a start is that
    case's); made here otherwise.  ``field_sinks``: one per case
    (:class:`layers.results.FieldExtremes` where the fields are not kept), so
    that the cases' cell fields never fill memory together.  With more than one case the iteration's
    :class:`layers.errors.ConvergenceWarning` is left to the caller, case by
    case (:func:`layers.march.warn_unconverged` with each result's
    ``unconverged_steps``).

    Raises
    ------
    UnphysicalState, BadConductivity
        With ``member``, the index of the case that left the physical range
        or its k(T) law while marching.
    """
    first = cases[0]
    scheme = scheme_for(first, systems[0])
    if starts is None:
        starts = [initial_state(v, m, s, scheme) for v, m, s in zip(cases, meshes, systems)]
    step_size = _stepping_start(first, systems[0], scheme)
    plan = first.time
    results = march_batch(systems, [x for x, _ in starts], plan.step, plan.n_steps, output_every=plan.output_stride,
                          scheme=scheme, smooth_start=step_size > 0.0, field_sink=field_sinks)
    _warn_jumps(first, scheme, step_size, results[0])
    return results, [cycles for _, cycles in starts]


#: A run whose cells leave the range of their initial and boundary temperatures
#: by more than this gets a warning [K] (the numerical overshoot of a scheme
#: that is not monotone; sun, sky and imposed fluxes legitimately leave it).
RANGE_WARNING = 0.1


def _warn_outside_range(case: Case, system: System, res: MarchResult, field_sink=None) -> None:
    """Warn when the cells leave the range spanned by the initial state and
    every temperature that drives a boundary (maximum principle)."""
    if any(ex.kind == "flux" or (ex.kind == "film" and ex.has_sun_or_sky) for ex in (system.inside, system.outside)):
        return
    low, high = res.drive_range
    t = res.temperature if res.temperature is not None else res.interface_temperature
    hottest, coldest = float(np.max(t)), float(np.min(t))
    if field_sink is not None:
        hottest, coldest = max(hottest, field_sink.high), min(coldest, field_sink.low)
    above, below = hottest - high, low - coldest
    if max(above, below) > RANGE_WARNING:
        where = f"{above:.3g} K above the highest" if above >= below else f"{below:.3g} K below the lowest"
        warnings.warn(
            f"{case.path}: cell temperatures reach {where} initial or boundary temperature (overshoot of "
            f"{res.scheme} at step {case.time.step:g} s; a shorter step or tr-bdf2 reduces it)",
            UserWarning,
            stacklevel=3,
        )


def _warn_service_temperature(case: Case, mesh: Mesh, res: MarchResult, warn: bool = True, field_sink=None) -> list[str]:
    """Warn for every layer whose material passes its maximum service temperature
    (at the kept times, cell centres where kept and layer faces); returns the
    warnings' texts (``warn=False``: only returns them)."""
    texts = []
    for number, spec in enumerate(case.layers, start=1):
        if spec.is_gap or spec.material.max_temperature is None:
            continue
        faces = res.interface_temperature[:, number - 1 : number + 1]
        hottest = faces.max(axis=1)
        if res.temperature is not None:
            hottest = np.maximum(res.temperature[:, mesh.layer == number].max(axis=1), hottest)
        elif field_sink is not None:
            hottest = np.maximum(field_sink.layer_hottest[:, number - 1], hottest)
        j = int(np.argmax(hottest))
        if hottest[j] > spec.material.max_temperature:
            when = np.datetime_as_string(case.datetimes(res.time[j : j + 1])[0], unit="m") + "Z"
            text = (
                f"layer {number} ({spec.material.name}) reaches {hottest[j]:.1f} degC at {when}, above its maximum "
                f"service temperature of {spec.material.max_temperature:g} degC: choose a material rated for it"
            )
            if warn:
                warnings.warn(f"{case.path}: {text}", UserWarning, stacklevel=3)
            texts.append(text)
    return texts


def unphysical_error(case: Case, system: System, exc: UnphysicalState) -> CaseError:
    """The bad input behind a state outside physics, as a CaseError naming the
    boundary that drives it (the one that moves the most heat at that moment)."""
    when = np.datetime_as_string(case.datetimes(np.array([exc.time]))[0], unit="m") + "Z"
    if math.isnan(exc.low) or math.isnan(exc.high):
        what = "temperatures that are not numbers"
    elif exc.low <= ABSOLUTE_ZERO_CELSIUS:
        what = f"{exc.low:.4g} degC, below absolute zero"
    else:
        what = f"{exc.high:.4g} degC, beyond what any construction material survives"
    side = system.inside if abs(exc.q_in) >= abs(exc.q_out) or math.isnan(exc.q_out) else system.outside
    key = {
        "flux": "heat_flux", "temperature": "surface_temperature", "film": "air_temperature",
        "contents": "initial_temperature", "adiabatic": "type",
    }[side.kind]
    if side.kind == "film" and side.spec.solar_irradiance is not None:
        key = "solar_irradiance"
    reason = (
        f"the run reaches {what} at {when}, driven by this boundary "
        f"({side.kind}; {abs(exc.q_in if side is system.inside else exc.q_out):.4g} W per {case.reference_unit} at that moment): "
        "check its value, sign and unit; nothing was archived"
    )
    return CaseError(case.path, f"{side.side}.{key}", reason)


class RunRecord(NamedTuple):
    """A finished march as the result Dataset takes it: the arrays of
    :func:`layers.results.to_dataset` (``fields``), the extra time series
    (``extra``) and the run's attributes (``attrs``)."""

    fields: dict
    extra: dict
    attrs: dict


def run_record(case: Case, mesh: Mesh, system: System, res: MarchResult, cycles: int, *, warn: bool = True, field_sink=None) -> RunRecord:
    """What a run reports, from its march: warnings (overshoot, service
    temperature), boundary series, contents, the energy balance and attributes.
    Shared by :func:`simulate` and the members of a sweep.  With a
    ``field_sink`` the fields' extremes come from it."""
    if warn:
        _warn_outside_range(case, system, res, field_sink)
    overheated = _warn_service_temperature(case, mesh, res, warn=warn, field_sink=field_sink)
    seconds = res.time
    extra: dict = {}
    attrs: dict = {}
    for spec, film, t_eq in ((case.inside, res.film_in, res.t_eq_in), (case.outside, res.film_out, res.t_eq_out)):
        if spec.kind != "film":
            continue
        if spec.auto_film:
            extra[f"film_coefficient_{spec.side}"] = ("W m-2 K-1", f"{spec.side} surface film coefficient, convection plus radiation", film)
        ex = system.inside if spec.side == "inside" else system.outside
        if ex.has_sun_or_sky and (spec.auto_film or spec.solar_absorptance):
            extra[f"sol_air_temperature_{spec.side}"] = t_eq
        air = in_seconds(case, spec.air_temperature)(seconds)
        extra[f"air_temperature_{spec.side}"] = air
        if spec.solar_irradiance is not None:  # what the surface received, as the run used it
            transposed = spec.solar_irradiance_on == "horizontal"
            extra[f"solar_irradiance_{spec.side}"] = (
                "W m-2",
                f"solar irradiance on the {spec.side} surface"
                + (f" (transposed from global horizontal: tilt {spec.tilt:g} deg, azimuth {spec.surface_azimuth:g} deg, albedo {spec.albedo:g})"
                   if transposed else " (as given)"),
                np.asarray(in_seconds(case, spec.solar_irradiance)(seconds), dtype=float) * np.ones_like(air),
            )
            if transposed:
                from layers.solar import provenance

                attrs["solar_model"] = provenance()
        if spec.relative_humidity is not None:
            from layers.psychrometrics import dew_point

            rh = in_seconds(case, spec.relative_humidity)(seconds) * np.ones_like(air)
            extra[f"dew_point_{spec.side}"] = (
                "degC",
                f"{spec.side} air dew point (ISO 13788:2012 saturation pressure)",
                np.asarray(dew_point(air, rh), dtype=float),
            )
    if res.contents_temperature is not None:
        extra["contents_temperature"] = ("degC", "temperature of the contents of the bore", res.contents_temperature)
        extra["ice_fraction"] = ("1", "mass fraction of the contents that is ice", res.ice_fraction)
        attrs["time_to_freezing_h"] = res.time_to_freezing / 3600.0
        attrs["freeze_time_h"] = res.time_to_ice_fraction / 3600.0
        attrs["max_ice_fraction"] = _ice_target(case)
        # heat given up by the contents to the bore over the run (the contents are part of
        # the stored energy, so they do not enter the energy-balance boundary terms)
        attrs["heat_from_contents_total"] = float(res.initial_enthalpy - res.final_enthalpy)
    if system.depends_on_temperature:
        attrs["nonlinear_tolerance_K"] = TOLERANCE
        attrs["nonlinear_unconverged_steps"] = res.unconverged_steps
        attrs["nonlinear_max_iterations"] = res.max_iterations_used
    attrs["smoothed_steps"] = res.smoothed_steps
    if overheated:
        attrs["service_temperature_exceeded"] = "; ".join(overheated)
    net = res.heat_in + res.heat_out
    # relative to the heat exchanged, or to 1 J per reference unit where less than
    # that crossed the boundaries (a construction in equilibrium: only round-off)
    scale = max(res.heat_abs, abs(res.stored_final - res.stored_initial), 1.0)
    balance = abs((res.stored_final - res.stored_initial) - net) / scale
    # With contents the water is part of the stored energy, so the balance has
    # no inside boundary term; the heat through the bore wall is what the
    # contents gave up, and that is what the run reports for the inside surface.
    heat_in_reported = attrs.get("heat_from_contents_total", res.heat_in)
    fields = dict(
        seconds=seconds,
        temperature=res.temperature,
        interface_temperature=res.interface_temperature,
        surface_temperature_inside=res.surface_in,
        surface_temperature_outside=res.surface_out,
        heat_flow_inside=res.q_in,
        heat_flow_outside=-res.q_out,
        stored_energy=res.stored,
        energy_balance_error=balance,
        heat_in_total=heat_in_reported,
        heat_out_total=-res.heat_out,
        periodic_cycles=cycles,
    )
    attrs["scheme"] = res.scheme
    if case.time.scheme == "auto":
        attrs["scheme_requested"] = "auto"
    if case.geometry == "planar" and all(sp.kind == "film" and not sp.auto_film for sp in (case.inside, case.outside)) and mesh.is_linear:
        attrs["steady_resistance_total"] = float(mesh.steady_resistance() + case.inside.surface_resistance + case.outside.surface_resistance)
    return RunRecord(fields, extra, attrs)


def record_dataset(case: Case, mesh: Mesh, record: RunRecord) -> xr.Dataset:
    """The result Dataset of one run record."""
    ds = to_dataset(case, mesh, **record.fields, extra=record.extra)
    ds.attrs.update(record.attrs)
    return ds


def simulate(case: Case, progress: Callable[[int, int], None] | None = None, field_sink=None) -> xr.Dataset:
    """Run a case and return its results as a labelled Dataset.

    Parameters
    ----------
    case : Case
        From :func:`layers.case.load_case`.
    progress : callable, optional
        ``progress(steps_done, steps_total)``, called now and then.
    field_sink : FieldSink, optional
        Takes the cell fields as the march makes them
        (:class:`layers.results.FieldSink`), so memory stays flat however
        long the run: the Dataset then has no ``temperature`` in memory, and
        :func:`layers.results.write_new` copies it from the sink into the
        file.  Close the sink after the Dataset is written.

    Returns
    -------
    xarray.Dataset
        Variables and attributes as the product contract lists them.
    """
    mesh = case.mesh()
    keep = case.time.keep_temperature is not False
    sink = field_sink if keep else FieldExtremes(mesh)  # fields not kept never fill memory
    res, cycles, system = run_march(case, mesh, progress, field_sink=sink)
    record = run_record(case, mesh, system, res, cycles, field_sink=sink)
    if sink is not None:
        record.fields["temperature"] = None
    ds = record_dataset(case, mesh, record)
    return field_sink.attach(ds) if field_sink is not None and keep else ds
