"""Vectorised steady state of layered walls, pipes and spheres (the ISO 12241 calculation).

For one-dimensional steady conduction with a temperature-dependent
conductivity the Kirchhoff transform makes each layer exact:

    q = lambda_m(theta_1, theta_2) (theta_1 - theta_2) / S,
    lambda_m = 1/(theta_2 - theta_1) * integral of lambda(theta) d theta

with S the shape factor of the shell (d for a plane, ln(r2/r1)/(2 pi) per
metre of pipe, (1/r1 - 1/r2)/(4 pi) for a sphere).  This is the mean-
conductivity rule of ISO 12241:2008 sec. 4.2 and ASTM C680 (from memory).
The heat flow, the layer-face temperatures and the surface coefficients that
depend on them (free convection, radiation) are found together by a fixed
point on the face temperatures, for many candidate thicknesses at once: all
arrays carry a leading candidate axis, so thousands of thickness and
temperature combinations cost a few dozen numpy passes.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass

import numpy as np

from layers.case import BoundarySpec, Case
from layers.errors import CaseError, ConvergenceWarning
from layers.radiation import STEFAN_BOLTZMANN

#: The fixed point stops when no face temperature changes by more than this [K].
TOLERANCE = 1e-7
MAX_ITERATIONS = 500
KELVIN = 273.15


@dataclass(frozen=True)
class SteadyResult:
    """Steady state of N candidate constructions.

    Attributes
    ----------
    heat_flow : (N,) heat flow from inside to outside [W per reference unit]
    surface_temperature_inside, surface_temperature_outside : (N,) [degC]
    face_temperature : (N, layers, 2) inner and outer face of each layer [degC]
    film_outside : (N,) outside surface coefficient [W m-2 K-1]
    outer_diameter : (N,) [m] (cylinder, sphere; total thickness for walls)
    iterations : int
    """

    heat_flow: np.ndarray
    surface_temperature_inside: np.ndarray
    surface_temperature_outside: np.ndarray
    face_temperature: np.ndarray
    film_outside: np.ndarray
    outer_diameter: np.ndarray
    iterations: int


def _shape(geometry: str, r1: np.ndarray, r2: np.ndarray) -> np.ndarray:
    if geometry == "planar":
        return r2 - r1
    if geometry == "cylinder":
        return np.log(r2 / r1) / (2.0 * math.pi)
    return (1.0 / r1 - 1.0 / r2) / (4.0 * math.pi)


def _area(geometry: str, r: np.ndarray) -> np.ndarray:
    if geometry == "planar":
        return np.ones_like(r)
    if geometry == "cylinder":
        return 2.0 * math.pi * r
    return 4.0 * math.pi * r**2


def design_time(case: Case) -> np.datetime64:
    """When the steady design conditions are taken: ``[sizing] design_time``, else the run's start."""
    if case.sizing is not None and case.sizing.design_time is not None:
        return case.sizing.design_time
    return case.time.start


def _value(case: Case, forcing) -> float:
    """A boundary quantity at the design time (see :func:`design_time`)."""
    return float(np.asarray(forcing(np.array([design_time(case)])), dtype=float)[0])


def _film(
    case: Case, spec: BoundarySpec, area: np.ndarray, diameter: np.ndarray, t_surface: np.ndarray, t_air: float
) -> tuple[np.ndarray, np.ndarray]:
    """Surface coefficient [W m-2 K-1] of a film boundary at surface
    temperatures ``t_surface``, and the temperature it drives towards [degC].

    For an ``"auto"`` film that is the convective-radiative mean
    (h_c t_air + h_r t_rad) / (h_c + h_r), as in the transient path
    (:class:`layers.boundaries.AutoFilm`); for a fixed film, the air.
    """
    if not spec.auto_film:
        rs = spec.surface_resistance
        return np.full_like(t_surface, math.inf if rs == 0 else 1.0 / rs), np.full_like(t_surface, t_air)
    from layers.convection import body_convection_coefficient, iso6946_external_convection, iso6946_internal_convection
    from layers.radiation import jacket_emissivity

    eps = jacket_emissivity(spec.jacket) if spec.jacket else spec.emissivity
    wind = _value(case, spec.wind_speed) if spec.wind_speed is not None else None
    if case.geometry == "planar":
        if spec.side == "inside":
            hc = np.full_like(t_surface, float(iso6946_internal_convection(spec.heat_flow_direction)))
        else:
            hc = np.full_like(t_surface, float(iso6946_external_convection(4.0 if wind is None else wind)))
    else:
        hc = np.asarray(
            body_convection_coefficient(
                case.geometry, t_surface, t_air, diameter, 0.0 if wind is None else wind,
                orientation=case.orientation, height=case.height,
            ),
            dtype=float,
        )
    t_rad = _value(case, spec.radiant_temperature) if spec.radiant_temperature is not None else t_air
    ts, tr = t_surface + KELVIN, t_rad + KELVIN
    hr = eps * STEFAN_BOLTZMANN * (ts * ts + tr * tr) * (ts + tr)
    return hc + hr, (hc * t_air + hr * t_rad) / (hc + hr)


