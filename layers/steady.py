"""The one steady solver: layered walls, pipes and spheres, many candidates at once.

For one-dimensional steady conduction with a temperature-dependent
conductivity the Kirchhoff transform makes each layer exact:

    q = lambda_m(theta_1, theta_2) (theta_1 - theta_2) / S,
    lambda_m = 1/(theta_2 - theta_1) * integral of lambda(theta) d theta

with S the shape factor of the shell (:func:`layers.mesh.shape_factor`).
This is the mean-conductivity rule of ISO 12241:2008 sec. 4.2 and ASTM C680
(from memory).  The heat flow, the layer-face temperatures and the surface
exchange that depends on them (:mod:`layers.exchange`: films, radiation,
free convection) are found together by a fixed point on the face
temperatures, for many candidate thicknesses at once: all arrays carry a
leading candidate axis, so thousands of candidates cost a few dozen numpy
passes.

Every steady figure comes from here: ``initial = "steady"`` (through
:func:`cell_temperatures`, the exact profile at the cell centres), the
periodic start (the steady state of the period's mean forcing), sizing,
and ``layers check``.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from layers.case import Case
from layers.errors import CaseError, ConvergenceWarning
from layers.exchange import Exchange, exchanges, thevenin
from layers.mesh import Mesh, shape_factor, surface_area

#: The fixed point stops when no face temperature changes by more than this [K].
TOLERANCE = 1e-7
MAX_ITERATIONS = 500


@dataclass(frozen=True)
class SteadyResult:
    """Steady state of N candidate constructions.

    Attributes
    ----------
    heat_flow : (N,) heat flow from inside to outside [W per reference unit]
    surface_temperature_inside, surface_temperature_outside : (N,) [degC]
    face_temperature : (N, layers, 2) inner and outer face of each layer [degC]
    film_inside, film_outside : (N,) surface coefficient of a film boundary [W m-2 K-1] (NaN otherwise)
    outer_diameter : (N,) [m] (cylinder, sphere; total thickness for walls)
    inner_radius : (N, layers) radius (or position) of each layer's inner face [m]
    iterations : int
    """

    heat_flow: np.ndarray
    surface_temperature_inside: np.ndarray
    surface_temperature_outside: np.ndarray
    face_temperature: np.ndarray
    film_inside: np.ndarray
    film_outside: np.ndarray
    outer_diameter: np.ndarray
    inner_radius: np.ndarray
    iterations: int


def design_time(case: Case) -> np.datetime64:
    """When the steady design conditions are taken: ``[sizing] design_time``, else the run's start."""
    if case.sizing is not None and case.sizing.design_time is not None:
        return case.sizing.design_time
    return case.time.start


def design_forcing(case: Case, exchange: Exchange, *, sun_and_sky: bool = False) -> dict[str, np.ndarray]:
    """A boundary's forcing at the design time (:func:`design_time`); without sun
    and sky unless asked (the usual steady design conditions)."""
    seconds = case.seconds(np.array([design_time(case)]))
    return exchange.forcing(seconds, sun_and_sky=sun_and_sky)


