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

from layers.boundaries import in_seconds, is_linear, linear_drive, sol_air_temperature
from layers.case import Case
from layers.errors import CaseError, ConvergenceWarning
from layers.mesh import Mesh, build_mesh
from layers.results import to_dataset
from layers.solver import LinearSystem, MarchResult, march, steady_state

#: The ``"periodic"`` initial state repeats the first period until no cell changes by more than this [K].
PERIODIC_TOLERANCE = 1e-3
PERIODIC_MAX_CYCLES = 2000


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
    for cycle in range(1, PERIODIC_MAX_CYCLES + 1):
        out = march(system, state, plan.step, steps, output_every=steps, scheme=plan.scheme)
        change = float(np.max(np.abs(out.final - state)))
        state = out.final
        if change < PERIODIC_TOLERANCE:
            return state, cycle
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
    run = run_case(case, progress)
    res = run.result
    mesh = run.mesh
    k = mesh.conductivity()
    r_in, r_out = mesh.half_resistances(k)
    seconds = res.time
    extra = {}
    for spec in (case.inside, case.outside):
        if spec.kind == "film":
            extra[f"air_temperature_{spec.side}"] = in_seconds(case, spec.air_temperature)(seconds)
        sol_air = sol_air_temperature(case, spec, seconds)
        if sol_air is not None:
            extra[f"sol_air_temperature_{spec.side}"] = sol_air
    surface_in = res.temperature[:, 0] + res.q_in * r_in
    surface_out = res.temperature[:, -1] + res.q_out * r_out
    stored = res.temperature @ run.system.capacity
    stored0 = float(run.initial @ run.system.capacity)
    stored_end = float(res.final @ run.system.capacity)
    net = res.heat_in + res.heat_out
    scale = max(res.heat_abs, abs(stored_end - stored0), 1e-300)
    balance = abs((stored_end - stored0) - net) / scale
    return to_dataset(
        case,
        mesh,
        seconds=seconds,
        temperature=res.temperature,
        surface_temperature_inside=surface_in,
        surface_temperature_outside=surface_out,
        heat_flow_inside=res.q_in,
        heat_flow_outside=-res.q_out,
        stored_energy=stored,
        energy_balance_error=balance,
        heat_in_total=res.heat_in,
        heat_out_total=-res.heat_out,
        extra=extra,
        periodic_cycles=run.periodic_cycles,
    )
