"""The run archive: ``layers list`` and ``layers compare``.

Runs are tiny real runs (a few cells, one day, hourly output), archived the
way ``layers run`` archives them.
"""

from __future__ import annotations

import json
import os
import random
import shutil
import tomllib
from pathlib import Path

import netCDF4
import numpy as np
import pytest
import xarray as xr

from layers import CAUTION
from tests.conftest import ROOT
from layers.catalogue import ArchiveEntry, headline_attributes, list_runs, read_entry
from layers.comparison import (
    case_differences,
    compare_runs,
    flatten_case,
    interface_temperatures,
    interface_temperatures_from_cells,
)
from layers.case import load_case
from layers.cli import main
from layers.errors import CaseError
from layers.results import archive, write_new
from layers.simulation import simulate

WALL = """
title = "TITLE"
label = "LABEL"
[[layers]]
material = "brick"
thickness = "40 mm"
[[layers]]
material = "mineral-wool"
thickness = "WOOL"
[series.cycles.outdoor]
mean = "27 degC"
amplitude = "8 K"
peak_hour = 15
[inside]
type = "film"
air_temperature = "24 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:outdoor"
surface_resistance = "0.04 m2*K/W"
[time]
start = "START"
duration = "1 d"
step = "10 min"
output_every = "EVERY"
initial = "steady"
[mesh]
max_cell = "10 mm"
"""

PIPE = """
title = "small pipe"
[geometry]
kind = "cylinder"
inner_radius = "20 mm"
[[layers]]
material = "mineral-wool"
thickness = "30 mm"
[inside]
type = "film"
air_temperature = "80 degC"
film_coefficient = "500 W/(m2*K)"
[outside]
type = "film"
air_temperature = "20 degC"
film_coefficient = "9 W/(m2*K)"
[time]
start = "2026-07-20T00:00"
duration = "1 d"
step = "1 h"
initial = "steady"
[mesh]
max_cell = "10 mm"
"""


def wall_text(title="tiny wall", label="", wool="30 mm", start="2026-07-20T00:00", every="1 h") -> str:
    text = WALL.replace("TITLE", title).replace("WOOL", wool).replace("START", start).replace("EVERY", every)
    return text.replace("LABEL", label) if label else text.replace('label = "LABEL"\n', "")


@pytest.fixture(autouse=True)
def _own_cache(tmp_path, monkeypatch):
    """Every test has its own `layers list` header cache, never the user's."""
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(tmp_path / "cache"))


@pytest.fixture
def make_run(tmp_path):
    """Write a case, simulate it and archive it; returns (run file, Dataset)."""

    def make(text: str, name: str = "wall", folder: Path | None = None) -> tuple[Path, xr.Dataset]:
        case_path = tmp_path / f"{name}.toml"
        case_path.write_text(text, encoding="utf-8")
        case = load_case(case_path)
        ds = simulate(case)
        return archive(ds, case.stem, folder or tmp_path / "runs"), ds

    return make


def set_attributes(path: Path, **attrs) -> None:
    with netCDF4.Dataset(path, "a") as nc:
        for name, value in attrs.items():
            nc.setncattr(name, value)


# --------------------------------------------------------------------------- #
# headline attributes and list


def test_headline_attributes_match_the_run(make_run):
    """Extremes are those of the kept samples; the mean heat flow is the run's
    step-by-step total over the duration, and agrees with the trapezoidal mean
    of the hourly samples to 2 % (the samples of a smooth daily cycle;
    trapezoidal error ~ (1 h)^2 / 12 * |q''| relative to a mean of a few W/m2)."""
    _, ds = make_run(wall_text())
    head = headline_attributes(ds)
    outside = ds["surface_temperature_outside"].values
    assert head["summary_surface_temperature_outside_max_degC"] == pytest.approx(outside.max(), abs=0)
    assert head["summary_surface_temperature_outside_min_degC"] == pytest.approx(outside.min(), abs=0)
    assert head["summary_duration_s"] == 86400.0
    assert head["summary_time_start"] == "2026-07-20T00:00:00Z"
    assert head["summary_time_end"] == "2026-07-21T00:00:00Z"
    assert head["summary_heat_flow_inside_mean_units"] == "W m-2"
    exact = ds.attrs["heat_in_inside_total"] / 86400.0
    assert head["summary_heat_flow_inside_mean"] == pytest.approx(exact, rel=1e-12)
    seconds = np.arange(ds.sizes["time"]) * 3600.0
    trapezoid = np.trapezoid(ds["heat_flow_inside"].values, seconds) / 86400.0
    assert head["summary_heat_flow_inside_mean"] == pytest.approx(trapezoid, rel=0.02)
    # every value is a netCDF-ready scalar
    assert all(isinstance(v, (float, str)) for v in head.values())


