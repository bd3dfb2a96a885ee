"""The one surface-exchange model (layers/exchange.py), kind by kind.

Each expected value is written out here from its published formula, not
taken from the code under test:

* sol-air temperature T_air + a I R_se: ASHRAE Handbook of Fundamentals
  2017, ch. 18, eq. 28 without the long-wave term (from memory);
* ISO 6946:2017 annex on surface resistances: h_ce = 4 + 4 v, h_ci = 2.5 /
  5.0 / 0.7 W m-2 K-1 (horizontal / up / down) (from memory);
* exact linearisation of grey-body exchange, h_r = eps sigma (T_s^2 +
  T_r^2)(T_s + T_r) (Incropera et al., 6th ed., eq. 1.9);
* view factors of a tilted surface to the sky and the ground, (1 +- cos
  tilt)/2 (Duffie & Beckman, *Solar Engineering of Thermal Processes*,
  4th ed., sec. 2.19, from memory);
* the free-convection correlation itself is checked against ``ht`` in
  tests/test_convection.py; here the pipe film is checked against ``ht``'s
  Churchill-Chu directly, with air properties at the film temperature.
"""

from __future__ import annotations

import math
import textwrap
import tomllib

import numpy as np
import pytest

from layers.case import parse_case
from layers.exchange import exchanges

SIGMA = 5.670374419e-8  # CODATA 2018


def _case(text: str):
    text = textwrap.dedent(text)
    return parse_case(tomllib.loads(text), text=text)


WALL = """
[[layers]]
material = "brick"
thickness = "200 mm"
[inside]
type = "film"
air_temperature = "20 degC"
film_coefficient = "auto"
heat_flow_direction = "{direction}"
emissivity = 0.9
[outside]
type = "film"
air_temperature = "-3 degC"
{outside}
[time]
duration = "1 h"
step = "1 h"
"""


def test_fixed_film_is_its_coefficient_toward_the_sol_air_temperature():
    """h = 1/R_se and t_eq = T_air + a I R_se; exact to round-off."""
    case = _case(WALL.format(direction="horizontal", outside='surface_resistance = "0.04 m2*K/W"\nsolar_absorptance = 0.6\nsolar_irradiance = "500 W/m2"'))
    _, out = exchanges(case)
    film = out.film(out.forcing(np.array([0.0, 600.0])), np.array([5.0, 7.0]))
    np.testing.assert_allclose(film.h, 25.0, rtol=1e-14)
    np.testing.assert_allclose(film.t_eq, -3.0 + 0.6 * 500.0 * 0.04, rtol=1e-14)
    np.testing.assert_allclose(film.q_imposed, 0.0)


@pytest.mark.parametrize("direction,hc", [("horizontal", 2.5), ("up", 5.0), ("down", 0.7)])
def test_auto_inside_wall_film_is_iso6946_convection_plus_exact_radiation(direction, hc):
    """Inside: h_ci by heat-flow direction plus eps h_r to the air (the default
    radiant temperature); t_eq is then the air.  Round-off tolerance."""
    case = _case(WALL.format(direction=direction, outside='surface_resistance = "0.04 m2*K/W"'))
    inside, _ = exchanges(case)
    ts = np.array([12.0, 18.0, 25.0])
    film = inside.film(inside.forcing(np.zeros(3)), ts)
    tk, ak = ts + 273.15, 20.0 + 273.15
    hr = 0.9 * SIGMA * (tk**2 + ak**2) * (tk + ak)
    np.testing.assert_allclose(film.h, hc + hr, rtol=1e-13)
    np.testing.assert_allclose(film.t_eq, 20.0, rtol=1e-13)


