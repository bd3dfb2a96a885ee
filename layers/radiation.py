"""Long-wave radiation exchange of surfaces, sky temperature and surface resistances.

Pure, vectorised numpy functions: every numeric argument may be a scalar or an
array, and arrays broadcast against each other. A scalar input gives a numpy
scalar back. Temperatures come in and go out in degC; they are converted to
kelvin only inside the radiation formulas.

The surface is taken as small and grey in large isothermal surroundings, so
the net exchange is q = eps sigma (T1^4 - T2^4) = hr (theta1 - theta2) with the
exactly linearised coefficient hr of :func:`radiative_coefficient`.
"""

from __future__ import annotations

from dataclasses import dataclass
from types import MappingProxyType

import numpy as np
from numpy.typing import ArrayLike

import layers.checks as checks
from layers.constants import ISO6946_REFERENCE_WIND_SPEED, STEFAN_BOLTZMANN, ZERO_CELSIUS
from layers.convection import iso6946_external_convection, iso6946_internal_convection

__all__ = [
    "SurfaceEmissivity",
    "JACKET_EMISSIVITY",
    "jacket_emissivity",
    "radiative_coefficient",
    "hr0",
    "sky_temperature_swinbank",
    "view_factor_sky",
    "view_factor_ground",
    "iso6946_surface_resistance",
    "iso6946_external_surface_resistance",
]

def _kelvin(name: str, value: ArrayLike) -> np.ndarray:
    """Temperature in degC -> K; raise ValueError for NaN, inf or <= 0 K."""
    return checks.temperature(name, value) + ZERO_CELSIUS


def _emissivity(value: ArrayLike) -> np.ndarray:
    return checks.within("emissivity", value, 0.0, 1.0)


# ---------------------------------------------------------------------------
# emissivity of jacket and cladding surfaces
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class SurfaceEmissivity:
    """Typical hemispherical emissivity of a surface, with where it comes from.

    Attributes
    ----------
    emissivity : float
        Typical total hemispherical emissivity near room temperature [-].
    description : str
        The surface in words.
    source : str
        Where the value comes from, and how sure it is.
    """

    emissivity: float
    description: str
    source: str


_VDI = (
    "typical, from memory: the emissivity column that VDI 2055 Part 1 and "
    "ISO 12241 print beside the simplified coefficient C_A; not checked "
    "against the standards"
)

JACKET_EMISSIVITY = MappingProxyType(
    {
        "aluminium-bright": SurfaceEmissivity(0.05, "aluminium, bright rolled", _VDI),
        "aluminium-oxidised": SurfaceEmissivity(0.13, "aluminium, oxidised", _VDI),
        "galvanised-steel-new": SurfaceEmissivity(0.26, "galvanised steel sheet, new (blank)", _VDI),
        "galvanised-steel-dusty": SurfaceEmissivity(0.44, "galvanised steel sheet, dusty", _VDI),
        "stainless-steel": SurfaceEmissivity(0.15, "austenitic stainless steel sheet", _VDI),
        "aluminium-zinc": SurfaceEmissivity(0.16, "aluminium-zinc coated steel sheet", _VDI),
        "non-metallic": SurfaceEmissivity(
            0.94,
            "paint, plastic jacket, mastic, render and other non-metallic surfaces",
            _VDI + "; painted and plastic surfaces are 0.85-0.95 in most handbooks",
        ),
    }
)
"""Typical emissivities of insulation jackets and cladding, keyed by the
names the case file accepts for an outside film's ``jacket``. Real values vary with
finish, ageing and dirt (bright aluminium roughly 0.03-0.1, weathered
galvanised steel up to about 0.3-0.6): use a measured value where the result
depends on it."""


def jacket_emissivity(surface: str) -> float:
    """Typical emissivity of a jacket surface from :data:`JACKET_EMISSIVITY`.

    Parameters
    ----------
    surface : str
        A key of :data:`JACKET_EMISSIVITY`.

    Returns
    -------
    float
        Emissivity [-].

    Raises
    ------
    ValueError
        For an unknown surface; the message lists the known ones.
    """
    if surface not in JACKET_EMISSIVITY:
        raise ValueError(f"surface must be one of {', '.join(JACKET_EMISSIVITY)}; got {surface!r}")
    return JACKET_EMISSIVITY[surface].emissivity


