"""The first hour of a practitioner (issue 14): time zones said and ambiguous
mixes refused, every filled gap reported, the ISO 6946 heat-flow direction of
an inside "auto" film derived from the tilt and the sign of air minus surface,
and the "not used" warning of a fixed film said before any work.

Sources, named where they are used:

* ISO 8601 (offsets: local time = UTC + offset), for the time arithmetic
  written out by hand in the tests.
* ISO 6946:2017, annex on surface resistances: inside convective coefficients
  hci = 5.0 (heat flow up), 2.5 (horizontal), 0.7 (down) W/(m2 K); the note
  to its table of surface resistances, "the values under 'horizontal' apply
  to directions of heat flow +-30 deg from the horizontal plane"; and its
  tabulated Rsi = 0.10 (up), 0.13 (horizontal), 0.17 (down) m2 K/W (all
  from memory).  The convection code's constants come from the same annex;
  the tests write the numbers out again rather than reading them from the
  code.
* Stefan-Boltzmann law, linearised exactly:
  h_r = eps sigma (T_s^2 + T_a^2)(T_s + T_a), sigma from CODATA 2018.
"""

from __future__ import annotations

import math
import textwrap
import tomllib

import numpy as np
import pytest
import xarray as xr

from layers.case import parse_case
from layers.cli import main
from layers.convection import iso6946_heat_flow_direction
from layers.exchange import exchanges

SIGMA = 5.670374419e-8  # W m-2 K-4, CODATA 2018
#: ISO 6946:2017 hci by heat-flow direction [W m-2 K-1] (from memory)
HCI = {"up": 5.0, "horizontal": 2.5, "down": 0.7}


def _write(tmp_path, case_text: str, weather: str | None = None, name: str = "weather.csv"):
    case = tmp_path / "case.toml"
    case.write_text(textwrap.dedent(case_text))
    if weather is not None:
        (tmp_path / name).write_text(weather)
    return case


def _lines(text: str) -> list[str]:
    return [line for line in text.splitlines() if line.strip()]


# --------------------------------------------------------------------------- #
# 1. time zones

SERIES_CASE = """
title = "wall"
[[layers]]
material = "concrete"
thickness = "200 mm"
[inside]
type = "film"
air_temperature = "20 degC"
[outside]
type = "film"
air_temperature = "series:t_out"
[series]
file = "weather.csv"
{zone}
[series.columns]
t_out = {{column = "T_out", unit = "degC"}}
[time]
step = "1 h"
{time}
"""

NAIVE = "time,T_out\n" + "".join(f"2026-07-01T{h:02d}:00,{h}.0\n" for h in range(8))
OFFSET = "time,T_out\n" + "".join(f"2026-07-01T{h:02d}:00+02:00,{h}.0\n" for h in range(8))


def _refusal(capsys, case) -> str:
    assert main(["check", str(case)]) == 2
    err = capsys.readouterr().err
    assert len(_lines(err)) == 1 and "Traceback" not in err, err  # one line, nothing else
    return err


def test_a_series_that_mixes_offsets_and_naive_stamps_is_refused(tmp_path, capsys):
    """Row 4 without an offset among rows with +02:00: the file, the row and
    the time column are named, and why (the naive stamp's zone is a guess)."""
    weather = OFFSET.replace("2026-07-01T02:00+02:00", "2026-07-01T02:00")
    err = _refusal(capsys, _write(tmp_path, SERIES_CASE.format(zone="", time=""), weather))
    assert "weather.csv: row 4, column time:" in err
    assert "'2026-07-01T02:00' has no UTC offset while row 2" in err and "with an offset or every one without" in err


def test_a_mix_is_refused_even_with_a_declared_zone(tmp_path, capsys):
    """One file, one convention: a declared zone does not make a mixed column acceptable."""
    weather = OFFSET.replace("2026-07-01T05:00+02:00", "2026-07-01T05:00")
    err = _refusal(capsys, _write(tmp_path, SERIES_CASE.format(zone='timezone = "+02:00"', time=""), weather))
    assert "row 7, column time" in err


