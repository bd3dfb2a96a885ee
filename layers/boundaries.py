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

import math
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


# --------------------------------------------------------------------------- #
# boundary models for the nonlinear march (layers.nonlinear)

from layers.nonlinear import SideCoefficients, SideModel  # noqa: E402
from layers.radiation import STEFAN_BOLTZMANN, sky_temperature_swinbank, view_factor_ground, view_factor_sky  # noqa: E402

KELVIN = 273.15
#: ISO 6946:2017, annex on surface resistances: wind speed behind the conventional Rse = 0.04 m2K/W [m s-1].
ISO6946_WIND_SPEED = 4.0


class LinearSide(SideModel):
    """A film (fixed coefficient), temperature, flux or adiabatic boundary."""

    def __init__(self, case: Case, spec: BoundarySpec, mesh: Mesh) -> None:
        self.case, self.spec, self.area = case, spec, surface_area(mesh, spec.side)

    def prepare(self, seconds: np.ndarray) -> dict[str, np.ndarray]:
        spec, case = self.spec, self.case
        z = np.zeros_like(seconds, dtype=float)
        if spec.kind == "film":
            t = in_seconds(case, spec.air_temperature)(seconds) + z
            if spec.solar_irradiance is not None and spec.solar_absorptance:
                t = t + spec.solar_absorptance * in_seconds(case, spec.solar_irradiance)(seconds) * spec.surface_resistance
            return {"t": t, "q": z}
        if spec.kind == "temperature":
            return {"t": in_seconds(case, spec.surface_temperature)(seconds) + z, "q": z}
        if spec.kind == "flux":
            return {"t": z, "q": in_seconds(case, spec.heat_flux)(seconds) * self.area + z}
        return {"t": z, "q": z}

    def coefficients(self, forcing, k, t_surface, r_half) -> SideCoefficients:
        spec = self.spec
        if spec.kind == "film":
            rs = spec.surface_resistance
            g = 1.0 / (rs / self.area + r_half)
            return SideCoefficients(g, forcing["t"][k], 0.0, 1.0 / rs if rs > 0 else math.inf, forcing["t"][k])
        if spec.kind == "temperature":
            return SideCoefficients(1.0 / r_half, forcing["t"][k], 0.0)
        return SideCoefficients(0.0, 0.0, forcing["q"][k])


