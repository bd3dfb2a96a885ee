"""The surfaces figure of long runs: daily bands, a window (--from / --to), the start's heat-flow jump off scale.

Invented cases only: a year of a two-layer wall under a generated daily cycle
started from a cold wall (so the first heat-flow samples jump), and a few
hours of a steel pipe warming up from room temperature.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import numpy as np
import pytest

from layers import plots
from layers.case import load_case
from layers.cli import main
from layers.results import write_new
from layers.simulation import simulate

#: A year of an invented wall, 2-hourly (the exact path keeps it near a second),
#: started at -5 degC against 20 degC inside: the first heat-flow samples jump.
YEAR = """
title = "Invented year wall"

[[layers]]
name = "brick"
material = "brick"
thickness = "200 mm"

[[layers]]
name = "mineral wool"
material = "mineral-wool"
thickness = "100 mm"

[series.cycles.outdoor]
mean = "10 degC"
amplitude = "6 K"
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
solar_irradiance = "150 W/m2"

[time]
start = "2026-01-01T00:00"
duration = "365 d"
step = "2 h"
output_every = "2 h"
initial = "-5 degC"

[mesh]
max_cell = "50 mm"
"""

#: Three hours of an invented steel pipe in mineral wool, 150 degC inside, started at 20 degC.
PIPE = """
title = "Invented pipe warm-up"

[geometry]
kind = "cylinder"
inner_radius = "51 mm"

[[layers]]
name = "steel pipe"
material = "steel"
thickness = "6 mm"

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
output_every = "10 min"
initial = "20 degC"