def test_a_naive_start_beside_stamps_with_offsets_and_no_zone_is_refused(tmp_path, capsys):
    """The start's zone would be a guess: refused, naming time.start and the way out."""
    case = _write(tmp_path, SERIES_CASE.format(zone="", time='start = "2026-07-01T01:00"\nduration = "2 h"'), OFFSET)
    err = _refusal(capsys, case)
    assert "case.toml: time.start:" in err and "(+02:00)" in err and "declare series.timezone" in err


def test_naive_stamps_beside_a_start_with_an_offset_and_no_zone_are_refused(tmp_path, capsys):
    case = _write(tmp_path, SERIES_CASE.format(zone="", time='start = "2026-07-01T03:00+02:00"\nduration = "2 h"'), NAIVE)
    err = _refusal(capsys, case)
    assert "case.toml: series.file:" in err and "declare series.timezone" in err


def test_a_naive_end_beside_a_start_with_an_offset_is_refused_without_a_series(tmp_path, capsys):
    text = """
    [[layers]]
    material = "concrete"
    thickness = "200 mm"
    [inside]
    type = "film"
    air_temperature = "20 degC"
    [outside]
    type = "film"
    air_temperature = "5 degC"
    [time]
    start = "2026-07-01T00:00+02:00"
    end = "2026-07-01T06:00"
    step = "1 h"
    """
    err = _refusal(capsys, _write(tmp_path, text))
    assert "time.end:" in err and "time.start carries one (+02:00)" in err


def test_a_naive_start_follows_the_declared_zone_and_offsets_win(tmp_path, capsys):
    """ISO 8601: 03:00 at +02:00 is 01:00Z.  The stamps carry +02:00 (00:00+02:00
    is 2026-06-30T22:00Z); a naive start is read in the declared zone, a start
    written with Z keeps its own offset although the zone says +02:00."""
    case = _write(tmp_path, SERIES_CASE.format(zone='timezone = "+02:00"', time='start = "2026-07-01T03:00"\nduration = "2 h"'), OFFSET)
    assert main(["check", str(case)]) == 0
    out = capsys.readouterr().out
    assert "time:      2026-07-01T01:00Z to 2026-07-01T03:00Z" in out
    assert "time.start: written without an offset, read in +02:00 (series.timezone)" in out
    assert "series.file (weather.csv): stamps with their own UTC offsets (+02:00)" in out
    case.write_text(case.read_text().replace('start = "2026-07-01T03:00"', 'start = "2026-07-01T00:00Z"'))
    assert main(["check", str(case)]) == 0
    out = capsys.readouterr().out
    assert "time:      2026-07-01T00:00Z to 2026-07-01T02:00Z" in out and "time.start: written with offset Z" in out


def test_all_naive_without_a_zone_is_read_as_utc_and_said_in_check_and_run(tmp_path, capsys):
    case = _write(tmp_path, SERIES_CASE.format(zone="", time='start = "2026-07-01T01:00"\nend = "2026-07-01T04:00"'), NAIVE)
    assert main(["check", str(case)]) == 0
    out = capsys.readouterr().out
    assert "time:      2026-07-01T01:00Z to 2026-07-01T04:00Z" in out
    for key in ("series.file (weather.csv): stamps without offsets", "time.start: written without an offset", "time.end: written without an offset"):
        assert f"{key}, read as UTC (no series.timezone declared)" in out
    assert main(["run", str(case), "--quiet", "-o", str(tmp_path / "out.nc")]) == 0
    with xr.open_dataset(tmp_path / "out.nc") as ds:
        zones = ds.attrs["time_zones"]
    assert "time.start: written without an offset, read as UTC (no series.timezone declared)" in zones
    assert "series.file (weather.csv): stamps without offsets, read as UTC" in zones