def test_list_reads_back_what_runs_wrote(make_run, tmp_path):
    path_a, ds_a = make_run(wall_text(title="wall A", label="first try"), name="walla")
    path_b, ds_b = make_run(PIPE, name="pipe")
    entries = list_runs(tmp_path / "runs")
    assert {e.path for e in entries} == {path_a, path_b}
    by_path = {e.path: e for e in entries}
    for path, ds in ((path_a, ds_a), (path_b, ds_b)):
        e = by_path[path]
        head = headline_attributes(ds)
        assert e.is_run and e.problem is None
        assert e.title == ds.attrs["title"]
        assert e.created == ds.attrs["created"]
        assert e.case_sha256 == ds.attrs["case_sha256"]
        assert e.geometry == ds.attrs["geometry"]
        assert e.duration_s == head["summary_duration_s"]
        assert e.start == head["summary_time_start"]
        assert e.surface_temperature_outside_max == pytest.approx(head["summary_surface_temperature_outside_max_degC"], rel=1e-12)
        assert e.surface_temperature_outside_min == pytest.approx(head["summary_surface_temperature_outside_min_degC"], rel=1e-12)
        assert e.heat_flow_inside_mean == pytest.approx(head["summary_heat_flow_inside_mean"], rel=1e-12)
        assert e.heat_flow_units == ds["heat_flow_inside"].attrs["units"]
        assert e.headline_source == "attributes"  # to_dataset writes them
    assert by_path[path_a].label == "first try"
    assert by_path[path_b].label is None
    assert by_path[path_b].heat_flow_units == "W m-1"


def test_list_reads_older_runs_without_headline_attributes(make_run, tmp_path):
    """A run written before the summary attributes existed is listed from its
    small time series, with the same values the attributes would carry."""
    path, ds = make_run(wall_text())
    with netCDF4.Dataset(path, "a") as nc:
        for name in [n for n in nc.ncattrs() if n.startswith("summary_")]:
            nc.delncattr(name)
    (entry,) = list_runs(tmp_path / "runs")
    head = headline_attributes(ds)
    assert entry.headline_source == "variables"
    assert entry.surface_temperature_outside_max == pytest.approx(head["summary_surface_temperature_outside_max_degC"], rel=1e-12)
    assert entry.heat_flow_inside_mean == pytest.approx(head["summary_heat_flow_inside_mean"], rel=1e-12)


def test_list_prefers_the_headline_attributes(make_run, tmp_path):
    """With the summary attributes present the data are not read: distinctive
    values written into the attributes are what the listing shows."""
    path, ds = make_run(wall_text())
    head = headline_attributes(ds)
    head["summary_surface_temperature_outside_max_degC"] = 99.25
    head["summary_heat_flow_inside_mean"] = -12.5
    set_attributes(path, **head)
    (entry,) = list_runs(tmp_path / "runs")
    assert entry.headline_source == "attributes"
    assert entry.surface_temperature_outside_max == 99.25
    assert entry.heat_flow_inside_mean == -12.5
    assert entry.surface_temperature_outside_min == pytest.approx(ds["surface_temperature_outside"].values.min())


