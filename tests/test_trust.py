"""Inputs that used to crash (exit 3) are refused with one line and exit 2, writing nothing."""

from __future__ import annotations

import pytest

from layers.cli import main

PIPE = """
[geometry]
kind = "cylinder"
inner_radius = "50 mm"
[[layers]]
material = "mineral-wool"
thickness = "50 mm"
[inside]
type = "temperature"
surface_temperature = "{inside}"
[outside]
type = "film"
air_temperature = "{air}"
film_coefficient = "auto"
{extra}
[time]
duration = "2 h"
step = "10 min"
"""


@pytest.mark.parametrize(
    "inside,air,extra,key",
    [
        ("100 degC", "0 K", "", "outside.air_temperature"),  # radiation to 0 K
        ("100 degC", "-150 degC", "", "outside.air_temperature"),  # below the air-property fits
        ("100 degC", "20 degC", 'jacket = ["x"]', "outside.jacket"),  # a list where a name belongs
    ],
)
def test_auto_films_outside_their_range_are_refused(tmp_path, capsys, inside, air, extra, key):
    case = tmp_path / "pipe.toml"
    case.write_text(PIPE.format(inside=inside, air=air, extra=extra))
    runs = tmp_path / "runs"
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and key in err, err
    assert not runs.exists() or not any(runs.iterdir())


def test_a_surface_beyond_the_correlations_is_a_case_error():
    """Where a pipe's surface leaves the air-property range during a run, the
    correlation's ValueError becomes a CaseError naming the film (exit 2)."""
    import tomllib

    import numpy as np

    from layers.case import parse_case
    from layers.errors import CaseError
    from layers.exchange import exchanges

    text = PIPE.format(inside="100 degC", air="20 degC", extra="")
    case = parse_case(tomllib.loads(text), text=text)
    _, outside = exchanges(case)
    with pytest.raises(CaseError, match="outside.film_coefficient"):
        outside.body_convection(np.array([2500.0]), np.array([20.0]), 0.2, np.array([0.0]))


OK = """
[[layers]]
material = "brick"
thickness = "200 mm"
[inside]
type = "temperature"
surface_temperature = "20 degC"
[outside]
type = "temperature"
surface_temperature = "0 degC"
[time]
duration = "2 h"
step = "1 h"
"""


@pytest.mark.parametrize("archive", ["afile", "afile/sub"])
def test_an_archive_that_is_a_file_is_refused_before_any_work(tmp_path, capsys, archive):
    """--archive naming a file (or a folder under one) used to loop through 9999
    names and crash; now it is refused at once with exit 2."""
    (tmp_path / "afile").write_text("not a folder")
    case = tmp_path / "ok.toml"
    case.write_text(OK)
    assert main(["run", str(case), "--archive", str(tmp_path / archive), "--quiet"]) == 2
    assert "--archive" in capsys.readouterr().err