[mesh]
max_cell = "10 mm"
"""


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, Path]:
    folder = tmp_path_factory.mktemp("long")
    paths = {}
    for name, text in (("year", YEAR), ("pipe", PIPE)):
        case_path = folder / f"{name}.toml"
        case_path.write_text(textwrap.dedent(text), encoding="utf-8")
        paths[name] = write_new(simulate(load_case(case_path)), folder / f"{name}.nc")
    return paths


def subtitle(fig) -> str:
    return fig.texts[1].get_text()


def bands(fig) -> list:
    return [c for ax in fig.axes for c in ax.collections if c.get_gid() == "daily band"]


def mean_lines(fig) -> list:
    return [line for ax in fig.axes for line in ax.lines if not line.get_label().startswith("_")]


def test_a_year_is_drawn_as_daily_bands(runs):
    ds = plots.open_run(runs["year"])
    fig = plots.plot_surfaces(ds)
    assert "daily bands" in subtitle(fig)
    lines = mean_lines(fig)
    # one band and one daily-mean line per quantity the run has
    assert len(bands(fig)) == len(lines) == 7
    # a point a day (the part-days at the ends left out), not one per sample
    assert all(360 <= line.get_xdata().size <= 366 for line in lines)
    # temperatures above, heat flows in their own panel below: no right-hand axis
    assert len(fig.axes) == 2 and "heat flow" in fig.axes[1].get_ylabel()


def test_daily_bands_of_a_known_series():
    # two whole days and a 3-hour tail: the tail is too short to be a day
    time = np.datetime64("2026-03-01T00:00") + np.arange(51) * np.timedelta64(1, "h")
    values = np.concatenate((np.arange(24.0), 100.0 + np.arange(24.0), [7.0, 8.0, 9.0]))
    found = plots.daily_bands(time, values)
    assert found.day.astype("datetime64[h]").tolist() == [np.datetime64("2026-03-01T12", "h").item(),
                                                          np.datetime64("2026-03-02T12", "h").item()]
    np.testing.assert_allclose(found.low, [0.0, 100.0])
    np.testing.assert_allclose(found.high, [23.0, 123.0])
    np.testing.assert_allclose(found.mean, [11.5, 111.5])  # mean of 0..23, exact in binary


def test_colours_are_one_per_trace():
    assert len(set(plots.SURFACE_COLOURS.values())) == len(plots.SURFACE_COLOURS)
    outside = {plots.SURFACE_COLOURS[n] for n in
               ("surface_temperature_outside", "air_temperature_outside", "sol_air_temperature_outside")}
    assert len(outside) == 3


def test_the_start_jump_is_left_off_the_heat_flow_scale_and_marked(runs):
    for name in ("year", "pipe"):
        ds = plots.open_run(runs[name])
        fig = plots.plot_surfaces(ds)
        flow_ax = fig.axes[1]
        low, high = flow_ax.get_ylim()
        first = float(ds["heat_flow_inside"].values[0])
        assert not low <= first <= high, name
        assert "off scale" in subtitle(fig)
        assert any("off scale" in t.get_text() for ax in fig.axes for t in ax.texts), name
        # every later sample is on the scale
        later = np.asarray(ds["heat_flow_inside"].values[plots.SPIKE_SAMPLES:], dtype=float)
        assert low <= later.min() and later.max() <= high


def test_a_smooth_start_keeps_every_sample_on_scale():
    t = np.linspace(0.0, 6.0 * np.pi, 200)
    assert plots.leading_spike(5.0 * np.sin(t)) == 0
    assert plots.leading_spike(np.concatenate(([400.0, 300.0], 5.0 * np.sin(t)))) == 2


def test_legend_is_inside_the_figure_and_clear_of_the_caution(runs):
    for name in ("year", "pipe"):
        fig = plots.plot_surfaces(plots.open_run(runs[name]))
        renderer = fig.canvas.get_renderer()
        fig.canvas.draw()
        (legend,) = [a.get_legend() for a in fig.axes if a.get_legend() is not None]
        box = legend.get_window_extent(renderer)
        frame = fig.bbox
        assert frame.x0 <= box.x0 and box.x1 <= frame.x1 and frame.y0 <= box.y0 and box.y1 <= frame.y1, name
        caution = [t for t in fig.texts if t.get_gid() == "caution"][0].get_window_extent(renderer)
        assert box.y0 > caution.y1, name
        # and below the lowest panel's time labels (tick labels and the axis label)
        lowest = min(fig.axes, key=lambda ax: ax.get_window_extent(renderer).y0)
        labels = [lowest.xaxis.label, *lowest.get_xticklabels()]
        assert box.y1 < min(t.get_window_extent(renderer).y0 for t in labels if t.get_text()), name


def test_from_to_pick_a_window_with_plain_traces(runs, tmp_path, capsys):
    out = tmp_path / "window.png"
    assert main(["plot", str(runs["year"]), "--kind", "surfaces", "--from", "2026-07-01", "--to", "2026-07-15",
                 "-o", str(out)]) == 0
    assert out.exists()
    ds = plots.open_run(runs["year"])
    fig = plots.plot_surfaces(ds, "2026-07-01", "2026-07-15T00:00Z")
    assert "daily bands" not in subtitle(fig) and "2026-07-01 00:00 to 2026-07-15 00:00 UTC" in subtitle(fig)
    assert not bands(fig)
    lines = mean_lines(fig)
    assert {line.get_xdata().size for line in lines} == {14 * 12 + 1}  # every 2-hourly sample, both ends kept
    # a window in the middle of the run does not take its first sample for the start's jump
    assert "off scale" not in subtitle(fig)
    # a window of the threshold or longer is banded again
    fig = plots.plot_surfaces(ds, "2026-03-01", "2026-04-15")
    assert "daily bands" in subtitle(fig)
    capsys.readouterr()


@pytest.mark.parametrize("args, option, words", [
    (["--from", "yesterday"], "--from", "cannot read"),
    (["--to", "2026-13-01"], "--to", "cannot read"),
    (["--from", "2028-01-01"], "--from", "after the end of the run"),
    (["--to", "2020-01-01"], "--to", "before the start of the run"),
    (["--from", "2026-05-02", "--to", "2026-05-01"], "--to", "empty"),
    (["--from", "2026-05-01T00:30", "--to", "2026-05-01T01:30"], "--from", "no output time"),
])
def test_bad_windows_are_one_line_and_exit_2(runs, tmp_path, capsys, args, option, words):
    out = tmp_path / "bad.png"
    assert main(["plot", str(runs["year"]), "--kind", "surfaces", *args, "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and option in err and words in err and "Traceback" not in err
    assert not out.exists()


@pytest.mark.parametrize("kind", ["carpet", "profiles"])
def test_other_kinds_refuse_a_window(runs, tmp_path, capsys, kind):
    out = tmp_path / "bad.png"
    assert main(["plot", str(runs["pipe"]), "--kind", kind, "--from", "2026-01-05T07:00", "-o", str(out)]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "--from" in err and "surfaces" in err
    assert not out.exists()