def steady_state(case: Case, layer: int | None = None, thicknesses: np.ndarray | None = None) -> SteadyResult:
    """Steady state of the case's construction at its design conditions.

    Parameters
    ----------
    case : Case
        Boundary values are taken at the case's start time.  Inside: film,
        temperature or contents (held at its initial temperature); outside:
        film or temperature.
    layer : int, optional
        1-based index of the layer whose thickness varies.
    thicknesses : array_like, optional
        Candidate thicknesses of that layer [m], shape (N,).

    Returns
    -------
    SteadyResult
    """
    specs = case.layers
    n_cand = 1 if thicknesses is None else int(np.size(thicknesses))
    geometry = case.geometry
    r = np.full(n_cand, case.inner_radius if geometry != "planar" else 0.0)
    radii = []  # (inner, outer) per layer
    for j, spec in enumerate(specs, start=1):
        d = np.asarray(thicknesses, dtype=float) if (layer == j and thicknesses is not None) else np.full(n_cand, spec.thickness)
        radii.append((r, r + d))
        r = r + d
    r_out = r
    area_in = _area(geometry, np.full(n_cand, case.inner_radius if geometry != "planar" else 0.0))
    area_out = _area(geometry, r_out)
    diameter = 2.0 * r_out if geometry != "planar" else r_out

    inside, outside = case.inside, case.outside
    if inside.kind in ("flux", "adiabatic") or outside.kind in ("flux", "adiabatic", "contents"):
        raise CaseError(case.path, "inside.type", "the steady calculation needs a film, temperature or contents inside and a film or temperature outside")
    if inside.kind == "film":
        t_in = _value(case, inside.air_temperature)
    elif inside.kind == "temperature":
        t_in = _value(case, inside.surface_temperature)
    else:
        t_in = float(inside.initial_temperature)
    t_out = _value(case, outside.air_temperature if outside.kind == "film" else outside.surface_temperature)

    n_layers = len(specs)
    faces = np.empty((n_cand, n_layers, 2))
    # initial guess: linear in position
    total = (r_out - radii[0][0])
    for j, (a, b) in enumerate(radii):
        faces[:, j, 0] = t_in + (t_out - t_in) * (a - radii[0][0]) / np.where(total > 0, total, 1)
        faces[:, j, 1] = t_in + (t_out - t_in) * (b - radii[0][0]) / np.where(total > 0, total, 1)
    ts_in = faces[:, 0, 0].copy()
    ts_out = faces[:, -1, 1].copy()
    h_out = np.full(n_cand, math.nan)
    for iteration in range(1, MAX_ITERATIONS + 1):
        resist = []
        for j, spec in enumerate(specs):
            a, b = radii[j]
            if spec.is_gap:
                resist.append(spec.resistance / _area(geometry, 0.5 * (a + b)))
            else:
                lam = np.asarray(spec.material.mean_conductivity(faces[:, j, 0], faces[:, j, 1]), dtype=float)
                resist.append(_shape(geometry, a, b) / lam)
            contact = spec.contact_resistance / _area(geometry, b) if spec.contact_resistance else np.zeros(n_cand)
            resist.append(contact)
        drive_in, drive_out = t_in, t_out
        if inside.kind == "film":
            h_in, drive_in = _film(case, inside, area_in, 2 * radii[0][0], ts_in, t_in)
            r_in = 1.0 / (h_in * area_in)
        elif inside.kind == "contents" and inside.surface_resistance:
            r_in = inside.surface_resistance / area_in
        else:
            r_in = np.zeros(n_cand)
        if outside.kind == "film":
            h_out, drive_out = _film(case, outside, area_out, diameter, ts_out, t_out)
            r_o = 1.0 / (h_out * area_out)
        else:
            r_o = np.zeros(n_cand)
        q = (drive_in - drive_out) / (r_in + sum(resist) + r_o)
        new = np.empty_like(faces)
        theta = drive_in - q * r_in
        for j in range(n_layers):
            new[:, j, 0] = theta
            theta = theta - q * resist[2 * j]
            new[:, j, 1] = theta
            theta = theta - q * resist[2 * j + 1]
        change = float(np.max(np.abs(new - faces)))
        faces = new
        ts_in = faces[:, 0, 0]
        ts_out = faces[:, -1, 1]
        if change < TOLERANCE:
            break
    else:
        warnings.warn(f"steady state: fixed point not within {TOLERANCE:g} K after {MAX_ITERATIONS} iterations", ConvergenceWarning, stacklevel=2)
    return SteadyResult(
        heat_flow=q,
        surface_temperature_inside=ts_in.copy(),
        surface_temperature_outside=ts_out.copy(),
        face_temperature=faces,
        film_outside=h_out,
        outer_diameter=diameter,
        iterations=iteration,
    )
