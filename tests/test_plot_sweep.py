"""Figures of sweep files (layers/plots.py, ``layers plot SWEEP.nc``): the map of a
per-point result over two sweep dimensions, the line of a one-dimensional sweep,
the ``--variable`` choice, and the one-line refusals of kinds that draw one run.

The sweeps are small (a few points of a two-day wall under an invented hourly
series, the exact path), so the whole file runs in a few seconds.
"""

from __future__ import annotations

import shutil
import textwrap
import tomllib
from pathlib import Path

import numpy as np
import pytest

from layers import CAUTION, plots
from layers.case import parse_case
from layers.cli import main
from layers.results import write_new
from layers.sweeps import sweep
from tests.test_exact import WALL, _weather

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"
#: FIGSIZE x DPI: 10 in x 120 dpi wide, 6 in x 120 dpi high.
PNG_SHAPE = (720, 1200)

TWO_DIMENSIONS = """
[[sweep]]
name = "wool"
key = "layers.3.thickness"
values = ["60 mm", "120 mm", "200 mm"]
[[sweep]]
name = "absorptance"
key = "outside.solar_absorptance"
range = {from = 0.3, to = 0.9, count = 2}
"""

ONE_DIMENSION = """
[[sweep]]
name = "wool"
key = "layers.3.thickness"
values = ["60 mm", "120 mm", "200 mm", "300 mm"]
"""

THREE_DIMENSIONS = TWO_DIMENSIONS + """
[[sweep]]
name = "inside_air"
key = "inside.air_temperature"
values = ["18 degC", "22 degC"]
"""


def _sweep_file(folder: Path, name: str, tables: str) -> Path:
    """A sweep of the two-day test wall written as ``<name>.nc`` in ``folder``."""
    text = textwrap.dedent(WALL.format(step="1 h", initial="steady", scheme="auto") + tables)
    text = text.replace('duration = "5 d"', 'duration = "2 d"')
    text = 'title = "Plot test sweep"\n' + text
    case = parse_case(tomllib.loads(text), text=text, base_dir=folder, file=str(folder / f"{name}.toml"))
    return write_new(sweep(case), folder / f"{name}.nc")


@pytest.fixture(scope="module")
def sweeps(tmp_path_factory) -> dict[str, Path]:
    """A 3 x 2, a 4-point and a 3 x 2 x 2 sweep, written once."""
    folder = tmp_path_factory.mktemp("sweeps")
    _weather(folder)
    return {
        "two": _sweep_file(folder, "two", TWO_DIMENSIONS),
        "one": _sweep_file(folder, "one", ONE_DIMENSION),
        "three": _sweep_file(folder, "three", THREE_DIMENSIONS),
    }


@pytest.fixture
def copy_of(sweeps, tmp_path):
    """A private copy of a sweep file, so the default figure names next to it do not collide."""

    def copy(name: str) -> Path:
        target = tmp_path / f"{name}-sweep.nc"
        shutil.copyfile(sweeps[name], target)
        return target

    return copy


def assert_png(path: Path) -> None:
    """A PNG of the figure's size with something drawn in it (not one flat colour)."""
    import matplotlib.image as mpimg

    assert path.read_bytes()[:8] == PNG_MAGIC
    assert path.stat().st_size > 20_000  # a blank 1200 x 720 PNG compresses to a few kB
    image = mpimg.imread(path)
    assert image.shape[:2] == PNG_SHAPE
    assert float(image[..., :3].std()) > 0.05


def figure_texts(fig) -> list[str]:
    texts = [t.get_text() for t in fig.texts]
    for ax in fig.axes:
        texts.extend(t.get_text() for t in ax.texts)
    return texts


def one_line_error(capsys, *words: str) -> str:
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert "Traceback" not in captured.err and "internal error" not in captured.err
    for word in words:
        assert word in lines[0], (word, lines[0])
    return lines[0]


# --------------------------------------------------------------------------- #
# the default figure of a sweep file


def test_default_kind_for_a_sweep_file_writes_the_map(copy_of, capsys):
    run = copy_of("two")
    assert main(["plot", str(run)]) == 0
    expected = run.with_name(f"{run.stem}-sweep.png")
    assert str(expected) in capsys.readouterr().out
    assert_png(expected)


