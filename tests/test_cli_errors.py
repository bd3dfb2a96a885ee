"""Bad input: exit status 2, one line naming the file, the key and the reason, nothing written."""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from pathlib import Path

import pytest

from layers import CAUTION
from layers.cli import main

GOOD = """
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
[series.columns]
t_out = {column = "T_out", unit = "degC"}
[time]
step = "1 h"
"""

WEATHER = "time,T_out\n2026-01-01T00:00,1.0\n2026-01-01T01:00,2.0\n2026-01-01T02:00,3.0\n2026-01-01T03:00,2.5\n"


def _run(tmp_path, text, weather=WEATHER):
    case = tmp_path / "case.toml"
    case.write_text(text)
    (tmp_path / "weather.csv").write_text(weather)
    archive = tmp_path / "runs"
    code = main(["run", str(case), "--archive", str(archive), "--quiet"])
    return code, archive


def test_good_case_runs(tmp_path, capsys):
    code, archive = _run(tmp_path, GOOD)
    assert code == 0
    (written,) = archive.glob("*.nc")
    # --quiet drops the bar and the summary, never the file name or the caution
    out = capsys.readouterr().out.splitlines()
    assert out == [f"archived: {written}", f"caution: {CAUTION}"]


@pytest.mark.parametrize(
    "change,key,words",
    [
        (("[[layers]]", "[[layers]"), "(syntax)", "malformed TOML"),
        (('title = "wall"', 'title = "wall"\ncolour = "red"'), "colour", "unknown key"),
        (('material = "concrete"', 'material = "concret"'), "layers[1].material", "unknown material"),
        (('thickness = "200 mm"', 'thickness = "0.2"'), None, None),  # bare number: SI metres, valid
        (('thickness = "200 mm"', 'thickness = 200'), "layers[1].thickness", "did you mean"),
        (('thickness = "200 mm"', 'thickness = "200 kg"'), "layers[1].thickness", "not a length"),
        (('thickness = "200 mm"', 'thickness = "-200 mm"'), "layers[1].thickness", "must be positive"),
        (('thickness = "200 mm"', 'thickness = "0 mm"'), "layers[1].thickness", "must be positive"),
        (('step = "1 h"', 'step = "0 s"'), "time.step", "must be positive"),
        (('step = "1 h"', 'step = "1 parsec"'), "time.step", "not a duration"),
        (('type = "film"\nair_temperature = "20 degC"', 'type = "radiator"'), "inside.type", "unknown boundary type"),
        (('column = "T_out"', 'column = "T_outside"'), "T_outside", "T_out"),
        (('unit = "degC"', 'unit = "W/m2"'), "outside.air_temperature", "irradiance"),
        (('air_temperature = "20 degC"', 'air_temperature = "20 m"'), "inside.air_temperature", "not a temperature"),
        (('air_temperature = "series:t_out"', 'air_temperature = "series:t_in"'), "outside.air_temperature", "no series named"),
        (('air_temperature = "series:t_out"', 'air_temperature = "Series:t_out"'), "outside.air_temperature", "lower case"),
        (('air_temperature = "20 degC"', 'air_temperature = "warm"'), "inside.air_temperature", "cannot read 'warm' as a number and a unit"),
        (('step = "1 h"', 'step = "1 h"\ninitial = "cold"'), "time.initial", "must be a temperature"),
        (('type = "film"\nair_temperature = "series:t_out"', 'type = "film"\nair_temperature = "series:t_out"\nfilm_coefficient = "auto"\nwind_speed = "-3 m/s"'),
         "outside.wind_speed", "plausible range"),
        (('air_temperature = "20 degC"', 'air_temperature = "20 degC"\nrelative_humidity = 80'), "inside.relative_humidity", "write a percentage"),
        (('thickness = "200 mm"', 'thickness = "0.2 m2*K/W"'), "layers[1].thickness", "not a length"),
    ],
)
def test_bad_case_exit_2_one_line_nothing_written(tmp_path, capsys, change, key, words):
    old, new = change
    assert old in GOOD
    code, archive = _run(tmp_path, GOOD.replace(old, new, 1))
    err = capsys.readouterr().err
    if key is None:
        assert code == 0
        return
    assert code == 2, err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert "case.toml" in err or "weather.csv" in err
    assert key in err and words in err
    assert not archive.exists() or not list(archive.iterdir())


def test_materials_bad_values(tmp_path, capsys):
    text = GOOD + '\n[materials.foam]\nconductivity = "-0.03 W/(m*K)"\ndensity = "30 kg/m3"\nspecific_heat = "1400 J/(kg*K)"\n'
    code, _ = _run(tmp_path, text)
    err = capsys.readouterr().err
    assert code == 2 and "materials.foam.conductivity" in err
    text = GOOD + '\n[materials.foam]\nconductivity = "0.03 W/(m*K)"\ndensity = "0 kg/m3"\nspecific_heat = "1400 J/(kg*K)"\n'
    code, _ = _run(tmp_path, text)
    err = capsys.readouterr().err
    assert code == 2 and "materials.foam.density" in err


