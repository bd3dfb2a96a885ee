"""Figures: every kind on a tiny planar and cylinder run, files, labels, caution, no overwrite."""

from __future__ import annotations

import re
import shutil
import textwrap
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from layers import CAUTION, plots
from layers.case import load_case
from layers.cli import main
from layers.errors import CaseError
from layers.results import write_new
from layers.simulation import simulate

# Tiny invented cases: a day of a two-layer wall under a daily cycle with sun,
# and three hours of a steel pipe with an air gap and mineral wool warming up.
WALL = """
title = "Plot test wall"

[[layers]]
name = "brick"
material = "brick"
thickness = "100 mm"

[[layers]]
name = "mineral wool"
material = "mineral-wool"
thickness = "50 mm"

[series.cycles.outdoor]
mean = "25 degC"
amplitude = "8 K"
peak_hour = 15

[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"

[outside]
type = "film"
air_temperature = "series:outdoor"
surface_resistance = "0.04 m2*K/W"
solar_absorptance = 0.6
solar_irradiance = "300 W/m2"
relative_humidity = "60 %"

[time]
start = "2026-07-20T00:00"
duration = "1 d"
step = "1 h"
output_every = "1 h"
initial = "steady"

[mesh]
max_cell = "25 mm"
"""

PIPE = """
title = "Plot test pipe"

[geometry]
kind = "cylinder"
inner_radius = "51 mm"

[[layers]]
name = "steel pipe"
material = "steel"
thickness = "6 mm"

[[layers]]
kind = "air-gap"
resistance = "0.05 m2*K/W"

[[layers]]
name = "mineral wool"
material = "mineral-wool"
thickness = "40 mm"

[inside]
type = "film"
air_temperature = "150 degC"
film_coefficient = "500 W/(m2*K)"

[outside]
type = "film"
air_temperature = "20 degC"
film_coefficient = "9 W/(m2*K)"

[time]
start = "2026-01-05T06:00"
duration = "3 h"
step = "10 min"
output_every = "20 min"
initial = "20 degC"

[mesh]
max_cell = "10 mm"
"""

#: A figure saved as PNG is FIGSIZE x DPI pixels: 10 in x 120 = 1200 wide, 6 in x 120 = 720 high.
PNG_SHAPE = (720, 1200)
PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
#: An axis label ends with its unit in brackets: one of the units the runs and
#: sizing files carry, as plots.pretty_units shows them, lengths in mm, or
#: UTC for a time axis.
UNIT_AT_END = re.compile(r" \[([^\]]+)\]$")
KNOWN_UNITS = {"°C", "K", "W/m²", "W/m", "W", "W/(m²·K)", "J/m²", "J/m", "J", "mm", "m", "h", "d", "UTC", "-"}
RUN_KINDS = ("carpet", "surfaces", "profiles")


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, Path]:
    """The two tiny runs, written once as netCDF files."""
    folder = tmp_path_factory.mktemp("runs")
    paths = {}
    for name, text in (("wall", WALL), ("pipe", PIPE)):
        case_path = folder / f"{name}.toml"
        case_path.write_text(textwrap.dedent(text), encoding="utf-8")
        paths[name] = write_new(simulate(load_case(case_path)), folder / f"{name}.nc")
    return paths


@pytest.fixture
def run_copy(runs, tmp_path):
    """A private copy of a run, so default output names next to it do not collide between tests."""

    def copy(name: str) -> Path:
        target = tmp_path / f"{name}-run.nc"
        shutil.copyfile(runs[name], target)
        return target

    return copy


LONG_CAUTION = (
    "Touch limits depend on the contact time and the surface material. A cold line also needs a "
    "continuous vapour barrier. Insulation alone only delays freezing of stagnant water; it cannot "
    "prevent it. Where freezing must be prevented, keep the water flowing or add heat tracing."
)