def test_several_processes_writing_to_one_archive_lose_nothing(tmp_path):
    """Four runs of the same case started together into one archive (same stem,
    same second: their names collide) all land, each under its own name,
    complete and readable; no partial file is left."""
    import subprocess
    import sys

    import xarray as xr

    from layers.catalogue import list_runs

    case = tmp_path / "same.toml"
    case.write_text(OK)
    runs = tmp_path / "runs"
    procs = [
        subprocess.Popen([sys.executable, "-m", "layers.cli", "run", str(case), "--archive", str(runs), "--quiet"],
                         stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
        for _ in range(4)
    ]
    for p in procs:
        _, err = p.communicate(timeout=120)
        assert p.returncode == 0, err
    files = sorted(runs.glob("*.nc"))
    assert len(files) == 4 and not list(runs.glob(".*.partial"))
    for f in files:
        with xr.open_dataset(f) as ds:
            assert ds["temperature"].shape[0] == 3
    assert len(list_runs(runs)) == 4


def test_a_k_of_t_law_that_turns_negative_is_refused(tmp_path, capsys):
    """A conductivity polynomial that reaches zero at -100 degC, used down to
    -180 degC, stopped the march with a LinAlgError (exit 3); now the run is
    refused naming the layer and the temperature."""
    case = tmp_path / "cold.toml"
    case.write_text(
        '[materials.odd]\nconductivity = {polynomial = [0.02, 2e-4]}\ndensity = "50 kg/m3"\n'
        'specific_heat = "1000 J/(kg*K)"\n[[layers]]\nmaterial = "odd"\nthickness = "50 mm"\n'
        '[inside]\ntype = "temperature"\nsurface_temperature = "20 degC"\n'
        '[outside]\ntype = "temperature"\nsurface_temperature = "-180 degC"\n'
        '[time]\nduration = "2 h"\nstep = "10 min"\ninitial = "20 degC"\n'
    )
    assert main(["run", str(case), "--archive", str(tmp_path / "runs"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "layers[1].material" in err and "k(T)" in err


def test_the_last_state_is_kept_when_output_every_does_not_divide_the_run(tmp_path):
    """A 2 h run kept every 3 h (or a 1 s run with the default 1 h) ends with its
    final state, not only its initial one."""
    import xarray as xr

    case = tmp_path / "short.toml"
    case.write_text(OK.replace('duration = "2 h"\nstep = "1 h"', 'duration = "5 h"\nstep = "1 h"\noutput_every = "2 h"\ninitial = "5 degC"'))
    runs = tmp_path / "runs"
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    (path,) = runs.glob("*.nc")
    with xr.open_dataset(path) as ds:
        hours = (ds["time"].values - ds["time"].values[0]) / 3600e9
        assert list(hours.astype(float)) == [0.0, 2.0, 4.0, 5.0]


@pytest.mark.parametrize(
    "old,new,key",
    [
        ('thickness = "200 mm"', "thickness = 15", "layers[1].thickness"),  # 15 m of brick: mm without their unit
        ('[inside]', '[sizing]\nlayer = 1\nthicknesses = [20, 30]\nmax_heat_loss = "100 W/m2"\n[inside]', "sizing.thicknesses[1]"),
    ],
)
def test_bare_lengths_of_a_metre_or_more_get_a_hint(tmp_path, capsys, old, new, key):
    """A bare thickness is metres; 1 m or more written bare is almost always
    millimetres without their unit, and is refused with a hint."""
    case = tmp_path / "c.toml"
    case.write_text(OK.replace(old, new, 1))
    assert main(["check", str(case)]) == 2
    err = capsys.readouterr().err
    assert key in err and "mm" in err


def test_run_output_must_be_netcdf(tmp_path, capsys):
    """`run -o copy.png` would have written netCDF under a picture's name."""
    case = tmp_path / "c.toml"
    case.write_text(OK)
    assert main(["run", str(case), "-o", str(tmp_path / "copy.png"), "--archive", str(tmp_path / "runs")]) == 2
    assert ".nc" in capsys.readouterr().err and not (tmp_path / "runs").exists()


def test_trade_spellings_of_compound_units_are_read():
    """W/m2K and W/mK as the trade writes them (and as `check` prints them)."""
    from layers.units import parse_quantity

    assert parse_quantity("8 W/m2K", "film_coefficient") == pytest.approx(8.0)
    assert parse_quantity("0.035 W/mK", "conductivity") == pytest.approx(0.035)


def test_plotting_a_case_file_says_to_run_it_first(tmp_path, capsys):
    case = tmp_path / "c.toml"
    case.write_text(OK)
    assert main(["plot", str(case)]) == 2
    assert "run it first" in capsys.readouterr().err


def test_contents_that_never_freeze_get_no_freeze_lines(tmp_path, capsys):
    """A water-filled sphere in warm air never reaches 0 degC: the summary says
    so, and no freeze caution is printed (it printed 'first at 0 degC after
    not within the run' and the freezing caution)."""
    case = tmp_path / "warm.toml"
    case.write_text(
        '[geometry]\nkind = "sphere"\ninner_radius = "100 mm"\n[[layers]]\nmaterial = "steel"\nthickness = "3 mm"\n'
        '[[layers]]\nmaterial = "mineral-wool"\nthickness = "50 mm"\n'
        '[inside]\ntype = "contents"\ncontents = "water"\ninitial_temperature = "20 degC"\n'
        '[outside]\ntype = "film"\nair_temperature = "5 degC"\nfilm_coefficient = "10 W/(m2*K)"\n'
        '[time]\nduration = "6 h"\nstep = "10 min"\ninitial = "20 degC"\n'
    )
    assert main(["run", str(case), "--archive", str(tmp_path / "runs")]) == 0
    out = capsys.readouterr().out
    assert "do not reach 0 degC within the run" in out
    assert "Insulation alone only delays freezing" not in out


def test_plot_of_a_comparison_file_is_refused_with_a_hint(tmp_path, capsys):
    """`plot` of what `compare -o X.nc` wrote crashed (exit 3); now exit 2 with the command to use."""
    case = tmp_path / "a.toml"
    case.write_text(OK)
    runs = tmp_path / "runs"
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    assert main(["run", str(case), "--archive", str(runs), "--quiet"]) == 0
    first, second = sorted(runs.glob("*.nc"))
    both = tmp_path / "both.nc"
    assert main(["compare", str(first), str(second), "-o", str(both)]) == 0
    capsys.readouterr()
    assert main(["plot", str(both)]) == 2
    assert "layers compare" in capsys.readouterr().err


def test_a_bare_temperature_that_reads_like_kelvin_is_warned_about(tmp_path):
    """A wall whose room air is written 293.15 (kelvin, without the unit) among
    ordinary temperatures: read as 293.15 degC, as the contract says, with a
    warning naming the key and the fix; the same number with its unit, or a
    pipe's process temperature, gives no such warning."""
    import tomllib
    import warnings

    from layers.case import parse_case

    wall = """
    [[layers]]
    material = "brick"
    thickness = "200 mm"
    [inside]
    type = "film"
    air_temperature = {inside}
    [outside]
    type = "film"
    air_temperature = "0 degC"
    [time]
    duration = "1 d"
    step = "1 h"
    """
    import textwrap

    text = textwrap.dedent(wall.format(inside="293.15"))
    with pytest.warns(UserWarning, match=r"inside.air_temperature = 293.15 is read as 293.15 degC.*293.15 K"):
        parse_case(tomllib.loads(text), text=text)
    text = textwrap.dedent(wall.format(inside='"293.15 K"'))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        parse_case(tomllib.loads(text), text=text)


def test_a_weather_column_in_kelvin_declared_as_degc_is_warned_about(tmp_path):
    """An outside air column holding kelvin (271-278) but declared degC would run a
    wall at 275 degC outside air without a word: the reader warns, naming the key
    and the likely cause; the same column declared in K reads quietly. The bound is
    the range of air temperatures measured on Earth, about -89 to +57 degC (WMO
    archive, from memory), widened to -90 to 70 degC."""
    import textwrap
    import warnings

    from layers.case import load_case

    rows = ["time,T_out"] + [f"2026-01-01T{h:02d}:00Z,{271.15 + 0.3 * h:.2f}" for h in range(24)]
    (tmp_path / "weather.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    wall = textwrap.dedent("""
        [[layers]]
        material = "brick"
        thickness = "200 mm"
        [inside]
        type = "film"
        air_temperature = "20 degC"
        [outside]
        type = "film"
        air_temperature = "series:t_out"
        [series]
        file = "weather.csv"
        [series.columns]
        t_out = {{column = "T_out", unit = "{unit}"}}
        [time]
        duration = "12 h"
        step = "1 h"
        """)
    case_file = tmp_path / "case.toml"
    case_file.write_text(wall.format(unit="degC"), encoding="utf-8")
    with pytest.warns(UserWarning, match=r"outside.air_temperature: the series runs from 271.1 to 278.1 degC.*kelvin declared as degC"):
        load_case(case_file)
    case_file.write_text(wall.format(unit="K"), encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        load_case(case_file)