def test_series_with_nan_is_refused(tmp_path, capsys):
    code, archive = _run(tmp_path, GOOD, WEATHER.replace("2.0", "nan"))
    err = capsys.readouterr().err
    assert code == 2 and "weather.csv" in err and "row 3" in err and "T_out" in err


def test_run_beyond_series_is_refused(tmp_path, capsys):
    code, _ = _run(tmp_path, GOOD.replace('step = "1 h"', 'step = "1 h"\nduration = "10 h"'))
    err = capsys.readouterr().err
    assert code == 2 and "outside the series" in err


def test_output_never_overwritten(tmp_path, capsys):
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    (tmp_path / "weather.csv").write_text(WEATHER)
    out = tmp_path / "out.nc"
    out.write_bytes(b"precious")
    code = main(["run", str(case), "-o", str(out), "--archive", str(tmp_path / "runs"), "--quiet"])
    assert code == 2 and "exists" in capsys.readouterr().err
    assert out.read_bytes() == b"precious"
    assert not (tmp_path / "runs").exists()


def test_archive_names_never_collide(tmp_path):
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    (tmp_path / "weather.csv").write_text(WEATHER)
    for _ in range(3):
        assert main(["run", str(case), "--archive", str(tmp_path / "runs"), "--quiet"]) == 0
    assert len(list((tmp_path / "runs").glob("case-*.nc"))) == 3
    assert not list((tmp_path / "runs").glob(".*partial"))


def test_missing_case_file(tmp_path, capsys):
    assert main(["check", str(tmp_path / "nope.toml")]) == 2
    assert "cannot read" in capsys.readouterr().err


def test_degC_difference_in_a_conductivity_is_an_interval(tmp_path, capsys):
    """0.035 W/(m*degC) is 0.035 W/(m*K): the U-value of `check` is that of 0.035."""
    text = GOOD + '\n[materials.foam]\nconductivity = "CONDUCTIVITY"\ndensity = "30 kg/m3"\nspecific_heat = "1400 J/(kg*K)"\n'
    text = text.replace('material = "concrete"', 'material = "foam"')
    outputs = []
    for unit in ("0.035 W/(m*K)", "0.035 W/(m*degC)"):
        case = tmp_path / "case.toml"
        case.write_text(text.replace("CONDUCTIVITY", unit))
        (tmp_path / "weather.csv").write_text(WEATHER)
        assert main(["check", str(case)]) == 0
        outputs.append([line for line in capsys.readouterr().out.splitlines() if "U" in line and "W/" in line])
    assert outputs[0] and outputs[0] == outputs[1]


