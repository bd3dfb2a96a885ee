"""Sweeps (layers/sweeps.py, layers/variation.py): one run per grid point, as one Dataset.

The reference for every point is the same case run on its own
(:func:`layers.simulation.simulate` on the case file with the value written
in): a sweep is a way of running many cases, so its numbers must be theirs.
The contract's tolerance is 1e-6 K; points marched together in a modal batch
differ from a lone run only by the order of floating-point sums (round-off,
about 1e-12 K here), so 1e-6 K has a wide margin and still catches any
mix-up of points, coefficients or drives.
"""

from __future__ import annotations

import textwrap
import tomllib

import numpy as np
import pytest

from layers.case import parse_case
from layers.cli import main
from layers.errors import CaseError
from layers.simulation import simulate
from layers.sweeps import plan_jobs, points, sweep, variant
from layers.variation import with_values
from tests.test_exact import WALL, _weather

SWEEP = """
[[sweep]]
name = "wool"
key = "layers.3.thickness"
values = ["60 mm", "120 mm", "200 mm"]
[[sweep]]
name = "absorptance"
key = "outside.solar_absorptance"
range = {from = 0.3, to = 0.9, count = 2}
"""


def _case(text: str, base_dir=None, file: str = "<case>"):
    text = textwrap.dedent(text)
    return parse_case(tomllib.loads(text), text=text, base_dir=base_dir, file=file)


def _alone(case, settings: dict, base_dir):
    data = with_values(tomllib.loads(case.text), settings)
    return simulate(parse_case(data, text=case.text, base_dir=base_dir))


def test_every_point_equals_its_own_run(tmp_path):
    """A 3 x 2 grid on a linear wall under hourly weather (the exact path,
    marched as one modal batch although the points have different numbers
    of cells): each point's surface temperatures, heat flows and layer faces
    equal the lone run of that case to 1e-6 K (see the module docstring)."""
    _weather(tmp_path)
    case = _case(WALL.format(step="1 h", initial="steady", scheme="auto") + SWEEP, tmp_path)
    ds = sweep(case)
    assert ds.attrs["product"] == "sweep" and ds.attrs["scheme"] == "exact"
    assert ds["surface_temperature_outside"].dims == ("wool", "absorptance", "time")
    assert ds["wool"].attrs["units"] == "mm" and list(ds["wool"].values) == [60.0, 120.0, 200.0]
    assert "temperature" not in ds  # only with keep_temperature = true
    assert "air_temperature_outside" in ds and ds["air_temperature_outside"].dims == ("time",)  # shared: kept once
    grid = points(case)
    cases = [variant(case, with_values(tomllib.loads(case.text), p.settings), p) for p in grid]
    assert len({c.mesh().n for c in cases}) == 3
    assert [job.kind for job in plan_jobs(case, cases, [with_values(tomllib.loads(case.text), p.settings) for p in grid])] == ["exact"]
    for p in grid:
        one = _alone(case, p.settings, tmp_path)
        member = ds.isel(wool=p.index[0], absorptance=p.index[1])
        for name in ("surface_temperature_inside", "surface_temperature_outside", "heat_flow_inside", "heat_flow_outside", "interface_temperature"):
            np.testing.assert_allclose(member[name].values, one[name].values, rtol=0, atol=1e-6, err_msg=name)
        assert float(member["heat_in_inside_total"]) == pytest.approx(one.attrs["heat_in_inside_total"], rel=1e-9)
        assert float(member["energy_balance_error"]) < 1e-9