# ---------------------------------------------------------------------------
# linearised radiation
# ---------------------------------------------------------------------------


def radiative_coefficient(
    emissivity: ArrayLike, surface_temperature: ArrayLike, surroundings_temperature: ArrayLike
) -> np.ndarray:
    """Exactly linearised radiative heat-transfer coefficient.

    .. math::
        h_r = \\varepsilon\\sigma (T_1^2 + T_2^2)(T_1 + T_2)
        = \\varepsilon\\sigma\\frac{T_1^4 - T_2^4}{T_1 - T_2}

    so that hr (theta1 - theta2) is the net grey-body exchange exactly, with
    no division (finite when the temperatures are equal: hr = 4 eps sigma T^3).

    Parameters
    ----------
    emissivity : array_like
        Surface emissivity, within [0, 1] [-].
    surface_temperature : array_like
        Surface temperature [degC].
    surroundings_temperature : array_like
        Mean radiant temperature of the surroundings [degC].

    Returns
    -------
    numpy.ndarray
        hr [W m-2 K-1].

    Raises
    ------
    ValueError
        For emissivity outside [0, 1], NaN, or temperatures at or below
        absolute zero.

    References
    ----------
    Incropera et al., *Fundamentals of Heat and Mass Transfer*, 6th ed.,
    eq. 1.9; ISO 12241:2008 section 4.1.4 (hr of the outer surface).
    """
    eps = _emissivity(emissivity)
    t1 = _kelvin("surface_temperature", surface_temperature)
    t2 = _kelvin("surroundings_temperature", surroundings_temperature)
    return linearised_radiation_kelvin(eps, t1, t2)[()]


def linearised_radiation_kelvin(emissivity, t1_kelvin, t2_kelvin):
    """The formula of :func:`radiative_coefficient` without its input checks,
    on absolute temperatures [K], for callers that checked their ranges once
    (the time march calls it at every iteration) [W m-2 K-1]."""
    return emissivity * STEFAN_BOLTZMANN * (t1_kelvin * t1_kelvin + t2_kelvin * t2_kelvin) * (t1_kelvin + t2_kelvin)


def hr0(mean_temperature: ArrayLike) -> np.ndarray:
    """Black-body radiative coefficient hr0 = 4 sigma Tm^3 of ISO 6946 annex on surface resistances.

    Parameters
    ----------
    mean_temperature : array_like
        Mean of the surface and surroundings temperatures [degC].

    Returns
    -------
    numpy.ndarray
        hr0 [W m-2 K-1] (5.7 at 20 degC, 4.6 at 0 degC).

    References
    ----------
    ISO 6946:2017, annex on surface resistances (from memory; reproduces the tabulated Rsi and Rse).
    """
    t = _kelvin("mean_temperature", mean_temperature)
    return (4.0 * STEFAN_BOLTZMANN * t**3)[()]


# ---------------------------------------------------------------------------
# sky and view factors
# ---------------------------------------------------------------------------


def sky_temperature_swinbank(air_temperature: ArrayLike) -> np.ndarray:
    """Effective clear-sky temperature, Swinbank (1963): T_sky = 0.0552 T_air^1.5 (K).

    Parameters
    ----------
    air_temperature : array_like
        Screen-level air temperature [degC].

    Returns
    -------
    numpy.ndarray
        Effective sky temperature for long-wave exchange [degC].

    Notes
    -----
    A clear-sky relation without humidity or cloud; it gives a sky about
    16 K below the air at 20 degC.

    References
    ----------
    W. C. Swinbank, "Long-wave radiation from clear skies", Q. J. R. Meteorol.
    Soc. 89 (1963) 339-348; Duffie and Beckman, *Solar Engineering of Thermal
    Processes*, section 3.9.
    """
    t = _kelvin("air_temperature", air_temperature)
    return (0.0552 * t**1.5 - ZERO_CELSIUS)[()]


