"""Verification of layers.psychrometrics against ISO 13788 values and psychrolib.

Two independent oracles:

- the ISO 13788:2012 saturation-pressure expressions (Magnus type; the
  constants 610.5, 17.269/237.3 over water and 21.875/265.5 over ice, and their
  place in Annex E, are FROM MEMORY), evaluated by hand for four check points
  (COMPUTED from that expression, not numbers printed in the standard);
- psychrolib 2.5 (ASHRAE Handbook of Fundamentals 2017, ch. 1, eqs. 5-6,
  Hyland-Wexler), a different formula family.

Tolerance 0.05 K against psychrolib: at the four check points the two
families differ by at most 0.0035 K, and for air at 0-35 degC and 30-100 % RH
by about 0.02 K, so 0.05 K leaves room for neither formula's rounding to
matter while still catching a wrong branch (water instead of ice below 0 degC
moves the 0 degC/80 % frost point by about 0.35 K).
"""

from __future__ import annotations

import math

import numpy as np
import psychrolib
import pytest

from layers.psychrometrics import dew_point, saturation_vapour_pressure, vapour_pressure

# psychrolib is a declared test extra (pyproject.toml): imported plainly so that a
# missing extra fails the run instead of skipping this module.
psychrolib.SetUnitSystem(psychrolib.SI)

# (temperature degC, RH fraction, dew point degC COMPUTED by hand from the ISO 13788:2012
# saturation-pressure expression, itself FROM MEMORY; not values printed in the standard).
ISO13788_CHECKS = [
    (20.0, 0.50, 9.269),
    (20.0, 0.60, 12.004),
    (25.0, 0.80, 21.306),
    (0.0, 0.80, -2.681),
]


@pytest.mark.parametrize(("temperature", "rh", "expected"), ISO13788_CHECKS)
def test_dew_point_matches_iso13788_expression(temperature, rh, expected):
    # The expected values are rounded to 3 decimals: half a unit of the 3rd decimal.
    assert float(dew_point(temperature, rh)) == pytest.approx(expected, abs=5e-4)


@pytest.mark.parametrize(("temperature", "rh", "_"), ISO13788_CHECKS)
def test_dew_point_matches_psychrolib_at_check_points(temperature, rh, _):
    expected = psychrolib.GetTDewPointFromRelHum(temperature, rh)
    assert float(dew_point(temperature, rh)) == pytest.approx(expected, abs=0.05)


def test_dew_point_matches_psychrolib_over_a_grid():
    temperatures = np.arange(0.0, 35.01, 2.5)
    humidities = np.arange(0.30, 1.001, 0.05)
    theta, phi = np.meshgrid(temperatures, humidities)
    ours = dew_point(theta, phi)
    expected = np.vectorize(psychrolib.GetTDewPointFromRelHum)(theta, phi)
    assert np.max(np.abs(ours - expected)) < 0.05


def test_saturation_pressure_against_iso13788_and_psychrolib():
    # psat(20 degC): ISO 13788:2012 expression (FROM MEMORY) 610.5 exp(17.269*20/257.3)
    # = 2337.0 Pa [COMPUTED]; psychrolib gives 2338.8 Pa. 0.1 % separates the two families.
    assert float(saturation_vapour_pressure(20.0)) == pytest.approx(
        610.5 * math.exp(17.269 * 20.0 / 257.3), rel=1e-12
    )
    assert float(saturation_vapour_pressure(20.0)) == pytest.approx(2337.0, abs=0.1)
    # The families differ by 0.07-0.34 % from -15 to 35 degC (largest over
    # ice); 0.5 % still catches a wrong constant or branch.
    for theta in (-15.0, -5.0, 5.0, 20.0, 35.0):
        assert float(saturation_vapour_pressure(theta)) == pytest.approx(
            psychrolib.GetSatVapPres(theta), rel=5e-3
        )


def test_saturation_pressure_uses_ice_below_zero():
    # Over ice: 610.5 exp(21.875 theta / (265.5 + theta)) [ISO 13788:2012, FROM MEMORY].
    expected = 610.5 * math.exp(21.875 * -10.0 / 255.5)
    assert float(saturation_vapour_pressure(-10.0)) == pytest.approx(expected, rel=1e-12)
    # Continuous at 0 degC (both branches give 610.5 Pa).
    assert float(saturation_vapour_pressure(-1e-9)) == pytest.approx(610.5, rel=1e-9)
    assert float(saturation_vapour_pressure(0.0)) == pytest.approx(610.5, rel=1e-12)


def test_frost_point_below_zero_matches_psychrolib():
    # psychrolib switches to ice at the triple point too.
    for theta, rh in ((-10.0, 0.8), (-5.0, 0.6), (2.0, 0.7)):
        expected = psychrolib.GetTDewPointFromRelHum(theta, rh)
        assert float(dew_point(theta, rh)) == pytest.approx(expected, abs=0.05)


def test_dew_point_is_inverse_of_saturation_pressure():
    theta = np.linspace(-30.0, 60.0, 37)
    rh = np.linspace(0.05, 1.0, 37)
    dp = dew_point(theta, rh)
    assert np.allclose(saturation_vapour_pressure(dp), vapour_pressure(theta, rh), rtol=1e-10)


def test_saturated_air_has_dew_point_equal_to_temperature():
    theta = np.array([-20.0, -0.5, 0.0, 10.0, 40.0])
    assert np.allclose(dew_point(theta, 1.0), theta, atol=1e-10)


def test_broadcasting_and_scalar_return():
    result = dew_point(np.array([[10.0], [20.0]]), np.array([0.4, 0.6, 0.8]))
    assert result.shape == (2, 3)
    assert np.all(np.diff(result, axis=1) > 0)  # wetter air, higher dew point
    assert np.ndim(dew_point(20.0, 0.5)) == 0


@pytest.mark.parametrize("rh", [0.0, -0.1, 1.01, 50.0, float("nan")])
def test_bad_relative_humidity_raises(rh):
    with pytest.raises(ValueError, match="relative_humidity"):
        dew_point(20.0, rh)


def test_bad_relative_humidity_inside_an_array_raises():
    with pytest.raises(ValueError):
        dew_point(np.array([20.0, 20.0]), np.array([0.5, np.nan]))
    with pytest.raises(ValueError):
        vapour_pressure(20.0, np.array([0.5, 1.5]))


@pytest.mark.parametrize("temperature", [float("nan"), float("inf"), -273.15, -300.0])
def test_bad_temperature_raises(temperature):
    with pytest.raises(ValueError, match="temperature"):
        dew_point(temperature, 0.5)
    with pytest.raises(ValueError, match="temperature"):
        saturation_vapour_pressure(temperature)