def test_a_cycle_says_on_which_clock_its_peak_hour_is_read(tmp_path, capsys):
    text = """
    [[layers]]
    material = "concrete"
    thickness = "200 mm"
    [inside]
    type = "film"
    air_temperature = "20 degC"
    [outside]
    type = "film"
    air_temperature = "series:t_day"
    [series]
    {zone}
    [series.cycles.t_day]
    mean = "20 degC"
    amplitude = "5 K"
    [time]
    duration = "1 d"
    step = "1 h"
    """
    assert main(["check", str(_write(tmp_path, text.format(zone="")))]) == 0
    out = capsys.readouterr().out
    assert "series.cycles peak_hour: on the UTC clock (no series.timezone declared)" in out
    assert "time.start: not given: the default 2026-01-01T00:00 UTC" in out
    assert main(["check", str(_write(tmp_path, text.format(zone='timezone = "Europe/Berlin"')))]) == 0
    assert "on the clock of Europe/Berlin (series.timezone, at its standard offset all year)" in capsys.readouterr().out


# --------------------------------------------------------------------------- #
# 2. gaps

HOURLY = [f"2026-07-01T{h:02d}:00" for h in range(8)]


def test_a_missing_row_is_reported_by_check_the_warning_and_the_run(tmp_path, capsys):
    """The 03:00 row is missing (an interval of 2 h where the others are 1 h):
    bridged, and said with the file, the time column, the count and the place."""
    weather = NAIVE.replace("2026-07-01T03:00,3.0\n", "")
    case = _write(tmp_path, SERIES_CASE.format(zone="", time=""), weather)
    assert main(["check", str(case)]) == 0
    captured = capsys.readouterr()
    said = ("weather.csv: column time (usual interval 1 h): 1 gap of missing rows (about 1 row) bridged by linear "
            "interpolation in time: after 2026-07-01T02:00Z (row 4, 2 h to the next row)")
    assert f"gaps: {tmp_path / 'weather.csv'}: " in captured.out and said in captured.out
    assert len(_lines(captured.err)) == 1 and "warning:" in captured.err and said in captured.err
    assert main(["run", str(case), "--quiet", "-o", str(tmp_path / "out.nc")]) == 0
    assert said in capsys.readouterr().err
    with xr.open_dataset(tmp_path / "out.nc") as ds:
        assert said in ds.attrs["series_gaps"]


def test_a_blank_value_filled_by_fill_gaps_is_reported_with_its_row(tmp_path, capsys):
    weather = NAIVE.replace("2026-07-01T05:00,5.0", "2026-07-01T05:00,")
    case = _write(tmp_path, SERIES_CASE.format(zone='fill_gaps = "2 h"', time=""), weather)
    assert main(["check", str(case)]) == 0
    captured = capsys.readouterr()
    said = ("weather.csv: column T_out: 1 gap of missing values (1 value) filled by linear interpolation in time: "
            "2026-07-01T05:00Z (row 7)")
    assert said in captured.out and said in captured.err
    assert "missing rows" not in captured.err  # no row is missing: one report, not two


def test_many_gaps_list_the_first_three_and_count_the_rest(tmp_path, capsys):
    """Five separate blank values: the first three stamps, then "and 2 more"."""
    rows = [f"2026-07-01T{h:02d}:00,{'' if h in (1, 3, 5, 7, 9) else h}\n" for h in range(12)]
    case = _write(tmp_path, SERIES_CASE.format(zone='fill_gaps = "3 h"', time=""), "time,T_out\n" + "".join(rows))
    assert main(["check", str(case)]) == 0
    err = capsys.readouterr().err
    assert ("5 gaps of missing values (5 values) filled by linear interpolation in time: 2026-07-01T01:00Z (row 3), "
            "2026-07-01T03:00Z (row 5), 2026-07-01T05:00Z (row 7), and 2 more") in err