def steady_state(
    case: Case,
    layer: int | None = None,
    thicknesses: np.ndarray | None = None,
    *,
    forcing: tuple[dict, dict] | None = None,
) -> SteadyResult:
    """Steady state of the case's construction.

    Parameters
    ----------
    case : Case
        Inside: film, temperature, flux, adiabatic or contents (held at its
        initial temperature); outside: film, temperature, flux or adiabatic;
        not both sides a flux or adiabatic.
    layer : int, optional
        1-based index of the layer whose thickness varies.
    thicknesses : array_like, optional
        Candidate thicknesses of that layer [m], shape (N,).
    forcing : (dict, dict), optional
        Inside and outside forcing values (:meth:`layers.exchange.Exchange.forcing`
        at one time, or a period's mean).  Default: the design conditions
        (:func:`design_forcing`, without sun and sky).

    Returns
    -------
    SteadyResult
    """
    ex_in, ex_out = exchanges(case)
    if ex_in.kind in ("flux", "adiabatic") and ex_out.kind in ("flux", "adiabatic"):
        raise CaseError(case.path, "inside.type", "no steady state: neither boundary fixes a temperature (both are flux or adiabatic)")
    if forcing is None:
        forcing = (design_forcing(case, ex_in), design_forcing(case, ex_out))
    f_in, f_out = forcing
    specs = case.layers
    n_cand = 1 if thicknesses is None else int(np.size(thicknesses))
    geometry = case.geometry
    r0 = case.inner_radius if geometry != "planar" else 0.0
    r = np.full(n_cand, r0)
    radii = []  # (inner, outer) per layer
    for j, spec in enumerate(specs, start=1):
        d = np.asarray(thicknesses, dtype=float) if (layer == j and thicknesses is not None) else np.full(n_cand, spec.thickness)
        radii.append((r, r + d))
        r = r + d
    r_out = r
    area_in = surface_area(geometry, np.full(n_cand, r0))
    area_out = surface_area(geometry, r_out)
    diameter = 2.0 * r_out if geometry != "planar" else r_out

    # first guess: surfaces at the two drive temperatures, linear in between
    t_a = float(np.mean(ex_in.drive_temperature(f_in))) if ex_in.kind not in ("flux", "adiabatic") else None
    t_b = float(np.mean(ex_out.drive_temperature(f_out))) if ex_out.kind not in ("flux", "adiabatic") else None
    t_a = t_b if t_a is None else t_a
    t_b = t_a if t_b is None else t_b
    if ex_in.kind == "contents":
        t_a = float(f_in["contents"].flat[0])
    n_layers = len(specs)
    faces = np.empty((n_cand, n_layers, 2))
    span = np.where(r_out > r0, r_out - r0, 1.0)
    for j, (a, b) in enumerate(radii):
        faces[:, j, 0] = t_a + (t_b - t_a) * (a - r0) / span
        faces[:, j, 1] = t_a + (t_b - t_a) * (b - r0) / span
    ts_in, ts_out = faces[:, 0, 0].copy(), faces[:, -1, 1].copy()
    for iteration in range(1, MAX_ITERATIONS + 1):
        resist = []  # layer, then its contact resistance, per layer [K W-1 per reference unit]
        for j, spec in enumerate(specs):
            a, b = radii[j]
            if spec.is_gap:
                resist.append(spec.resistance / surface_area(geometry, 0.5 * (a + b)))
            else:
                lam = np.asarray(spec.material.mean_conductivity(faces[:, j, 0], faces[:, j, 1]), dtype=float)
                resist.append(shape_factor(geometry, a, b) / lam)
            resist.append(spec.contact_resistance / surface_area(geometry, b) if spec.contact_resistance else np.zeros(n_cand))
        r_cond = sum(resist)
        film_in = ex_in.film(f_in, ts_in, 2.0 * r0)
        film_out = ex_out.film(f_out, ts_out, diameter)
        theta_i, r_i = thevenin(film_in.h, film_in.t_eq, film_in.q_imposed, area_in)
        theta_o, r_o = thevenin(film_out.h, film_out.t_eq, film_out.q_imposed, area_out)
        if ex_in.kind in ("flux", "adiabatic"):
            q = film_in.q_imposed * area_in
            start = theta_o + q * (r_o + r_cond)
        elif ex_out.kind in ("flux", "adiabatic"):
            q = -film_out.q_imposed * area_out
            start = theta_i - q * r_i
        else:
            q = (theta_i - theta_o) / (r_i + r_cond + r_o)
            start = theta_i - q * r_i
        new = np.empty_like(faces)
        theta = start
        for j in range(n_layers):
            new[:, j, 0] = theta
            theta = theta - q * resist[2 * j]
            new[:, j, 1] = theta
            theta = theta - q * resist[2 * j + 1]
        change = float(np.max(np.abs(new - faces)))
        faces = new
        ts_in, ts_out = faces[:, 0, 0], faces[:, -1, 1]
        if not np.all(np.isfinite(faces)):
            raise CaseError(case.path, "layers", "the steady state is not finite (check the boundary values and the layer properties)")
        if change < TOLERANCE:
            break
    else:
        warnings.warn(f"steady state: fixed point not within {TOLERANCE:g} K after {MAX_ITERATIONS} iterations", ConvergenceWarning, stacklevel=2)
    nan = np.full(n_cand, math.nan)
    return SteadyResult(
        heat_flow=q,
        surface_temperature_inside=ts_in.copy(),
        surface_temperature_outside=ts_out.copy(),
        face_temperature=faces,
        film_inside=np.broadcast_to(film_in.h, (n_cand,)).copy() if ex_in.kind == "film" else nan,
        film_outside=np.broadcast_to(film_out.h, (n_cand,)).copy() if ex_out.kind == "film" else nan,
        outer_diameter=diameter,
        inner_radius=np.stack([a for a, _ in radii], axis=1),
        iterations=iteration,
    )


def cell_temperatures(mesh: Mesh, result: SteadyResult, candidate: int = 0) -> np.ndarray:
    """The exact steady profile of one candidate at the cell centres of ``mesh`` [degC].

    In each layer the Kirchhoff potential falls linearly with the shape
    factor from the layer's inner face: lambda_m(theta_1, T) (T - theta_1) =
    -q S(r_1, r).  For a constant conductivity that is T = theta_1 - q S / k
    (exactly the mesh's own steady state, since its half-cell resistances are
    the exact shell resistances); for k(T) it is solved by Newton's method,
    whose derivative is k(T) itself.
    """
    q = float(result.heat_flow[candidate])
    out = np.empty(mesh.n)
    r0 = mesh.inner_radius
    for number, spec in enumerate(mesh.layer_specs, start=1):
        cells = np.flatnonzero(mesh.layer == number)
        if spec.is_gap or cells.size == 0:
            continue
        theta_1 = float(result.face_temperature[candidate, number - 1, 0])
        r1 = float(result.inner_radius[candidate, number - 1])
        s = shape_factor(mesh.geometry, np.full(cells.size, r1), r0 + mesh.x[cells])
        target = -q * s  # Kirchhoff potential relative to the inner face [W m-1]
        mat = spec.material
        theta_2 = float(result.face_temperature[candidate, number - 1, 1])
        temp = theta_1 + target / mat.conductivity
        if not mat.is_constant:
            # safeguarded Newton: the potential rises monotonically, and the
            # root lies between the layer's two face temperatures
            lo = np.full(cells.size, min(theta_1, theta_2))
            hi = np.full(cells.size, max(theta_1, theta_2))
            temp = np.clip(theta_1 + target / np.asarray(mat.conductivity_at(theta_1), dtype=float), lo, hi)
            for _ in range(100):
                residual = np.asarray(mat.mean_conductivity(theta_1, temp), dtype=float) * (temp - theta_1) - target
                lo = np.where(residual < 0, temp, lo)
                hi = np.where(residual > 0, temp, hi)
                newton = temp - residual / np.asarray(mat.conductivity_at(temp), dtype=float)
                new = np.where((newton > lo) & (newton < hi), newton, 0.5 * (lo + hi))
                done = np.max(np.abs(new - temp)) < 1e-11
                temp = new
                if done:
                    break
        out[cells] = temp
    return out