def test_list_reads_back_a_thousand_runs_with_a_corrupt_and_a_foreign_file(make_run, tmp_path):
    """1,000 runs (copies of one real run, each with its own title, creation
    time, hash and headline values), a corrupt file and a foreign netCDF file
    in one folder: every run is read back with its own values, sorted by
    creation time, and the two other files are listed with their reasons.
    Then a second listing from the cache gives the same entries."""
    original, ds = make_run(wall_text())
    head = headline_attributes(ds)
    folder = tmp_path / "many"
    folder.mkdir()
    n = 1000
    order = list(range(n))
    random.Random(7).shuffle(order)
    for i, k in enumerate(order):
        copy = folder / f"wall-{i:04d}.nc"
        shutil.copyfile(original, copy)
        set_attributes(
            copy,
            created=f"2026-03-{1 + k // 1440:02d}T{k % 1440 // 60:02d}:{k % 60:02d}:00Z",
            title=f"copy {k}",
            case_sha256=f"{k:064x}",
            summary_surface_temperature_outside_max_degC=head["summary_surface_temperature_outside_max_degC"] + k,
            summary_heat_flow_inside_mean=head["summary_heat_flow_inside_mean"] - k,
        )
    (folder / "corrupt.nc").write_bytes(np.random.default_rng(1).bytes(2048))
    xr.Dataset({"t2m": ("time", np.arange(4.0))}, attrs={"title": "weather"}).to_netcdf(folder / "foreign.nc")
    entries = list_runs(folder)
    assert len(entries) == n + 2
    runs, others = entries[:n], entries[n:]
    assert all(e.is_run for e in runs)
    assert [e.title for e in runs] == [f"copy {k}" for k in range(n)]
    for k, e in enumerate(runs):
        assert e.case_sha256 == f"{k:064x}"
        assert e.surface_temperature_outside_max == head["summary_surface_temperature_outside_max_degC"] + k
        assert e.heat_flow_inside_mean == head["summary_heat_flow_inside_mean"] - k
        assert e.geometry == "planar" and e.duration_s == head["summary_duration_s"]
    assert [e.path.name for e in others] == ["corrupt.nc", "foreign.nc"]
    assert "not a readable netCDF file" in others[0].problem
    assert "not a layers run" in others[1].problem
    assert list_runs(folder) == entries  # from the cache this time


def test_corrupt_and_foreign_files_are_listed_with_a_reason(make_run, tmp_path, capsys):
    run, _ = make_run(wall_text())
    folder = run.parent
    (folder / "corrupt.nc").write_bytes(np.random.default_rng(1).bytes(2048))
    xr.Dataset({"t2m": ("time", np.arange(4.0))}, attrs={"title": "weather"}).to_netcdf(folder / "foreign.nc")
    (folder / "notes.txt").write_text("not listed: not a .nc file")
    entries = list_runs(folder)
    assert [e.path.name for e in entries] == [run.name, "corrupt.nc", "foreign.nc"]
    corrupt, foreign = entries[1], entries[2]
    assert not corrupt.is_run and "not a readable netCDF file" in corrupt.problem
    assert not foreign.is_run and "not a layers run" in foreign.problem and "geometry" in foreign.problem
    assert foreign.title == "weather"
    assert main(["list", str(folder)]) == 0
    out = capsys.readouterr().out
    assert run.name in out and "corrupt.nc" in out and "not a readable netCDF file" in out
    assert "foreign.nc" in out and "not a layers run" in out
    assert "1 run in" in out and "2 other files" in out


def test_a_file_without_the_time_series_is_not_a_run(tmp_path):
    """A file with the run attributes but not its time series is named as not a run."""
    path = tmp_path / "partial.nc"
    xr.Dataset(
        {"surface_temperature_outside": ("thickness", [50.0, 40.0])},
        attrs={"geometry": "cylinder", "created": "2026-01-01T00:00:00Z", "case_sha256": "0" * 64},
    ).to_netcdf(path)
    entry = read_entry(path)
    assert not entry.is_run and "'time'" in entry.problem