def test_a_complete_regular_file_says_nothing_about_gaps(tmp_path, capsys):
    """The counter-case: nothing is missing, nothing is said."""
    case = _write(tmp_path, SERIES_CASE.format(zone="", time=""), NAIVE)
    assert main(["check", str(case)]) == 0
    captured = capsys.readouterr()
    assert "gaps:" not in captured.out and captured.err == ""


# --------------------------------------------------------------------------- #
# 3. the heat-flow direction of an inside auto film

ROOF = """
[[layers]]
material = "concrete"
thickness = "150 mm"
[inside]
type = "film"
air_temperature = "{inside_air}"
film_coefficient = "auto"
emissivity = 0.9
{inside}
[outside]
type = "film"
air_temperature = "{outside_air}"
{outside}
[time]
duration = "2 h"
step = "1 h"
"""


def _case(inside_air="20 degC", outside_air="0 degC", inside="", outside=""):
    text = textwrap.dedent(ROOF.format(inside_air=inside_air, outside_air=outside_air, inside=inside, outside=outside))
    return parse_case(tomllib.loads(text), text=text)


def _inside_convection(case, t_surface):
    """h_c of the inside film: its h less the exact linearised radiation to the air (the default radiant temperature)."""
    inside, _ = exchanges(case)
    forcing = inside.forcing(np.zeros(np.shape(t_surface)))
    film = inside.film(forcing, np.asarray(t_surface, dtype=float))
    ts, ta = np.asarray(t_surface) + 273.15, forcing["air"] + 273.15
    return film.h - 0.9 * SIGMA * (ts**2 + ta**2) * (ts + ta)


@pytest.mark.parametrize(
    "tilt, surface, direction",
    [
        (0, 15.0, "up"),           # a ceiling under a warmer room (flat roof)
        (0, 25.0, "down"),         # the same ceiling warmer than its room
        (180, 15.0, "down"),       # a floor over a cold space, room warmer
        (180, 25.0, "up"),         # that floor warmer than the room (floor heating)
        (90, 15.0, "horizontal"),  # a wall, either way
        (90, 25.0, "horizontal"),
    ],
)
def test_the_direction_follows_the_tilt_and_the_sign_of_air_minus_surface(tilt, surface, direction):
    """ISO 6946 hci (5.0 up, 2.5 horizontal, 0.7 down W/(m2 K), from memory);
    the tilt is written once, on the outside, and serves the inside too.
    Round-off tolerance: the coefficient is a table value plus a formula."""
    case = _case(outside=f"tilt = {tilt}")
    assert case.inside.tilt == tilt and case.inside.heat_flow_direction == "auto"
    hc = _inside_convection(case, np.array([surface]))
    np.testing.assert_allclose(hc, HCI[direction], rtol=1e-12)
    inside, _ = exchanges(case)
    assert inside.heat_flow_direction(inside.forcing(np.zeros(1)), np.array([surface]))[0] == direction


def test_the_coefficient_is_evaluated_per_element_on_arrays():
    """One call, surface temperatures on both sides of the air's 20 degC: up, then down."""
    hc = _inside_convection(_case(outside="tilt = 0"), np.array([10.0, 19.9, 20.1, 30.0]))
    np.testing.assert_allclose(hc, [HCI["up"], HCI["up"], HCI["down"], HCI["down"]], rtol=1e-12)


def test_an_explicit_heat_flow_direction_overrides_the_derived_one():
    case = _case(inside='heat_flow_direction = "down"', outside="tilt = 0")
    np.testing.assert_allclose(_inside_convection(case, np.array([15.0, 25.0])), HCI["down"], rtol=1e-12)


