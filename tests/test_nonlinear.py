"""Verification of the nonlinear march: k(T), automatic film coefficients, freezing contents."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from layers.case import load_case
from layers.simulation import simulate

SIGMA = 5.670374419e-8  # CODATA 2018


WALL_CYCLE = """
[materials.conc]
conductivity = {k_conc}
density = "2400 kg/m3"
specific_heat = "1000 J/(kg*K)"
[[layers]]
material = "conc"
thickness = "0.20 m"
[[layers]]
material = "eps"
thickness = "0.08 m"
[series.cycles.out]
mean = "10 degC"
amplitude = "8 K"
peak_hour = 14
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:out"
surface_resistance = "0.04 m2*K/W"
[time]
duration = "2 d"
step = "20 min"
output_every = "1 h"
initial = "0 degC"
scheme = "{scheme}"
"""


@pytest.mark.parametrize("scheme", ["backward-euler", "crank-nicolson", "tr-bdf2"])
def test_nonlinear_path_reproduces_linear_path(write_case, scheme):
    """A constant conductivity written as a flat k(T) table takes the nonlinear path.

    Its Picard iteration converges in one correction and must reproduce the
    linear banded march of the same scheme to the iteration tolerance (1e-6 K;
    required 1e-6 K on temperatures).  Both paths close their energy balance
    at round-off (< 1e-9 relative).
    """
    lin = simulate(load_case(write_case(WALL_CYCLE.format(k_conc='"2.0 W/(m*K)"', scheme=scheme), "a.toml")))
    table = '{temperature = [-50, 100], value = [2.0, 2.0]}'
    non = simulate(load_case(write_case(WALL_CYCLE.format(k_conc=table, scheme=scheme), "b.toml")))
    assert "nonlinear_tolerance_K" in non.attrs and "nonlinear_tolerance_K" not in lin.attrs
    np.testing.assert_allclose(non.temperature.values, lin.temperature.values, atol=1e-6)
    np.testing.assert_allclose(non.heat_flow_inside.values, lin.heat_flow_inside.values, atol=1e-5)
    np.testing.assert_allclose(non.surface_temperature_outside.values, lin.surface_temperature_outside.values, atol=1e-6)
    assert lin.attrs["energy_balance_error"] < 1e-9
    assert non.attrs["energy_balance_error"] < 1e-9


def test_k_of_t_cylinder_steady_mean_conductivity(write_case):
    """Steady cylinder with lambda = a + b theta between fixed surface temperatures.

    Exact: q' = 2 pi lambda_m (theta1 - theta2) / ln(r2/r1) with lambda_m the
    integral mean a + b (theta1 + theta2)/2 (Kirchhoff transform; ISO 12241:2008
    sec. 4.2.2 and ASTM C680 mean-conductivity rule, from memory).  The finite
    volumes evaluate k at cell centres, a second-order approximation: with 60
    cells the error is ~ (dk/k)^2/N^2-small; tolerance 2e-4 relative, and the
    error must fall about 4x when the cells double.
    """
    a, b = 0.030, 1.5e-4
    text = """
    [geometry]
    kind = "cylinder"
    inner_radius = "57 mm"
    [materials.wool]
    conductivity = {{polynomial = [{a}, {b}]}}
    density = "100 kg/m3"
    specific_heat = "840 J/(kg*K)"
    [[layers]]
    material = "wool"
    thickness = "100 mm"
    cells = {cells}
    [mesh]
    growth = 1.0
    max_cell = "1 m"
    [inside]
    type = "temperature"
    surface_temperature = "400 degC"
    [outside]
    type = "temperature"
    surface_temperature = "30 degC"
    [time]
    duration = "1 h"
    step = "1 h"
    """
    lam_m = a + b * (400 + 30) / 2
    exact = 2 * math.pi * lam_m * 370 / math.log(0.157 / 0.057)
    errors = []
    for cells in (30, 60):
        ds = simulate(load_case(write_case(text.format(a=a, b=b, cells=cells), f"c{cells}.toml")))
        errors.append(abs(float(ds.heat_flow_inside[0]) / exact - 1))
    assert errors[1] < 2e-4
    assert 3.0 < errors[0] / errors[1] < 5.0


FREEZE = """
[geometry]
kind = "cylinder"
inner_radius = "10 mm"
[materials.copper-tube]
conductivity = "380 W/(m*K)"
density = "{rho_cu} kg/m3"
specific_heat = "380 J/(kg*K)"
[materials.light-wool]
conductivity = "0.035 W/(m*K)"
density = "0.01 kg/m3"
specific_heat = "1 J/(kg*K)"
[[layers]]
material = "copper-tube"
thickness = "1 mm"
[[layers]]
material = "light-wool"
thickness = "20 mm"
[inside]
type = "contents"
contents = "water"
initial_temperature = "10 degC"
[outside]
type = "film"
air_temperature = "-10 degC"
film_coefficient = "10 W/(m2*K)"
[time]
duration = "8 h"
step = "20 s"
output_every = "10 min"
initial = "steady"
[sizing]
layer = 2
thicknesses = ["20 mm"]
min_freeze_time = "1 h"
max_ice_fraction = 0.25
"""


@pytest.mark.parametrize("rho_cu", [1.0, 8900.0])
def test_freeze_time_lumped_limit(write_case, rho_cu):
    """Freeze time of stagnant water against the lumped formulas.

    Cooling to 0 degC: t = R' C' ln((theta0 - theta_a)/(theta_f - theta_a))
    (ASHRAE Handbook of Fundamentals 2009, ch. 23, eq. 1; ISO 12241:2008 sec. 6.1,
    which adds the pipe wall to C'), then freezing a fraction f:
    t = f rho L A R' / (theta_f - theta_a) (ISO 12241:2008 sec. 6.2, from memory).
    The insulation is given a negligible heat capacity so the lumped limit
    holds; the copper wall is either massless or real (then in C', as ISO
    12241 does, since 380 W/mK keeps it at the water temperature).  Backward
    Euler with 20 s steps against a 2 h time constant errs by ~h/2tau ~ 0.1 %;
    tolerance 1 % as the issue asks.
    """
    ds = simulate(load_case(write_case(FREEZE.format(rho_cu=rho_cu))))
    ri, r1, r2 = 0.010, 0.011, 0.031
    r = math.log(r1 / ri) / (2 * math.pi * 380) + math.log(r2 / r1) / (2 * math.pi * 0.035) + 1 / (10 * 2 * math.pi * r2)
    m = 1000 * math.pi * ri**2
    c = m * 4190 + rho_cu * math.pi * (r1**2 - ri**2) * 380
    t_cool = r * c * math.log((10 - -10) / (0 - -10))
    t_ice = 0.25 * m * 333.6e3 * r / (0 - -10)
    assert ds.attrs["time_to_freezing_h"] * 3600 == pytest.approx(t_cool, rel=0.01)
    assert ds.attrs["freeze_time_h"] * 3600 == pytest.approx(t_cool + t_ice, rel=0.01)
    assert ds.attrs["energy_balance_error"] < 1e-9
    ice = ds["ice_fraction"].values
    assert np.all(np.diff(ice) >= -1e-12) and ice[-1] > 0.25


def test_sol_air_by_hand(write_case):
    """Steady wall, auto films, constant sun and sky: the outside surface temperature of a hand balance.

    Outside: a I + h_c (T_a - T_s) + eps sigma [F_sky (T_sky^4 - T_s^4) + F_gnd (T_a^4 - T_s^4)]
    = q (the conduction to the inside), h_c = 4 + 4 v (ISO 6946:2017, annex on surface resistances),
    F_sky = (1 + cos tilt)/2 (vertical wall: 1/2).  Inside: h_c = 2.5 plus
    radiation to surroundings at the air temperature.  Solved here with brentq
    on the exact fourth powers; the model solves the same balance by Picard
    iteration to 1e-6 K and the FV steady state is exact for constant k:
    tolerance 1e-4 K.
    """
    ds = simulate(
        load_case(
            write_case(
                """
                [materials.board]
                conductivity = "0.5 W/(m*K)"
                density = "1000 kg/m3"
                specific_heat = "1000 J/(kg*K)"
                [[layers]]
                material = "board"
                thickness = "0.1 m"
                [inside]
                type = "film"
                air_temperature = "22 degC"
                film_coefficient = "auto"
                emissivity = 0.9
                [outside]
                type = "film"
                air_temperature = "30 degC"
                film_coefficient = "auto"
                emissivity = 0.9
                wind_speed = "2 m/s"
                solar_absorptance = 0.6
                solar_irradiance = "500 W/m2"
                sky_temperature = "15 degC"
                tilt = 90
                [time]
                duration = "1 h"
                step = "1 h"
                """
            )
        )
    )
    k = 273.15
    r_wall = 0.1 / 0.5

    def balance(ts_out):
        # conduction through the wall and inside film by inner fixed point
        ts_in = 22.0
        for _ in range(200):
            hr_in = 0.9 * SIGMA * ((ts_in + k) ** 2 + (22 + k) ** 2) * ((ts_in + k) + (22 + k))
            h_in = 2.5 + hr_in
            q = (ts_out - 22.0) / (r_wall + 1 / h_in)
            ts_in = 22.0 + q / h_in
        sun = 0.6 * 500
        conv = (4 + 4 * 2) * (30 - ts_out)
        rad = 0.9 * SIGMA * (0.5 * ((15 + k) ** 4 - (ts_out + k) ** 4) + 0.5 * ((30 + k) ** 4 - (ts_out + k) ** 4))
        return sun + conv + rad - q

    ts = brentq(balance, 0, 80)
    assert float(ds["surface_temperature_outside"][0]) == pytest.approx(ts, abs=1e-4)
    assert "sol_air_temperature_outside" in ds and "film_coefficient_outside" in ds


@pytest.mark.parametrize(
    "direction,rsi", [("up", 0.10), ("horizontal", 0.13), ("down", 0.17)]
)
def test_auto_inside_film_reproduces_iso6946_table(write_case, direction, rsi):
    """With eps 0.9, surface and surroundings near 20 degC, the auto inside film gives the
    ISO 6946:2017 Table 7 Rsi (0.10 / 0.13 / 0.17 m2K/W, printed to 2 decimals).

    The run holds a tiny temperature difference so that h_r = 4 eps sigma T^3
    at 20 degC (ISO 6946 annex on surface resistances: hr0 = 5.7); tolerance half the last printed digit.
    The check is made near 20 degC, not 10 degC, because the table's values are those of
    hr0 at about 20 degC inside: at 10 degC the same ISO 6946 formulas give Rsi = 0.104 /
    0.140 / 0.187 (hr0 = 5.15, computed), which print as 0.10 / 0.14 / 0.19, not the table's
    0.13 and 0.17, while at 20 degC they give 0.099 / 0.131 / 0.171 (computed).
    """
    ds = simulate(
        load_case(
            write_case(
                f"""
                [[layers]]
                material = "eps"
                thickness = "0.1 m"
                [inside]
                type = "film"
                air_temperature = "20 degC"
                film_coefficient = "auto"
                heat_flow_direction = "{direction}"
                [outside]
                type = "film"
                air_temperature = "19.9 degC"
                [time]
                duration = "1 h"
                step = "1 h"
                """
            )
        )
    )
    assert 1 / float(ds["film_coefficient_inside"][0]) == pytest.approx(rsi, abs=0.005)


def test_auto_outside_film_reproduces_iso6946_rse(write_case):
    """Outside auto film at the ISO 6946 default wind of 4 m/s, eps 0.9, near 0 degC: Rse = 0.04 m2K/W
    (ISO 6946:2017 Table 7 and its annex on surface resistances: h_c = 4 + 4v, hr0(0 degC) = 4.6); tolerance half the last digit.

    The check is made near 0 degC because the standard's outside values correspond to hr0
    at 0 degC (here 1/(20 + 0.9 * 4.62) = 0.0414, computed; its Rse-against-wind table is
    reproduced at 0 degC and not at 10 degC, see test_radiation).
    """
    ds = simulate(
        load_case(
            write_case(
                """
                [[layers]]
                material = "eps"
                thickness = "0.1 m"
                [inside]
                type = "film"
                air_temperature = "0.1 degC"
                [outside]
                type = "film"
                air_temperature = "0 degC"
                film_coefficient = "auto"
                [time]
                duration = "1 h"
                step = "1 h"
                """
            )
        )
    )
    assert 1 / float(ds["film_coefficient_outside"][0]) == pytest.approx(0.04, abs=0.005)


def test_hot_pipe_auto_film_matches_correlation_balance(write_case):
    """Insulated hot pipe indoors, auto outside film: the surface balance holds with the
    Churchill-Chu coefficient (checked against ht in test_convection) plus radiation.

    q' from the conduction side must equal (h_c + h_r) pi D (T_s - T_a) with both
    coefficients evaluated at the model's own surface temperature; the Picard
    tolerance (1e-6 K) bounds the mismatch: tolerance 1e-5 relative.
    """
    from layers.convection import free_convection_coefficient
    from layers.radiation import radiative_coefficient

    ds = simulate(
        load_case(
            write_case(
                """
                [geometry]
                kind = "cylinder"
                inner_radius = "57.15 mm"
                [[layers]]
                material = "mineral-wool-pipe"
                thickness = "50 mm"
                [inside]
                type = "temperature"
                surface_temperature = "250 degC"
                [outside]
                type = "film"
                air_temperature = "20 degC"
                film_coefficient = "auto"
                emissivity = 0.9
                [time]
                duration = "1 h"
                step = "1 h"
                """
            )
        )
    )
    ts = float(ds["surface_temperature_outside"][0])
    d = 2 * (0.05715 + 0.050)
    hc = float(free_convection_coefficient(ts, 20.0, d, "horizontal-cylinder"))
    hr = float(radiative_coefficient(0.9, ts, 20.0))
    q = float(ds["heat_flow_outside"][0])
    assert q == pytest.approx((hc + hr) * math.pi * d * (ts - 20.0), rel=1e-5)
    assert float(ds["film_coefficient_outside"][0]) == pytest.approx(hc + hr, rel=1e-6)