def test_periodic_start_with_contents_is_refused(tmp_path, capsys):
    case = tmp_path / "freeze.toml"
    case.write_text(
        """
[geometry]
kind = "cylinder"
inner_radius = "10 mm"
[[layers]]
material = "elastomeric-foam"
thickness = "20 mm"
[inside]
type = "contents"
initial_temperature = "8 degC"
[outside]
type = "film"
air_temperature = "-10 degC"
film_coefficient = "10 W/(m2*K)"
[time]
start = "2026-01-01T00:00"
duration = "12 h"
step = "5 min"
initial = "periodic"
"""
    )
    assert main(["run", str(case), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert "time.initial" in err and "contents" in err


def test_written_files_are_readable_by_others_under_the_usual_umask(tmp_path):
    """An archive is shared: runs get the mode an ordinary new file gets (0644 under umask 022)."""
    case = tmp_path / "case.toml"
    case.write_text(GOOD)
    (tmp_path / "weather.csv").write_text(WEATHER)
    old = os.umask(0o022)
    try:
        assert main(["run", str(case), "--archive", str(tmp_path / "runs"), "-o", str(tmp_path / "copy.nc"), "--quiet"]) == 0
    finally:
        os.umask(old)
    for path in [*(tmp_path / "runs").glob("*.nc"), tmp_path / "copy.nc"]:
        assert stat.S_IMODE(path.stat().st_mode) == 0o644, path


def test_a_closed_pipe_ends_quietly():
    """`layers materials | head -1`: when the reader goes away the command stops
    quietly with 141 (128 + SIGPIPE, as Unix tools do), not an internal error."""
    proc = subprocess.Popen(
        [sys.executable, "-m", "layers.cli", "materials"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=Path(__file__).resolve().parents[1],
    )
    proc.stdout.close()  # long before the interpreter has started and printed
    err = proc.stderr.read().decode()
    assert proc.wait() == 141
    assert "internal error" not in err and "Traceback" not in err


def test_periodic_refuses_an_existing_output_before_any_work(tmp_path, capsys):
    out = tmp_path / "dc.nc"
    out.write_bytes(b"precious")
    wall = Path(__file__).resolve().parents[1] / "cases" / "masonry-wall-hot-week.toml"
    assert main(["periodic", str(wall), "-o", str(out)]) == 2
    captured = capsys.readouterr()
    assert captured.out == "" and "exists already" in captured.err
    assert out.read_bytes() == b"precious"


def test_periodic_says_how_it_treats_auto_films(capsys):
    """The year demo has an auto outside film with sun and sky: the ISO 13786
    table states the fixed Rse it used and that sun and sky are left out.
    Rse is the ISO 6946 expression 1/(4 + 4 v + eps hr0) at v = 4 m/s,
    eps = 0.9, hr0 = 4.6 W/(m2 K) at 0 degC (ISO 6946:2017, annex on surface
    resistances, from memory): 1/(20 + 4.14) = 0.0414 m2K/W."""
    wall = Path(__file__).resolve().parents[1] / "cases" / "year-masonry-outside.toml"
    assert main(["periodic", str(wall)]) == 0
    out = capsys.readouterr().out
    assert "auto films as fixed resistances" in out and "sun and sky" in out
    assert "Rse 0.0414" in out


def test_auto_only_keys_with_a_fixed_film_warn_and_run(tmp_path, capsys):
    """As in the contract's example case: emissivity and wind_speed beside a
    fixed film coefficient are accepted, unused, and said to be unused."""
    text = GOOD.replace(
        'air_temperature = "series:t_out"',
        'air_temperature = "series:t_out"\nfilm_coefficient = "7.7 W/(m2*K)"\nemissivity = 0.9\nwind_speed = "3 m/s"',
    )
    code, archive = _run(tmp_path, text)
    err = capsys.readouterr().err
    assert code == 0
    assert err.count("\n") == 1 and "warning" in err and "emissivity, wind_speed not used" in err
    assert len(list(archive.glob("*.nc"))) == 1


def test_filled_values_are_reported(tmp_path, capsys):
    """A series with a missing value and fill_gaps: check, the run summary and
    the archived run all say how many values were filled."""
    weather = WEATHER.replace("2.0", "")  # row 3 has no value
    text = GOOD.replace('file = "weather.csv"', 'file = "weather.csv"\nfill_gaps = "2 h"')
    case = tmp_path / "case.toml"
    case.write_text(text)
    (tmp_path / "weather.csv").write_text(weather)
    assert main(["check", str(case)]) == 0
    assert "filled by fill_gaps: t_out 1" in capsys.readouterr().out
    assert main(["run", str(case), "--archive", str(tmp_path / "runs")]) == 0
    assert "filled by fill_gaps" in capsys.readouterr().out
    import xarray as xr

    (run,) = (tmp_path / "runs").glob("*.nc")
    with xr.open_dataset(run) as ds:
        assert ds.attrs["series_filled"] == "t_out: 1 values"


@pytest.mark.parametrize("scheme, warned", [("crank-nicolson", True), ("tr-bdf2", False)])
def test_crank_nicolson_after_a_step_is_flagged(tmp_path, capsys, scheme, warned):
    case = tmp_path / "step.toml"
    case.write_text(
        f"""
[[layers]]
material = "concrete"
thickness = "100 mm"
[inside]
type = "temperature"
surface_temperature = "100 degC"
[outside]
type = "adiabatic"
[time]
start = "2026-01-01T00:00"
duration = "1 h"
step = "5 min"
initial = "20 degC"
scheme = "{scheme}"
"""
    )
    assert main(["run", str(case), "--archive", str(tmp_path / "runs"), "--quiet"]) == 0
    err = capsys.readouterr().err
    assert ("rings" in err) == warned and err.count("\n") == int(warned)


def test_periodic_says_nothing_of_auto_films_where_there_are_none(capsys):
    """A wall with fixed films (the hot-week demo: surface resistances given) gets
    no line about automatic films in its ISO 13786 table."""
    wall = Path(__file__).resolve().parents[1] / "cases" / "masonry-wall-hot-week.toml"
    assert main(["periodic", str(wall)]) == 0
    out = capsys.readouterr().out
    assert "ISO 13786" in out and "auto films" not in out


def test_check_says_how_much_work_a_case_asks_for(tmp_path, capsys):
    """`layers check` states the march's size and a rough duration before anything
    runs, and for long work how it is shown and stopped (a freeze case at 10 ms
    steps: 2.16 million steps)."""
    demo = Path(__file__).resolve().parents[1] / "cases" / "outdoor-water-freeze.toml"
    assert main(["check", str(demo)]) == 0
    out = capsys.readouterr().out
    work = [line for line in out.splitlines() if line.startswith("work:")]
    assert len(work) == 1 and "steps x" in work[0] and "nonlinear" in work[0] and "Ctrl-C" not in work[0]
    text = demo.read_text(encoding="utf-8")
    import re

    long_case = tmp_path / "long.toml"
    long_case.write_text(re.sub(r'(?m)^step = ".*"$', 'step = "10 ms"', text), encoding="utf-8")
    assert main(["check", str(long_case)]) == 0
    work = [line for line in capsys.readouterr().out.splitlines() if line.startswith("work:")]
    assert work and "Ctrl-C stops it cleanly" in work[0]