@pytest.mark.parametrize(
    "tilt, direction",
    [(0, "up"), (30, "up"), (45, "up"), (59, "up"), (60, "horizontal"), (90, "horizontal"), (120, "horizontal"),
     (121, "down"), (150, "down"), (180, "down")],
)
def test_iso6946_horizontal_band_is_thirty_degrees_either_side_of_the_horizontal_flow(tilt, direction):
    """ISO 6946 (from memory): flow within +-30 deg of the horizontal plane is
    horizontal, so a surface within 30 deg of vertical (tilt 60 to 120 deg)
    has horizontal flow, a 45 deg pitched roof up or down.  Warm room: the
    flow goes from the air into the construction, along its outward normal."""
    assert iso6946_heat_flow_direction(tilt, 5.0) == direction


@pytest.mark.parametrize("tilt, rsi", [(0, 0.10), (90, 0.13), (180, 0.17)])
def test_the_design_resistance_of_a_derived_film_is_iso6946_rsi(tilt, rsi):
    """Warm room, cold outside: the U-value and ISO 13786 take the direction at
    the design conditions, reproducing ISO 6946's Rsi = 0.10 / 0.13 / 0.17
    m2 K/W (up, horizontal, down; from memory) to half the last printed digit."""
    inside, _ = exchanges(_case(outside=f"tilt = {tilt}"))
    assert inside.design_resistance() == pytest.approx(rsi, abs=0.005)


def test_check_says_which_direction_was_derived(tmp_path, capsys):
    roof = _write(tmp_path, ROOF.format(inside_air="20 degC", outside_air="0 degC", inside="", outside="tilt = 0"))
    assert main(["check", str(roof)]) == 0
    out = capsys.readouterr().out
    assert "heat flow up at the design conditions (derived: tilt 0 deg, air 20 degC against 0 degC on the other side" in out
    assert "turns down while the surface is warmer than the air" in out
    wall = _write(tmp_path, ROOF.format(inside_air="20 degC", outside_air="0 degC", inside="", outside=""))
    assert main(["check", str(wall)]) == 0
    assert "heat flow horizontal (derived: tilt 90 deg is within 30 deg of vertical" in capsys.readouterr().out


def test_a_run_whose_room_air_crosses_the_ceiling_temperature_turns_the_direction(tmp_path, capsys):
    """A flat roof whose room air falls from 30 to 0 degC in 12 h over a 10 degC
    outside: while the air is warmer than the ceiling the recorded coefficient
    less its radiation is hci(up) = 5.0, once colder hci(down) = 0.7
    (ISO 6946, from memory).  The tolerance 0.02 W/(m2 K) allows for the
    coefficient being recorded at the last iterate of the step (converged to
    1e-6 K) and separates the two values by a factor of 200."""
    weather = "time,T_in\n" + "".join(f"2026-01-01T{h:02d}:00,{30 - 2.5 * h}\n" for h in range(13))
    text = ROOF.format(inside_air="series:t_in", outside_air="10 degC", inside="", outside="tilt = 0") + textwrap.dedent("""
    [series]
    file = "weather.csv"
    [series.columns]
    t_in = {column = "T_in", unit = "degC"}
    """).replace("[time]\nduration = \"2 h\"\nstep = \"1 h\"", "")
    text = text.replace('duration = "2 h"\nstep = "1 h"', 'duration = "12 h"\nstep = "10 min"\noutput_every = "10 min"')
    case = _write(tmp_path, text, weather)
    assert main(["run", str(case), "--quiet", "-o", str(tmp_path / "out.nc")]) == 0
    with xr.open_dataset(tmp_path / "out.nc") as ds:
        ts = ds["surface_temperature_inside"].values + 273.15
        ta = ds["air_temperature_inside"].values + 273.15
        hc = ds["film_coefficient_inside"].values - 0.9 * SIGMA * (ts**2 + ta**2) * (ts + ta)
    difference = ta - ts
    warm, cold = difference > 0.05, difference < -0.05
    assert warm.sum() > 10 and cold.sum() > 10  # the run does cross
    np.testing.assert_allclose(hc[warm], HCI["up"], atol=0.02)
    np.testing.assert_allclose(hc[cold], HCI["down"], atol=0.02)


