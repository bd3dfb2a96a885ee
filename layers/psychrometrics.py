"""Moist-air relations for dew-point and surface-condensation checks.

Pure, vectorised numpy functions: every argument may be a scalar or an array,
and arrays broadcast against each other. A scalar input gives a numpy scalar
back.

The saturation vapour pressure is the ISO 13788 expression (a Magnus-type
formula), over liquid water for temperatures at or above 0 degC and over ice
below. The dew point is its exact inverse, so below 0 degC it is the frost
point, which is what matters for hoar frost on a cold surface.

References
----------
.. [1] ISO 13788:2012, *Hygrothermal performance of building components and
   building elements -- Internal surface temperature to avoid critical surface
   humidity and interstitial condensation -- Calculation methods*, Annex E
   (saturation water vapour pressure). Constants recalled from the standard
   (from memory, high confidence). Against the ASHRAE (Hyland-Wexler)
   formulation used by psychrolib the dew point differs by at most 0.003 K at
   20 degC/50 %, 25 degC/80 % and 0 degC/80 %, and by at most about 0.02 K for
   air at 0 to 35 degC and 30 to 100 % RH; the tests check both.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

import layers.checks as checks

__all__ = [
    "saturation_vapour_pressure",
    "vapour_pressure",
    "dew_point",
]

# ISO 13788 Annex E: psat = A * exp(B * theta / (C + theta)) [Pa], theta in degC.
_A = 610.5  # [Pa] saturation pressure at 0 degC used by the standard
_B_WATER, _C_WATER = 17.269, 237.3  # [-], [degC] over liquid water, theta >= 0
_B_ICE, _C_ICE = 21.875, 265.5  # [-], [degC] over ice, theta < 0


def _temperature_array(name: str, value: ArrayLike) -> np.ndarray:
    """Return `value` as a float array; raise ValueError for NaN, infinity or <= 0 K."""
    return checks.temperature(name, value)


def _relative_humidity_array(value: ArrayLike) -> np.ndarray:
    """Return RH as a float array; raise ValueError unless every value is in (0, 1]."""
    array = np.asarray(value, dtype=float)
    if np.any(np.isnan(array)):
        raise ValueError("relative_humidity contains NaN")
    if np.any((array <= 0.0) | (array > 1.0)):
        raise ValueError(
            "relative_humidity must be a fraction in (0, 1] (give 0.5 for 50 %), "
            f"got values from {array.min():g} to {array.max():g}"
        )
    return array


def saturation_vapour_pressure(temperature: ArrayLike) -> np.ndarray:
    """Saturation water vapour pressure, ISO 13788.

    .. math::
        p_{sat} = 610.5 \\exp\\left(\\frac{17.269\\,\\theta}{237.3 + \\theta}\\right)
        \\quad (\\theta \\ge 0),\\qquad
        p_{sat} = 610.5 \\exp\\left(\\frac{21.875\\,\\theta}{265.5 + \\theta}\\right)
        \\quad (\\theta < 0)

    Parameters
    ----------
    temperature : array_like
        Air or surface temperature [degC].

    Returns
    -------
    numpy.ndarray
        Saturation vapour pressure, over water at or above 0 degC and over ice
        below [Pa].

    Raises
    ------
    ValueError
        If a temperature is NaN, infinite or at or below absolute zero.

    References
    ----------
    ISO 13788:2012 Annex E (constants from memory, high confidence).
    """
    theta = _temperature_array("temperature", temperature)
    over_water = theta >= 0.0
    b = np.where(over_water, _B_WATER, _B_ICE)
    c = np.where(over_water, _C_WATER, _C_ICE)
    return (_A * np.exp(b * theta / (c + theta)))[()]


def vapour_pressure(temperature: ArrayLike, relative_humidity: ArrayLike) -> np.ndarray:
    """Partial pressure of water vapour from temperature and relative humidity.

    Parameters
    ----------
    temperature : array_like
        Air temperature [degC].
    relative_humidity : array_like
        Relative humidity as a fraction in (0, 1] [-] (0.5 for 50 %).

    Returns
    -------
    numpy.ndarray
        Vapour pressure p = RH * psat(theta) [Pa].

    Raises
    ------
    ValueError
        If RH is outside (0, 1] or NaN, or a temperature is not physical.
    """
    phi = _relative_humidity_array(relative_humidity)
    return (phi * np.asarray(saturation_vapour_pressure(temperature)))[()]


def dew_point(temperature: ArrayLike, relative_humidity: ArrayLike) -> np.ndarray:
    """Dew-point temperature (frost point below 0 degC), inverse of ISO 13788.

    .. math::
        \\theta_d = \\frac{C\\,\\ln(p/610.5)}{B - \\ln(p/610.5)},
        \\quad p = RH\\cdot p_{sat}(\\theta)

    with (B, C) = (17.269, 237.3 degC) when p >= 610.5 Pa (condensation to
    water) and (21.875, 265.5 degC) below (deposition as frost).

    Parameters
    ----------
    temperature : array_like
        Air temperature [degC].
    relative_humidity : array_like
        Relative humidity as a fraction in (0, 1] [-].

    Returns
    -------
    numpy.ndarray
        Dew-point temperature [degC]; at or below 0 degC it is the frost point.

    Raises
    ------
    ValueError
        If RH is outside (0, 1] or NaN, or a temperature is NaN, infinite or
        not above absolute zero.

    References
    ----------
    ISO 13788:2012 Annex E, inverted algebraically.

    Examples
    --------
    >>> round(float(dew_point(20.0, 0.5)), 2)
    9.27
    """
    p = np.asarray(vapour_pressure(temperature, relative_humidity))
    log_ratio = np.log(p / _A)
    over_water = p >= _A
    b = np.where(over_water, _B_WATER, _B_ICE)
    c = np.where(over_water, _C_WATER, _C_ICE)
    return (c * log_ratio / (b - log_ratio))[()]
