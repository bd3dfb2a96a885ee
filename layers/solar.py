"""Sun position and solar irradiance on a tilted surface, built on pvlib.

The one place for the sun in ``layers``: where it is (:func:`solar_position`)
and how much of a measured global horizontal irradiance (GHI) falls on a
wall, a roof or a pipe jacket of given tilt and azimuth
(:func:`surface_irradiance`).  Pure, vectorised functions of UTC times
(``datetime64``, naive = UTC, as :class:`layers.series.Series` keeps them);
a year of hours takes a few tens of milliseconds.

Models
------
Each is named in a constant, so that a run can record it (:func:`provenance`).

Sun position (:data:`SUN_POSITION_MODEL`)
    The NREL Solar Position Algorithm, Reda & Andreas (2004), through
    ``pvlib.solarposition.spa_python`` (numpy).  Its stated uncertainty is
    +-0.0003 deg from the year -2000 to 6000.  The zenith used everywhere in
    this module is the *apparent* topocentric zenith (corrected for
    atmospheric refraction, with the pressure of the site's altitude and the
    air temperature), the one SPA prints as "topocentric zenith angle" and the
    one the Kasten & Young (1989) air mass requires.  Using the same zenith
    for the split, the air mass and the incidence angles keeps the parts
    adding up; refraction matters only within a few degrees of the horizon.
Split of GHI into beam and diffuse (:data:`DECOMPOSITION_MODEL`)
    Erbs, Klein & Duffie (1982), ``pvlib.irradiance.erbs``: the diffuse
    fraction as a function of the clearness index alone.  It needs nothing
    but GHI and the sun, it was fitted to hourly data (the usual weather
    step) and it keeps the closure DNI cos Z + DHI = GHI at every time (where
    the zenith exceeds 87 deg, or the beam would come out negative, all of
    GHI is taken as diffuse; where the beam would exceed the extraterrestrial
    normal irradiance, which happens only with the sun a few degrees above
    the horizon, it is capped there and the rest counted as diffuse).  Used
    only when DNI and DHI are not given.
Sky diffuse on the surface (:data:`SKY_DIFFUSE_MODEL`)
    Perez, Ineichen, Seals, Michalsky & Stewart (1990), all-sites composite
    coefficients, ``pvlib.irradiance.perez``.  Chosen over the simpler
    Hay & Davies (1980) model because it adds the horizon-brightening band
    to the circumsolar and isotropic parts: the band matters most for
    vertical surfaces, the commonest case here (walls, vertical pipes), and
    empirical comparisons on measured tilted and vertical irradiance rank
    the Perez model among the most accurate (Loutzenhiser et al. 2007, from
    memory).  It needs the extraterrestrial normal irradiance (Spencer 1971,
    ``pvlib.irradiance.get_extra_radiation``) and the relative air mass
    (Kasten & Young 1989, ``pvlib.atmosphere.get_relative_airmass``).
    Where the Perez model has no value (the sun at or below the horizon,
    where the air mass is undefined, or no diffuse light at all) the sky is
    taken as isotropic, DHI (1 + cos beta) / 2 (Liu & Jordan 1963), so that
    twilight diffuse light is kept and nothing is NaN.
Ground reflection (:data:`GROUND_MODEL`)
    Isotropic, GHI albedo (1 - cos beta) / 2 (``pvlib.irradiance.get_ground_diffuse``).

A property of the Perez model worth knowing: its circumsolar part is scaled
by a / b with b = max(cos 85 deg, cos Z), so a horizontal surface gets GHI
back exactly while the sun is more than 5 deg above the horizon, and a
little less, DHI F1 (1 - cos Z / cos 85 deg) (floored at no sky diffuse at
all), below that.  Over an invented but plausible year at 52 N the shortfall
stays below 1 W m-2; only an implausibly bright diffuse sky with the sun at
the horizon makes it large.  It is the published model's, and
``tests/test_solar.py`` checks it term by term.  The same 1 / b makes the
circumsolar part on a surface facing a low sun several times the DHI under
a bright, hazy sky: that too is the model, not noise.

Time stamps of averaged data
----------------------------
An hourly weather value is a mean over the hour, and hourly meteorological
records most often stamp it at the *end* of the hour (the value at 13:00 is
the mean from 12:00 to 13:00).  ``label`` says where in its interval a
stamp sits: ``"end"`` (the default, for that commonest case), ``"start"``,
or ``"middle"`` (also for instantaneous values).  The sun is placed at the
middle of the interval: half an interval before an end stamp, half an
interval after a start stamp.  This is the usual approximation of the
interval's mean geometry; in an interval containing sunrise or sunset the
middle may fall with the sun below the horizon, and that interval's GHI then
counts as diffuse light only.

Bad and absurd inputs
---------------------
NaN or infinite irradiance is refused (``ValueError``): gaps are filled, or
refused, by the series reader, never here.  Negative irradiance (the small
night offsets of thermopile pyranometers) is set to zero silently.  A value
above the extraterrestrial normal irradiance of its day (about 1321 to
1413 W m-2), which no mean at ground level can reach (a wrong unit, a spike),
is clipped to it with a ``UserWarning`` that counts the values clipped.  A
given DNI is set to zero while the sun is below the horizon; a DNI split
from GHI is capped at the extraterrestrial value (see the split above).

References
----------
Reda, I., Andreas, A. (2004). Solar position algorithm for solar radiation
applications. Solar Energy 76(5), 577-589; corrigendum Solar Energy 81(6),
838 (2007).
Erbs, D. G., Klein, S. A., Duffie, J. A. (1982). Estimation of the diffuse
radiation fraction for hourly, daily and monthly-average global radiation.
Solar Energy 28(4), 293-302.
Perez, R., Ineichen, P., Seals, R., Michalsky, J., Stewart, R. (1990).
Modeling daylight availability and irradiance components from direct and
global irradiance. Solar Energy 44(5), 271-289.
Hay, J. E., Davies, J. A. (1980). Calculation of the solar radiation incident
on an inclined surface. Proc. First Canadian Solar Radiation Data Workshop,
59-72 (from memory).
Kasten, F., Young, A. T. (1989). Revised optical air mass tables and
approximation formula. Applied Optics 28(22), 4735-4738.
Spencer, J. W. (1971). Fourier series representation of the position of the
sun. Search 2(5), 172 (from memory).
Liu, B. Y. H., Jordan, R. C. (1963). The long-term average performance of
flat-plate solar-energy collectors. Solar Energy 7(2), 53-74 (from memory).
Loutzenhiser, P. G., Manz, H., Felsmann, C., Strachan, P. A., Frank, T.,
Maxwell, G. M. (2007). Empirical validation of models to compute solar
irradiance on inclined surfaces for building energy simulation. Solar Energy
81(2), 254-267 (from memory).
Holmgren, W. F., Hansen, C. W., Mikofski, M. A. (2018). pvlib python: a
python package for modeling solar energy systems. Journal of Open Source
Software 3(29), 884.
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

import layers.checks as checks

__all__ = [
    "DECOMPOSITION_MODEL",
    "DEFAULT_LABEL",
    "GROUND_MODEL",
    "LABELS",
    "SKY_DIFFUSE_MODEL",
    "SUN_POSITION_MODEL",
    "Site",
    "SolarPosition",
    "SurfaceIrradiance",
    "provenance",
    "solar_position",
    "surface_irradiance",
]

#: The models, as a run records them (attribute text; see :func:`provenance`).
SUN_POSITION_MODEL = (
    "NREL SPA, Reda and Andreas (2004), pvlib.solarposition.spa_python; "
    "apparent (refraction-corrected) topocentric zenith"
)
DECOMPOSITION_MODEL = "Erbs, Klein and Duffie (1982), pvlib.irradiance.erbs (only when DNI and DHI are not given)"
SKY_DIFFUSE_MODEL = (
    "Perez et al. (1990), all-sites composite coefficients, pvlib.irradiance.perez, "
    "with Kasten and Young (1989) relative air mass and Spencer (1971) extraterrestrial irradiance; "
    "isotropic (Liu and Jordan 1963) where the sun is at or below the horizon"
)
GROUND_MODEL = "isotropic ground reflection, GHI albedo (1 - cos tilt) / 2"

#: Where a time stamp sits in the interval its value averages.
LABELS = ("end", "start", "middle")
#: Hourly meteorological records most often stamp an hour's mean at its end.
DEFAULT_LABEL = "end"

#: The Perez coefficient set (pvlib's name for Perez et al. 1990, all sites composite).
_PEREZ_COEFFICIENTS = "allsitescomposite1990"
#: Above this zenith the Erbs split gives no beam (pvlib's default, kept explicit) [deg].
_ERBS_MAX_ZENITH = 87.0
#: Air temperature for refraction when none is given: pvlib's default, a mean-climate value [degC].
_REFRACTION_TEMPERATURE = 12.0


@dataclass(frozen=True)
class Site:
    """Where the sun is seen from.

    Parameters
    ----------
    latitude : float
        Latitude, north positive, -90 to 90 [deg].
    longitude : float
        Longitude, east positive, -180 to 180 [deg].
    altitude : float
        Height above mean sea level, -1000 to 10000 [m]; sets the pressure
        (standard atmosphere, ``pvlib.atmosphere.alt2pres``) for refraction
        and the topocentric parallax.
    """

    latitude: float
    longitude: float
    altitude: float = 0.0

    def __post_init__(self) -> None:
        object.__setattr__(self, "latitude", float(checks.within("latitude", self.latitude, -90.0, 90.0)))
        object.__setattr__(self, "longitude", float(checks.within("longitude", self.longitude, -180.0, 180.0)))
        object.__setattr__(self, "altitude", float(checks.within("altitude", self.altitude, -1000.0, 10000.0)))


class SolarPosition(NamedTuple):
    """The sun seen from a site.

    Attributes
    ----------
    zenith : numpy.ndarray
        Apparent (refraction-corrected) topocentric zenith angle, 0 to 180 [deg].
    azimuth : numpy.ndarray
        Azimuth, clockwise from north (90 east, 180 south), 0 to 360 [deg].
    """

    zenith: np.ndarray
    azimuth: np.ndarray


class SurfaceIrradiance(NamedTuple):
    """Solar irradiance on a surface and what it was made of; all finite, none negative.

    Attributes
    ----------
    total : numpy.ndarray
        Irradiance on the surface, ``beam + sky_diffuse + ground_reflected`` [W m-2].
    beam : numpy.ndarray
        Direct (beam) part on the surface, DNI max(cos AOI, 0) [W m-2].
    sky_diffuse : numpy.ndarray
        Diffuse light from the sky on the surface [W m-2].
    ground_reflected : numpy.ndarray
        Light reflected by the ground onto the surface [W m-2].
    solar_zenith : numpy.ndarray
        Apparent zenith of the sun at ``sun_time`` [deg].
    solar_azimuth : numpy.ndarray
        Azimuth of the sun at ``sun_time``, clockwise from north [deg].
    angle_of_incidence : numpy.ndarray
        Angle between the sun and the surface's outward normal, 0 to 180 [deg].
    ghi : numpy.ndarray
        Global horizontal irradiance used (after clipping) [W m-2].
    dni : numpy.ndarray
        Direct normal irradiance used (given or split from GHI) [W m-2].
    dhi : numpy.ndarray
        Diffuse horizontal irradiance used (given or split from GHI) [W m-2].
    dni_extra : numpy.ndarray
        Extraterrestrial normal irradiance of the day [W m-2].
    sun_time : numpy.ndarray
        The instants the sun was placed at (UTC, ``datetime64[ns]``): the
        stamps moved to the middle of their intervals.
    """

    total: np.ndarray
    beam: np.ndarray
    sky_diffuse: np.ndarray
    ground_reflected: np.ndarray
    solar_zenith: np.ndarray
    solar_azimuth: np.ndarray
    angle_of_incidence: np.ndarray
    ghi: np.ndarray
    dni: np.ndarray
    dhi: np.ndarray
    dni_extra: np.ndarray
    sun_time: np.ndarray


#: The daily peaks of a global-horizontal series and of the sun may differ by
#: clouds and by a series stamped at the end of its hour; this much more, on
#: the median day, says the stamps are in another time zone than read [h].
SHIFT_WARNING_HOURS = 1.5


def timing_offset(times_utc: ArrayLike, ghi: ArrayLike, zenith: ArrayLike) -> float | None:
    """How much later the series' irradiance peaks than the sun, on the median day [h].

    For each day with some sun (a daily maximum above 100 W m-2), the time of
    the largest global horizontal irradiance minus the time of the smallest
    zenith; the median over those days (None without three of them).  A
    series read in the wrong time zone is late or early by about the zones'
    difference: a check, not a correction.

    Parameters
    ----------
    times_utc : array of datetime64
        The stamps (UTC).
    ghi : array_like
        Global horizontal irradiance at the stamps [W m-2].
    zenith : array_like
        The sun's zenith at the same instants [deg].
    """
    seconds = (np.asarray(times_utc).astype("datetime64[s]") - np.datetime64("1970-01-01T00:00:00")).astype(float)
    ghi, zenith = np.asarray(ghi, dtype=float), np.asarray(zenith, dtype=float)
    days = np.floor(seconds / 86400.0).astype(np.int64)
    offsets = []
    for day in np.unique(days):
        here = np.flatnonzero(days == day)
        if here.size < 6 or not np.isfinite(ghi[here]).any() or np.nanmax(ghi[here]) < 100.0:
            continue
        peak = here[int(np.nanargmax(ghi[here]))]
        sun = here[int(np.nanargmin(zenith[here]))]
        offsets.append((seconds[peak] - seconds[sun]) / 3600.0)
    if len(offsets) < 3:
        return None
    return float(np.median(offsets))


def provenance() -> str:
    """A short text naming the models and the pvlib version, for a result's attributes.

    Returns
    -------
    str
        One line per model and the pvlib version, e.g. ``"sun position: ...;
        ...; pvlib 0.13.0"``.  Reads the installed version without importing
        pvlib.
    """
    from importlib.metadata import PackageNotFoundError, version

    try:
        pvlib_version = version("pvlib")
    except PackageNotFoundError:
        pvlib_version = "not installed"
    return (
        f"sun position: {SUN_POSITION_MODEL}; split: {DECOMPOSITION_MODEL}; "
        f"sky diffuse: {SKY_DIFFUSE_MODEL}; ground: {GROUND_MODEL}; pvlib {pvlib_version}"
    )


# ---------------------------------------------------------------------------
# helpers


def _times(times_utc: ArrayLike) -> np.ndarray:
    """Times as a 1-D ``datetime64[ns]`` array (naive, read as UTC)."""
    times = np.atleast_1d(np.asarray(times_utc))
    if not np.issubdtype(times.dtype, np.datetime64):
        raise ValueError(f"times_utc must be datetime64 values (UTC), got dtype {times.dtype}")
    if times.ndim != 1:
        raise ValueError(f"times_utc must be one-dimensional, got shape {times.shape}")
    times = times.astype("datetime64[ns]")
    if np.any(np.isnat(times)):
        raise ValueError("times_utc contains NaT")
    return times


def _index(times: np.ndarray):
    """A UTC ``pandas.DatetimeIndex`` for pvlib."""
    import pandas as pd

    return pd.DatetimeIndex(times).tz_localize("UTC")


def _along(name: str, value: ArrayLike, n: int) -> np.ndarray:
    """``value`` (scalar or one per time) as a float array of length ``n``; NaN and inf refused."""
    array = checks.finite(name, value)
    try:
        return np.broadcast_to(array, (n,)).astype(float)
    except ValueError:
        raise ValueError(f"{name} must be a scalar or have one value per time ({n}), got shape {array.shape}") from None


def _sun_times(times: np.ndarray, label: str, interval: float | None) -> np.ndarray:
    """The stamps moved to the middle of their averaging intervals."""
    checks.choice("label", label, LABELS)
    if label == "middle":
        return times
    if interval is None:
        steps = np.diff(times) / np.timedelta64(1, "s")
        steps = steps[steps > 0]
        if steps.size == 0:
            raise ValueError(f"label={label!r} needs the averaging interval: give interval [s] (one time stamp only)")
        interval = float(np.median(steps))
    interval = float(checks.positive("interval", interval))
    half = np.timedelta64(int(round(interval * 5e8)), "ns")  # half the interval, in ns
    return times - half if label == "end" else times + half


def _clip(name: str, value: np.ndarray, ceiling: np.ndarray) -> np.ndarray:
    """Negative values to zero (silently); values above ``ceiling`` to it, with a warning."""
    above = value > ceiling
    if np.any(above):
        warnings.warn(
            f"{name}: {int(above.sum())} value(s) above the extraterrestrial normal irradiance "
            f"(largest {float(value.max()):.6g} W m-2) clipped to it",
            UserWarning,
            stacklevel=3,
        )
    return np.clip(value, 0.0, ceiling)


def _solar_position(index, site: Site, temp_air: np.ndarray, pressure: float | None, delta_t: float | None):
    from pvlib import atmosphere, solarposition

    if pressure is None:
        pressure = float(atmosphere.alt2pres(site.altitude))
    frame = solarposition.spa_python(
        index,
        site.latitude,
        site.longitude,
        altitude=site.altitude,
        pressure=pressure,
        temperature=temp_air,
        delta_t=delta_t,
        how="numpy",
    )
    return SolarPosition(
        zenith=frame["apparent_zenith"].to_numpy(dtype=float),
        azimuth=frame["azimuth"].to_numpy(dtype=float),
    )


# ---------------------------------------------------------------------------
# public functions


def solar_position(
    times_utc: ArrayLike,
    site: Site,
    *,
    temp_air: ArrayLike | None = None,
    pressure: float | None = None,
    delta_t: float | None = None,
) -> SolarPosition:
    """Where the sun is, seen from ``site``, at the given instants.

    NREL SPA (Reda & Andreas 2004) through ``pvlib.solarposition.spa_python``.

    Parameters
    ----------
    times_utc : array_like of datetime64
        Instants, UTC (naive ``datetime64`` read as UTC) [-].
    site : Site
        Latitude, longitude [deg] and altitude [m].
    temp_air : float or array_like, optional
        Air temperature for the refraction correction [degC]; default 12 degC
        (pvlib's default, a mean-climate value).
    pressure : float, optional
        Air pressure for the refraction correction [Pa]; default that of the
        standard atmosphere at the site's altitude.
    delta_t : float, optional
        TT - UT1 [s]; default pvlib's estimate for the year and month
        (``pvlib.spa.calculate_deltat``).  One second moves the sun by about
        0.004 deg.

    Returns
    -------
    SolarPosition
        ``zenith`` (apparent, refraction-corrected) [deg] and ``azimuth``
        (clockwise from north) [deg], one per instant.
    """
    times = _times(times_utc)
    temp = _along("temp_air", _REFRACTION_TEMPERATURE if temp_air is None else temp_air, times.size)
    checks.temperature("temp_air", temp)
    if pressure is not None:
        pressure = float(checks.positive("pressure", pressure))
    if delta_t is not None:
        delta_t = float(checks.finite("delta_t", delta_t))
    return _solar_position(_index(times), site, temp, pressure, delta_t)


def surface_irradiance(
    times_utc: ArrayLike,
    site: Site,
    surface_tilt: ArrayLike,
    surface_azimuth: ArrayLike,
    ghi: ArrayLike | None,
    *,
    dni: ArrayLike | None = None,
    dhi: ArrayLike | None = None,
    albedo: ArrayLike = 0.2,
    temp_air: ArrayLike | None = None,
    label: str = DEFAULT_LABEL,
    interval: float | None = None,
) -> SurfaceIrradiance:
    """Solar irradiance on a tilted surface from horizontal irradiance.

    GHI alone is split into beam and diffuse by Erbs et al. (1982); given DNI
    and DHI are used as they are.  The sky diffuse is transposed by the Perez
    et al. (1990) model (isotropic where the sun is at or below the
    horizon), the ground reflection is isotropic with ``albedo``, and the beam
    is DNI max(cos AOI, 0).  See the module text for the reasons and the
    references.

    Parameters
    ----------
    times_utc : array_like of datetime64
        Time stamps of the irradiance values, UTC (naive ``datetime64`` read
        as UTC), one-dimensional [-].
    site : Site
        Latitude, longitude [deg] and altitude [m].
    surface_tilt : float or array_like
        Tilt of the surface from horizontal: 0 a flat roof facing up, 90 a
        vertical wall, 180 facing down; 0 to 180 [deg].
    surface_azimuth : float or array_like
        Direction the surface faces, clockwise from north: 0 north, 90 east,
        180 south, 270 west; any finite value, taken modulo 360 [deg].
    ghi : float, array_like or None
        Global horizontal irradiance, one per time stamp (or a scalar)
        [W m-2].  May be None when ``dni`` and ``dhi`` are both given: then
        GHI = DNI cos Z + DHI.  With DNI and DHI given, a given GHI is used
        only for the ground reflection.
    dni : float or array_like, optional
        Direct normal irradiance [W m-2]; give it with ``dhi`` or not at all.
    dhi : float or array_like, optional
        Diffuse horizontal irradiance [W m-2]; give it with ``dni`` or not at all.
    albedo : float or array_like, optional
        Ground reflectance, 0 to 1 [-]; default 0.2 (common practice for
        grass and mixed ground).
    temp_air : float or array_like, optional
        Air temperature for the refraction correction of the sun position
        [degC]; default 12 degC.
    label : {"end", "start", "middle"}, optional
        Where each stamp sits in the interval its value averages; default
        ``"end"``, the commonest convention of hourly meteorological records.
        The sun is placed at the interval's middle (``"middle"`` also serves
        instantaneous values) [-].
    interval : float, optional
        Length of the averaging interval [s]; default the median spacing of
        the stamps.  Needed for a single stamp unless ``label="middle"``.

    Returns
    -------
    SurfaceIrradiance
        Total, beam, sky-diffuse and ground-reflected irradiance on the
        surface [W m-2], the sun's apparent zenith and azimuth [deg], the
        angle of incidence [deg], the GHI, DNI and DHI used [W m-2], the
        extraterrestrial normal irradiance [W m-2] and the instants the sun
        was placed at.  Every array is finite and none is negative.

    Raises
    ------
    ValueError
        NaN or infinite input, a time that is not ``datetime64``, only one
        of ``dni`` and ``dhi``, a tilt outside 0 to 180 deg, an albedo
        outside 0 to 1, an unknown ``label``.

    Warns
    -----
    UserWarning
        When irradiance above the extraterrestrial normal irradiance was
        clipped to it.
    """
    from pvlib import atmosphere, irradiance

    times = _times(times_utc)
    n = times.size
    if (dni is None) != (dhi is None):
        raise ValueError("give both dni and dhi, or neither (then GHI is split by Erbs et al. 1982)")
    if ghi is None and dni is None:
        raise ValueError("ghi is needed unless dni and dhi are both given")
    tilt = _along("surface_tilt", surface_tilt, n)
    checks.within("surface_tilt", tilt, 0.0, 180.0)
    azimuth = np.mod(_along("surface_azimuth", surface_azimuth, n), 360.0)
    albedo = _along("albedo", albedo, n)
    checks.within("albedo", albedo, 0.0, 1.0)
    temp = _along("temp_air", _REFRACTION_TEMPERATURE if temp_air is None else temp_air, n)
    checks.temperature("temp_air", temp)

    sun_time = _sun_times(times, label, interval)
    index = _index(sun_time)
    sun = _solar_position(index, site, temp, None, None)
    zenith, sun_azimuth = sun.zenith, sun.azimuth
    day_of_year = np.asarray(index.day_of_year, dtype=float)
    dni_extra = np.asarray(irradiance.get_extra_radiation(day_of_year), dtype=float)
    cos_zenith = np.cos(np.radians(zenith))
    up = zenith < 90.0

    if dni is None:
        ghi_used = _clip("ghi", _along("ghi", ghi, n), dni_extra)
        split = irradiance.erbs(ghi_used, zenith, day_of_year, max_zenith=_ERBS_MAX_ZENITH)
        dni_used = np.asarray(split["dni"], dtype=float)
        dhi_used = np.asarray(split["dhi"], dtype=float)
        # near the horizon (GHI - DHI) / cos Z can exceed the top of the atmosphere: cap the beam
        # there and give the rest to the diffuse, so that DNI cos Z + DHI = GHI still holds
        capped = dni_used > dni_extra
        dni_used = np.where(capped, dni_extra, dni_used)
        dhi_used = np.where(capped, ghi_used - dni_extra * cos_zenith, dhi_used)
    else:
        dni_used = np.where(up, _clip("dni", _along("dni", dni, n), dni_extra), 0.0)
        dhi_used = _clip("dhi", _along("dhi", dhi, n), dni_extra)
        if ghi is None:
            ghi_used = dni_used * np.maximum(cos_zenith, 0.0) + dhi_used
        else:
            ghi_used = _clip("ghi", _along("ghi", ghi, n), dni_extra)

    aoi = np.asarray(irradiance.aoi(tilt, azimuth, zenith, sun_azimuth), dtype=float)
    beam = np.asarray(irradiance.beam_component(tilt, azimuth, zenith, sun_azimuth, dni_used), dtype=float)
    beam = np.where(up, beam, 0.0)

    airmass = np.asarray(atmosphere.get_relative_airmass(zenith), dtype=float)  # NaN at zenith > 90
    with np.errstate(invalid="ignore", divide="ignore"):
        perez = np.asarray(
            irradiance.perez(
                tilt, azimuth, dhi_used, dni_used, dni_extra, zenith, sun_azimuth, airmass,
                model=_PEREZ_COEFFICIENTS,
            ),
            dtype=float,
        )
    isotropic = dhi_used * 0.5 * (1.0 + np.cos(np.radians(tilt)))
    usable = up & np.isfinite(airmass) & np.isfinite(perez) & (dhi_used > 0.0)
    sky = np.where(usable, perez, isotropic)
    ground = np.asarray(irradiance.get_ground_diffuse(tilt, ghi_used, albedo=albedo), dtype=float)

    # clip the last round-off below zero (a cos of 90 deg is 6e-17, not 0)
    beam, sky, ground = (np.maximum(part, 0.0) for part in (beam, sky, ground))
    return SurfaceIrradiance(
        total=beam + sky + ground,
        beam=beam,
        sky_diffuse=sky,
        ground_reflected=ground,
        solar_zenith=zenith,
        solar_azimuth=sun_azimuth,
        angle_of_incidence=aoi,
        ghi=np.asarray(ghi_used, dtype=float),
        dni=dni_used,
        dhi=dhi_used,
        dni_extra=dni_extra,
        sun_time=sun_time,
    )
