"""Boundary conditions: from a boundary specification to a solver drive.

Each side of the construction exchanges heat with its surroundings.  For the
solver every linear boundary is written as a conductance ``G`` from an
environment temperature to the nearest cell centre plus an imposed heat
``Q`` (both per reference unit: m2 of wall, m of pipe, whole sphere):

==============  ===========================  ===============================
type            G                            T_ext(t), Q(t)
==============  ===========================  ===============================
film            1 / (Rs / A + R_half)        air (or sol-air) temperature, 0
temperature     1 / R_half                   prescribed surface temperature, 0
flux            0                            -, q(t) A
adiabatic       0                            -, 0
==============  ===========================  ===============================

``R_half`` is the conduction resistance from the surface to the first cell
centre (:meth:`layers.mesh.Mesh.half_resistances`) and ``A`` the surface
area per reference unit.  The surface temperature follows from the heat
into the construction q as ``T_s = T_cell + q R_half``.

The sol-air temperature for a film with solar gain is
``T_sa = T_air + a I Rs`` (ASHRAE Handbook of Fundamentals 2017, ch. 18,
eq. 28, without the long-wave correction; CIBSE Guide A, sec. 5.2).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from layers.case import BoundarySpec, Case
from layers.mesh import Mesh
from layers.solver import Drive

LINEAR_KINDS = ("film", "temperature", "flux", "adiabatic")


def _zero(times: np.ndarray) -> np.ndarray:
    return np.zeros_like(np.asarray(times, dtype=float))


def in_seconds(case: Case, forcing) -> Callable[[np.ndarray], np.ndarray]:
    """Wrap a forcing of datetimes as a function of seconds from the case start."""
    return lambda seconds: np.asarray(forcing(case.datetimes(seconds)), dtype=float)


def is_linear(spec: BoundarySpec) -> bool:
    """True when the boundary gives a constant G (no auto film, no contents)."""
    return spec.kind in LINEAR_KINDS and not spec.auto_film


def surface_area(mesh: Mesh, side: str) -> float:
    """Area of the inside or outside surface per reference unit [m2 per ref. unit]."""
    return mesh.area_inside if side == "inside" else mesh.area_outside


def linear_drive(case: Case, spec: BoundarySpec, mesh: Mesh, half_resistance: float) -> Drive:
    """Drive of a linear boundary.

    Parameters
    ----------
    case : Case
    spec : BoundarySpec
    mesh : Mesh
    half_resistance : float
        Surface to nearest cell centre [K W-1 per reference unit].
    """
    area = surface_area(mesh, spec.side)
    if spec.kind == "film":
        rs = spec.surface_resistance
        conductance = 1.0 / (rs / area + half_resistance)
        t_air = in_seconds(case, spec.air_temperature)
        if spec.solar_irradiance is not None and spec.solar_absorptance:
            solar = in_seconds(case, spec.solar_irradiance)
            a = spec.solar_absorptance

            def t_ext(seconds: np.ndarray) -> np.ndarray:
                return t_air(seconds) + a * solar(seconds) * rs

            return Drive(conductance, t_ext, _zero)
        return Drive(conductance, t_air, _zero)
    if spec.kind == "temperature":
        return Drive(1.0 / half_resistance, in_seconds(case, spec.surface_temperature), _zero)
    if spec.kind == "flux":
        q = in_seconds(case, spec.heat_flux)
        return Drive(0.0, _zero, lambda seconds: q(seconds) * area)
    if spec.kind == "adiabatic":
        return Drive(0.0, _zero, _zero)
    raise ValueError(f"boundary type {spec.kind!r} is not linear")


def sol_air_temperature(case: Case, spec: BoundarySpec, seconds: np.ndarray) -> np.ndarray | None:
    """Sol-air temperature of a film boundary with solar gain [degC], or None."""
    if spec.kind != "film" or spec.solar_irradiance is None or spec.auto_film:
        return None
    t_air = in_seconds(case, spec.air_temperature)(seconds)
    solar = in_seconds(case, spec.solar_irradiance)(seconds)
    return t_air + spec.solar_absorptance * solar * spec.surface_resistance