def test_one_construction_has_one_tilt(tmp_path, capsys):
    text = ROOF.format(inside_air="20 degC", outside_air="0 degC", inside="tilt = 10", outside="tilt = 0")
    err = _refusal(capsys, _write(tmp_path, text))
    assert "inside.tilt: 10 deg differs from outside.tilt 0 deg" in err


def test_heat_flow_direction_on_the_outside_is_said_to_be_unused(tmp_path, capsys):
    """ISO 6946's outside coefficient 4 + 4 v is the same for every direction."""
    text = ROOF.format(inside_air="20 degC", outside_air="0 degC", inside="",
                       outside='film_coefficient = "auto"\nheat_flow_direction = "up"')
    assert main(["check", str(_write(tmp_path, text))]) == 0
    err = capsys.readouterr().err
    assert "outside: heat_flow_direction not used: the outside coefficient of ISO 6946, 4 + 4 v, is driven by the wind" in err


# --------------------------------------------------------------------------- #
# 4. a fixed film ignores tilt: said by check, and before a run starts

FIXED = ROOF.replace('film_coefficient = "auto"\nemissivity = 0.9', 'film_coefficient = "7.7 W/(m2*K)"\ntilt = 0')
FIXED_WARNING = "inside: tilt not used with a fixed film coefficient"


def test_check_says_a_fixed_film_ignores_tilt(tmp_path, capsys):
    case = _write(tmp_path, FIXED.format(inside_air="20 degC", outside_air="0 degC", inside="", outside=""))
    assert main(["check", str(case)]) == 0
    err = capsys.readouterr().err
    assert len(_lines(err)) == 1 and FIXED_WARNING in err


def test_a_run_says_a_fixed_film_ignores_tilt_before_it_starts(tmp_path, capsys, monkeypatch):
    """The warning is on stderr when the march is called, not only after it."""
    import layers.api

    seen: list[str] = []
    real = layers.api.run_case

    def spy(*args, **kwargs):
        seen.append(capsys.readouterr().err)
        return real(*args, **kwargs)

    monkeypatch.setattr(layers.api, "run_case", spy)
    case = _write(tmp_path, FIXED.format(inside_air="20 degC", outside_air="0 degC", inside="", outside=""))
    assert main(["run", str(case), "--quiet"]) == 0
    assert len(seen) == 1 and FIXED_WARNING in seen[0]
    assert FIXED_WARNING not in capsys.readouterr().err  # said once


def test_every_output_says_the_heat_flow_sign_alike(tmp_path, capsys):
    """One convention for heat flows (the contract's: positive from inside to
    outside), said in every place a user reads one: the run summary, the
    variables' long_name, and compare's metrics (max = the largest outward flow)."""
    from pathlib import Path

    cases = Path(__file__).resolve().parents[1] / "cases"
    runs = tmp_path / "runs"
    assert main(["run", str(cases / "masonry-wall-hot-week.toml"), "--archive", str(runs), "-o", str(tmp_path / "a.nc")]) == 0
    summary = capsys.readouterr().out
    assert "heat flows are positive from inside to outside: max is the largest outward flow" in summary
    with xr.open_dataset(tmp_path / "a.nc") as ds:
        assert "positive outward" in ds["heat_flow_inside"].attrs["long_name"]
        assert "positive outward" in ds["heat_flow_outside"].attrs["long_name"]
    assert main(["run", str(cases / "masonry-wall-hot-week.toml"), "--archive", str(runs), "-o", str(tmp_path / "b.nc"), "-q"]) == 0
    capsys.readouterr()
    assert main(["compare", str(tmp_path / "a.nc"), str(tmp_path / "b.nc")]) == 0
    compared = capsys.readouterr().out
    flow_lines = [line for line in compared.splitlines() if line.startswith("heat flow") and ", max" in line]
    assert flow_lines and all("(outward)" in line for line in flow_lines)
