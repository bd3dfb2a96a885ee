"""Walls under a year of weather: series forcing, surface energy balance, energy closure."""

from __future__ import annotations

import numpy as np
import pytest

from layers.case import load_case
from layers.cli import main
from layers.simulation import simulate


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
scheme = "backward-euler"
duration = "365 d"
step = "1 h"
output_every = "1 h"
initial = "steady"
"""


def test_year_long_run_closes_energy_balance(write_case, tmp_path):
    """A year of hourly weather with automatic outside films, solar and sky radiation:
    the change of stored energy equals the net boundary heat to 1e-9 relative (the
    scheme's own fluxes with the final Picard coefficients telescope exactly).

    Besides the code's own energy_balance_error (normalised by the gross heat
    through both surfaces), conservation is checked directly from the dataset:
    stored_energy at the end minus at the start against the net heat in, i.e.
    heat_in_inside_total - heat_out_outside_total (both flows are positive toward
    the outside), and against the same net heat summed from the recorded
    heat_flow_inside and heat_flow_outside.  Normaliser: the net heat in itself
    (about 3.1e5 J/m2, 1/230 of the 7.1e7 J/m2 that enters through the inside
    surface over the year), as in test_verification_core.test_energy_balance_closes.
    Tolerance 1e-9 relative: summing 8760 step tallies of at most ~1e5 J/m2 in
    double precision errs by at most ~8760 * 2e-16 * 7e7 ~ 1.4e-4 J/m2, 5e-10 of
    the net heat, even in the worst case of no cancellation.
    """
    _year_csv(tmp_path / "weather.csv")
    ds = simulate(load_case(write_case(YEAR)))
    assert ds.sizes["time"] == 365 * 24 + 1
    assert ds.attrs["energy_balance_error"] < 1e-9
    stored = ds["stored_energy"]
    assert stored.attrs["units"] == "J m-2" and ds.attrs["heat_total_units"] == "J m-2"
    change = float(stored[-1] - stored[0])
    net_in = ds.attrs["heat_in_inside_total"] - ds.attrs["heat_out_outside_total"]
    assert change == pytest.approx(net_in, rel=1e-9)
    # Backward Euler (chosen in this case) takes each step's boundary heat as h times the
    # flow at the end of the step, and every step is an output here, so the recorded
    # flows from the second sample on sum to the same net heat.
    assert ds.attrs["scheme"] == "backward-euler"
    assert ds.attrs["time_step"] == ds.attrs["output_every"] == 3600.0
    flows = ds["heat_flow_inside"].values[1:] - ds["heat_flow_outside"].values[1:]
    assert 3600.0 * float(np.sum(flows)) == pytest.approx(net_in, rel=1e-9)
    assert change == pytest.approx(3600.0 * float(np.sum(flows)), rel=1e-9)
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