#: A steady pipe sizing case (invented numbers): 300 degC bore, 25 degC air, touch limit 50 degC.
SIZING_CASE = """
title = "Plot test sizing"

[geometry]
kind = "cylinder"
inner_radius = "57.15 mm"

[[layers]]
name = "insulation"
material = "mineral-wool"
thickness = "50 mm"

[inside]
type = "temperature"
surface_temperature = "300 degC"

[outside]
type = "film"
air_temperature = "25 degC"
film_coefficient = "10 W/(m2*K)"
relative_humidity = "70 %"

[time]
duration = "1 h"
step = "1 h"

[sizing]
layer = 1
thicknesses = ["20 mm", "40 mm", "60 mm", "80 mm", "100 mm"]
max_surface_temperature = "50 degC"
dew_point_margin = "1 K"
max_heat_loss = "150 W/m"
"""


def sizing_dataset(full: bool = True) -> xr.Dataset:
    """A small synthetic sizing Dataset (invented numbers, shaped like `layers size` output)."""
    thickness = np.array([20.0, 30.0, 40.0, 60.0, 80.0]) / 1000.0
    surface = 20.0 + 45.0 * np.exp(-thickness / 0.03)
    loss = 9.0 / (thickness + 0.02)
    ds = xr.Dataset(
        {
            "surface_temperature_outside": ("thickness", surface, {"units": "degC", "long_name": "outside surface temperature"}),
            "heat_flow": ("thickness", loss, {"units": "W m-1", "long_name": "heat loss per metre of pipe"}),
        },
        coords={"thickness": ("thickness", thickness, {"units": "m", "long_name": "insulation thickness"})},
        attrs={"title": "Synthetic sizing"},
    )
    if full:
        ds["freeze_time"] = ("thickness", 4.0 + 250.0 * thickness, {"units": "h"})
        ds["time_to_freezing"] = ("thickness", 2.0 + 150.0 * thickness, {"units": "h"})
        ds["passes_max_surface_temperature"] = ("thickness", surface <= 50.0)
        ds["passes_max_heat_loss"] = ("thickness", loss <= 200.0)
        ds["passes_min_freeze_time"] = ("thickness", 4.0 + 250.0 * thickness >= 12.0)
        ds["passes_all"] = ds["passes_max_surface_temperature"] & ds["passes_max_heat_loss"] & ds["passes_min_freeze_time"]
        ds.attrs.update(
            recommended_thickness=0.04,
            max_surface_temperature=50.0,
            max_heat_loss=200.0,
            dew_point=11.5,
            dew_point_margin=1.0,
            min_freeze_time_h=12.0,
            # a sizing run joins several cautions: the figure must find room for all of them
            caution=" ".join([LONG_CAUTION, CAUTION]),
        )
    return ds


# --------------------------------------------------------------------------- #
# helpers


def all_axes(fig):
    """Every Axes of a figure, with the secondary (child) axes."""
    found = []
    for ax in fig.axes:
        found.append(ax)
        found.extend(ax.child_axes)
    return found


def assert_labels_have_units(fig) -> None:
    labels = [label for ax in all_axes(fig) for label in (ax.get_xlabel(), ax.get_ylabel()) if label]
    assert labels, "a figure without axis labels"
    for label in labels:
        found = UNIT_AT_END.search(label)
        assert found and found.group(1) in KNOWN_UNITS, f"axis label without a unit: {label!r}"