class AutoFilm(SideModel):
    """Film coefficient from convection and long-wave radiation at the surface temperature.

    Planar surfaces use the ISO 6946:2017, annex on surface resistances convective coefficients
    (inside by heat-flow direction: 5.0 / 2.5 / 0.7 W m-2 K-1 up / horizontal /
    down; outside 4 + 4 v).  Cylinders and spheres outdoors or indoors use
    free convection (Churchill-Chu horizontal cylinder, or the vertical-plate
    form on the height of a vertical pipe; Churchill sphere) combined with forced convection in the wind (Churchill-Bernstein,
    Whitaker) by Churchill's cube rule (:mod:`layers.convection`).
    Radiation is exchanged with the surroundings at ``radiant_temperature``
    (default: the air) or, where a sky temperature is given, with the sky and
    the ground (at air temperature) in proportion to their view factors
    (1 +- cos tilt)/2.  The net heat into the surface is then

        q = h_c (T_air - T_s) + sum_j h_r,j (T_j - T_s) + a I = h (T_eq - T_s)

    with h_r,j = eps sigma F_j (T_s^2 + T_j^2)(T_s + T_j) (exact
    linearisation, absolute temperatures), h = h_c + sum h_r,j and T_eq the
    equivalent (sol-air) temperature.
    """

    depends_on_temperature = True

    def __init__(self, case: Case, spec: BoundarySpec, mesh: Mesh) -> None:
        from layers.radiation import jacket_emissivity

        self.case, self.spec, self.mesh = case, spec, mesh
        self.area = surface_area(mesh, spec.side)
        self.geometry = case.geometry
        self.diameter = 2.0 * (mesh.inner_radius + mesh.total_thickness)
        self.emissivity = jacket_emissivity(spec.jacket) if spec.jacket else spec.emissivity
        self.f_sky = float(view_factor_sky(spec.tilt))
        self.f_ground = float(view_factor_ground(spec.tilt))
        if case.geometry == "planar":
            from layers.convection import iso6946_internal_convection

            self.h_inside = float(iso6946_internal_convection(spec.heat_flow_direction))

    def prepare(self, seconds: np.ndarray) -> dict[str, np.ndarray]:
        spec, case = self.spec, self.case
        z = np.zeros_like(seconds, dtype=float)
        out = {"air": in_seconds(case, spec.air_temperature)(seconds) + z}
        default_wind = ISO6946_WIND_SPEED if (self.geometry == "planar" and spec.side == "outside") else 0.0
        out["wind"] = in_seconds(case, spec.wind_speed)(seconds) + z if spec.wind_speed is not None else z + default_wind
        out["solar"] = (
            spec.solar_absorptance * in_seconds(case, spec.solar_irradiance)(seconds) + z
            if spec.solar_irradiance is not None
            else z
        )
        out["radiant"] = in_seconds(case, spec.radiant_temperature)(seconds) + z if spec.radiant_temperature is not None else out["air"]
        if spec.sky_temperature is not None:
            out["sky"] = in_seconds(case, spec.sky_temperature)(seconds) + z
        elif spec.values.get("sky_auto"):
            out["sky"] = np.asarray(sky_temperature_swinbank(out["air"]), dtype=float) + z
        if self.geometry == "planar" and spec.side == "outside":
            from layers.convection import iso6946_external_convection

            out["hc"] = np.asarray(iso6946_external_convection(out["wind"]), dtype=float) + z
        self.table = None
        if self.geometry != "planar" and np.ptp(out["air"]) == 0 and np.ptp(out["wind"]) == 0:
            # steady air and wind: tabulate h_c against the surface temperature once
            # (0.05 K spacing; linear interpolation errs by < 1e-4 W m-2 K-1 beyond 1 K of
            # temperature difference) instead of evaluating the correlation every iteration
            grid = out["air"][0] + np.arange(-250.0, 750.0, 0.05)
            grid = grid[grid > -100.0]
            self.table = (grid, self._correlation(grid, out["air"][0], out["wind"][0]))
        return out

    def _correlation(self, t_surface, t_air, wind):
        from layers.convection import body_convection_coefficient

        return np.asarray(
            body_convection_coefficient(
                self.geometry, t_surface, t_air, self.diameter, wind,
                orientation=self.case.orientation, height=self.case.height,
            ),
            dtype=float,
        )

    def convection(self, forcing, k: int, t_surface: float) -> float:
        if self.geometry == "planar":
            return self.h_inside if self.spec.side == "inside" else float(forcing["hc"][k])
        if self.table is not None and self.table[0][0] <= t_surface <= self.table[0][-1]:
            return float(np.interp(t_surface, *self.table))
        return float(self._correlation(t_surface, forcing["air"][k], forcing["wind"][k]))

    def coefficients(self, forcing, k, t_surface, r_half) -> SideCoefficients:
        eps = self.emissivity
        hc = self.convection(forcing, k, t_surface)
        ts = t_surface + KELVIN
        air = forcing["air"][k]
        num = hc * air + forcing["solar"][k]
        total = hc
        if "sky" in forcing:
            pairs = ((self.f_sky, forcing["sky"][k]), (self.f_ground, air))
        else:
            pairs = ((1.0, forcing["radiant"][k]),)
        for view, t_rad in pairs:
            tr = t_rad + KELVIN
            hr = eps * STEFAN_BOLTZMANN * view * (ts * ts + tr * tr) * (ts + tr)
            num += hr * t_rad
            total += hr
        t_eq = num / total
        g = 1.0 / (1.0 / (total * self.area) + r_half)
        return SideCoefficients(g, t_eq, 0.0, total, t_eq)


def side_model(case: Case, spec: BoundarySpec, mesh: Mesh) -> SideModel:
    """The nonlinear-march model of one boundary."""
    return AutoFilm(case, spec, mesh) if spec.auto_film else LinearSide(case, spec, mesh)