def test_stepping_points_and_the_cell_field(tmp_path):
    """Points the exact path cannot take (an automatic film) are marched together
    with TR-BDF2 (one job, one tridiagonal system) and equal their lone runs to
    the contract's 1e-6 K: each stage iterates until every point has converged to
    the march's 1e-6 K iteration tolerance, so a point may take a chord iteration
    more than alone (measured: a few 1e-9 K).  With keep_temperature the cell
    field is kept on a padded cell axis, NaN past a point's cells."""
    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto").replace(
        'surface_resistance = "0.04 m2*K/W"', 'film_coefficient = "auto"'
    ).replace('duration = "5 d"', 'duration = "1 d"').replace('output_every = "1 h"', 'output_every = "1 h"\nkeep_temperature = true')
    text += '[[sweep]]\nname = "wool"\nkey = "layers.3.thickness"\nvalues = ["60 mm", "200 mm"]\n'
    case = _case(text, tmp_path)
    ds = sweep(case)
    assert ds.attrs["scheme"] == "tr-bdf2"
    grid = points(case)
    sources = [with_values(tomllib.loads(case.text), p.settings) for p in grid]
    cases = [variant(case, src, p) for src, p in zip(sources, grid)]
    assert [(job.kind, job.points) for job in plan_jobs(case, cases, sources)] == [("step", (0, 1))]
    for i, value in enumerate(["60 mm", "200 mm"]):
        one = _alone(case, {"layers.3.thickness": value}, tmp_path)
        np.testing.assert_allclose(ds["surface_temperature_outside"].isel(wool=i).values, one["surface_temperature_outside"].values,
                                   rtol=0, atol=1e-6)
        n = one.sizes["x"]
        np.testing.assert_allclose(ds["temperature"].isel(wool=i).values[:, :n], one["temperature"].values, rtol=0, atol=1e-6)
        assert np.isnan(ds["temperature"].isel(wool=i).values[:, n:]).all()
        np.testing.assert_array_equal(ds["x"].isel(wool=i).values[:n], one["x"].values)


@pytest.mark.parametrize(
    ("table", "key", "reason"),
    [
        ('name = "w"\nkey = "layers.9.thickness"\nvalues = ["1 mm"]', "sweep[1].key", "list of 4"),
        ('name = "w"\nkey = "nothing.here"\nvalues = ["1 mm"]', "sweep[1].key", "no 'nothing'"),
        ('name = "time"\nkey = "layers.1.thickness"\nvalues = ["1 mm"]', "sweep[1].name", "name of the result"),
        ('name = "energy_balance_error"\nkey = "layers.1.thickness"\nvalues = ["1 mm"]', "sweep[1].name", "name of the result"),
        ('name = "k"\nkey = "time.keep_temperature"\nvalues = [true, false]', "sweep[1].key", "cannot vary"),
        ('name = "w"\nkey = "layers.².thickness"\nvalues = ["1 mm"]', "sweep[1].key", "item number"),
        ('name = "w"\nkey = "time.scheme"\nvalues = ["exact", "exact"]', "sweep[1].values", "same value twice"),
        ('name = "w"\nkey = "layers.1.thickness"\nvalues = ["10 mm", "1 cm"]', "sweep[1].values", "same value twice"),
        ('name = "w"\nkey = "layers.1.thickness"\nvalues = ["10 mm", 0.02]', "sweep[1].values", "every value with a unit"),
        ('name = "w"\nkey = "layers.1.thickness"', "sweep[1]", "values = [...] or range"),
        ('name = "w"\nkey = "layers"\nvalues = [1]', "sweep[1].key", "table or list"),
        ('name = "w"\nkey = "series.file"\nvalues = ["a.csv"]', "sweep[1].key", "one series file"),
        ('name = "w"\nkey = "layers.1.thickness"\nrange = {from = "1 mm", to = "1 mm", count = 3}', "sweep[1].range", "different"),
    ],
)
def test_a_bad_sweep_table_is_refused_when_the_case_is_read(tmp_path, table, key, reason):
    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto") + "[[sweep]]\n" + table + "\n"
    with pytest.raises(CaseError) as info:
        _case(text, tmp_path)
    assert info.value.key == key and reason in info.value.reason