def _tilt(tilt_deg: ArrayLike) -> np.ndarray:
    tilt = checks.finite("tilt_deg", tilt_deg)
    if np.any((tilt < 0.0) | (tilt > 180.0)):
        raise ValueError("tilt_deg must be within [0, 180] (0 = facing up, 90 = vertical)")
    return np.radians(tilt)


def view_factor_sky(tilt_deg: ArrayLike) -> np.ndarray:
    """View factor from a tilted plane to the sky, (1 + cos beta)/2.

    Parameters
    ----------
    tilt_deg : array_like
        Tilt from horizontal, 0 (roof facing up) to 180 (facing down) [deg].

    Returns
    -------
    numpy.ndarray
        View factor to the sky hemisphere [-].

    References
    ----------
    Duffie and Beckman, *Solar Engineering of Thermal Processes*, section
    2.16 (isotropic sky).
    """
    return ((1.0 + np.cos(_tilt(tilt_deg))) / 2.0)[()]


def view_factor_ground(tilt_deg: ArrayLike) -> np.ndarray:
    """View factor from a tilted plane to the ground, (1 - cos beta)/2.

    Parameters
    ----------
    tilt_deg : array_like
        Tilt from horizontal, 0 to 180 [deg].

    Returns
    -------
    numpy.ndarray
        View factor to the ground [-]; sky and ground factors sum to 1.

    References
    ----------
    Duffie and Beckman, section 2.16.
    """
    return ((1.0 - np.cos(_tilt(tilt_deg))) / 2.0)[()]


# ---------------------------------------------------------------------------
# ISO 6946 surface resistances
# ---------------------------------------------------------------------------


def iso6946_surface_resistance(
    direction: str, emissivity: ArrayLike = 0.9, mean_temperature: ArrayLike = 20.0
) -> np.ndarray:
    """Internal surface resistance Rsi = 1/(hci + eps hr0) of ISO 6946 annex on surface resistances.

    Parameters
    ----------
    direction : str
        Direction of heat flow: ``up``, ``horizontal`` or ``down``.
    emissivity : array_like, optional
        Hemispherical emissivity of the surface, within [0, 1] [-]; default 0.9.
    mean_temperature : array_like, optional
        Temperature at which hr0 is evaluated [degC]; default 20, which
        reproduces the standard's table (0.10 / 0.13 / 0.17 m2 K W-1).

    Returns
    -------
    numpy.ndarray
        Rsi [m2 K W-1].

    References
    ----------
    ISO 6946:2017, annex on surface resistances (from memory).
    """
    hc = iso6946_internal_convection(direction)
    return (1.0 / (hc + _emissivity(emissivity) * np.asarray(hr0(mean_temperature))))[()]


def iso6946_external_surface_resistance(
    wind_speed: ArrayLike = ISO6946_REFERENCE_WIND_SPEED, emissivity: ArrayLike = 0.9, mean_temperature: ArrayLike = 0.0
) -> np.ndarray:
    """External surface resistance Rse = 1/(4 + 4 v + eps hr0) of ISO 6946 annex on surface resistances.

    Parameters
    ----------
    wind_speed : array_like, optional
        Wind speed close to the surface, >= 0 [m s-1]; default 4, the
        standard's design value.
    emissivity : array_like, optional
        Hemispherical emissivity, within [0, 1] [-]; default 0.9.
    mean_temperature : array_like, optional
        Temperature at which hr0 is evaluated [degC]; default 0, which
        reproduces the standard's Rse table against wind speed (at 10 degC the
        5 m/s entry would round to 0.03 instead of 0.04).

    Returns
    -------
    numpy.ndarray
        Rse [m2 K W-1] (0.04 at 4 m s-1).

    References
    ----------
    ISO 6946:2017, annex on surface resistances (from memory).
    """
    hc = np.asarray(iso6946_external_convection(wind_speed))
    return (1.0 / (hc + _emissivity(emissivity) * np.asarray(hr0(mean_temperature))))[()]