def test_auto_outside_wall_film_with_wind_sun_and_sky():
    """Outside: h_ce = 4 + 4 v, radiation split between the sky (f = (1 + cos
    tilt)/2) and the ground at air temperature, absorbed sun in t_eq:
    h = h_c + h_r,sky + h_r,ground, t_eq = (h_c T_a + h_r,s T_sky + h_r,g T_a + a I) / h."""
    outside = """film_coefficient = "auto"
emissivity = 0.85
wind_speed = "3 m/s"
solar_absorptance = 0.7
solar_irradiance = "400 W/m2"
sky_temperature = "-20 degC"
tilt = "30 deg"
"""
    case = _case(WALL.format(direction="horizontal", outside=outside))
    _, out = exchanges(case)
    ts = 4.0
    film = out.film(out.forcing(np.array([0.0])), ts)
    hc = 4.0 + 4.0 * 3.0
    f_sky, f_ground = (1 + math.cos(math.radians(30))) / 2, (1 - math.cos(math.radians(30))) / 2
    tk = ts + 273.15

    def hr(t_other, view):
        ok = t_other + 273.15
        return 0.85 * SIGMA * view * (tk**2 + ok**2) * (tk + ok)

    h_sky, h_ground = hr(-20.0, f_sky), hr(-3.0, f_ground)
    total = hc + h_sky + h_ground
    assert film.h.item() == pytest.approx(total, rel=1e-13)
    assert film.t_eq.item() == pytest.approx((hc * -3.0 + h_sky * -20.0 + h_ground * -3.0 + 0.7 * 400.0) / total, rel=1e-13)


PIPE = """
[geometry]
kind = "cylinder"
inner_radius = "50 mm"
[[layers]]
material = "mineral-wool"
thickness = "50 mm"
[inside]
type = "temperature"
surface_temperature = "150 degC"
[outside]
type = "film"
air_temperature = "{air}"
film_coefficient = "auto"
emissivity = 0.9
wind_speed = "{wind}"
[series.cycles.t]
mean = "10 degC"
amplitude = "8 K"
[time]
duration = "2 d"
step = "10 min"
"""


def test_auto_pipe_film_in_still_air_matches_ht_churchill_chu():
    """A horizontal pipe in still air: h_c = Nu k / D with Nu from ht's
    Churchill-Chu horizontal cylinder, Ra and Pr from air properties at the
    film temperature (ht.conv_free_immersed; the air properties of
    layers.convection are checked separately in tests/test_convection.py),
    combined by Churchill's cube rule with the still-air limit of the forced
    part (Churchill-Bernstein at Re = 0, Nu = 0.3, from ht.conv_external).
    Tolerance 1e-9: the same formulas, round-off only."""
    import ht

    from layers.convection import STANDARD_GRAVITY, air_properties

    case = _case(PIPE.format(air="10 degC", wind="0 m/s"))
    _, out = exchanges(case)
    d = 0.2
    ts = 40.0
    hc = out.convection(out.forcing(np.array([0.0])), np.array(ts), d).item()
    air = air_properties(0.5 * (ts + 10.0))
    ra = STANDARD_GRAVITY * float(air.expansion_coefficient) * 30.0 * d**3 / (float(air.kinematic_viscosity) * float(air.thermal_diffusivity))
    nu = ht.conv_free_immersed.Nu_horizontal_cylinder_Churchill_Chu(float(air.prandtl), ra / float(air.prandtl))
    nu_forced = ht.conv_external.Nu_cylinder_Churchill_Bernstein(0.0, float(air.prandtl))
    k = float(air.thermal_conductivity)
    assert hc == pytest.approx(((nu * k / d) ** 3 + (nu_forced * k / d) ** 3) ** (1 / 3), rel=1e-9)


def test_convection_table_matches_the_correlation():
    """A pipe in a steady wind with varying air has its convection tabulated
    once per run; at 2,000 random points of (surface, air) inside the table
    the interpolated h_c agrees with the correlation to 1e-4 relative (the
    grid spacing's bilinear error, 0.5 K in air and 0.02 sqrt(K) in the
    temperature difference, estimated from the curvature)."""
    from layers.simulation import system_for

    case = _case(PIPE.format(air="series:t", wind="1.5 m/s"))
    system = system_for(case, case.mesh())
    out = system.outside
    assert out._table is not None
    rng = np.random.default_rng(1)
    air = rng.uniform(2.5, 17.5, 2000)
    ts = air + rng.uniform(-5.0, 140.0, 2000)
    d = system.diameter_out
    forcing = {"air": air, "wind": np.full(2000, 1.5)}
    table = out.convection(forcing, ts, d)
    direct = out.body_convection(ts, air, d, 1.5)
    assert np.max(np.abs(table / direct - 1.0)) < 1e-4