def test_a_bad_value_names_the_point(tmp_path):
    """A swept value the case reader refuses is reported with the point that carries it."""
    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto") + (
        '[[sweep]]\nname = "wool"\nkey = "layers.3.thickness"\nvalues = ["60 mm", "-5 mm"]\n'
    )
    with pytest.raises(CaseError) as info:
        sweep(_case(text, tmp_path))
    assert info.value.key == "layers[3].thickness" and "wool = -5 mm" in info.value.reason


def test_layers_sweep_archives_one_file_that_list_shows(tmp_path, capsys, monkeypatch):
    _weather(tmp_path)
    path = tmp_path / "wall.toml"
    path.write_text(WALL.format(step="1 h", initial="steady", scheme="auto") + SWEEP)
    monkeypatch.chdir(tmp_path)
    assert main(["sweep", str(path), "--archive", str(tmp_path / "runs")]) == 0
    out = capsys.readouterr().out
    assert "sweep of 6 points" in out and "caution:" in out
    files = list((tmp_path / "runs").glob("wall-sweep-*.nc"))
    assert len(files) == 1
    assert main(["list", str(tmp_path / "runs")]) == 0
    listed = capsys.readouterr().out
    assert "wall-sweep-" in listed and "[sweep, 6 points]" in listed
    # a comparison of sweeps is printed, not written
    assert main(["compare", str(files[0]), str(files[0]), "-o", str(tmp_path / "c.png")]) == 2
    assert "printed only" in capsys.readouterr().err
    # bad command lines: one line, exit 2
    assert main(["sweep", str(path), "--workers", "0", "--archive", str(tmp_path / "runs")]) == 2
    assert main(["sweep", str(path), "--workers", "2", "--scheduler", "tcp://127.0.0.1:1", "--archive", str(tmp_path / "runs")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 2 and "--workers" in err


def test_a_distributed_sweep_equals_the_serial_one(tmp_path):
    """A local dask cluster of two worker processes runs the same jobs (fixed
    batches of points) and returns the serial numbers exactly."""
    distributed = pytest.importorskip("distributed")
    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto") + SWEEP
    text += ""
    case = _case(text, tmp_path, file=str(tmp_path / "wall.toml"))
    serial = sweep(case)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        with distributed.Client(cluster) as client:
            spread = sweep(case, client=client)
    for name in serial.data_vars:
        np.testing.assert_array_equal(serial[name].values, spread[name].values, err_msg=name)


def test_points_that_differ_in_their_series_and_warnings(tmp_path):
    """Sun on one point and none on the other: the sol-air temperature is kept
    for both, NaN where a point has none; each point equals its own run; a
    warning that a point's run gives is said once for the sweep, with how many
    points gave it."""
    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto").replace('duration = "5 d"', 'duration = "1 d"')
    text += '[[sweep]]\nname = "absorptance"\nkey = "outside.solar_absorptance"\nvalues = [0.0, 0.6]\n'
    case = _case(text, tmp_path)
    ds = sweep(case)
    sol_air = ds["sol_air_temperature_outside"]
    assert np.isnan(sol_air.isel(absorptance=0).values).all() and np.isfinite(sol_air.isel(absorptance=1).values).all()
    one = _alone(case, {"outside.solar_absorptance": 0.6}, tmp_path)
    np.testing.assert_allclose(sol_air.isel(absorptance=1).values, one["sol_air_temperature_outside"].values, atol=1e-9)
    # a stepping scheme that warns at every point (Crank-Nicolson after a start step)
    ringing = WALL.format(step="1 h", initial="-5 degC", scheme="crank-nicolson").replace('duration = "5 d"', 'duration = "1 d"')
    ringing += '[[sweep]]\nname = "wool"\nkey = "layers.3.thickness"\nvalues = ["60 mm", "120 mm"]\n'
    with pytest.warns(UserWarning, match=r"crank-nicolson .* \[at 2 of 2 sweep points"):
        warned = sweep(_case(ringing, tmp_path))
    assert "crank-nicolson" in warned.attrs["point_warnings"]


def test_one_mesh_keeps_the_run_cell_coordinates(tmp_path):
    """Points with the same mesh keep temperature on (time, x) with the run's x, bounds and layers."""
    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto").replace('duration = "5 d"', 'duration = "1 d"')
    text = text.replace('output_every = "1 h"', 'output_every = "1 h"\nkeep_temperature = true')
    text += '[[sweep]]\nname = "absorptance"\nkey = "outside.solar_absorptance"\nvalues = [0.3, 0.6]\n'
    case = _case(text, tmp_path)
    ds = sweep(case)
    assert ds["temperature"].dims == ("absorptance", "time", "x") and "x_bounds" in ds and "layer" in ds.coords
    one = _alone(case, {"outside.solar_absorptance": 0.3}, tmp_path)
    np.testing.assert_allclose(ds["temperature"].isel(absorptance=0).values, one["temperature"].values, atol=1e-9)


def test_check_reads_every_point_before_any_run(tmp_path, capsys):
    """`layers check` refuses a swept value the case reader would refuse, naming
    the point, and a grid too large to keep, at once."""
    _weather(tmp_path)
    path = tmp_path / "wall.toml"
    path.write_text(WALL.format(step="1 h", initial="steady", scheme="auto")
                    + '[[sweep]]\nname = "wool"\nkey = "layers.3.thicknes"\nvalues = ["60 mm", "80 mm"]\n')
    assert main(["check", str(path)]) == 2
    assert "layers[3].thicknes" in capsys.readouterr().err
    path.write_text(WALL.format(step="1 h", initial="steady", scheme="auto")
                    + '[[sweep]]\nname = "wool"\nkey = "layers.3.thickness"\nvalues = ["60 mm", "80 mm"]\n')
    assert main(["check", str(path)]) == 0
    assert "all 2 points read" in capsys.readouterr().out
    big = WALL.format(step="1 min", initial="steady", scheme="auto").replace('output_every = "1 h"', 'output_every = "1 min"')
    big += '[[sweep]]\nname = "wool"\nkey = "layers.3.thickness"\nrange = {from = "50 mm", to = "300 mm", count = 5000}\n'
    path.write_text(big)
    assert main(["check", str(path)]) == 2
    assert "GiB" in capsys.readouterr().err


def test_sweeps_of_the_same_grid_compare_point_by_point(tmp_path, capsys):
    """Two sweeps of the same grid (the second with a thicker brick) compare
    point by point: the largest difference of the mean heat flow is the one
    a direct subtraction of the two files gives; a sweep and a run do not compare."""
    import xarray as xr

    _weather(tmp_path)
    text = WALL.format(step="1 h", initial="steady", scheme="auto") + SWEEP
    (tmp_path / "a.toml").write_text(text)
    (tmp_path / "b.toml").write_text(text.replace('thickness = "240 mm"', 'thickness = "300 mm"'))
    for name in ("a", "b"):
        assert main(["sweep", str(tmp_path / f"{name}.toml"), "--archive", str(tmp_path / name), "-q"]) == 0
    (fa,), (fb,) = (tmp_path / "a").glob("*.nc"), (tmp_path / "b").glob("*.nc")
    capsys.readouterr()
    assert main(["compare", str(fa), str(fb)]) == 0
    out = capsys.readouterr().out
    with xr.open_dataset(fa) as a, xr.open_dataset(fb) as b:
        diff = (b["heat_flow_inside_mean"] - a["heat_flow_inside_mean"]).values
    largest = diff.flat[int(abs(diff).argmax())]
    assert "mean heat flow, inside surface" in out and f"{largest:+.4g}" in out
    assert main(["run", str(tmp_path / "a.toml"), "--archive", str(tmp_path / "r"), "-q"]) == 0
    (run,) = (tmp_path / "r").glob("*.nc")
    assert main(["compare", str(fa), str(run)]) == 2