def test_sizing_and_periodic_results_are_named_for_what_they_are(tmp_path, capsys):
    """`size -o` and `periodic -o` files in an archive are listed as such."""
    folder = tmp_path / "runs"
    folder.mkdir()
    pipe = ROOT / "cases" / "hot-oil-line-touch.toml"
    wall = ROOT / "cases" / "year-masonry-outside.toml"
    assert main(["size", str(pipe), "-o", str(folder / "s.nc"), "--quiet"]) == 0
    assert main(["periodic", str(wall), "-o", str(folder / "p.nc")]) == 0
    entries = {e.path.name: e for e in list_runs(folder)}
    assert "sizing result" in entries["s.nc"].problem and entries["s.nc"].product == "sizing"
    assert "layers periodic" in entries["p.nc"].problem and entries["p.nc"].product == "periodic"
    for name in ("s.nc", "p.nc"):
        with netCDF4.Dataset(folder / name) as nc:
            assert nc.getncattr("software_version") and nc.getncattr("created")


def test_list_json_is_valid(make_run, tmp_path, capsys):
    run, ds = make_run(wall_text(label="v1"))
    (run.parent / "corrupt.nc").write_bytes(b"\x89HDF garbage")
    assert main(["list", str(run.parent), "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert [r["name"] for r in rows] == [run.name, "corrupt.nc"]
    assert rows[0]["label"] == "v1" and rows[0]["problem"] is None
    assert rows[0]["surface_temperature_outside_max_degC"] == pytest.approx(float(ds["surface_temperature_outside"].max()))
    assert rows[0]["heat_flow_units"] == "W m-2"
    assert rows[1]["problem"] and rows[1]["title"] is None


def test_list_of_the_default_archive_and_of_a_missing_folder(make_run, tmp_path, monkeypatch, capsys):
    run, _ = make_run(wall_text())
    monkeypatch.setenv("LAYERS_ARCHIVE", str(run.parent))
    assert main(["list"]) == 0
    assert run.name in capsys.readouterr().out
    assert main(["list", str(tmp_path / "nowhere")]) == 2
    assert "no such folder" in capsys.readouterr().err
    empty = tmp_path / "empty"
    empty.mkdir()
    assert main(["list", str(empty)]) == 0
    assert "no runs in" in capsys.readouterr().out
    with pytest.raises(CaseError):
        list_runs(run)  # a file, not a folder


def test_list_cache_is_used_and_refreshed(make_run, tmp_path, monkeypatch):
    """A second listing reads no file; a changed file is read again."""
    run, _ = make_run(wall_text())
    first = list_runs(run.parent)
    assert list(Path(os.environ["LAYERS_CACHE_DIR"]).glob("list-*.json"))

    def no_reading(path):
        raise AssertionError(f"{path} read despite an unchanged cache entry")

    monkeypatch.setattr("layers.catalogue.read_entry", no_reading)
    assert list_runs(run.parent) == first
    monkeypatch.undo()
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(tmp_path / "cache"))
    set_attributes(run, title="renamed")
    (entry,) = list_runs(run.parent)
    assert entry.title == "renamed"
    assert list_runs(run.parent, cache=False) == [entry]


def test_an_unwritable_cache_only_costs_time(make_run, monkeypatch, tmp_path):
    run, _ = make_run(wall_text())
    blocker = tmp_path / "blocker"
    blocker.write_text("a file where the cache folder should be")
    monkeypatch.setenv("LAYERS_CACHE_DIR", str(blocker / "cache"))
    assert [e.path for e in list_runs(run.parent)] == [run]


# --------------------------------------------------------------------------- #
# case differences


def test_flatten_case_numbers_arrays_of_tables_from_one():
    data = tomllib.loads(wall_text())
    flat = flatten_case(data)
    assert flat["layers[2].thickness"] == "30 mm"
    assert flat["layers[1].material"] == "brick"
    assert flat["series.cycles.outdoor.peak_hour"] == 15
    keys, _ = case_differences([wall_text(), wall_text(wool="40 mm"), wall_text() + '\n[sizing]\nlayer = 2\n'])
    assert keys == ["layers[2].thickness", "sizing.layer"]


# --------------------------------------------------------------------------- #
# compare


def test_compare_a_run_with_itself_gives_zero_differences(make_run, tmp_path, capsys):
    run, _ = make_run(wall_text())
    c = compare_runs([run, run])
    assert c.same_mesh and c.time_source is None and c.interfaces_compared == 1
    assert c.exact_heat_flow_means
    assert all(d == 0.0 for m in c.metrics for d in m.differences)
    assert all(m.values[1] == 0.0 for m in c.largest_differences)
    assert len(set(c.labels)) == 2  # the run coordinate stays unique
    assert main(["compare", str(run), str(run)]) == 0
    out = capsys.readouterr().out
    assert "B-A" in out and "outside surface temperature, max" in out and CAUTION in out


def test_compare_meshes_of_the_same_case_differ_by_less_than_the_discretisation_error(make_run):
    """Surface and interface differences between max_cell 10 mm and 5 mm lie below
    the discretisation error of the 10 mm run, and differences between finer
    meshes shrink at second order.

    The finite volumes are second order in space (measured 1.8-2.2 in
    test_verification_core.test_space_order_of_convergence_graded).  With an
    error e_h ~ C h^p, the difference of the two runs is
    T_10 - T_5 ~ (1 - 2^-p) e_10, below e_10 for any order p > 0.  e_10 is
    estimated as the difference from a 1.25 mm run, whose own error is
    2^-3p e_10 (1/64 for p = 2).  Uniform cells (growth 1) make halving
    max_cell halve every cell; the time step and scheme are the same in all
    runs, so the time error does not enter the differences to leading order.
    """
    text = """
title = "mesh study"
[[layers]]
material = "brick"
thickness = "100 mm"
[[layers]]
material = "mineral-wool"
thickness = "50 mm"
[series.cycles.outdoor]
mean = "20 degC"
amplitude = "10 K"
peak_hour = 15
[inside]
type = "film"
air_temperature = "22 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:outdoor"
surface_resistance = "0.04 m2*K/W"
[time]
start = "2026-07-20T00:00"
duration = "1 d"
step = "5 min"
output_every = "1 h"
initial = "steady"
scheme = "crank-nicolson"
[mesh]
max_cell = "MAX"
growth = 1.0
"""
    runs = {m: make_run(text.replace("MAX", f"{m} mm"), name=f"mesh{m}")[0] for m in ("10", "5", "2.5", "1.25", "0.625", "0.3125")}
    halved = compare_runs([runs["10"], runs["5"]])
    error = compare_runs([runs["10"], runs["1.25"]])
    assert not halved.same_mesh and halved.interfaces_compared == 1
    assert "mesh.max_cell" in halved.differing_keys
    for diff, err in zip(halved.largest_differences, error.largest_differences):
        assert diff.name == err.name
        assert 0.0 < diff.values[1] < err.values[1], diff.name
    # and the headline extremes differ by less than the same bound
    for metric, ref in zip(halved.metrics, error.metrics):
        if "temperature" in metric.name:
            bound = max(m.values[1] for m in error.largest_differences if "temperature" in m.name)
            assert abs(metric.differences[1]) <= bound, metric.name
    # The differences shrink at the order the core tests measure: over two
    # halvings (2.5 -> 1.25 -> 0.625 -> 0.3125 mm) a second-order scheme
    # divides them by 16, a first-order one by 4; requiring more than 8 (an
    # order above 1.5) tells the two apart.  Coarser meshes are left out: the
    # outside half cell in the wool has a Biot number h dx / (2 k) of 3.6 at
    # 10 mm and 0.9 at 2.5 mm, so the outside surface is only approaching its
    # asymptotic rate there (successive ratios measured 3.4, 3.7).
    coarse = compare_runs([runs["2.5"], runs["1.25"]]).largest_differences
    fine = compare_runs([runs["0.625"], runs["0.3125"]]).largest_differences
    for d_coarse, d_fine in zip(coarse, fine):
        assert d_coarse.name == d_fine.name
        assert d_coarse.values[1] / d_fine.values[1] > 8.0, d_coarse.name


def test_compare_aligns_runs_with_different_output_intervals(make_run):
    """The same case kept every 1 h and every 30 min: compared on the hourly
    stamps, which the 30 min run also holds, so every difference is zero
    (the 10 min step is the same; only the kept samples differ)."""
    hourly, _ = make_run(wall_text(every="1 h"), name="hourly")
    half, _ = make_run(wall_text(every="30 min"), name="half")
    c = compare_runs([half, hourly])
    assert c.time_source == 1
    assert c.dataset.sizes["time"] == 25
    assert c.differing_keys == ("time.output_every",)
    assert all(m.values[1] < 1e-12 for m in c.largest_differences)


def test_compare_uses_the_common_overlap(make_run):
    a, _ = make_run(wall_text(start="2026-07-20T00:00"), name="early")
    b, _ = make_run(wall_text(start="2026-07-20T12:00"), name="late")
    c = compare_runs([a, b])
    assert c.start == np.datetime64("2026-07-20T12:00")
    assert c.end == np.datetime64("2026-07-21T00:00")
    assert c.dataset.sizes["time"] == 13
    assert not c.exact_heat_flow_means  # neither run spans exactly the window


def test_compare_refuses_different_geometry(make_run, capsys):
    wall, _ = make_run(wall_text(), name="wall")
    pipe, _ = make_run(PIPE, name="pipe")
    with pytest.raises(CaseError) as info:
        compare_runs([wall, pipe])
    assert info.value.key == "geometry" and "cylinder" in info.value.reason
    assert main(["compare", str(wall), str(pipe)]) == 2
    assert "different geometry" in capsys.readouterr().err


def test_compare_refuses_runs_without_overlap(make_run, capsys):
    july, _ = make_run(wall_text(start="2026-07-20T00:00"), name="july")
    august, _ = make_run(wall_text(start="2026-08-20T00:00"), name="august")
    with pytest.raises(CaseError) as info:
        compare_runs([july, august])
    assert info.value.key == "time" and "no overlap" in info.value.reason
    assert main(["compare", str(july), str(august)]) == 2
    assert "no overlap in time" in capsys.readouterr().err


def test_compare_refuses_bad_files(make_run, tmp_path, capsys):
    run, _ = make_run(wall_text())
    corrupt = tmp_path / "corrupt.nc"
    corrupt.write_bytes(b"not netCDF at all")
    assert main(["compare", str(run), str(corrupt)]) == 2
    assert "corrupt.nc" in capsys.readouterr().err
    assert main(["compare", str(run)]) == 2
    assert main(["compare", str(run), str(tmp_path / "missing.nc")]) == 2
    assert main(["compare", str(run), str(run), "-o", str(tmp_path / "out.csv")]) == 2


def test_combine_along_run_labels_the_differing_key(make_run, tmp_path, capsys):
    thin, _ = make_run(wall_text(wool="30 mm"), name="thin")
    thick, _ = make_run(wall_text(wool="40 mm"), name="thick")
    out = tmp_path / "both.nc"
    assert main(["compare", str(thin), str(thick), "-o", str(out)]) == 0
    capsys.readouterr()
    with xr.open_dataset(out) as ds:
        assert list(ds["run"].values) == ["layers[2].thickness=30 mm", "layers[2].thickness=40 mm"]
        assert ds.attrs["comparison_differing_keys"] == "layers[2].thickness"
        assert ds.attrs["caution"] == CAUTION
        assert ds["temperature"].dims == ("run", "time", "x")
        assert ds["surface_temperature_outside"].attrs["units"] == "degC"
        # profiles on the union of the cell centres, NaN beyond the thinner wall
        assert np.isnan(ds["temperature"].sel(run="layers[2].thickness=30 mm").values[:, -1]).all()
        assert np.isfinite(ds["temperature"].sel(run="layers[2].thickness=40 mm").values).all()
        assert list(ds["file"].values) == [thin.name, thick.name]
        assert ds["temperature_interface"].dims == ("run", "interface", "time")  # CF 2.4 order
        before = out.read_bytes()
    from tests.test_cf_compliance import _errors

    assert _errors(out, tmp_path) == []  # IOOS compliance checker, cf:1.10, no high-priority failure
    assert main(["compare", str(thin), str(thick), "-o", str(out)]) == 2
    assert "exists already" in capsys.readouterr().err
    assert out.read_bytes() == before


def test_compare_plot_is_written_once(make_run, tmp_path, capsys):
    a, _ = make_run(wall_text(wool="30 mm"), name="a")
    b, _ = make_run(wall_text(wool="40 mm"), name="b")
    for suffix, magic in ((".png", b"\x89PNG"), (".svg", b"<?xml"), (".pdf", b"%PDF")):
        out = tmp_path / f"overlay{suffix}"
        assert main(["compare", str(a), str(b), "-o", str(out)]) == 0
        assert out.read_bytes().startswith(magic)
        assert main(["compare", str(a), str(b), "-o", str(out)]) == 2
    assert "exists already" in capsys.readouterr().err


def test_interface_temperature_of_a_steady_wall_is_exact(make_run):
    """Steady conduction: T_interface = T_air,in - q (Rsi + d1 / k1) (series
    resistances, ISO 6946:2017 sec. 6.7.1).  The steady profile is linear
    within each layer, so the two-sided extrapolation is exact up to round-off."""
    text = """
title = "steady two layers"
[materials.heavy]
conductivity = "1.2 W/(m*K)"
density = "2000 kg/m3"
specific_heat = "900 J/(kg*K)"
[materials.light]
conductivity = "0.04 W/(m*K)"
density = "40 kg/m3"
specific_heat = "1400 J/(kg*K)"
[[layers]]
material = "heavy"
thickness = "100 mm"
[[layers]]
material = "light"
thickness = "60 mm"
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "-5 degC"
surface_resistance = "0.04 m2*K/W"
[time]
duration = "2 h"
step = "1 h"
initial = "steady"
"""
    _, ds = make_run(text, name="steady")
    total = 0.13 + 0.100 / 1.2 + 0.060 / 0.04 + 0.04
    q = 25.0 / total
    expected = 20.0 - q * (0.13 + 0.100 / 1.2)
    face = interface_temperatures(ds)
    assert face.dims == ("time", "interface") and face.attrs["units"] == "degC"
    np.testing.assert_allclose(face.values[:, 0], expected, rtol=0, atol=1e-9)
    # the fallback for old run files (re-derived from the cell centres) is exact here too
    old = interface_temperatures_from_cells(ds.drop_vars("interface_temperature", errors="ignore"))
    np.testing.assert_allclose(old.values[:, 0], expected, rtol=0, atol=1e-9)


def _with_own_interface_temperature(ds: xr.Dataset, offset: float) -> xr.Dataset:
    """A copy of a run carrying an ``interface_temperature`` (time, interface: 0 the inside
    surface ... the outside surface) set to known values: each internal face is the
    re-derived value plus ``offset``, so a comparison that re-derived would miss it."""
    faces = interface_temperatures_from_cells(ds).values
    full = np.column_stack([ds["surface_temperature_inside"].values, faces + offset, ds["surface_temperature_outside"].values])
    out = ds.drop_vars("interface_temperature", errors="ignore")
    out["interface_temperature"] = (("time", "interface"), full, {"units": "degC", "long_name": "temperature of each layer face"})
    return out


def test_compare_reads_each_run_s_own_interface_temperature(make_run, tmp_path):
    """compare takes the interface temperatures the runs carry (the solver's own), not a
    re-derivation; only old run files without the variable are re-derived, and the
    combined Dataset says which."""
    _, ds = make_run(wall_text(), name="wall")
    own_a = write_new(_with_own_interface_temperature(ds, 0.5), tmp_path / "own-a.nc")
    own_b = write_new(_with_own_interface_temperature(ds, 1.5), tmp_path / "own-b.nc")
    old = write_new(ds.drop_vars("interface_temperature", errors="ignore"), tmp_path / "old.nc")
    derived = interface_temperatures_from_cells(ds).values[:, 0]

    combined = compare_runs([own_a, own_b]).dataset
    values = combined["temperature_interface"].values  # (run, interface, time)
    np.testing.assert_allclose(values[0, 0], derived + 0.5, rtol=0, atol=1e-12)
    np.testing.assert_allclose(values[1, 0], derived + 1.5, rtol=0, atol=1e-12)
    assert "re-derived" not in combined["temperature_interface"].attrs["comment"]

    combined = compare_runs([own_a, old]).dataset
    np.testing.assert_allclose(combined["temperature_interface"].values[1, 0], derived, rtol=0, atol=1e-12)
    assert combined["temperature_interface"].attrs["comment"].endswith("without it: old.nc")


def test_archive_entry_json_has_units_in_the_keys():
    row = ArchiveEntry(Path("x.nc"), surface_temperature_outside_max=float("nan")).to_json()
    assert row["surface_temperature_outside_max_degC"] is None
    assert json.loads(json.dumps(row)) == row


def test_compare_of_freeze_runs_shows_their_freeze_times(make_run):
    """Runs with contents: the comparison carries each run's freeze times and
    the largest ice fraction, as the runs recorded them."""
    text = (ROOT / "cases" / "outdoor-water-freeze.toml").read_text()
    thin, ds_thin = make_run(text, name="thin")
    thick, ds_thick = make_run(text.replace('thickness = "40 mm"', 'thickness = "60 mm"'), name="thick")
    metrics = {m.name: m for m in compare_runs([thin, thick]).metrics}
    freeze = metrics["freeze time (max_ice_fraction)"]
    assert freeze.values == (ds_thin.attrs["freeze_time_h"], ds_thick.attrs["freeze_time_h"])
    assert freeze.values[1] > freeze.values[0]  # thicker insulation, later freezing
    assert metrics["ice fraction, max"].values[0] == pytest.approx(float(ds_thin["ice_fraction"].max()))


def test_a_combined_comparison_is_listed_as_one(make_run, tmp_path, capsys):
    run, _ = make_run(wall_text())
    assert main(["compare", str(run), str(run), "-o", str(run.parent / "study.nc")]) == 0
    entries = {e.path.name: e for e in list_runs(run.parent)}
    assert entries["study.nc"].product == "comparison" and "layers compare" in entries["study.nc"].problem
    assert entries[run.name].product == "run"


def test_compare_names_interfaces_by_every_run_s_materials(make_run):
    """Runs with different insulation: each interface is named by the
    material pairs of all runs, not the first run's only."""
    wool, _ = make_run(wall_text(), name="wool")
    eps, _ = make_run(wall_text().replace('material = "mineral-wool"', 'material = "eps"'), name="eps")
    names = compare_runs([wool, eps]).dataset.attrs["comparison_interface_names"]
    assert "brick | mineral-wool / brick | eps" in names


def test_compare_reports_both_extremes_of_a_reversing_flow_with_their_times(tmp_path, capsys):
    """A heat flow that reverses has a largest value each way: compare gives the
    maximum and the minimum (with the time each run reached it) and the mean,
    not one signed "peak"; the values are those of the run file itself."""
    import xarray as xr

    from layers.cli import main

    case = Path(__file__).resolve().parents[1] / "cases" / "masonry-wall-hot-week.toml"
    for archive in ("a", "b"):
        assert main(["run", str(case), "--archive", str(tmp_path / archive), "-q"]) == 0
    (a,), (b,) = (tmp_path / "a").glob("*.nc"), (tmp_path / "b").glob("*.nc")
    capsys.readouterr()
    assert main(["compare", str(a), str(b)]) == 0
    out = capsys.readouterr().out
    with xr.open_dataset(a) as ds:
        flow = ds["heat_flow_outside"]
        high, low = float(flow.max()), float(flow.min())
        when = str(flow["time"].values[int(flow.argmax())])[:16].replace("T", " ")
    assert low < 0.0 < high  # the flow reverses in this case
    line = next(row for row in out.splitlines() if row.startswith("heat flow, outside surface, max"))
    assert f"{high:.4g}" in line and "peak" not in out
    assert any(row.strip().startswith("at A " + when) for row in out.splitlines())
    assert any(row.startswith("heat flow, outside surface, min") and f"{low:.4g}" in row for row in out.splitlines())