def test_temperature_flux_and_adiabatic_kinds():
    """A held surface is h = inf at its temperature; a flux is h = 0 with the
    imposed heat; adiabatic is nothing at all."""
    text = WALL.format(direction="horizontal", outside='surface_resistance = "0.04 m2*K/W"')
    held = _case(text.replace('type = "film"\nair_temperature = "20 degC"\nfilm_coefficient = "auto"\nheat_flow_direction = "horizontal"\nemissivity = 0.9',
                              'type = "temperature"\nsurface_temperature = "35 degC"'))
    inside, _ = exchanges(held)
    film = inside.film(inside.forcing(np.zeros(2)), np.zeros(2))
    assert np.all(np.isinf(film.h)) and np.all(film.t_eq == 35.0)
    flux = _case(text.replace('type = "film"\nair_temperature = "20 degC"\nfilm_coefficient = "auto"\nheat_flow_direction = "horizontal"\nemissivity = 0.9',
                              'type = "flux"\nheat_flux = "12 W/m2"'))
    inside, _ = exchanges(flux)
    film = inside.film(inside.forcing(np.zeros(2)), np.zeros(2))
    assert np.all(film.h == 0.0) and np.all(film.q_imposed == 12.0)


def test_design_resistance_of_an_auto_wall_film_is_the_iso6946_expression():
    """Where one fixed value stands for an auto film (U-value, ISO 13786):
    R = 1 / (h_c + eps h_r0) with h_r0 = 4 sigma T_m^3 at 20 degC inside and
    0 degC outside (ISO 6946:2017 annex on surface resistances, from memory);
    at eps = 0.9 that is the standard's 0.13 and 0.04 m2 K/W to 0.005."""
    case = _case(WALL.format(direction="horizontal", outside='film_coefficient = "auto"\nemissivity = 0.9'))
    inside, outside = exchanges(case)
    hr0_in, hr0_out = 4 * SIGMA * 293.15**3, 4 * SIGMA * 273.15**3
    assert inside.design_resistance() == pytest.approx(1 / (2.5 + 0.9 * hr0_in), rel=1e-12)
    assert outside.design_resistance() == pytest.approx(1 / (4 + 4 * 4.0 + 0.9 * hr0_out), rel=1e-12)
    assert abs(inside.design_resistance() - 0.13) < 0.005 and abs(outside.design_resistance() - 0.04) < 0.005


def test_each_film_says_how_it_is_modelled():
    """The report's words for a film come from the exchange model's own decisions:
    a wall's inside auto film uses the horizontal ISO 6946 value, a roof's derives
    its direction at every step, an outside wall film is 4 + 4 v, a pipe's auto
    film uses the body correlations (Churchill & Chu / Churchill & Bernstein), and
    a fixed film states its coefficient."""
    import textwrap

    from layers.api import parse_case
    from layers.exchange import exchanges

    def described(inside: str, outside: str, geometry: str = "") -> tuple[str, str]:
        text = textwrap.dedent(f"""
            {geometry}
            [[layers]]
            material = "eps"
            thickness = "100 mm"
            [inside]
            type = "film"
            air_temperature = "20 degC"
            {inside}
            [outside]
            type = "film"
            air_temperature = "0 degC"
            {outside}
            [time]
            duration = "1 h"
            step = "1 h"
            """)
        ex_in, ex_out = exchanges(parse_case(text))
        return ex_in.model_description(), ex_out.model_description()

    wall_in, wall_out = described('film_coefficient = "auto"', 'film_coefficient = "auto"\nwind_speed = "3 m/s"')
    assert "heat flow horizontal" in wall_in and "derived at every step" not in wall_in
    assert "4 + 4 v" in wall_out
    roof_in, _ = described('film_coefficient = "auto"\ntilt = "0 deg"', 'surface_resistance = "0.04 m2*K/W"')
    assert "derived at every step" in roof_in
    _, fixed = described('surface_resistance = "0.13 m2*K/W"', 'surface_resistance = "0.04 m2*K/W"')
    assert fixed == "Outside film: fixed, as given in the case (25 W/(m²·K))."
    _, pipe = described('surface_resistance = "0.13 m2*K/W"', 'film_coefficient = "auto"',
                        '[geometry]\nkind = "cylinder"\ninner_radius = "30 mm"')
    assert "Churchill & Chu" in pipe and "cylinder" in pipe
