"""Verification of layers.solar (sun position, split of GHI, irradiance on a tilted surface).

Oracles:

- the NREL SPA reference example (Reda & Andreas 2004, NREL/TP-560-34302
  revised 2008, appendix example; the expected output printed, to six
  decimals, in the comment of NREL's SPA_TESTER.C): 2003-10-17 12:30:30 at
  UTC-7, latitude 39.742476, longitude -105.1786, elevation 1830.14 m,
  820 mbar, 11 degC, delta T 67 s, refraction at the horizon 0.5667 deg:
  topocentric zenith 50.111622 deg, azimuth 194.340241 deg [FOUND: the
  tester's inputs and its expected output, in several public copies of the
  file];
- the Erbs, Klein & Duffie (1982) diffuse-fraction correlation, eq. 1, written
  out here [MEMORY: the three branches and their coefficients];
- the Perez et al. (1990) sky-diffuse model written out here: sky clearness
  epsilon with kappa = 1.041 (zenith in radians), brightness Delta = DHI m /
  E0n, the "all sites composite" F1/F2 coefficients per clearness bin, and
  DHI [(1 - F1)(1 + cos beta)/2 + F1 a/b + F2 sin beta], b = max(cos 85 deg,
  cos Z) [FOUND: the coefficient table as several independent open
  implementations citing the paper print it, all agreeing; the paper's own
  table was not seen];
- the Kasten & Young (1989) relative air mass, m = 1 / (cos Z + 0.50572
  (96.07995 - Z)^-1.6364), Z the apparent zenith in degrees [MEMORY];
- identities of the geometry (a horizontal plane, a plane facing the sun) and
  physical inequalities (a south wall in winter, a north wall at noon).

All irradiance data here are INVENTED (no measured weather is used): a
clear-sky formula (Haurwitz 1945, from memory) times a seeded random cloud
factor, so that days look like days and nights like nights.  The site is the
case-file example of SPEC.md (52.1 N, 5.2 E, 10 m).
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pvlib
import pytest

from layers.solar import (
    DECOMPOSITION_MODEL,
    DEFAULT_LABEL,
    SKY_DIFFUSE_MODEL,
    SUN_POSITION_MODEL,
    Site,
    provenance,
    solar_position,
    surface_irradiance,
)

# pvlib is one of the project's chosen dependencies: imported plainly above so that a
# missing install fails this module instead of skipping it.

SITE = Site(latitude=52.1, longitude=5.2, altitude=10.0)  # the example [site] of SPEC.md
COS85 = np.cos(np.radians(85.0))

# Perez et al. (1990), "all sites composite": rows are the clearness bins 1 (overcast)
# to 8 (clear); columns f11, f12, f13, f21, f22, f23.
PEREZ_1990 = np.array(
    [
        [-0.008, 0.588, -0.062, -0.060, 0.072, -0.022],
        [0.130, 0.683, -0.151, -0.019, 0.066, -0.029],
        [0.330, 0.487, -0.221, 0.055, -0.064, -0.026],
        [0.568, 0.187, -0.295, 0.109, -0.152, -0.014],
        [0.873, -0.392, -0.362, 0.226, -0.462, 0.001],
        [1.132, -1.237, -0.412, 0.288, -0.823, 0.056],
        [1.060, -1.600, -0.359, 0.264, -1.127, 0.131],
        [0.678, -0.327, -0.250, 0.156, -1.377, 0.251],
    ]
)
PEREZ_EPSILON_EDGES = np.array([1.065, 1.230, 1.500, 1.950, 2.800, 4.500, 6.200])
PEREZ_KAPPA = 1.041  # for the zenith in radians

# Round-off for quantities that the module and the oracle compute by the same closed
# formulas in a different order (tens of floating operations on values of order 1e3):
# 1e-12 relative is a few thousand ulps; the absolute floor 1e-9 W m-2 covers values
# that should be exactly zero but come out as a product with cos(90 deg) = 6e-17.
RTOL_ROUND_OFF = 1e-12
ATOL_ROUND_OFF = 1e-9  # [W m-2]


# ---------------------------------------------------------------------------
# oracles and invented data


def kasten_young_airmass(apparent_zenith):
    """Relative air mass, Kasten & Young (1989) [-] (apparent zenith [deg] < 90)."""
    z = np.asarray(apparent_zenith, dtype=float)
    return 1.0 / (np.cos(np.radians(z)) + 0.50572 * (96.07995 - z) ** -1.6364)


def perez_f1_f2(zenith, dni, dhi, dni_extra):
    """Perez et al. (1990) circumsolar and horizon coefficients F1, F2 [-] (DHI > 0, zenith < 90 deg)."""
    z = np.radians(zenith)
    epsilon = ((dhi + dni) / dhi + PEREZ_KAPPA * z**3) / (1.0 + PEREZ_KAPPA * z**3)
    delta = dhi * kasten_young_airmass(zenith) / dni_extra
    f = PEREZ_1990[np.searchsorted(PEREZ_EPSILON_EDGES, epsilon, side="right")]
    f1 = np.maximum(0.0, f[..., 0] + f[..., 1] * delta + f[..., 2] * z)
    f2 = f[..., 3] + f[..., 4] * delta + f[..., 5] * z
    return f1, f2, epsilon


def erbs_diffuse_fraction(kt):
    """Erbs, Klein & Duffie (1982), eq. 1: DHI / GHI from the clearness index [-]."""
    kt = np.asarray(kt, dtype=float)
    middle = 0.9511 - 0.1604 * kt + 4.388 * kt**2 - 16.638 * kt**3 + 12.336 * kt**4
    return np.where(kt <= 0.22, 1.0 - 0.09 * kt, np.where(kt <= 0.80, middle, 0.165))


def hours_of(year: int = 2026) -> np.ndarray:
    """Hourly stamps of a year, each at the end of its hour (01:00 to 00:00 of the next year)."""
    start = np.datetime64(f"{year}-01-01T01:00")
    return np.arange(start, start + np.timedelta64(365 * 24, "h"), np.timedelta64(1, "h"))


def invented_ghi(times: np.ndarray, site: Site = SITE, seed: int = 2026) -> np.ndarray:
    """INVENTED hourly-mean GHI [W m-2] for hour-end stamps: the Haurwitz (1945) clear-sky
    formula 1098 cos Z exp(-0.057 / cos Z) at the hour's middle (from memory; it only makes
    days look like days), times a seeded random cloud factor in [0.1, 1], minus the 2 W m-2
    night offset of an invented thermopile pyranometer (so every night is negative)."""
    zenith = solar_position(times - np.timedelta64(30, "m"), site).zenith
    cos_z = np.cos(np.radians(zenith))
    with np.errstate(divide="ignore"):
        clear = np.where(cos_z > 0.0, 1098.0 * cos_z * np.exp(-0.057 / np.maximum(cos_z, 1e-9)), 0.0)
    cloud = np.random.default_rng(seed).uniform(0.1, 1.0, times.size)
    return clear * cloud - 2.0


# ---------------------------------------------------------------------------
# 1. a horizontal surface gets GHI back


@pytest.mark.parametrize("given", ["ghi only (Erbs split)", "dni and dhi"])
def test_a_horizontal_surface_gets_the_global_horizontal_irradiance_back(given):
    """Beam + sky diffuse on a horizontal plane = DNI cos Z + DHI = GHI, whatever the split.

    Reference: the geometry itself (cos AOI = cos Z on a horizontal plane, no ground in
    view), and Perez et al. (1990) for the one published exception: its circumsolar part
    is scaled by a / b with b = max(cos 85 deg, cos Z), so with the sun within 5 deg of
    the horizon the plane gets DNI cos Z + max(0, DHI [1 - F1 (1 - cos Z / cos 85 deg)]),
    F1 computed by the oracle above (the floor at zero is pvlib's: F1 > 1 would make the
    sky diffuse negative; the wild invented DNI and DHI of the second case reach it).
    Tolerance: round-off (RTOL_ROUND_OFF), the parts being a handful of floating
    operations each.  Data: an invented year of hours, nights included.
    """
    times = hours_of()
    ghi = invented_ghi(times)
    if given == "dni and dhi":
        rng = np.random.default_rng(7)  # INVENTED beam and diffuse, independent of each other
        result = surface_irradiance(
            times, SITE, 0.0, 180.0, None, dni=rng.uniform(0.0, 900.0, times.size), dhi=rng.uniform(0.0, 300.0, times.size)
        )
    else:
        result = surface_irradiance(times, SITE, 0.0, 180.0, ghi)

    z = result.solar_zenith
    assert np.all(result.ground_reflected == 0.0)
    band = (z >= 85.0) & (z < 90.0) & (result.dhi > 0.0)
    elsewhere = ~band
    np.testing.assert_allclose(
        result.total[elsewhere], result.ghi[elsewhere], rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF
    )
    # the published model's shortfall within 5 deg of the horizon, term by term
    f1, _, _ = perez_f1_f2(z[band], result.dni[band], result.dhi[band], result.dni_extra[band])
    cos_z = np.cos(np.radians(z[band]))
    sky = np.maximum(0.0, result.dhi[band] * (1.0 - f1 * (1.0 - cos_z / COS85)))
    expected = result.dni[band] * cos_z + sky
    np.testing.assert_allclose(result.total[band], expected, rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF)
    assert band.sum() > 100  # the band was exercised (about 2 % of the hours at 52 N)
    assert elsewhere.sum() > 8000


# ---------------------------------------------------------------------------
# 2. the sun position against the published example


def test_sun_position_matches_the_nrel_spa_reference_example():
    """Reda & Andreas (2004, revised 2008), appendix example; expected values from the output
    printed in NREL's SPA_TESTER.C (six decimals): zenith 50.111622 deg, azimuth 194.340241 deg
    (the report's table prints them to five: 50.11162 and 194.34024).

    The example's inputs are passed as it states them: 12:30:30 at UTC-7 is 19:30:30 UTC;
    820 mbar, 11 degC, delta T = 67 s (the refraction at the horizon, 0.5667 deg, is pvlib's
    default).  Tolerance: half a unit in the last printed digit, 5e-7 deg; SPA is a fixed
    sequence of series sums, so the same inputs give the same digits.
    """
    site = Site(latitude=39.742476, longitude=-105.1786, altitude=1830.14)
    sun = solar_position(
        np.array(["2003-10-17T19:30:30"], dtype="datetime64[s]"), site,
        temp_air=11.0, pressure=82000.0, delta_t=67.0,
    )
    assert sun.zenith[0] == pytest.approx(50.111622, abs=5e-7)
    assert sun.azimuth[0] == pytest.approx(194.340241, abs=5e-7)


@pytest.mark.parametrize(("label", "shift_minutes"), [("end", -30), ("start", 30), ("middle", 0)])
def test_the_sun_is_placed_at_the_middle_of_each_interval(label, shift_minutes):
    """An hourly mean stamped at the end of its hour sees the sun of half an hour earlier;
    one stamped at the start, half an hour later; ``middle`` takes the stamp as it is.  The
    zenith and azimuth are those of :func:`solar_position` at that instant, exactly (the same
    computation).  Reference: the definition of the stamps (module text)."""
    times = hours_of()[:48]
    result = surface_irradiance(times, SITE, 90.0, 180.0, invented_ghi(times)[:48], label=label)
    expected_time = times.astype("datetime64[ns]") + np.timedelta64(shift_minutes, "m")
    np.testing.assert_array_equal(result.sun_time, expected_time)
    sun = solar_position(expected_time, SITE)
    np.testing.assert_array_equal(result.solar_zenith, sun.zenith)
    np.testing.assert_array_equal(result.solar_azimuth, sun.azimuth)


def test_hour_end_is_the_default_label_and_one_stamp_needs_its_interval():
    assert DEFAULT_LABEL == "end"
    one = np.array(["2026-06-21T12:00"], dtype="datetime64[m]")
    with pytest.raises(ValueError, match="interval"):
        surface_irradiance(one, SITE, 90.0, 180.0, 500.0)
    result = surface_irradiance(one, SITE, 90.0, 180.0, 500.0, interval=600.0)
    assert result.sun_time[0] == np.datetime64("2026-06-21T11:55", "ns")
    assert surface_irradiance(one, SITE, 90.0, 180.0, 500.0, label="middle").sun_time[0] == one[0]


# ---------------------------------------------------------------------------
# 3. consistency of the split and of the transposition


def test_the_erbs_split_closes_and_follows_the_published_correlation():
    """Closure DNI cos Z + DHI = GHI at every hour with the sun up (and DNI = 0, DHI = GHI with
    it down), to round-off; where the sun is well up (Z < 80 deg, so no floor on cos Z) and
    the beam is not capped, DHI / GHI equals the Erbs et al. (1982) correlation of the
    clearness index kt = GHI / (E0n cos Z), written out above, to round-off.  Invented year."""
    times = hours_of()
    result = surface_irradiance(times, SITE, 90.0, 180.0, invented_ghi(times))
    z = result.solar_zenith
    cos_z = np.cos(np.radians(z))
    up = z < 90.0
    np.testing.assert_allclose(
        result.dni[up] * cos_z[up] + result.dhi[up], result.ghi[up], rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF
    )
    assert np.all(result.dni[~up] == 0.0)
    np.testing.assert_array_equal(result.dhi[~up], result.ghi[~up])

    high = (z < 80.0) & (result.ghi > 0.0) & (result.dni < result.dni_extra)
    kt = result.ghi[high] / (result.dni_extra[high] * cos_z[high])
    assert np.all(kt < 1.0)  # pvlib caps kt at 1; the invented data stay below
    np.testing.assert_allclose(
        result.dhi[high] / result.ghi[high], erbs_diffuse_fraction(kt), rtol=RTOL_ROUND_OFF, atol=0.0
    )
    assert high.sum() > 2000


def test_a_surface_facing_the_sun_gets_dni_plus_its_share_of_diffuse():
    """Given DNI and DHI, a plane whose normal points at the sun (tilt = Z, azimuth = the
    sun's) gets the whole DNI as beam, and as sky diffuse the Perez et al. (1990) share
    DHI [(1 - F1)(1 + cos Z)/2 + F1 / cos Z + F2 sin Z] (a = cos 0 = 1, b = cos Z for
    Z < 85 deg), with F1, F2 from the oracle above; the ground adds GHI albedo (1 - cos Z)/2.

    Tolerance: round-off for all three (RTOL_ROUND_OFF): cos AOI = 1 - O(1e-16) at normal
    incidence, and the sky share is the same closed formula.  The invented (DNI, DHI) pairs
    fall in five clearness bins from overcast to clear; none lies within 1e-6 of a bin edge
    (checked), where the two evaluations could fall in neighbouring bins.
    """
    times = np.array(
        ["2026-03-20T08:00", "2026-03-20T11:40", "2026-06-21T06:00", "2026-06-21T11:40",
         "2026-09-23T14:00", "2026-12-21T11:40"],
        dtype="datetime64[m]",
    )
    dni = np.array([850.0, 375.0, 200.0, 240.0, 0.0, 700.0])   # INVENTED [W m-2]
    dhi = np.array([70.0, 150.0, 220.0, 300.0, 250.0, 60.0])   # INVENTED [W m-2]
    sun = solar_position(times, SITE)
    assert np.all(sun.zenith < 85.0)
    result = surface_irradiance(
        times, SITE, sun.zenith, sun.azimuth, None, dni=dni, dhi=dhi, albedo=0.2, label="middle"
    )
    np.testing.assert_allclose(result.angle_of_incidence, 0.0, atol=1e-5)  # arccos(1 - 1e-16) ~ 1e-6 deg
    np.testing.assert_allclose(result.beam, dni, rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF)

    z = result.solar_zenith
    f1, f2, epsilon = perez_f1_f2(z, dni, dhi, result.dni_extra)
    assert np.min(np.abs(epsilon[:, None] - PEREZ_EPSILON_EDGES[None, :])) > 1e-6
    assert len(set(np.searchsorted(PEREZ_EPSILON_EDGES, epsilon, side="right"))) >= 5  # five of the eight bins
    cos_z, sin_z = np.cos(np.radians(z)), np.sin(np.radians(z))
    sky = dhi * ((1.0 - f1) * (1.0 + cos_z) / 2.0 + f1 / cos_z + f2 * sin_z)
    ground = (dni * cos_z + dhi) * 0.2 * (1.0 - cos_z) / 2.0
    np.testing.assert_allclose(result.sky_diffuse, sky, rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF)
    np.testing.assert_allclose(result.ground_reflected, ground, rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF)
    np.testing.assert_allclose(result.total, dni + sky + ground, rtol=RTOL_ROUND_OFF, atol=ATOL_ROUND_OFF)


# ---------------------------------------------------------------------------
# 4. physical checks


def test_a_south_wall_in_winter_at_noon_beats_the_roof_and_a_north_wall_gets_no_beam():
    """At 52.1 N on the winter solstice the noon sun stands about 14.5 deg high: a south-facing
    vertical wall sees it almost at normal incidence (AOI ~ 14.5 deg) while a flat roof sees it
    at 75.5 deg, so under a clear sky the wall receives more than the roof; a north wall faces
    away from it (AOI > 90 deg) and gets no beam at all.  Clear sky: the Haurwitz (1945) GHI
    of the invented data, split by Erbs.  Noon: the minute of least zenith, checked to lie
    within 0.5 deg of due south (the azimuth moves about 0.27 deg per minute then)."""
    minutes = np.arange(np.datetime64("2026-12-21T10:30"), np.datetime64("2026-12-21T12:50"), np.timedelta64(1, "m"))
    sun = solar_position(minutes, SITE)
    noon = minutes[[int(np.argmin(sun.zenith))]]
    z = solar_position(noon, SITE).zenith
    ghi = 1098.0 * np.cos(np.radians(z)) * np.exp(-0.057 / np.cos(np.radians(z)))  # INVENTED clear sky
    walls = {
        name: surface_irradiance(noon, SITE, tilt, azimuth, ghi, label="middle")
        for name, tilt, azimuth in [("roof", 0.0, 180.0), ("south", 90.0, 180.0), ("north", 90.0, 0.0)]
    }
    assert abs(walls["south"].solar_azimuth[0] - 180.0) < 0.5
    assert 14.0 < 90.0 - walls["south"].solar_zenith[0] < 15.5
    assert walls["south"].total[0] > walls["roof"].total[0]
    assert walls["south"].beam[0] > walls["roof"].beam[0]
    assert walls["north"].angle_of_incidence[0] > 90.0
    assert walls["north"].beam[0] == 0.0
    assert 0.0 < walls["north"].total[0] < walls["south"].total[0]  # diffuse and ground only


def test_east_and_west_walls_swap_between_morning_and_afternoon():
    """Symmetry of the geometry about solar noon: an east wall gets beam in the morning and none
    in the afternoon, a west wall the reverse (AOI beyond 90 deg gives exactly zero beam)."""
    times = np.array(["2026-06-21T07:00", "2026-06-21T16:00"], dtype="datetime64[m]")
    ghi = np.array([400.0, 400.0])  # INVENTED
    east = surface_irradiance(times, SITE, 90.0, 90.0, ghi, label="middle")
    west = surface_irradiance(times, SITE, 90.0, 270.0, ghi, label="middle")
    assert east.beam[0] > 0.0 and east.beam[1] == 0.0
    assert west.beam[0] == 0.0 and west.beam[1] > 0.0


# ---------------------------------------------------------------------------
# 5. a whole year: finite, non-negative, fast


@pytest.mark.parametrize(
    "site",
    [SITE, Site(-33.9, 18.4, 20.0), Site(78.2, 15.6, 10.0), Site(0.0, -78.5, 2800.0)],
    ids=["52N", "34S", "78N-polar", "equator-high"],
)
def test_a_year_of_hours_is_finite_and_non_negative(site):
    """Every output over an invented year of hourly GHI (nights negative, polar night and day,
    the southern hemisphere, a high equatorial site) is finite and non-negative, for roofs,
    walls of four orientations, a facing-down soffit and an azimuth beyond 360 deg; the
    total is the sum of its parts.  The time per year is printed (run with -s), not asserted
    (no timed unit tests: the benchmarks time things)."""
    times = hours_of()
    ghi = invented_ghi(times, site)
    elapsed = []
    for tilt, azimuth in [(0.0, 180.0), (30.0, 180.0), (90.0, 0.0), (90.0, 90.0), (90.0, 180.0),
                          (90.0, 270.0), (135.0, 45.0), (180.0, 0.0), (60.0, 400.0)]:
        start = time.perf_counter()
        result = surface_irradiance(times, site, tilt, azimuth, ghi, temp_air=5.0)
        elapsed.append(time.perf_counter() - start)
        for name, values in result._asdict().items():
            if name == "sun_time":
                continue
            assert values.shape == times.shape, name
            assert np.all(np.isfinite(values)), name
            assert np.all(values >= 0.0), name
        np.testing.assert_allclose(
            result.total, result.beam + result.sky_diffuse + result.ground_reflected, rtol=1e-15, atol=0.0
        )
        assert np.all(result.solar_azimuth < 360.0) and np.all(result.solar_zenith <= 180.0)
    print(f"{site}: {times.size} hours in {min(elapsed) * 1e3:.0f} ms (fastest of {len(elapsed)} surfaces)")


# ---------------------------------------------------------------------------
# inputs: clipped, refused


def test_negative_irradiance_is_zeroed_silently_and_an_absurd_value_clipped_with_a_warning(recwarn):
    times = np.array(["2026-06-21T11:00", "2026-06-21T12:00", "2026-06-21T13:00"], dtype="datetime64[m]")
    result = surface_irradiance(times, SITE, 0.0, 180.0, np.array([-4.0, 300.0, 500.0]))
    assert not [w for w in recwarn if "clipped" in str(w.message)]
    assert result.ghi[0] == 0.0 and result.total[0] == 0.0
    with pytest.warns(UserWarning, match="1 value"):
        spike = surface_irradiance(times, SITE, 0.0, 180.0, np.array([200.0, 9000.0, 500.0]))  # a wrong unit
    assert spike.ghi[1] == spike.dni_extra[1]
    assert np.all(spike.dni <= spike.dni_extra)


def test_a_beam_split_near_the_horizon_is_capped_at_the_top_of_the_atmosphere():
    """An hour-end stamp whose middle has the sun 4 deg high, with an (invented) hourly mean
    of 300 W m-2, would give DNI = (GHI - DHI) / cos Z above the extraterrestrial value: it is
    capped there, the rest is diffuse, and the closure still holds to round-off."""
    day = np.arange(np.datetime64("2026-06-21T02:00"), np.datetime64("2026-06-21T06:00"), np.timedelta64(1, "m"))
    elevation = 90.0 - solar_position(day, SITE).zenith
    middle = day[[int(np.argmin(np.abs(elevation - 4.0)))]]
    result = surface_irradiance(middle + np.timedelta64(30, "m"), SITE, 90.0, 90.0, 300.0, interval=3600.0)
    z = result.solar_zenith
    assert 85.5 < z[0] < 86.5
    assert result.dni[0] == result.dni_extra[0]
    np.testing.assert_allclose(result.dni * np.cos(np.radians(z)) + result.dhi, 300.0, rtol=RTOL_ROUND_OFF)


def test_a_given_beam_is_dropped_while_the_sun_is_below_the_horizon():
    night = np.array(["2026-12-21T00:00"], dtype="datetime64[m]")
    result = surface_irradiance(night, SITE, 90.0, 0.0, None, dni=500.0, dhi=20.0, label="middle")
    assert result.solar_zenith[0] > 90.0
    assert result.dni[0] == 0.0 and result.beam[0] == 0.0
    assert result.sky_diffuse[0] == pytest.approx(10.0, rel=1e-15)  # isotropic: DHI (1 + cos 90)/2


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"ghi": np.array([np.nan, 1.0])}, "NaN"),
        ({"ghi": np.array([np.inf, 1.0])}, "finite"),
        ({"dni": 100.0}, "both dni and dhi"),
        ({"ghi": None}, "ghi is needed"),
        ({"surface_tilt": 190.0}, "surface_tilt"),
        ({"albedo": 1.5}, "albedo"),
        ({"label": "centre"}, "label"),
        ({"ghi": np.ones(3)}, "one value per time"),
        ({"times_utc": np.array([1.0, 2.0])}, "datetime64"),
        ({"temp_air": -300.0}, "absolute zero"),
    ],
)
def test_bad_inputs_are_refused(kwargs, match):
    args = {
        "times_utc": np.array(["2026-06-21T11:00", "2026-06-21T12:00"], dtype="datetime64[m]"),
        "site": SITE, "surface_tilt": 90.0, "surface_azimuth": 180.0, "ghi": np.array([100.0, 200.0]),
    }
    args.update(kwargs)
    with pytest.raises(ValueError, match=match):
        surface_irradiance(**args)


@pytest.mark.parametrize(
    "coordinates", [(91.0, 0.0, 0.0), (0.0, 181.0, 0.0), (0.0, 0.0, 20000.0), (float("nan"), 0.0, 0.0)]
)
def test_a_site_outside_the_globe_is_refused(coordinates):
    with pytest.raises(ValueError):
        Site(*coordinates)


# ---------------------------------------------------------------------------
# provenance and import cost


def test_provenance_names_the_models_and_the_pvlib_version():
    text = provenance()
    for name in ("Reda and Andreas (2004)", "Erbs", "Perez et al. (1990)", "Kasten and Young (1989)", "albedo"):
        assert name in text
    assert f"pvlib {pvlib.__version__}" in text
    assert SUN_POSITION_MODEL in text and DECOMPOSITION_MODEL in text and SKY_DIFFUSE_MODEL in text


def test_importing_the_module_does_not_import_pvlib():
    """pvlib (and pandas under it) is imported on first use, so the commands that never
    meet the sun keep their start-up time."""
    done = subprocess.run(
        [sys.executable, "-c", "import sys, layers.solar; print('pvlib' in sys.modules)"],
        cwd=Path(__file__).resolve().parents[1], capture_output=True, text=True, timeout=120,
    )
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "False"
