"""ISO 13788 monthly interstitial condensation assessment (the Glaser method).

(Not ``condensation.py``: a module of that name would hide the API function
``layers.condensation``.)

The method, month by month, as ISO 13788:2012 clause 6 describes it
(from memory, medium-high confidence):

1. **Temperatures.** The steady temperature at every layer interface with
   the month's mean inside and outside air temperatures, from the one steady
   solver (:func:`layers.steady.steady_state`, so k(T) is honoured) with the
   fixed surface resistances the case's boundaries stand for
   (:meth:`layers.exchange.Exchange.design_resistance`: a fixed film its own;
   an ``"auto"`` film on a wall its ISO 6946 value; a held surface 0).  No
   sun, no sky: the standard works with air temperatures.
2. **Saturation pressure** at each interface, p_sat(theta), by the ISO 13788
   formulas (:func:`layers.psychrometrics.saturation_vapour_pressure`: over
   water at or above 0 degC, over ice below).
3. **Vapour pressure line** against the cumulative diffusion-equivalent air
   layer thickness s_d = mu d from the inside surface.  It runs from the
   inside vapour pressure p_i (at s_d = 0) to the outside one p_e (at the
   total S_T); surface resistances to vapour are neglected, as the standard
   does.  Where the straight line would exceed p_sat at an interface, the
   line is drawn as tight as it will go beneath the p_sat points: the lower
   convex hull of (0, p_i), (S_k, p_sat,k) and (S_T, p_e).  Its corners are
   the condensation planes (one or several); at each, the condensation rate
   is the vapour flux in minus the flux out,

       g_c = delta_0 [(p_(c-1) - p_c)/(S_c - S_(c-1)) - (p_c - p_(c+1))/(S_(c+1) - S_c)],

   delta_0 = 2e-10 kg/(m s Pa), the vapour permeability of still air the
   standard uses (from memory).  This is the "tangent" construction of the
   standard drawn for any number of planes at once.
4. **Month by month**, with calendar month lengths (a non-leap year):
   moisture collected at a plane keeps the vapour pressure there at
   saturation while any remains, so the line is pinned at every wet plane
   and the balance there may be negative (drying); the amount is carried to
   the next month and never falls below zero.  Where a plane dries out
   before the month ends, the month is split at that moment: the plane is no
   longer pinned, the line is redrawn, and the other planes go on at the
   redrawn line's rates for the rest of the month.  Setting the amount to
   zero at the month's end instead (the rule as usually stated, from memory)
   gives the same answer with one plane, but with two it credits the
   neighbouring plane with a whole month of flux from a plane that had
   already dried, creating water (our reading, derived: mass is conserved
   this way).  The month's reported rate and line are those at its start.
5. **Starting month** (ISO 13788:2012 clause 6, from memory, not checked
   against the clause text): the calculation starts, with a dry
   construction, in the first month in which condensation is predicted
   after a month without it.  We find it by computing every month with a
   dry construction; each month that condenses after one that does not is a
   start the rule allows.  Where the year has more than one such month
   (two condensation seasons), we take the start that leaves the most
   moisture at the end of the year, then the largest accumulated amount:
   the conservative choice (our decision, the standard being silent or not
   recalled).  Where every month condenses, the year starts in the month
   after the one that condenses least (the rule's intent: start as dry as
   the climate allows).  Where no month condenses, nothing is started
   (``first_month = 0``).
6. **Verdict**: ``no condensation`` (no month condenses with a dry
   construction), ``dries out within the year`` (all moisture has gone by
   the end of the twelve months), or ``accumulates`` (moisture remains: the
   next year starts wetter, and the amount grows year on year).

Inside humidity may be given as monthly relative humidity or as an ISO
13788 Annex A internal humidity class (:func:`vapour_pressure_excess`).

The method is a screening check: it ignores liquid transport, moisture
storage and built-in moisture, rain, solar drying and air leakage
(:data:`CAUTION_GLASER`).

References
----------
.. [1] ISO 13788:2012, Hygrothermal performance of building components and
   building elements - Internal surface temperature to avoid critical
   surface humidity and interstitial condensation - Calculation methods,
   clause 6 and Annex A (from memory).
.. [2] ISO 10456:2007, Building materials and products - Hygrothermal
   properties (vapour resistance factors, dry-cup and wet-cup).
.. [3] EN 15026:2007, Hygrothermal performance of building components and
   building elements - Assessment of moisture transfer by numerical
   simulation (the detailed method that takes precedence).
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from dataclasses import dataclass

import numpy as np

from layers.case import Case
from layers.errors import CaseError
from layers.psychrometrics import saturation_vapour_pressure, vapour_pressure

#: Water vapour permeability of still air used by ISO 13788 [kg m-1 s-1 Pa-1] (from memory).
DELTA_0 = 2e-10
#: Days of each calendar month, January first (a non-leap year) [d].
MONTH_DAYS = (31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31)
MONTH_SECONDS = tuple(86400.0 * d for d in MONTH_DAYS)
MONTH_NAMES = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
#: The three verdicts, from best to worst.
VERDICTS = ("no condensation", "dries out within the year", "accumulates")
#: Less moisture than this at a plane counts as none [kg m-2] (1 ug/m2: the
#: round-off of a month's sum g t against an amount of grams per m2).
DRY = 1e-9

#: ISO 13788:2012 Annex A internal humidity classes: the internal vapour
#: pressure excess Delta p = p_i - p_e [Pa] at monthly mean outside
#: temperatures at or below 0 degC; it falls linearly to 0 at
#: :data:`HUMIDITY_CLASS_ZERO_AT` and is 0 above (the figure of vapour
#: pressure excess against outside temperature in Annex A; from memory,
#: medium confidence).  1: unoccupied buildings, storage of dry goods;
#: 2: offices, dwellings with normal occupancy and ventilation; 3: buildings
#: with unknown occupancy; 4: sports halls, kitchens, canteens; 5: special
#: buildings (laundry, brewery, swimming pool).
HUMIDITY_CLASS_EXCESS = {1: 270.0, 2: 540.0, 3: 810.0, 4: 1080.0, 5: 1350.0}
#: Monthly mean outside temperature at which the class's excess has fallen to 0 [degC].
HUMIDITY_CLASS_ZERO_AT = 20.0
#: The factor ISO 13788 applies to a class's excess for the interstitial
#: condensation calculation (p_i = p_e + 1.10 Delta p; from memory, medium confidence).
HUMIDITY_CLASS_SAFETY_FACTOR = 1.10

CAUTION_GLASER = (
    "The ISO 13788 (Glaser) method is a screening check: it ignores liquid water transport, moisture storage and "
    "built-in moisture, driving rain, solar drying and air leakage through the construction. Where it predicts "
    "accumulation, or the construction is moisture-sensitive, a detailed hygrothermal simulation (EN 15026) is "
    "needed; local building codes and licensed practice take precedence."
)


# --------------------------------------------------------------------------- #
# the algebra


def vapour_pressure_excess(humidity_class: int, outside_temperature: np.ndarray) -> np.ndarray:
    """Internal vapour pressure excess of an ISO 13788 humidity class.

    Parameters
    ----------
    humidity_class : int
        1 to 5 (ISO 13788:2012 Annex A).
    outside_temperature : array_like
        Monthly mean outside air temperature [degC].

    Returns
    -------
    numpy.ndarray
        Delta p = p_i - p_e [Pa]: the class's value at or below 0 degC,
        falling linearly to 0 at 20 degC, 0 above; without the safety factor
        (:data:`HUMIDITY_CLASS_SAFETY_FACTOR`).

    References
    ----------
    ISO 13788:2012 Annex A (from memory, medium confidence).
    """
    top = HUMIDITY_CLASS_EXCESS[int(humidity_class)]
    theta = np.asarray(outside_temperature, dtype=float)
    share = np.clip(1.0 - theta / HUMIDITY_CLASS_ZERO_AT, 0.0, 1.0)
    return top * share


def _lower_hull(x: np.ndarray, y: np.ndarray) -> list[int]:
    """Indices of the lower convex hull of points with strictly increasing x
    (Andrew's monotone chain); points on a straight edge are not corners."""
    hull: list[int] = []
    for k in range(x.size):
        while len(hull) >= 2:
            i, j = hull[-2], hull[-1]
            cross = (x[j] - x[i]) * (y[k] - y[i]) - (y[j] - y[i]) * (x[k] - x[i])
            scale = abs(x[j] - x[i]) * abs(y[k] - y[i]) + abs(y[j] - y[i]) * abs(x[k] - x[i])
            if cross <= 1e-12 * scale:  # j is not below the chord from i to k
                hull.pop()
            else:
                break
        hull.append(k)
    return hull


def vapour_profile(
    cumulative_sd: np.ndarray, saturation: np.ndarray, inside: float, outside: float, wet: np.ndarray | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """The vapour pressure line of one month, and the condensation rate at each interface.

    Parameters
    ----------
    cumulative_sd : array_like
        s_d from the inside surface to each interface, strictly increasing,
        0 first [m].
    saturation : array_like
        Saturation vapour pressure at each interface [Pa] (the ends are not
        used: the line is fixed there at ``inside`` and ``outside``).
    inside, outside : float
        Vapour pressure of the inside and outside air [Pa].
    wet : array of bool, optional
        Interfaces that hold moisture from earlier months: the line is pinned
        at saturation there, and their balance may be negative (drying).

    Returns
    -------
    pressure : numpy.ndarray
        Vapour pressure at each interface [Pa].
    rate : numpy.ndarray
        Condensation rate at each interface [kg m-2 s-1]: positive condensing,
        negative drying, 0 where the line passes straight (and at the two
        surfaces).
    """
    s = np.asarray(cumulative_sd, dtype=float)
    n = s.size
    q = np.array(saturation, dtype=float)
    q[0], q[-1] = float(inside), float(outside)
    pinned = np.zeros(n, bool) if wet is None else np.array(wet, dtype=bool)
    pinned[0] = pinned[-1] = False
    anchors = [0, *np.flatnonzero(pinned).tolist(), n - 1]
    corners = set(anchors)
    for a, b in zip(anchors[:-1], anchors[1:]):
        corners.update(a + k for k in _lower_hull(s[a:b + 1], q[a:b + 1]))
    v = np.array(sorted(corners))
    pressure = np.interp(s, s[v], q[v])
    pressure[v] = q[v]
    flux = DELTA_0 * (q[v[:-1]] - q[v[1:]]) / (s[v[1:]] - s[v[:-1]])  # between corners [kg m-2 s-1]
    rate = np.zeros(n)
    rate[v[1:-1]] = flux[:-1] - flux[1:]
    return pressure, rate


@dataclass(frozen=True)
class MoistureYear:
    """Twelve months from a starting month, in calendar order (index 0 = January).

    Attributes
    ----------
    start : int
        Calendar month the year starts in (1-12).
    rate : (12, interfaces) condensation rate [kg m-2 s-1]
    accumulated : (12, interfaces) moisture at the end of each month [kg m-2]
    pressure : (12, interfaces) vapour pressure [Pa]
    remaining : (interfaces,) moisture left at the end of the twelfth month [kg m-2]
    """

    start: int
    rate: np.ndarray
    accumulated: np.ndarray
    pressure: np.ndarray
    remaining: np.ndarray


def moisture_year(
    cumulative_sd: np.ndarray, saturation: np.ndarray, inside: np.ndarray, outside: np.ndarray, start: int,
    seconds: np.ndarray | tuple[float, ...] = MONTH_SECONDS,
) -> MoistureYear:
    """Run twelve months from ``start`` (1-12) with a dry construction at its beginning.

    Each month starts from the line of :func:`vapour_profile` with every wet
    plane pinned; its pressures and rates are the ones reported for the
    month.  Where a plane dries out before the month ends, the month is split
    there: the plane is dry (no longer pinned) from that moment, the line is
    redrawn, and the other planes go on at the redrawn line's rates for the
    rest of the month (see the module docstring, item 4).

    Parameters
    ----------
    cumulative_sd : (interfaces,) [m]
    saturation : (12, interfaces) [Pa], January first
    inside, outside : (12,) vapour pressure of the air [Pa]
    start : int
        Calendar month to start in (1-12).
    seconds : (12,) length of each month [s]

    Returns
    -------
    MoistureYear
        ``rate`` and ``pressure`` from the line at the start of each month;
        ``accumulated`` from the split month.
    """
    n = np.size(cumulative_sd)
    moisture = np.zeros(n)
    rate, accumulated, pressure = np.zeros((12, n)), np.zeros((12, n)), np.zeros((12, n))
    for k in range(12):
        m = (start - 1 + k) % 12
        left = float(seconds[m])
        parts = 4 * n + 4  # each part but the last ends with a plane drying out; a bound, never reached in practice
        for part in range(parts):
            p, g = vapour_profile(cumulative_sd, saturation[m], inside[m], outside[m], wet=moisture > 0.0)
            if part == 0:
                rate[m], pressure[m] = g, p
            drying = (moisture > 0.0) & (g < 0.0)
            until = np.full(n, np.inf)
            until[drying] = moisture[drying] / -g[drying]  # time to dry out at this rate [s]
            step = left if part == parts - 1 else min(left, float(until.min()))
            moisture = np.maximum(moisture + g * step, 0.0)
            moisture[drying & (until <= step)] = 0.0
            moisture[moisture <= DRY] = 0.0
            left -= step
            if left <= 0.0:
                break
        accumulated[m] = moisture
    return MoistureYear(start, rate, accumulated, pressure, moisture.copy())


def starting_month(cumulative_sd: np.ndarray, saturation: np.ndarray, inside: np.ndarray, outside: np.ndarray,
                   seconds=MONTH_SECONDS) -> tuple[int, MoistureYear | None]:
    """The ISO 13788 starting month and the year run from it (see the module docstring, item 5).

    Returns
    -------
    (int, MoistureYear or None)
        The calendar month (1-12), or 0 and None when no month condenses
        with a dry construction.
    """
    dry = np.array([vapour_profile(cumulative_sd, saturation[m], inside[m], outside[m])[1] for m in range(12)])
    condensing = (dry > 0.0).any(axis=1)
    if not condensing.any():
        return 0, None
    starts = [m + 1 for m in range(12) if condensing[m] and not condensing[m - 1]]
    if not starts:  # every month condenses: start after the month that condenses least
        least = int(np.argmin(dry.sum(axis=1)))  # 0-based
        starts = [(least + 1) % 12 + 1]
    years = [moisture_year(cumulative_sd, saturation, inside, outside, m, seconds) for m in starts]
    worst = max(years, key=lambda y: (float(y.remaining.sum()), float(y.accumulated.max())))
    return worst.start, worst


# --------------------------------------------------------------------------- #
# the case


@dataclass(frozen=True)
class VapourStack:
    """The case's layers as the vapour calculation sees them.

    Attributes
    ----------
    names : layer names, inside first
    sd : (layers,) diffusion-equivalent air layer thickness of each layer [m]
    mu : (layers,) vapour resistance factor used [-] (NaN for a membrane)
    labels : (layers + 1,) a name for every interface
    thermal_position : (layers + 1,) how many thermal layers lie inside each interface
    """

    names: tuple[str, ...]
    sd: np.ndarray
    mu: np.ndarray
    labels: tuple[str, ...]
    thermal_position: tuple[int, ...]


def vapour_stack(case: Case, cup: str = "dry-cup") -> VapourStack:
    """s_d of every layer of the case (membranes included), refusing what the method cannot use.

    Raises
    ------
    CaseError
        A solid layer whose material has no ``vapour_resistance_factor`` (and
        the layer gives none), or an air gap without a thickness.
    """
    names, sd, mu, position = [], [], [], [0]
    count = 0
    for layer in case.vapour_layers:
        key = f"layers[{layer.number}]"
        if layer.kind == "membrane":
            sd.append(float(layer.equivalent_air_thickness))
            mu.append(math.nan)
        elif layer.kind == "air-gap":
            if layer.thickness <= 0.0:
                raise CaseError(case.path, f"{key}.thickness",
                                "an air gap needs its thickness for the vapour calculation (its s_d is its thickness: mu = 1 for still air)")
            sd.append(layer.thickness)
            mu.append(1.0)
            count += 1
        else:
            factor = layer.vapour_resistance_factor
            if factor is None:
                factor = layer.material.vapour_factor(cup)
            if factor is None:
                raise CaseError(case.path, f"{key}.material",
                                f"{layer.material.name} has no vapour_resistance_factor; give one on the layer or under "
                                f"[materials.{layer.material.name}] (mu, ISO 10456) for `layers condensation`")
            sd.append(factor * layer.thickness)
            mu.append(factor)
            count += 1
        names.append(layer.name)
        position.append(count)
    labels = ["inside surface"] + [f"{a} | {b}" for a, b in zip(names[:-1], names[1:])] + ["outside surface"]
    return VapourStack(tuple(names), np.array(sd), np.array(mu), tuple(labels), tuple(position))


def surface_resistances(case: Case) -> tuple[float, float]:
    """Rsi and Rse [m2 K W-1] the monthly temperature profile uses
    (:meth:`layers.exchange.Exchange.design_resistance`).

    Raises
    ------
    CaseError
        For a boundary that no fixed resistance stands for (flux, adiabatic, contents).
    """
    from layers.exchange import exchanges

    out = []
    for exchange in exchanges(case):
        r = exchange.design_resistance()
        if r is None:
            raise CaseError(case.path, f"{exchange.side}.type",
                            f"a {exchange.kind} boundary has no surface resistance for ISO 13788; use type = \"film\" "
                            "(or \"temperature\") on both sides")
        out.append(float(r))
    return out[0], out[1]


def monthly_temperatures(case: Case, stack: VapourStack, r_si: float, r_se: float) -> np.ndarray:
    """Steady interface temperatures for each month's mean air temperatures [degC], (12, interfaces).

    The one steady solver (:func:`layers.steady.steady_state`) runs with the
    boundaries replaced by fixed films of ``r_si`` and ``r_se`` [m2 K W-1]
    (no sun, no sky).  Where a contact resistance separates two layers, the
    interface takes the colder of its two faces (the less favourable for
    condensation).  A membrane has no thermal part: both its faces have the
    temperature of the point it lies at.
    """
    from layers.steady import steady_state

    def fixed(spec, r):
        return dataclasses.replace(spec, kind="film", auto_film=False, surface_resistance=r, solar_irradiance=None,
                                   solar_absorptance=None, sky_temperature=None)

    trial = dataclasses.replace(case, inside=fixed(case.inside, r_si), outside=fixed(case.outside, r_se), sizing=None)
    spec = case.condensation
    n_thermal = len(case.layers)
    out = np.empty((12, len(stack.thermal_position)))
    zero = np.zeros(1)
    for m in range(12):
        result = steady_state(trial, forcing=({"air": np.array([spec.inside_temperature[m]]), "solar": zero},
                                              {"air": np.array([spec.outside_temperature[m]]), "solar": zero}))
        face = result.face_temperature[0]
        for k, inside_count in enumerate(stack.thermal_position):
            if inside_count == 0:
                out[m, k] = face[0, 0]
            elif inside_count == n_thermal:
                out[m, k] = face[-1, 1]
            else:
                out[m, k] = min(face[inside_count - 1, 1], face[inside_count, 0])
    return out


def air_vapour_pressures(case: Case) -> tuple[np.ndarray, np.ndarray]:
    """Monthly inside and outside air vapour pressures [Pa], (12,) each.

    Outside: RH_e p_sat(theta_e).  Inside: RH_i p_sat(theta_i), or with a
    humidity class p_e + 1.10 Delta p (:func:`vapour_pressure_excess`).

    Raises
    ------
    CaseError
        If a humidity class puts the inside air above saturation.
    """
    spec = case.condensation
    outside = np.asarray(vapour_pressure(spec.outside_temperature, spec.outside_relative_humidity), dtype=float)
    if spec.humidity_class is None:
        return np.asarray(vapour_pressure(spec.inside_temperature, spec.inside_relative_humidity), dtype=float), outside
    inside = outside + HUMIDITY_CLASS_SAFETY_FACTOR * vapour_pressure_excess(spec.humidity_class, spec.outside_temperature)
    limit = np.asarray(saturation_vapour_pressure(spec.inside_temperature), dtype=float)
    if np.any(inside > limit):
        m = int(np.argmax(inside - limit))
        raise CaseError(case.path, "condensation.humidity_class",
                        f"class {spec.humidity_class} puts the inside air above saturation in {MONTH_NAMES[m]} "
                        f"({inside[m]:.0f} Pa against {limit[m]:.0f} Pa at {spec.inside_temperature[m]:g} degC); "
                        "give inside_relative_humidity instead")
    return inside, outside


def assess(case: Case):
    """The ISO 13788 monthly assessment of a case with a ``[condensation]`` table.

    Parameters
    ----------
    case : Case
        A planar case with ``[condensation]``; film or temperature boundaries.

    Returns
    -------
    xarray.Dataset
        Dimensions ``month`` (1-12) and ``interface`` (0 = inside surface ...
        n = outside surface, membranes included); ``condensation_rate``
        [kg m-2 s-1], ``accumulated_moisture`` [kg m-2], ``vapour_pressure``
        and ``saturation_vapour_pressure`` [Pa], ``interface_temperature``
        [degC] (month x interface); the monthly climate; attributes
        ``first_month``, ``verdict``, ``max_accumulated_moisture`` [kg m-2],
        ``surface_resistance_inside`` / ``_outside`` [m2 K W-1], provenance
        and the caution.

    Raises
    ------
    CaseError
        No ``[condensation]`` table, a cylinder or sphere, a layer without
        vapour data, a boundary without a surface resistance.
    """
    if case.condensation is None:
        raise CaseError(case.path, "condensation", "is required by 'layers condensation' (add a [condensation] table "
                                                   "with the monthly inside and outside climate)")
    if case.geometry != "planar":
        raise CaseError(case.path, "geometry.kind", f"the ISO 13788 method is for plane elements (walls, roofs, floors); "
                                                    f"this case is a {case.geometry}")
    spec = case.condensation
    stack = vapour_stack(case, spec.vapour_data)
    r_si, r_se = surface_resistances(case)
    temperature = monthly_temperatures(case, stack, r_si, r_se)
    saturation = np.asarray(saturation_vapour_pressure(temperature), dtype=float)
    p_in, p_out = air_vapour_pressures(case)
    s = np.concatenate([[0.0], np.cumsum(stack.sd)])
    first, year = starting_month(s, saturation, p_in, p_out)
    if year is None:
        year = moisture_year(s, saturation, p_in, p_out, 1)
        verdict = VERDICTS[0]
    else:
        verdict = VERDICTS[2] if year.remaining.sum() > 0.0 else VERDICTS[1]
    surface = p_in > saturation[:, 0]
    if surface.any():
        warnings.warn(
            f"{case.path}: the inside air's vapour pressure exceeds saturation at the inside surface in "
            f"{', '.join(MONTH_NAMES[m] for m in np.flatnonzero(surface))}: surface condensation, which the "
            "interstitial method does not assess", UserWarning, stacklevel=2)
    _check_physical(case, temperature, saturation, year)
    return _dataset(case, stack, s, temperature, saturation, p_in, p_out, year, first, verdict, r_si, r_se, surface)


def _check_physical(case: Case, temperature: np.ndarray, saturation: np.ndarray, year: MoistureYear) -> None:
    """Refuse a result outside physics before it can be archived: every
    temperature [degC] finite and above absolute zero, pressures [Pa] finite and
    not negative, rates and amounts finite and amounts not negative."""
    from layers.constants import ABSOLUTE_ZERO_CELSIUS

    sound = (np.all(np.isfinite(temperature)) and np.all(temperature > ABSOLUTE_ZERO_CELSIUS)
             and np.all(np.isfinite(saturation)) and np.all(np.isfinite(year.pressure)) and np.all(year.pressure >= 0.0)
             and np.all(np.isfinite(year.rate)) and np.all(np.isfinite(year.accumulated)) and np.all(year.accumulated >= 0.0))
    if not sound:
        raise CaseError(case.path, "condensation", "the monthly calculation gave a result outside physics (not finite, "
                        "or below absolute zero); check the layers' vapour data and the climate")


def _dataset(case, stack, s, temperature, saturation, p_in, p_out, year, first, verdict, r_si, r_se, surface):
    import xarray as xr

    from layers.about import CAUTION, __version__
    from layers.results import cf_encoding, utc_now

    spec = case.condensation
    month = np.arange(1, 13)
    interface = np.arange(s.size)
    mi = ("month", "interface")
    peak = float(year.accumulated.max())
    where = np.unravel_index(int(np.argmax(year.accumulated)), year.accumulated.shape) if peak > 0 else None
    data = {
        "condensation_rate": (mi, year.rate, {"units": "kg m-2 s-1", "long_name": "condensation rate at the interface "
                              "at the start of the month (positive condensing, negative drying; while moisture remains)"}),
        "accumulated_moisture": (mi, year.accumulated, {"units": "kg m-2", "long_name": "moisture accumulated at the "
                                 "interface at the end of the month"}),
        "vapour_pressure": (mi, year.pressure, {"units": "Pa", "long_name": "water vapour pressure at the interface"}),
        "saturation_vapour_pressure": (mi, saturation, {"units": "Pa", "long_name": "saturation water vapour pressure "
                                       "at the interface (ISO 13788, over ice below 0 degC)"}),
        "interface_temperature": (mi, temperature, {"units": "degC", "long_name": "steady temperature of the interface "
                                  "at the month's mean air temperatures"}),
        "air_temperature_inside": ("month", spec.inside_temperature, {"units": "degC", "long_name": "monthly mean inside air temperature"}),
        "air_temperature_outside": ("month", spec.outside_temperature, {"units": "degC", "long_name": "monthly mean outside air temperature"}),
        "vapour_pressure_inside": ("month", p_in, {"units": "Pa", "long_name": "vapour pressure of the inside air"}),
        "vapour_pressure_outside": ("month", p_out, {"units": "Pa", "long_name": "vapour pressure of the outside air"}),
        "relative_humidity_outside": ("month", spec.outside_relative_humidity, {"units": "1", "long_name": "monthly mean outside relative humidity"}),
        "month_length": ("month", np.array(MONTH_DAYS, dtype=float), {"units": "d", "long_name": "days in the month (non-leap year)"}),
        "layer_equivalent_air_thickness": ("layer", stack.sd, {"units": "m", "long_name": "s_d = mu d of each layer (a membrane: its own)"}),
        "layer_vapour_resistance_factor": ("layer", stack.mu, {"units": "1", "long_name": f"vapour resistance factor mu used ({spec.vapour_data}; NaN for a membrane)"}),
    }
    if spec.inside_relative_humidity is not None:
        data["relative_humidity_inside"] = ("month", spec.inside_relative_humidity, {"units": "1", "long_name": "monthly mean inside relative humidity"})
    coords = {
        "month": ("month", month, {"long_name": "calendar month (1 = January)", "units": "1"}),
        "interface": ("interface", interface, {"long_name": "layer interface (0 = inside surface ... n = outside surface, membranes included)", "units": "1"}),
        "equivalent_air_thickness": ("interface", s, {"units": "m", "long_name": "cumulative s_d from the inside surface"}),
        "interface_name": ("interface", np.array(stack.labels, dtype=object), {"long_name": "the layers either side of the interface"}),
        "layer": ("layer", np.arange(1, len(stack.names) + 1), {"long_name": "layer number in the case file (membranes included)", "units": "1"}),
        "layer_name": ("layer", np.array(stack.names, dtype=object), {"long_name": "layer name"}),
    }
    ds = xr.Dataset(data, coords=coords)
    cautions = [CAUTION_GLASER, CAUTION]
    attrs = {
        "Conventions": "CF-1.10",
        "title": case.title,
        "product": "condensation",
        "case": case.text,
        "case_sha256": case.sha256,
        "software_version": __version__,
        "created": utc_now(),
        "geometry": case.geometry,
        "method": "ISO 13788:2012 monthly interstitial condensation (Glaser method); delta_0 = 2e-10 kg/(m s Pa)",
        "first_month": int(first),
        "first_month_rule": "the first month that condenses after one that does not, with a dry construction "
                            "(ISO 13788 clause 6, from memory); 0: no month condenses",
        "verdict": verdict,
        "max_accumulated_moisture": peak,
        "max_accumulated_moisture_units": "kg m-2",
        "max_accumulated_moisture_interface": int(where[1]) if where is not None else -1,
        "max_accumulated_moisture_month": int(where[0]) + 1 if where is not None else 0,
        "moisture_remaining_after_year": float(year.remaining.sum()),
        "moisture_remaining_after_year_units": "kg m-2",
        "surface_resistance_inside": r_si,
        "surface_resistance_outside": r_se,
        "surface_resistance_units": "m2 K W-1",
        "surface_resistances": f"Rsi = {r_si:.3g} m2*K/W, Rse = {r_se:.3g} m2*K/W ({_film_words(case)})",
        "vapour_data": spec.vapour_data,
        "inside_humidity": (f"ISO 13788 Annex A humidity class {spec.humidity_class}: p_i = p_e + "
                            f"{HUMIDITY_CLASS_SAFETY_FACTOR:g} x Delta p (from memory)") if spec.humidity_class
                           else "monthly inside relative humidity",
        "inside_surface_condensation_months": " ".join(MONTH_NAMES[m] for m in np.flatnonzero(surface)),
        "caution": " ".join(cautions),
    }
    ds.attrs = attrs
    return cf_encoding(ds, f"layers condensation {case.path}")


def _film_words(case: Case) -> str:
    words = []
    for spec in (case.inside, case.outside):
        if spec.kind == "temperature":
            words.append(f"{spec.side}: surface held at the air temperature")
        elif spec.auto_film:
            words.append(f"{spec.side}: ISO 6946 value of the auto film")
        else:
            words.append(f"{spec.side}: the case's film")
    return "; ".join(words)


# --------------------------------------------------------------------------- #
# text


def condensation_table(ds) -> str:
    """The monthly table ``layers condensation`` prints: climate, then per
    condensing interface the moisture the month added (+) or took away (-)
    and the amount at the month's end [g/m2], in calculation order from the
    first month (the year starts dry, so each M is the sum of the g above it)."""
    first = int(ds.attrs.get("first_month", 0))
    order = [(first - 1 + k) % 12 for k in range(12)] if first else list(range(12))
    acc = np.asarray(ds["accumulated_moisture"].values) * 1000.0
    rate = np.asarray(ds["condensation_rate"].values)
    amount = np.zeros_like(acc)
    for i, m in enumerate(order):
        amount[m] = acc[m] - (acc[order[i - 1]] if i else 0.0)
    active = [k for k in range(acc.shape[1]) if (acc[:, k] > 0).any() or (rate[:, k] > 0).any()]
    names = [str(v) for v in ds["interface_name"].values]
    head = f"{'month':<6}{'T_i':>6}{'T_e':>6}{'RH_e':>6}{'p_i':>7}{'p_e':>7}"
    lines = []
    if active:
        for n, k in enumerate(active, start=1):
            lines.append(f"plane {n}: interface {k}, {names[k]} (s_d from inside {float(ds['equivalent_air_thickness'][k]):.3g} m)")
        head += "".join(f"{f'g{n} [g/m2]':>13}{f'M{n} [g/m2]':>13}" for n in range(1, len(active) + 1))
    lines.append(head)
    lines.append(f"{'':<6}{'degC':>6}{'degC':>6}{'%':>6}{'Pa':>7}{'Pa':>7}")
    t_i, t_e = ds["air_temperature_inside"].values, ds["air_temperature_outside"].values
    rh_e = ds["relative_humidity_outside"].values * 100.0
    p_i, p_e = ds["vapour_pressure_inside"].values, ds["vapour_pressure_outside"].values
    for m in order:
        row = f"{MONTH_NAMES[m]:<6}{t_i[m]:>6.1f}{t_e[m]:>6.1f}{rh_e[m]:>6.0f}{p_i[m]:>7.0f}{p_e[m]:>7.0f}"
        for k in active:
            row += f"{amount[m, k]:>13.1f}{acc[m, k]:>13.1f}"
        lines.append(row)
    if active:
        lines.append("g: moisture condensed (+) or dried out (-) in the month; M: moisture at the month's end")
    else:
        margin = np.asarray(ds["saturation_vapour_pressure"].values - ds["vapour_pressure"].values)[:, 1:-1]
        if margin.size:
            m, k = np.unravel_index(int(np.argmin(margin)), margin.shape)
            lines.append(f"no interface condenses in any month; the smallest margin below saturation is {margin[m, k]:.0f} Pa "
                         f"({names[k + 1]}, {MONTH_NAMES[m]})")
    return "\n".join(lines)


def summary_lines(ds) -> list[str]:
    """The verdict and the figures that go with it, one line each."""
    out = [f"surface resistances: {ds.attrs['surface_resistances']}",
           f"vapour resistance factors: ISO 10456 {ds.attrs['vapour_data']} values; {ds.attrs['inside_humidity']}"]
    first = int(ds.attrs["first_month"])
    verdict = str(ds.attrs["verdict"])
    if first:
        out.append(f"starting month: {MONTH_NAMES[first - 1]} (the first month that condenses after one that does not)")
        peak = float(ds.attrs["max_accumulated_moisture"]) * 1000.0
        k = int(ds.attrs["max_accumulated_moisture_interface"])
        when = MONTH_NAMES[int(ds.attrs["max_accumulated_moisture_month"]) - 1]
        out.append(f"largest accumulated moisture: {peak:.1f} g/m2 at interface {k} ({ds['interface_name'].values[k]}), end of {when}")
    left = float(ds.attrs["moisture_remaining_after_year"]) * 1000.0
    out.append(f"verdict: {verdict}" + (f" ({left:.1f} g/m2 remain after twelve months, and more each year)" if verdict == VERDICTS[2] else ""))
    return out
