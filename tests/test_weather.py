"""Walls under a year of weather: series forcing, surface energy balance, energy closure."""

from __future__ import annotations

import numpy as np

from layers.case import load_case
from layers.cli import main
from layers.simulate import simulate


def _year_csv(path):
    t = np.arange(np.datetime64("2026-01-01T00:00"), np.datetime64("2027-01-01T01:00"), np.timedelta64(1, "h"))
    h = np.arange(t.size)
    temp = 10 - 9 * np.cos(2 * np.pi * (h - 400) / 8760) + 5 * np.cos(2 * np.pi * (h % 24 - 15) / 24)
    solar = np.clip(500 * np.sin(np.pi * ((h % 24) - 6) / 12), 0, None) * (h % 24 >= 6) * (h % 24 <= 18)
    wind = 3 + np.sin(h / 37.0)
    lines = ["# invented test series", "time,T_out,I_south,wind"]
    lines += [f"{a},{b:.2f},{c:.1f},{d:.2f}" for a, b, c, d in zip(t.astype(str), temp, solar, wind)]
    path.write_text("\n".join(lines) + "\n")


YEAR = """
title = "year of weather"
[[layers]]
material = "gypsum-plaster"
thickness = "15 mm"
[[layers]]
material = "brick"
thickness = "240 mm"
[[layers]]
material = "eps"
thickness = "100 mm"
[[layers]]
material = "cement-sand-render"
thickness = "10 mm"
[mesh]
max_cell = "30 mm"
[series]
file = "weather.csv"
timezone = "+01:00"
[series.columns]
t_out = {column = "T_out", unit = "degC"}
solar = {column = "I_south", unit = "W/m2"}
wind = {column = "wind", unit = "m/s"}
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t_out"
film_coefficient = "auto"
emissivity = 0.9
solar_absorptance = 0.6
solar_irradiance = "series:solar"
wind_speed = "series:wind"
sky_temperature = "auto"
[time]
duration = "365 d"
step = "1 h"
output_every = "1 h"
initial = "steady"
"""


def test_year_long_run_closes_energy_balance(write_case, tmp_path):
    """A year of hourly weather with automatic outside films, solar and sky radiation:
    the change of stored energy equals the net boundary heat to 1e-9 relative (the
    scheme's own fluxes with the final Picard coefficients telescope exactly)."""
    _year_csv(tmp_path / "weather.csv")
    ds = simulate(load_case(write_case(YEAR)))
    assert ds.sizes["time"] == 365 * 24 + 1
    assert ds.attrs["energy_balance_error"] < 1e-9
    assert ds.attrs["nonlinear_unconverged_steps"] == 0
    # recorded per step: film coefficients and the sol-air temperature, with units
    h = ds["film_coefficient_outside"]
    assert h.attrs["units"] == "W m-2 K-1"
    # ISO 6946 convection 4 + 4v (v 2..4 m/s) plus radiation ~4-5 W/m2K
    assert 14 < float(h.min()) and float(h.max()) < 26
    sol_air = ds["sol_air_temperature_outside"].values
    air = ds["air_temperature_outside"].values
    sunny = ds["time"].dt.hour.values == 12
    assert np.all(sol_air[sunny] > air[sunny] + 5)  # 300 W/m2 absorbed over h ~ 20
    night = ds["time"].dt.hour.values == 2
    assert np.all(sol_air[night] < air[night])  # sky colder than the air
    assert ds.attrs["series_sha256"]


def test_summary_prints_extremes_and_energy(write_case, tmp_path, capsys):
    _year_csv(tmp_path / "weather.csv")
    text = YEAR.replace('duration = "365 d"', 'duration = "10 d"')
    assert main(["run", str(write_case(text)), "--archive", str(tmp_path / "runs")]) == 0
    out = capsys.readouterr().out
    assert "min" in out and "max" in out and "kWh/m2" in out and "caution" in out
