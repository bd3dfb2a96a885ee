"""Surface exchange: one model per boundary kind, used by every caller.

The time march, the steady solver (and through it sizing, ``layers check``
and the run's steady start), the ISO 13786 report and the run summary all
take a boundary's exchange from here.  Each model says, for surface
temperatures ``t_surface`` [degC] at given forcing values, how much heat
enters the construction through one square metre of surface:

    q = h (t_eq - t_surface) + q_imposed                      [W m-2]

as a :class:`SurfaceFilm` of arrays (``h`` [W m-2 K-1], ``t_eq`` [degC],
``q_imposed`` [W m-2]).  Everything is vectorised: the forcing values, the
surface temperatures and the outside diameter broadcast together, so one
call serves a time step, a whole chunk of steps, or ten thousand sizing
candidates.

Boundary kinds
--------------
``film`` with a fixed coefficient
    h = 1 / R_s, t_eq the sol-air temperature ``T_air + a I R_s`` (ASHRAE
    Handbook of Fundamentals 2017, ch. 18, eq. 28, without the long-wave
    correction; CIBSE Guide A, sec. 5.2); t_eq = T_air without sun.
``film`` with ``film_coefficient = "auto"``
    Convection plus linearised long-wave radiation at the surface
    temperature.  Planar: the ISO 6946:2017 convective coefficients (annex
    on surface resistances; inside by heat-flow direction, outside
    4 + 4 v).  The inside direction is ``heat_flow_direction`` when the
    case gives it; otherwise it is derived at every evaluation from the
    construction's tilt and the sign of air minus surface temperature
    (:func:`layers.convection.iso6946_heat_flow_direction`): up under a
    ceiling whose room is warmer, down over a floor whose room is warmer,
    horizontal on a wall.  The outside coefficient is wind-driven and takes
    no direction (ISO 6946 gives one hce for every orientation).  Pipes and vessels: free convection (Churchill-Chu horizontal
    cylinder, the vertical-plate form on the height of a vertical pipe,
    Churchill sphere) combined with forced convection in the wind
    (Churchill-Bernstein, Whitaker) by Churchill's cube rule
    (:mod:`layers.convection`).  Radiation goes to ``radiant_temperature``
    (default: the air) or, with a sky temperature, to the sky and the ground
    (at air temperature) in proportion to their view factors (1 +- cos
    tilt)/2, each with the exact linearisation
    h_r,j = eps sigma F_j (T_s^2 + T_j^2)(T_s + T_j) in kelvin.  Then
    h = h_c + sum h_r,j and t_eq = (h_c T_air + sum h_r,j T_j + a I) / h.
``temperature``
    The surface is held at the given temperature: h = inf, t_eq = it.
``flux``
    h = 0 and q_imposed the given heat flux into the construction.
``adiabatic``
    h = 0, q_imposed = 0.
``contents``
    The film between stagnant contents and the bore: h = 1/R_s (inf for
    R_s = 0) towards the contents' temperature, which is a state of the
    march (:mod:`layers.contents`), not a forcing; the steady solver holds
    it at ``initial_temperature``.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from layers.constants import ISO6946_REFERENCE_WIND_SPEED, ISO6946_RSE, ZERO_CELSIUS
from layers.errors import CaseError

if TYPE_CHECKING:
    from layers.case import BoundarySpec, Case


@dataclass(frozen=True)
class SurfaceFilm:
    """Heat into the construction through a surface: ``h (t_eq - t_surface) + q_imposed``.

    Attributes
    ----------
    h : numpy.ndarray
        Surface coefficient [W m-2 K-1]; ``inf`` where the surface is held at ``t_eq``.
    t_eq : numpy.ndarray
        Equivalent (sol-air, or convective-radiative mean) temperature [degC].
    q_imposed : numpy.ndarray
        Imposed heat into the construction [W m-2].
    """

    h: np.ndarray
    t_eq: np.ndarray
    q_imposed: np.ndarray


def thevenin(h, t_eq, q_imposed, area):
    """A surface exchange as a source temperature behind a resistance.

    Heat into the construction through a surface of ``area`` at temperature
    T_s is ``h A (t_eq - T_s) + q A = (theta - T_s) / R`` with theta = t_eq +
    q / h and R = 1 / (h A); a held surface (h = inf) is theta = t_eq, R = 0;
    a surface with no film (h = 0) has R = inf and only its imposed flow q A.

    Parameters
    ----------
    h : float or array
        Surface coefficient [W m-2 K-1].
    t_eq : float or array
        Equivalent temperature [degC].
    q_imposed : float or array
        Imposed heat into the construction [W m-2].
    area : float or array
        Surface area [m2 per reference unit].

    Returns
    -------
    theta : source temperature [degC]
    resistance : [K W-1 per reference unit] (inf where h = 0)
    """
    if isinstance(h, float) and isinstance(area, float):  # the march, once per iteration: plain floats
        h, t_eq, q_imposed = float(h), float(t_eq), float(q_imposed)
        if math.isinf(h):
            return t_eq, 0.0
        if h > 0.0:
            return t_eq + q_imposed / h, 1.0 / (h * area)
        return t_eq, math.inf
    h = np.asarray(h, dtype=float)
    positive = h > 0
    safe = np.where(positive, h, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        theta = np.where(positive & np.isfinite(h), t_eq + q_imposed / safe, t_eq)
        resistance = np.where(np.isinf(h), 0.0, np.where(positive, 1.0 / (safe * area), math.inf))
    return theta, resistance


def in_seconds(case: Case, forcing) -> Callable[[np.ndarray], np.ndarray]:
    """A forcing of UTC datetimes as a function of seconds from the case start."""
    return lambda seconds: np.asarray(forcing(case.datetimes(seconds)), dtype=float)


class Exchange:
    """The surface exchange of one boundary of a case (see the module docstring).

    Parameters
    ----------
    case : Case
    spec : BoundarySpec
        The boundary (``case.inside`` or ``case.outside``).
    """

    def __init__(self, case: Case, spec: BoundarySpec) -> None:
        self.case, self.spec = case, spec
        self.side, self.kind, self.auto = spec.side, spec.kind, bool(spec.auto_film)
        self.geometry = case.geometry
        #: True when h or t_eq depend on the surface temperature (auto films).
        self.depends_on_temperature = self.auto
        if self.auto:
            from layers.radiation import jacket_emissivity, view_factor_ground, view_factor_sky

            self.emissivity = jacket_emissivity(spec.jacket) if spec.jacket else spec.emissivity
            self.f_sky = float(view_factor_sky(spec.tilt))
            self.f_ground = float(view_factor_ground(spec.tilt))
            self._sky = spec.sky_temperature is not None or bool(spec.values.get("sky_auto"))
        self._table: _ConvectionTable | None = None
        #: True when the inside convection's direction follows the sign of air minus
        #: surface at each evaluation (an inside auto film on a roof or a floor
        #: without an explicit heat_flow_direction).
        self.derives_direction = bool(
            self.auto and self.geometry == "planar" and self.side == "inside"
            and spec.heat_flow_direction == "auto" and self._tilt_direction() != "horizontal"
        )

    def _tilt_direction(self) -> str:
        """``"horizontal"`` where the tilt alone fixes it (a wall), else ``"up or down"``."""
        from layers.convection import iso6946_heat_flow_direction

        return "horizontal" if iso6946_heat_flow_direction(self.spec.tilt, 1.0) == "horizontal" else "up or down"

    def heat_flow_direction(self, forcing: dict[str, np.ndarray], t_surface) -> np.ndarray | str:
        """The ISO 6946 heat-flow direction the inside convection uses (``"up"``,
        ``"horizontal"``, ``"down"``) at surface temperatures ``t_surface`` [degC]:
        the case's ``heat_flow_direction``, or derived from the tilt and the sign
        of air minus surface (see :attr:`derives_direction`)."""
        from layers.convection import iso6946_heat_flow_direction

        given = self.spec.heat_flow_direction
        if given != "auto":
            return given
        return iso6946_heat_flow_direction(self.spec.tilt, np.asarray(forcing["air"], dtype=float) - np.asarray(t_surface, dtype=float))

    def model_description(self) -> str:
        """How this boundary's film is modelled, with the sources of its models, in
        words for reports (the same decisions :meth:`film` takes); empty for a
        boundary that is not a film."""
        spec = self.spec
        side = self.side.capitalize()
        if self.kind != "film":
            return ""
        if not self.auto:
            h = 1.0 / spec.surface_resistance if spec.surface_resistance else math.inf
            return f"{side} film: fixed, as given in the case ({h:.3g} W/(m²·K))."
        if self.geometry == "planar" and self.side == "inside":
            if self.derives_direction:
                direction = "the direction derived at every step from the tilt and the sign of air minus surface"
            else:
                direction = f"heat flow {spec.heat_flow_direction if spec.heat_flow_direction != 'auto' else self._tilt_direction()}"
            convection = ("convection by the heat-flow direction of ISO 6946:2017 Annex C (h_c 5.0 up, 2.5 horizontal, "
                          f"0.7 down W/(m²·K), from memory), {direction}")
        elif self.geometry == "planar":
            convection = "convection h_c = 4 + 4 v from the wind speed (ISO 6946:2017 Annex C, from memory)"
        else:
            body = "cylinder" if self.geometry == "cylinder" else "sphere"
            convection = (f"convection by regime for a {body} (free: Churchill & Chu; forced: Churchill & Bernstein; "
                          "mixed by their combination; layers method guide, section 7)")
        radiation = "linearised long-wave radiation to the surroundings at the surface's emissivity"
        if self._sky:
            radiation += (" (to the sky and the ground by their view factors; sky temperature "
                          + ("from the case" if spec.sky_temperature is not None else "by Swinbank (1963), from the air temperature") + ")")
        sun = "; absorbed sun a·I added at the surface" if spec.solar_irradiance is not None and spec.solar_absorptance else ""
        return f"{side} film: automatic, {convection}, plus {radiation}{sun}."

    def design_direction(self) -> tuple[str, str]:
        """The heat-flow direction that stands for an inside auto film where one
        fixed value is needed (U-value, ISO 13786), and how it was found [-].

        Given: the case's ``heat_flow_direction``.  Derived: from the tilt and,
        on a roof or floor, the sign of the inside air minus the other side's
        temperature at the design time (``[sizing] design_time``, else the
        start, as :func:`layers.steady.design_time`), which in a steady state
        without sun is the sign of air minus surface; horizontal where the
        other side fixes no temperature.
        """
        from layers.convection import iso6946_heat_flow_direction

        spec = self.spec
        if spec.heat_flow_direction != "auto":
            return spec.heat_flow_direction, "given"
        if self._tilt_direction() == "horizontal":
            return "horizontal", f"tilt {spec.tilt:g} deg"
        case = self.case
        when = case.sizing.design_time if case.sizing is not None and case.sizing.design_time is not None else case.time.start
        seconds = case.seconds(np.array([when]))
        other = case.outside if self.side == "inside" else case.inside
        if other.kind == "film":
            t_other = in_seconds(case, other.air_temperature)(seconds)
        elif other.kind == "temperature":
            t_other = in_seconds(case, other.surface_temperature)(seconds)
        else:
            return "horizontal", f"tilt {spec.tilt:g} deg, no temperature on the other side"
        air = in_seconds(case, spec.air_temperature)(seconds)
        direction = str(iso6946_heat_flow_direction(spec.tilt, float(air[0] - t_other[0])))
        return direction, f"tilt {spec.tilt:g} deg, air {float(air[0]):g} degC against {float(t_other[0]):g} degC on the other side"

    @property
    def has_sun_or_sky(self) -> bool:
        """True when the boundary takes sun or sky radiation."""
        spec = self.spec
        return spec.solar_irradiance is not None or spec.sky_temperature is not None or bool(spec.values.get("sky_auto"))

    @property
    def design_wind_speed(self) -> float:
        """A constant wind speed of the boundary, else ISO 6946's 4 m/s [m s-1]."""
        wind = self.spec.wind_speed
        return float(wind.value) if wind is not None and wind.value is not None else ISO6946_REFERENCE_WIND_SPEED

    def design_resistance(self) -> float | None:
        """The fixed surface resistance that stands for this boundary where one
        value is needed (U-value, ISO 13786) [m2 K W-1].

        A fixed film gives its own; an ``"auto"`` film on a wall its ISO 6946
        expression at the case's emissivity (inside by heat-flow direction,
        outside at :attr:`design_wind_speed`; ISO 6946:2017 annex on surface
        resistances, from memory; the direction of :meth:`design_direction`);
        a temperature boundary 0.  None where no
        fixed value stands for it (auto films on pipes, flux, adiabatic,
        contents).
        """
        from layers.radiation import iso6946_external_surface_resistance, iso6946_surface_resistance

        spec = self.spec
        if self.kind == "temperature":
            return 0.0
        if self.kind != "film":
            return None
        if not self.auto:
            return spec.surface_resistance
        if self.geometry != "planar":
            return None
        if self.side == "inside":
            return float(iso6946_surface_resistance(self.design_direction()[0], spec.emissivity))
        return float(iso6946_external_surface_resistance(self.design_wind_speed, spec.emissivity))

    # ------------------------------------------------------------------ #
    def forcing(self, seconds: np.ndarray, *, sun_and_sky: bool = True) -> dict[str, np.ndarray]:
        """The boundary's forcing values at ``seconds`` from the case start [s].

        Keys: ``air`` [degC], ``solar`` (absorbed, [W m-2]), ``wind`` [m s-1],
        ``radiant`` [degC], ``sky`` [degC], ``surface`` [degC], ``flux``
        [W m-2], as the kind needs them.  ``sun_and_sky=False`` leaves out the
        absorbed sun and the sky exchange (the steady design conditions of
        sizing).
        """
        spec, case = self.spec, self.case
        seconds = np.asarray(seconds, dtype=float)
        zero = np.zeros_like(seconds)
        out: dict[str, np.ndarray] = {}
        if self.kind == "film":
            out["air"] = in_seconds(case, spec.air_temperature)(seconds) + zero
            if spec.solar_irradiance is not None and spec.solar_absorptance and sun_and_sky:
                out["solar"] = spec.solar_absorptance * in_seconds(case, spec.solar_irradiance)(seconds) + zero
            else:
                out["solar"] = zero
            if self.auto:
                wind = spec.wind_speed
                default = ISO6946_REFERENCE_WIND_SPEED if (self.geometry == "planar" and self.side == "outside") else 0.0
                out["wind"] = in_seconds(case, wind)(seconds) + zero if wind is not None else zero + default
                if self.geometry == "planar" and not self.derives_direction:
                    out["hc"] = self._planar_convection(out["wind"]) + zero
                radiant = spec.radiant_temperature
                out["radiant"] = in_seconds(case, radiant)(seconds) + zero if radiant is not None else out["air"]
                if self._sky and sun_and_sky:
                    if spec.sky_temperature is not None:
                        out["sky"] = in_seconds(case, spec.sky_temperature)(seconds) + zero
                    else:
                        from layers.radiation import sky_temperature_swinbank

                        out["sky"] = np.asarray(sky_temperature_swinbank(out["air"]), dtype=float) + zero
        elif self.kind == "temperature":
            out["surface"] = in_seconds(case, spec.surface_temperature)(seconds) + zero
        elif self.kind == "flux":
            out["flux"] = in_seconds(case, spec.heat_flux)(seconds) + zero
        elif self.kind == "contents":
            out["contents"] = zero + float(spec.initial_temperature)
        return out

    def drive_temperature(self, forcing: dict[str, np.ndarray]) -> np.ndarray:
        """The temperature [degC] that drives this boundary: the sol-air temperature
        of a film (an auto film's sun taken over the conventional R_se), a held
        surface's temperature, the contents' temperature; for a flux, the rise it
        gives across R_se.  The march looks for jumps in it and compares a start
        with it.  R_se = 0.04 m2 K W-1, ISO 6946:2017 (from memory)."""
        if self.kind == "film":
            rs = ISO6946_RSE if self.auto else self.spec.surface_resistance
            return forcing["air"] + forcing["solar"] * rs
        if self.kind == "temperature":
            return forcing["surface"]
        if self.kind == "contents":
            return forcing["contents"]
        if self.kind == "flux":
            return forcing["flux"] * ISO6946_RSE
        return np.zeros(1)

    # ------------------------------------------------------------------ #
    def film(self, forcing: dict[str, np.ndarray], t_surface: np.ndarray | float, diameter: np.ndarray | float | None = None) -> SurfaceFilm:
        """The exchange at surface temperatures ``t_surface`` [degC].

        Parameters
        ----------
        forcing : dict
            From :meth:`forcing` (arrays or scalars that broadcast with ``t_surface``).
        t_surface : array_like
            Surface temperature [degC].
        diameter : array_like, optional
            Outside diameter of a pipe or vessel [m] (auto films outside).
        """
        ts = np.asarray(t_surface, dtype=float)
        if self.kind == "film" and not self.auto:
            rs = self.spec.surface_resistance
            h = math.inf if rs == 0 else 1.0 / rs
            t_eq = forcing["air"] + forcing["solar"] * rs
            return SurfaceFilm(np.full(np.shape(t_eq), h) + 0 * ts, t_eq + 0 * ts, 0 * ts + 0 * t_eq)
        if self.kind == "film":
            return self._auto(forcing, ts, diameter)
        if self.kind == "temperature":
            t = forcing["surface"] + 0 * ts
            return SurfaceFilm(np.full(np.shape(t), math.inf), t, np.zeros(np.shape(t)))
        if self.kind == "flux":
            q = forcing["flux"] + 0 * ts
            return SurfaceFilm(np.zeros(np.shape(q)), np.zeros(np.shape(q)), q)
        if self.kind == "contents":
            rs = self.spec.surface_resistance or 0.0
            t = forcing["contents"] + 0 * ts
            return SurfaceFilm(np.full(np.shape(t), math.inf if rs == 0 else 1.0 / rs), t, np.zeros(np.shape(t)))
        z = np.zeros(np.shape(ts))
        return SurfaceFilm(z, z, z)

    def convection(self, forcing: dict[str, np.ndarray], t_surface: np.ndarray, diameter) -> np.ndarray:
        """Convective coefficient h_c of an auto film [W m-2 K-1]."""
        if self.geometry == "planar":
            if self.derives_direction:  # up or down by the sign of air minus surface, at every evaluation
                from layers.convection import iso6946_internal_convection_derived

                return iso6946_internal_convection_derived(self.spec.tilt, forcing["air"], t_surface)
            return forcing["hc"] + 0 * t_surface
        if self._table is not None:
            hc = self._table.lookup(t_surface, forcing["air"], forcing["wind"], diameter)
            if hc is not None:
                return hc
        return self.body_convection(t_surface, forcing["air"], diameter, forcing["wind"])

    def _planar_convection(self, wind: np.ndarray) -> np.ndarray:
        """ISO 6946 convective coefficient of a wall surface where it does not
        depend on the surface temperature [W m-2 K-1]: inside by the given
        heat-flow direction (or horizontal, on a wall), outside 4 + 4 v
        (:mod:`layers.convection`)."""
        from layers.convection import iso6946_external_convection, iso6946_internal_convection

        if self.side == "inside":
            given = self.spec.heat_flow_direction
            return np.full(np.shape(wind), float(iso6946_internal_convection("horizontal" if given == "auto" else given)))
        return np.asarray(iso6946_external_convection(wind), dtype=float)

    def body_convection(self, t_surface, t_air, diameter, wind) -> np.ndarray:
        """The body correlation of :func:`layers.convection.body_convection_coefficient` [W m-2 K-1].

        Raises
        ------
        CaseError
            Where the air or the surface leaves the range of the air-property
            fits the correlations use (:data:`layers.convection.AIR_PROPERTY_RANGE`).
        """
        from layers.convection import AIR_PROPERTY_RANGE, body_convection_coefficient

        try:
            return np.asarray(
                body_convection_coefficient(
                    self.geometry, t_surface, t_air, diameter, wind,
                    orientation=self.case.orientation, height=self.case.height,
                ),
                dtype=float,
            )
        except ValueError:
            low, high = AIR_PROPERTY_RANGE
            span = f"air {np.min(t_air):.4g} to {np.max(t_air):.4g} degC, surface {np.min(t_surface):.4g} to {np.max(t_surface):.4g} degC"
            raise CaseError(
                self.case.path, f"{self.side}.film_coefficient",
                f"an auto film needs the air and the film temperature (the mean of air and surface) within {low:g} to "
                f"{high:g} degC (the range of the air properties its convection correlations use), here {span}; "
                "give a fixed film_coefficient",
            ) from None

    def _auto(self, forcing, ts, diameter) -> SurfaceFilm:
        from layers.radiation import linearised_radiation_kelvin

        hc = self.convection(forcing, ts, diameter)
        air = forcing["air"]
        numerator = hc * air + forcing["solar"]
        total = hc + 0.0
        if "sky" in forcing:
            pairs = ((self.f_sky, forcing["sky"]), (self.f_ground, air))
        else:
            pairs = ((1.0, forcing["radiant"]),)
        tsk = ts + ZERO_CELSIUS
        for view, t_rad in pairs:
            # the ranges were checked once: forcing in forcing(), the surface by the caller
            hr = view * linearised_radiation_kelvin(self.emissivity, tsk, t_rad + ZERO_CELSIUS)
            numerator = numerator + hr * t_rad
            total = total + hr
        return SurfaceFilm(total, numerator / total, 0.0 * total)

    def tabulate(self, air: np.ndarray, wind: np.ndarray, diameter: float) -> None:
        """Tabulate the body convection once for a run (pipes and vessels with
        constant wind), so that the march interpolates instead of evaluating
        the correlation at every iteration; see :class:`_ConvectionTable`."""
        from layers.convection import AIR_PROPERTY_RANGE

        if self.auto and self.geometry != "planar" and (np.min(air) < AIR_PROPERTY_RANGE[0] or np.max(air) > AIR_PROPERTY_RANGE[1]):
            raise CaseError(
                self.case.path, f"{self.side}.air_temperature",
                f"reaches {np.min(air):.4g} to {np.max(air):.4g} degC; an auto film on a pipe or vessel needs air from "
                f"{AIR_PROPERTY_RANGE[0]:g} to {AIR_PROPERTY_RANGE[1]:g} degC (its convection correlations); give a fixed film_coefficient",
            )
        if self.auto and self.geometry != "planar" and np.ptp(wind) == 0:
            self._table = _ConvectionTable(self, float(np.min(air)), float(np.max(air)), float(wind.flat[0]), diameter)