def figure_texts(fig) -> list[str]:
    texts = [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        texts.extend(t.get_text() for t in ax.texts)
    return texts


def assert_png(path: Path) -> None:
    import matplotlib.image as mpimg

    assert path.read_bytes()[:8] == PNG_MAGIC
    assert mpimg.imread(path).shape[:2] == PNG_SHAPE


# --------------------------------------------------------------------------- #
# every kind on every demo case, through the command line

DEMO_CASES = sorted((Path(__file__).resolve().parents[1] / "cases").glob("*.toml"))


@pytest.fixture(scope="module")
def demo_runs(tmp_path_factory) -> dict[str, Path]:
    """Each demo case of cases/ run once (and sized, where it has [sizing])."""
    folder = tmp_path_factory.mktemp("demo")
    found = {}
    for case in DEMO_CASES:
        assert main(["run", str(case), "--archive", str(folder / "runs"), "--quiet"]) == 0
        (found[case.stem],) = (folder / "runs").glob(f"{case.stem}-2*.nc")
        if load_case(case).sizing is not None:
            assert main(["size", str(case), "--archive", str(folder / "sized"), "--quiet"]) in (0, 1)
            (found[f"{case.stem} sizing"],) = (folder / "sized").glob(f"{case.stem}-size-*.nc")
    return found


def test_every_kind_on_every_demo_case(demo_runs, tmp_path, capsys):
    """Each demo run gives a PNG of the expected size for carpet, surfaces and
    profiles, each sizing result one for sizing; every axis label ends with a
    unit and every figure carries the caution."""
    assert len(demo_runs) >= len(DEMO_CASES)
    for name, run in demo_runs.items():
        kinds = ("sizing",) if name.endswith(" sizing") else RUN_KINDS
        ds = plots.open_run(run)
        for kind in kinds:
            out = tmp_path / f"{run.stem}-{kind}.png"
            assert main(["plot", str(run), "--kind", kind, "-o", str(out)]) == 0, (name, kind)
            assert_png(out)
            fig = plots.plot(ds, kind)
            assert_labels_have_units(fig)
            assert any(ds.attrs["caution"][:40] in text for text in figure_texts(fig)), (name, kind)
    capsys.readouterr()


# --------------------------------------------------------------------------- #
# every kind, both geometries, through the command line


@pytest.mark.parametrize("geometry", ["wall", "pipe"])
@pytest.mark.parametrize("kind", RUN_KINDS)
def test_cli_writes_png_of_expected_size(runs, tmp_path, capsys, geometry, kind):
    out = tmp_path / f"{geometry}-{kind}.png"
    assert main(["plot", str(runs[geometry]), "--kind", kind, "-o", str(out)]) == 0
    assert str(out) in capsys.readouterr().out
    assert_png(out)


@pytest.mark.parametrize("geometry", ["wall", "pipe"])
@pytest.mark.parametrize("kind", RUN_KINDS)
def test_figures_have_units_caution_and_title(runs, geometry, kind):
    ds = plots.open_run(runs[geometry])
    fig = plots.plot(ds, kind)
    assert_labels_have_units(fig)
    texts = figure_texts(fig)
    assert ds.attrs["caution"] in texts
    assert ds.attrs["title"] in texts


def test_default_name_next_to_the_run_and_no_overwrite(run_copy, capsys):
    run = run_copy("wall")
    assert main(["plot", str(run), "--kind", "carpet"]) == 0
    expected = run.with_name(f"{run.stem}-carpet.png")
    assert_png(expected)
    before = expected.read_bytes()
    capsys.readouterr()
    # a second plot of the same kind goes to the next free name; the first is untouched
    assert main(["plot", str(run), "--kind", "carpet"]) == 0
    assert_png(run.with_name(f"{run.stem}-carpet-2.png"))
    assert expected.read_bytes() == before


def test_default_kind_is_surfaces(run_copy):
    run = run_copy("pipe")
    assert main(["plot", str(run)]) == 0
    assert_png(run.with_name(f"{run.stem}-surfaces.png"))


def test_o_refuses_an_existing_file(runs, tmp_path, capsys):
    out = tmp_path / "taken.png"
    out.write_bytes(b"someone else's figure")
    assert main(["plot", str(runs["wall"]), "--kind", "surfaces", "-o", str(out)]) == 2
    err = capsys.readouterr().err
    assert str(out) in err and "-o" in err and "exists" in err
    assert out.read_bytes() == b"someone else's figure"


def test_o_refuses_an_unknown_format(runs, tmp_path, capsys):
    out = tmp_path / "figure.jpg"
    assert main(["plot", str(runs["wall"]), "-o", str(out)]) == 2
    assert "-o" in capsys.readouterr().err
    assert not out.exists()


@pytest.mark.parametrize(
    "suffix, check",
    [
        (".svg", lambda head: head.lstrip().startswith(b"<?xml") and b"<svg" in head),
        (".pdf", lambda head: head.startswith(b"%PDF-")),
        (".PNG", lambda head: head.startswith(PNG_MAGIC)),
    ],
)
def test_format_follows_the_extension(runs, tmp_path, suffix, check):
    out = tmp_path / f"figure{suffix}"
    assert main(["plot", str(runs["pipe"]), "--kind", "profiles", "-o", str(out)]) == 0
    assert check(out.read_bytes()[:2048])
    assert not list(tmp_path.glob(".*"))  # no temporary file left behind


def test_missing_or_unreadable_run_is_bad_input(tmp_path, capsys):
    assert main(["plot", str(tmp_path / "nothing.nc")]) == 2
    bad = tmp_path / "bad.nc"
    bad.write_text("not netCDF", encoding="utf-8")
    assert main(["plot", str(bad)]) == 2
    err = capsys.readouterr().err
    assert "nothing.nc" in err and "bad.nc" in err


# --------------------------------------------------------------------------- #
# what each figure shows


def test_units_come_from_the_attributes(runs):
    ds = plots.open_run(runs["wall"])
    ds["temperature"].attrs["units"] = "degF"
    ds["heat_flow_inside"].attrs["units"] = "kW m-2"
    carpet = plots.plot_carpet(ds)
    assert "temperature [°F]" in [ax.get_ylabel() for ax in carpet.axes]
    surfaces = plots.plot_surfaces(ds)
    assert any("[kW/m²]" in ax.get_ylabel() for ax in surfaces.axes)


def test_heat_flow_units_follow_the_geometry(runs):
    wall = plots.plot_surfaces(plots.open_run(runs["wall"]))
    pipe = plots.plot_surfaces(plots.open_run(runs["pipe"]))
    assert "heat flow, positive outward [W/m²]" in [ax.get_ylabel() for ax in wall.axes]
    assert "heat flow, positive outward [W/m]" in [ax.get_ylabel() for ax in pipe.axes]


def test_carpet_names_layers_draws_faces_and_labels_radius(runs):
    ds = plots.open_run(runs["pipe"])
    fig = plots.plot_carpet(ds)
    ax = fig.axes[0]
    names = [t.get_text() for t in ax.texts]
    assert names == ["steel pipe (steel)", "air gap", "mineral wool"]
    # the steel/gap/wool faces (the gap has no thickness: one line at 6 mm) and the wool's outer face is the axis end
    faces = sorted(line.get_ydata()[0] for line in ax.lines)
    assert faces == pytest.approx([6.0])
    assert ax.get_ylim() == pytest.approx((0.0, 46.0))
    assert [c.get_ylabel() for c in ax.child_axes] == ["radius [mm]"]
    assert fig.axes[0].collections[0].get_cmap().name == plots.CARPET_CMAP


def test_carpet_cells_are_the_runs_own_x_bounds(runs):
    """The carpet draws each cell between the faces the solver wrote (``x_bounds``),
    not faces rebuilt from the centres: a doctored ``x_bounds`` moves the drawn
    cells with it.  Exact (1e-9 mm): the edges are the stored numbers times 1000."""
    ds = plots.open_run(runs["pipe"])
    bounds = ds["x_bounds"].values * 1000.0
    edges = _carpet_cell_edges(plots.plot_carpet(ds))
    np.testing.assert_allclose(edges, np.concatenate(([bounds[0, 0]], bounds[:, 1])), rtol=0, atol=1e-9)
    doctored = ds.copy()
    doctored["x_bounds"] = ds["x_bounds"] + 1e-4  # every face 0.1 mm outward
    edges = _carpet_cell_edges(plots.plot_carpet(doctored))
    np.testing.assert_allclose(edges, np.concatenate(([bounds[0, 0]], bounds[:, 1])) + 0.1, rtol=0, atol=1e-9)


def _carpet_cell_edges(fig) -> np.ndarray:
    """The y edges of every cell the carpet drew [mm], inside to outside (one mesh per layer)."""
    meshes = fig.axes[0].collections
    edges = [m.get_coordinates()[:, 0, 1] for m in meshes if hasattr(m, "get_coordinates")]
    return np.unique(np.round(np.concatenate(edges), 9))


@pytest.mark.parametrize("name", ["wall", "pipe"])
def test_old_run_files_without_x_bounds_rebuild_the_same_faces(runs, name):
    """The fallback for run files written before ``x_bounds``: faces rebuilt from the
    cell centres (each the midpoint of its faces) and the layer faces agree with the
    faces the solver wrote to round-off (1e-12 m on a few hundred mm)."""
    ds = plots.open_run(runs[name])
    old = ds.drop_vars("x_bounds")
    np.testing.assert_allclose(plots.cell_bounds(old), ds["x_bounds"].values, rtol=0, atol=1e-12)
    assert len(_carpet_cell_edges(plots.plot_carpet(old))) == ds.sizes["x"] + 1


def test_layer_names_need_no_case_text(runs):
    """Without the stored case text the bands are named by the material coordinate;
    a ``layer_name`` variable (one per layer, air gaps included) names them without it."""
    ds = plots.open_run(runs["pipe"])
    del ds.attrs["case"]
    assert [b.label for b in plots.layer_bands(ds)] == ["steel", "air gap", "mineral-wool"]
    ds["layer_name"] = ("layer_number", np.array(["steel pipe", "", "mineral wool"], dtype=object))
    assert [b.label for b in plots.layer_bands(ds)] == ["steel pipe (steel)", "air gap", "mineral wool"]


def test_carpet_planar_has_no_radius_axis(runs):
    fig = plots.plot_carpet(plots.open_run(runs["wall"]))
    assert fig.axes[0].child_axes == []
    assert [t.get_text() for t in fig.axes[0].texts] == ["brick", "mineral wool"]


def test_surfaces_draws_what_the_run_has_with_distinct_styles(runs):
    ds = plots.open_run(runs["wall"])
    fig = plots.plot_surfaces(ds)
    lines = [line for ax in fig.axes for line in ax.lines if not line.get_label().startswith("_")]
    labels = [line.get_label() for line in lines]
    assert labels == [
        "inside air", "inside surface", "outside surface", "outside air", "outside sol-air", "outside dew point",
        "heat flow, inside surface (right axis)", "heat flow, outside surface (right axis)",
    ]
    # every line is told apart by its dash pattern and marker too, not by colour alone
    looks = {(line.get_marker(), line.get_markerfacecolor() == "white", tuple(line._unscaled_dash_pattern[1] or ()))
             for line in lines}
    assert len(looks) == len(lines)
    no_air = ds.drop_vars(["air_temperature_inside", "air_temperature_outside", "sol_air_temperature_outside",
                           "dew_point_outside"])
    fig = plots.plot_surfaces(no_air)
    labels = [line.get_label() for ax in fig.axes for line in ax.lines if not line.get_label().startswith("_")]
    assert "inside air" not in labels and "inside surface" in labels
    assert fig.axes[0].get_legend() is not None


def test_profiles_default_five_times_and_named_bands(runs):
    ds = plots.open_run(runs["wall"])
    fig = plots.plot_profiles(ds)
    ax = fig.axes[0]
    assert len(ax.lines) - sum(1 for line in ax.lines if line.get_label().startswith("_")) == 5
    assert {"brick", "mineral wool"} <= set(t.get_text() for t in ax.texts)
    # each profile runs from the inside surface (x = 0) to the outside surface (150 mm)
    first = next(line for line in ax.lines if not line.get_label().startswith("_"))
    assert first.get_xdata()[0] == 0.0 and first.get_xdata()[-1] == pytest.approx(150.0)
    assert first.get_ydata()[0] == pytest.approx(float(ds["surface_temperature_inside"][0]))
    assert ax.get_legend() is not None


def test_profiles_at_chosen_times(runs, tmp_path, capsys):
    ds = plots.open_run(runs["wall"])
    fig = plots.plot_profiles(ds, ["2026-07-20T06:00", "2026-07-20T15:00Z,2026-07-20T20:00+02:00"])
    labels = [line.get_label() for line in fig.axes[0].lines if not line.get_label().startswith("_")]
    # +02:00 is converted to UTC
    assert labels == ["2026-07-20 06:00 UTC", "2026-07-20 15:00 UTC", "2026-07-20 18:00 UTC"]
    out = tmp_path / "p.png"
    assert main(["plot", str(runs["wall"]), "--kind", "profiles", "--times", "2026-07-20T12:00", "-o", str(out)]) == 0
    assert_png(out)
    capsys.readouterr()
    for bad in ("2026-08-01T00:00", "noon"):
        assert main(["plot", str(runs["wall"]), "--kind", "profiles", "--times", bad, "-o", str(tmp_path / "q.png")]) == 2
        assert "--times" in capsys.readouterr().err
    with pytest.raises(CaseError, match="outside the run"):
        plots.select_times(ds, ["2025-01-01T00:00"])


def test_pipe_profiles_label_the_radius(runs):
    fig = plots.plot_profiles(plots.open_run(runs["pipe"]))
    assert [c.get_xlabel() for c in fig.axes[0].child_axes] == ["radius [mm]"]


# --------------------------------------------------------------------------- #
# sizing


def test_sizing_figure_limits_and_recommendation():
    ds = sizing_dataset()
    fig = plots.plot_sizing(ds)
    assert_labels_have_units(fig)
    assert ds.attrs["caution"] in figure_texts(fig) and "Synthetic sizing" in figure_texts(fig)
    assert [ax.get_ylabel() for ax in fig.axes] == ["surface temperature [°C]", "heat loss [W/m]", "freeze time [h]"]
    assert fig.axes[-1].get_xlabel() == "insulation thickness [mm]"
    legend = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    for expected in ("touch limit 50 °C", "dew point 11.5 °C", "dew point + 1 K margin", "heat-loss budget 200 W/m",
                     "required 12 h", "recommended 40 mm", "passes every criterion", "fails a criterion"):
        assert expected in legend
    # the recommendation is a vertical line at 40 mm on every panel
    for ax in fig.axes:
        assert any(np.allclose(line.get_xdata(), 40.0) for line in ax.lines)


def test_long_caution_keeps_its_own_strip(tmp_path):
    """The joined sizing cautions wrap onto several lines below the axes, not over them."""
    ds = sizing_dataset()
    fig = plots.plot_sizing(ds)
    path = plots.save_figure(fig, tmp_path / "sizing.png")
    assert_png(path)
    renderer = fig.canvas.get_renderer()
    caution = next(t for t in fig.texts if t.get_text() == ds.attrs["caution"])
    top_of_caution = caution.get_window_extent(renderer).y1
    lowest_axes = min(ax.get_tightbbox(renderer).y0 for ax in fig.axes)
    assert top_of_caution < lowest_axes


def test_sizing_of_a_real_size_run(write_case, tmp_path, capsys):
    """The Dataset `layers size` writes plots with its limits and recommendation."""
    from layers import sizing

    ds = sizing.size(load_case(write_case(SIZING_CASE, "sizing.toml")))
    fig = plots.plot_sizing(ds)
    assert_labels_have_units(fig)
    assert ds.attrs["caution"] in figure_texts(fig)
    legend = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert "touch limit 50 °C" in legend and "heat-loss budget 150 W/m" in legend
    assert any(text.startswith("dew point ") for text in legend)
    if np.isfinite(ds.attrs["recommended_thickness"]):
        assert f"recommended {ds.attrs['recommended_thickness'] * 1000:g} mm" in legend
    path = tmp_path / "size.nc"
    ds.to_netcdf(path)
    assert main(["plot", str(path), "--kind", "sizing", "-o", str(tmp_path / "size.svg")]) == 0


def test_sizing_accepts_missing_optional_parts():
    fig = plots.plot_sizing(sizing_dataset(full=False))
    assert len(fig.axes) == 2
    assert_labels_have_units(fig)
    assert CAUTION in figure_texts(fig)
    assert "no candidate passes every criterion" not in figure_texts(fig)


def test_sizing_says_when_no_candidate_passes():
    ds = sizing_dataset()
    ds.attrs["recommended_thickness"] = float("nan")
    for name in [n for n in ds.data_vars if n.startswith("passes_")]:
        ds[name] = ds[name] & False
    fig = plots.plot_sizing(ds)
    assert "no candidate passes every criterion" in figure_texts(fig)
    assert not any("recommended" in t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts())


def test_sizing_from_a_file_through_the_command_line(tmp_path, capsys):
    path = tmp_path / "sizing.nc"
    sizing_dataset().to_netcdf(path)
    out = tmp_path / "sizing.pdf"
    assert main(["plot", str(path), "--kind", "sizing", "-o", str(out)]) == 0
    assert out.read_bytes()[:5] == b"%PDF-"
    assert main(["plot", str(path), "--kind", "sizing"]) == 0
    assert_png(tmp_path / "sizing-sizing.png")
    assert main(["plot", str(path)]) == 0  # a sizing file's default kind is sizing
    assert_png(tmp_path / "sizing-sizing-2.png")
    capsys.readouterr()
    # a sizing Dataset is not a run, and a run is not a sizing Dataset
    assert main(["plot", str(path), "--kind", "carpet"]) == 2
    assert "--kind sizing" in capsys.readouterr().err


def test_run_is_not_a_sizing_dataset(runs, tmp_path, capsys):
    assert main(["plot", str(runs["wall"]), "--kind", "sizing", "-o", str(tmp_path / "s.png")]) == 2
    assert "--kind" in capsys.readouterr().err


# --------------------------------------------------------------------------- #
# units and colours


@pytest.mark.parametrize(
    "units, shown",
    [("degC", "°C"), ("W m-2", "W/m²"), ("W m-1", "W/m"), ("W", "W"), ("J m-2", "J/m²"),
     ("W m-2 K-1", "W/(m²·K)"), ("kg m-3", "kg/m³"), ("h", "h"), ("1", "-"), ("W/(m*K)", "W/(m*K)")],
)
def test_pretty_units(units, shown):
    assert plots.pretty_units(units) == shown


def test_palette_reads_in_greyscale_by_style():
    # five colours, each with its own dash pattern and marker, so no two lines depend on hue alone
    assert len(plots.PALETTE) == len(plots.LINESTYLES) == len(plots.MARKERS) == 5
    assert len({str(s) for s in plots.LINESTYLES}) == 5
    assert len(set(plots.MARKERS)) == 5
    assert len(set(plots.PALETTE)) == 5


def test_comparison_figure_has_units_caution_and_a_line_per_run(runs, tmp_path):
    from layers.comparison import compare_runs

    copy = tmp_path / "copy.nc"
    shutil.copyfile(runs["wall"], copy)
    comparison = compare_runs([runs["wall"], copy])
    fig = plots.plot_comparison(comparison.dataset, ["A: first", "B: second"])
    assert_labels_have_units(fig)
    assert any(CAUTION[:40] in text for text in figure_texts(fig))
    assert all(len(ax.lines) == 2 for ax in fig.axes)


def test_a_chilled_line_s_sizing_plot_says_heat_gain(tmp_path):
    """A chilled-water line takes heat in (heat_flow < 0, the contract's sign:
    positive from inside to outside): its sizing panel and budget say heat gain,
    not heat loss (the budget bounds the magnitude either way)."""
    from pathlib import Path

    from layers.case import load_case
    from layers.sizing import size

    ds = size(load_case(Path(__file__).resolve().parents[1] / "cases" / "chilled-water-condensation.toml"))
    assert (ds["heat_flow"].values < 0).all()
    fig = plots.plot_sizing(ds)
    labels = [ax.get_ylabel() for ax in fig.axes]
    assert "heat gain [W/m]" in labels and not any("loss" in text for text in labels)
    legend_texts = [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]
    assert not any("loss" in text for text in legend_texts)
    fig.savefig(tmp_path / "chilled.png")
