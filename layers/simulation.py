"""The one entry point: a case in, a labelled result out.

Data flow: case -> mesh -> boundary drives -> assembled system -> initial
state -> time march -> arrays -> :func:`layers.results.to_dataset`.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import xarray as xr

from layers.boundaries import in_seconds, is_linear, linear_drive, side_model, sol_air_temperature
from layers.contents import WaterNode
from layers.case import Case
from layers.errors import CaseError, ConvergenceWarning
from layers.mesh import Mesh, build_mesh
from layers.nonlinear import TOLERANCE, NonlinearResult, NonlinearSystem, march_nonlinear, steady_nonlinear
from layers.results import to_dataset
from layers.solver import LinearSystem, MarchResult, march, steady_state

#: The ``"periodic"`` initial state repeats the first period until no cell changes by more than this [K].
PERIODIC_TOLERANCE = 1e-3
PERIODIC_MAX_CYCLES = 2000
#: Default ice fraction for the freeze time: a common design allowance (ISO 12241 and
#: handbook practice allow a partly frozen pipe; 25 % is usual, common practice).
DEFAULT_ICE_FRACTION = 0.25


@dataclass
class Run:
    """Everything a finished run knows, before it becomes a Dataset."""

    case: Case
    mesh: Mesh
    system: LinearSystem
    result: MarchResult
    initial: np.ndarray
    periodic_cycles: int = 0


def mesh_for(case: Case) -> Mesh:
    """The finite-volume mesh of a case."""
    return build_mesh(case.layers, case.mesh_rule, case.geometry, case.inner_radius)


def assemble(case: Case, mesh: Mesh) -> LinearSystem:
    """Capacities, conductances and boundary drives of a linear case."""
    for spec in (case.inside, case.outside):
        if not is_linear(spec):
            what = "an auto film coefficient" if spec.auto_film else f"a {spec.kind!r} boundary"
            raise CaseError(case.path, f"{spec.side}.type", f"{what} needs the nonlinear solver")
    if not mesh.is_linear:
        names = sorted({m.name for m in mesh.materials if not m.is_constant})
        raise CaseError(case.path, "layers", f"temperature-dependent conductivity ({', '.join(names)}) needs the nonlinear solver")
    k = mesh.conductivity()
    r_in, r_out = mesh.half_resistances(k)
    return LinearSystem(
        capacity=mesh.capacity(),
        conductance=mesh.conductances(k),
        inside=linear_drive(case, case.inside, mesh, r_in),
        outside=linear_drive(case, case.outside, mesh, r_out),
    )


def periodic_settled(change: float, previous: float | None) -> bool:
    """Whether repeating the period can stop.

    The change from one cycle to the next must be below
    :data:`PERIODIC_TOLERANCE` everywhere, and so must the change still to
    come: the slowest mode decays geometrically, by r = change / previous a
    cycle, so the distance left to the periodic state is change r / (1 - r).
    That exceeds the last change once r > 0.5, i.e. for a construction whose
    slowest mode decays by less than half a period (a 600 mm brick wall
    under a daily cycle: r = 0.41, measured).

    Parameters
    ----------
    change, previous : float
        Largest change over the last and the cycle before [K]; ``previous``
        None after the first cycle.
    """
    if change >= PERIODIC_TOLERANCE:
        return False
    if previous is None or previous <= change:
        return True  # already settled on the first cycle, or down to round-off
    r = change / previous
    return change * r / (1.0 - r) < PERIODIC_TOLERANCE


def initial_state(case: Case, system: LinearSystem) -> tuple[np.ndarray, int]:
    """Initial cell temperatures [degC] and the number of periodic cycles used."""
    plan = case.time
    if isinstance(plan.initial, float):
        return np.full(system.n, plan.initial), 0
    if plan.initial == "steady":
        return steady_state(system, 0.0), 0
    # "periodic": repeat the first period from the steady state of its mean drive
    steps = int(round(plan.period / plan.step))
    seconds = np.arange(steps) * plan.step
    mean_system = LinearSystem(
        system.capacity,
        system.conductance,
        _mean_drive(system.inside, seconds),
        _mean_drive(system.outside, seconds),
    )
    state = steady_state(mean_system, 0.0)
    previous = None
    for cycle in range(1, PERIODIC_MAX_CYCLES + 1):
        out = march(system, state, plan.step, steps, output_every=steps, scheme=plan.scheme)
        change = float(np.max(np.abs(out.final - state)))
        state = out.final
        if periodic_settled(change, previous):
            return state, cycle
        previous = change
    warnings.warn(
        f"periodic initial state: change still {change:.2g} K after {PERIODIC_MAX_CYCLES} cycles",
        ConvergenceWarning,
        stacklevel=2,
    )
    return state, PERIODIC_MAX_CYCLES


def _mean_drive(drive, seconds):
    from layers.solver import Drive

    te = float(np.mean(drive.t_ext(seconds)))
    q = float(np.mean(drive.q(seconds)))
    return Drive(drive.conductance, lambda t: np.full_like(np.asarray(t, float), te), lambda t: np.full_like(np.asarray(t, float), q))


def run_case(case: Case, progress: Callable[[int, int], None] | None = None) -> Run:
    """Mesh, assemble, initialise and march a case."""
    mesh = mesh_for(case)
    system = assemble(case, mesh)
    initial, cycles = initial_state(case, system)
    plan = case.time
    total = plan.n_steps
    callback = (lambda done: progress(done, total)) if progress else None
    result = march(
        system,
        initial,
        plan.step,
        total,
        output_every=plan.output_stride,
        scheme=plan.scheme,
        progress=callback,
    )
    return Run(case, mesh, system, result, initial, cycles)


def needs_nonlinear(case: Case, mesh: Mesh) -> bool:
    """True for k(T) materials, auto film coefficients or contents."""
    return (not mesh.is_linear) or not (is_linear(case.inside) and is_linear(case.outside))


def build_nonlinear(case: Case, mesh: Mesh) -> NonlinearSystem:
    """The nonlinear system of a case (see :mod:`layers.nonlinear`)."""
    outside = side_model(case, case.outside, mesh)
    if case.inside.kind == "contents":
        water = WaterNode.for_bore(case.geometry, case.inner_radius)
        r_film = (case.inside.surface_resistance or 0.0) / mesh.area_inside
        return NonlinearSystem(mesh, outside, water=water, water_resistance=r_film)
    return NonlinearSystem(mesh, outside, inside=side_model(case, case.inside, mesh))


def _ice_target(case: Case) -> float:
    return case.sizing.max_ice_fraction if case.sizing is not None else DEFAULT_ICE_FRACTION


def run_nonlinear(case: Case, mesh: Mesh, progress=None) -> tuple[NonlinearResult, int]:
    """Initial state and march for a nonlinear case."""
    system = build_nonlinear(case, mesh)
    plan = case.time
    water0 = case.inside.initial_temperature if system.water is not None else None
    cycles = 0
    if isinstance(plan.initial, float):
        state = np.full(mesh.n, plan.initial)
    else:
        state, _ = steady_nonlinear(system, t_water=water0)
        if plan.initial == "periodic":
            steps = int(round(plan.period / plan.step))
            previous = None
            for cycles in range(1, PERIODIC_MAX_CYCLES + 1):
                out = march_nonlinear(system, state, water0, plan.step, steps, steps, plan.scheme)
                change = float(np.max(np.abs(out.final - state)))
                state = out.final
                if system.water is not None:
                    water0 = float(system.water.state(out.final_enthalpy)[0])
                if periodic_settled(change, previous):
                    break
                previous = change
            else:
                warnings.warn(
                    f"periodic initial state: change still {change:.2g} K after {PERIODIC_MAX_CYCLES} cycles",
                    ConvergenceWarning,
                    stacklevel=2,
                )
    total = plan.n_steps
    callback = (lambda done: progress(done, total)) if progress else None
    result = march_nonlinear(
        system, state, water0, plan.step, total, plan.output_stride, plan.scheme,
        progress=callback, ice_target=_ice_target(case),
    )
    return result, cycles


#: A start this far from a fixed boundary temperature counts as a step [K].
STEP_WARNING = 1.0


def _warn_crank_nicolson_step(case: Case) -> None:
    """Crank-Nicolson is not L-stable: after a sudden change at a surface its
    fine-mesh modes flip sign from step to step instead of decaying, so
    surface fluxes ring. Say so when a run starts from a temperature that
    a temperature boundary (or a fluid in a bore) does not share."""
    if case.time.scheme != "crank-nicolson" or not isinstance(case.time.initial, float):
        return
    for spec in (case.inside, case.outside):
        forcing = spec.surface_temperature if spec.kind == "temperature" else None
        if forcing is not None:
            start = float(forcing(np.array([case.time.start]))[0])
            if abs(start - case.time.initial) > STEP_WARNING:
                warnings.warn(
                    f"{case.path}: crank-nicolson after a {abs(start - case.time.initial):.3g} K step at the "
                    f"{spec.side} surface rings (fluxes oscillate for many steps); tr-bdf2 or backward-euler damp it",
                    UserWarning,
                    stacklevel=3,
                )
                return


def simulate(case: Case, progress: Callable[[int, int], None] | None = None) -> xr.Dataset:
    """Run a case and return its results as a labelled Dataset.

    Parameters
    ----------
    case : Case
        From :func:`layers.case.load_case`.
    progress : callable, optional
        ``progress(steps_done, steps_total)``, called now and then.

    Returns
    -------
    xarray.Dataset
        Variables and attributes as the product contract lists them.
    """
    mesh = mesh_for(case)
    _warn_crank_nicolson_step(case)
    extra: dict = {}
    attrs: dict = {}
    if needs_nonlinear(case, mesh):
        res, cycles = run_nonlinear(case, mesh, progress)
        seconds = res.time
        surface_in, surface_out = res.surface_in, res.surface_out
        stored, stored0, stored_end = res.stored, res.stored_initial, res.stored_final
        for spec, film, t_eq in ((case.inside, res.film_in, res.t_eq_in), (case.outside, res.film_out, res.t_eq_out)):
            if spec.auto_film:
                extra[f"film_coefficient_{spec.side}"] = ("W m-2 K-1", f"{spec.side} surface film coefficient, convection plus radiation", film)
                if spec.solar_irradiance is not None or spec.sky_temperature is not None or spec.values.get("sky_auto"):
                    extra[f"sol_air_temperature_{spec.side}"] = t_eq
        if res.contents_temperature is not None:
            extra["contents_temperature"] = ("degC", "temperature of the contents of the bore", res.contents_temperature)
            extra["ice_fraction"] = ("1", "mass fraction of the contents that is ice", res.ice_fraction)
            attrs["time_to_freezing_h"] = res.time_to_freezing / 3600.0
            attrs["freeze_time_h"] = res.time_to_ice_fraction / 3600.0
            attrs["max_ice_fraction"] = _ice_target(case)
            # heat given up by the contents to the bore over the run (the contents are part of
            # the stored energy, so they do not enter the energy-balance boundary terms)
            attrs["heat_from_contents_total"] = float(res.initial_enthalpy - res.final_enthalpy)
        attrs["nonlinear_tolerance_K"] = TOLERANCE
        attrs["nonlinear_unconverged_steps"] = res.unconverged_steps
        attrs["nonlinear_max_iterations"] = res.max_iterations_used
        q_in, q_out = res.q_in, res.q_out
        temperature = res.temperature
        heat_in, heat_out, heat_abs = res.heat_in, res.heat_out, res.heat_abs
    else:
        run = run_case(case, progress)
        res_l = run.result
        cycles = run.periodic_cycles
        seconds = res_l.time
        k = mesh.conductivity()
        r_in, r_out = mesh.half_resistances(k)
        temperature = res_l.temperature
        q_in, q_out = res_l.q_in, res_l.q_out
        surface_in = temperature[:, 0] + q_in * r_in
        surface_out = temperature[:, -1] + q_out * r_out
        stored = temperature @ run.system.capacity
        stored0 = float(run.initial @ run.system.capacity)
        stored_end = float(res_l.final @ run.system.capacity)
        heat_in, heat_out, heat_abs = res_l.heat_in, res_l.heat_out, res_l.heat_abs
        for spec in (case.inside, case.outside):
            sol_air = sol_air_temperature(case, spec, seconds)
            if sol_air is not None:
                extra[f"sol_air_temperature_{spec.side}"] = sol_air
    for spec in (case.inside, case.outside):
        if spec.kind == "film":
            air = in_seconds(case, spec.air_temperature)(seconds)
            extra[f"air_temperature_{spec.side}"] = air
            if spec.relative_humidity is not None:
                from layers.psychrometrics import dew_point

                rh = in_seconds(case, spec.relative_humidity)(seconds) * np.ones_like(air)
                extra[f"dew_point_{spec.side}"] = (
                    "degC",
                    f"{spec.side} air dew point (ISO 13788:2012 saturation pressure)",
                    np.asarray(dew_point(air, rh), dtype=float),
                )
    net = heat_in + heat_out
    scale = max(heat_abs, abs(stored_end - stored0), 1e-300)
    balance = abs((stored_end - stored0) - net) / scale
    # With contents the water is part of the stored energy, so the balance has
    # no inside boundary term; the heat through the bore wall is what the
    # contents gave up, and that is what the run reports for the inside surface.
    heat_in_reported = attrs.get("heat_from_contents_total", heat_in)
    ds = to_dataset(
        case,
        mesh,
        seconds=seconds,
        temperature=temperature,
        surface_temperature_inside=surface_in,
        surface_temperature_outside=surface_out,
        heat_flow_inside=q_in,
        heat_flow_outside=-q_out,
        stored_energy=stored,
        energy_balance_error=balance,
        heat_in_total=heat_in_reported,
        heat_out_total=-heat_out,
        extra=extra,
        periodic_cycles=cycles,
    )
    if case.geometry == "planar" and all(sp.kind == "film" and not sp.auto_film for sp in (case.inside, case.outside)) and mesh.is_linear:
        attrs["steady_resistance_total"] = float(mesh.steady_resistance() + case.inside.surface_resistance + case.outside.surface_resistance)
    ds.attrs.update(attrs)
    return ds