class _ConvectionTable:
    """h_c of a body correlation on a grid of (surface - air, air) at one wind
    speed and diameter, interpolated bilinearly.

    The temperature difference is spaced uniformly in u = sign(d) |d|^(1/2)
    (steps of 0.02 sqrt(K): 0.0004 K at d = 0, 0.2 K at d = 100 K), which
    follows the |d|^(1/4)-|d|^(1/3) growth of free convection, and the air
    temperature in steps of 0.5 K.  Where the correlation is smooth this
    interpolates to better than 1e-4 relative; a test compares it with the
    correlation itself (tests/test_exchange.py).  Outside the grid the march
    evaluates the correlation directly.
    """

    U_STEP = 0.02
    AIR_STEP = 0.5
    U_MIN, U_MAX = -math.sqrt(400.0), math.sqrt(1100.0)

    def __init__(self, exchange: Exchange, air_min: float, air_max: float, wind: float, diameter: float) -> None:
        self.wind, self.diameter = wind, diameter
        self.u = np.arange(self.U_MIN, self.U_MAX + self.U_STEP, self.U_STEP)
        n_air = max(2, int(math.ceil((air_max - air_min) / self.AIR_STEP)) + 2)
        self.air0 = air_min - 0.5 * self.AIR_STEP
        self.air = self.air0 + self.AIR_STEP * np.arange(n_air)
        d = np.sign(self.u) * self.u**2
        ts = self.air[:, None] + d[None, :]
        valid = (ts > -100.0) & (ts < 1000.0)
        values = np.full(ts.shape, np.nan)
        values[valid] = exchange.body_convection(ts[valid], np.broadcast_to(self.air[:, None], ts.shape)[valid], diameter, wind)
        self.values = values

    def lookup(self, t_surface, air, wind, diameter) -> np.ndarray | None:
        """Interpolated h_c [W m-2 K-1], or None where the grid does not hold the point."""
        if np.ndim(diameter) or diameter != self.diameter or np.any(wind != self.wind):
            return None
        d = np.asarray(t_surface - air, dtype=float)
        u = np.sign(d) * np.sqrt(np.abs(d))
        fu = (u - self.u[0]) / self.U_STEP
        fa = (np.asarray(air, dtype=float) - self.air0) / self.AIR_STEP
        if np.any(fu < 0) or np.any(fa < 0) or np.any(fu >= self.u.size - 1) or np.any(fa >= self.air.size - 1):
            return None
        iu = fu.astype(int)
        ia = fa.astype(int)
        wu, wa = fu - iu, fa - ia
        v = self.values
        out = (1 - wa) * ((1 - wu) * v[ia, iu] + wu * v[ia, iu + 1]) + wa * ((1 - wu) * v[ia + 1, iu] + wu * v[ia + 1, iu + 1])
        if np.any(np.isnan(out)):  # next to the air-property range: evaluate directly
            return None
        return out


def exchanges(case: Case) -> tuple[Exchange, Exchange]:
    """The inside and outside exchange of a case."""
    return Exchange(case, case.inside), Exchange(case, case.outside)