def test_the_map_has_a_cell_per_point_labelled_axes_colour_bar_and_caution(sweeps):
    ds = plots.open_run(sweeps["two"])
    fig = plots.plot(ds, "sweep")
    ax, bar = fig.axes
    assert ax.get_xlabel() == "wool (layers.3.thickness) [mm]"
    assert ax.get_ylabel().startswith("absorptance (outside.solar_absorptance) [")
    assert [t.get_text() for t in ax.get_xticklabels()] == ["60", "120", "200"]
    assert [t.get_text() for t in ax.get_yticklabels()] == ["0.3", "0.9"]
    assert bar.get_ylabel().endswith("[W/m²]")
    # every cell carries its value, to the figure's three significant digits
    mean = ds["heat_flow_inside_mean"].values
    cells = [t.get_text() for t in ax.texts]
    assert len(cells) == mean.size
    np.testing.assert_allclose([float(c) for c in cells], mean.ravel(), rtol=0, atol=0.006)
    texts = figure_texts(fig)
    assert CAUTION in texts and "Plot test sweep" in texts
    assert any("heat_flow_inside_mean" in t for t in texts)


def test_a_one_dimensional_sweep_is_a_line_with_markers(sweeps, tmp_path, capsys):
    ds = plots.open_run(sweeps["one"])
    fig = plots.plot_sweep(ds)
    (ax,) = fig.axes
    (line,) = ax.lines
    np.testing.assert_array_equal(line.get_xdata(), [60.0, 120.0, 200.0, 300.0])
    np.testing.assert_allclose(line.get_ydata(), ds["heat_flow_inside_mean"].values)
    assert line.get_marker() not in (None, "None", "") and line.get_linestyle() != "None"
    assert not ax.collections  # no map
    assert ax.get_xlabel() == "wool (layers.3.thickness) [mm]"
    assert ax.get_ylabel().endswith("[W/m²]")
    out = tmp_path / "line.png"
    assert main(["plot", str(sweeps["one"]), "-o", str(out)]) == 0
    assert_png(out)
    capsys.readouterr()


def test_three_dimensions_map_the_first_two_and_say_so(sweeps):
    ds = plots.open_run(sweeps["three"])
    fig = plots.plot_sweep(ds)
    assert len(fig.axes[0].texts) == 3 * 2
    assert any("inside_air = 18 °C" in t and "first value" in t for t in figure_texts(fig))


def test_variable_picks_another_result_per_point(sweeps, tmp_path, capsys):
    out = tmp_path / "heat.png"
    assert main(["plot", str(sweeps["two"]), "--variable", "heat_in_inside_total", "-o", str(out)]) == 0
    assert_png(out)
    capsys.readouterr()
    fig = plots.plot_sweep(plots.open_run(sweeps["two"]), "heat_in_inside_total")
    assert fig.axes[1].get_ylabel().endswith("J/m²]")


# --------------------------------------------------------------------------- #
# bad input: one line, exit 2, nothing written


@pytest.mark.parametrize("name", ["no_such_figure", "heat_flow_inside", "wool"])
def test_a_variable_the_map_cannot_show_is_refused(sweeps, tmp_path, capsys, name):
    out = tmp_path / "never.png"
    assert main(["plot", str(sweeps["two"]), "--variable", name, "-o", str(out)]) == 2
    one_line_error(capsys, "--variable", repr(name), "heat_flow_inside_mean", "energy_balance_error")
    assert not out.exists()


@pytest.mark.parametrize("kind", ["surfaces", "carpet", "profiles", "sizing"])
def test_kinds_of_one_run_refuse_a_sweep_file(sweeps, tmp_path, capsys, kind):
    out = tmp_path / "never.png"
    assert main(["plot", str(sweeps["two"]), "--kind", kind, "-o", str(out)]) == 2
    one_line_error(capsys, "--kind", "sweep Dataset", "--kind sweep")
    assert not out.exists()


def test_the_sweep_kind_refuses_a_single_run(tmp_path, capsys):
    _weather(tmp_path)
    text = "title = 'one run'\n" + WALL.format(step="1 h", initial="steady", scheme="auto").replace('"5 d"', '"1 d"')
    (tmp_path / "wall.toml").write_text(text, encoding="utf-8")
    assert main(["run", str(tmp_path / "wall.toml"), "-o", str(tmp_path / "wall.nc"), "--quiet"]) == 0
    capsys.readouterr()
    assert main(["plot", str(tmp_path / "wall.nc"), "--kind", "sweep", "-o", str(tmp_path / "never.png")]) == 2
    one_line_error(capsys, "--kind", "layers sweep")
    assert main(["plot", str(tmp_path / "wall.nc"), "--variable", "heat_flow_inside_mean"]) == 2
    one_line_error(capsys, "--variable", "--kind sweep")
    assert not list(tmp_path.glob("*.png"))
