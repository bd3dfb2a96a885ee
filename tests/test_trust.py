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
