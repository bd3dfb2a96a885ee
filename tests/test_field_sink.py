"""Flat memory: cell fields streamed to a scratch file as the march makes them
(layers.results.FieldSink) give the same result, bit for bit, as fields kept
in memory, for the stepping march and the exact path alike; the scratch file
is removed afterwards; the checks that read the fields still see them."""

from __future__ import annotations

import textwrap
import tomllib
import warnings

import numpy as np
import pytest
import xarray as xr

from layers.case import parse_case
from layers.cli import main
from layers.results import FieldSink, write_new
from layers.simulation import simulate

WALL = """
title = "streamed wall"
[[layers]]
material = "brick"
thickness = "200 mm"
[[layers]]
material = "mineral-wool"
thickness = "80 mm"
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t"
surface_resistance = "0.04 m2*K/W"
[series.cycles.t]
mean = "0 degC"
amplitude = "8 K"
[time]
duration = "20 d"
step = "{step}"
output_every = "1 h"
initial = "steady"
scheme = "{scheme}"
"""


def _case(step="1 h", scheme="auto"):
    text = textwrap.dedent(WALL.format(step=step, scheme=scheme))
    return parse_case(tomllib.loads(text), text=text)


@pytest.mark.parametrize("scheme", ["tr-bdf2", "exact"])
def test_streamed_fields_equal_fields_in_memory(scheme, tmp_path):
    """480 kept states: more than one block of 256 rows, so the sink is
    flushed in the middle of the run as well as at its end."""
    case = _case(scheme=scheme)
    sink = FieldSink(case.mesh())
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # exact under a generated cycle warns of its interpolation
            kept = simulate(case)
            streamed = simulate(case, field_sink=sink)
        assert sink.rows == kept.sizes["time"] > 256
        assert "temperature" not in streamed  # not in memory: copied from the sink when written
        written = write_new(streamed, tmp_path / "streamed.nc")
        with xr.open_dataset(written) as back:
            np.testing.assert_array_equal(back["temperature"].values, kept["temperature"].values)
            assert back["temperature"].attrs["units"] == "degC"
        for name in ("interface_temperature", "surface_temperature_outside", "heat_flow_inside"):
            np.testing.assert_array_equal(streamed[name].values, kept[name].values)
        assert sink.high == pytest.approx(float(kept["temperature"].max()), abs=0)
    finally:
        sink.close()
    assert not sink.path.exists()


def test_layers_run_streams_and_leaves_no_scratch_file(tmp_path, monkeypatch):
    monkeypatch.setenv("TMPDIR", str(tmp_path / "scratch"))
    (tmp_path / "scratch").mkdir()
    import tempfile

    monkeypatch.setattr(tempfile, "tempdir", None)
    path = tmp_path / "wall.toml"
    path.write_text(textwrap.dedent(WALL.format(step="1 h", scheme="tr-bdf2")))
    assert main(["run", str(path), "--archive", str(tmp_path / "runs"), "-q"]) == 0
    assert list((tmp_path / "scratch").iterdir()) == []
    (written,) = (tmp_path / "runs").glob("wall-*.nc")
    with xr.open_dataset(written) as ds:
        np.testing.assert_array_equal(ds["temperature"].values, simulate(_case(scheme="tr-bdf2"))["temperature"].values)
