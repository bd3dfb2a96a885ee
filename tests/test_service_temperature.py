"""Maximum service temperatures of the library's insulation materials are checked.

The limits themselves are typical values tagged "from memory" in
layers/data/materials.toml; what is tested here is that a run and a sizing
read them.
"""

from __future__ import annotations

import textwrap
import tomllib

import numpy as np
import pytest

from layers.case import parse_case
from layers.simulation import simulate
from layers.sizing import size

HOT_PIR = """
[geometry]
kind = "cylinder"
inner_radius = "30 mm"
[[layers]]
material = "pir"
thickness = "40 mm"
[inside]
type = "temperature"
surface_temperature = "180 degC"
[outside]
type = "film"
air_temperature = "20 degC"
film_coefficient = "10 W/(m2*K)"
[time]
duration = "2 h"
step = "10 min"
initial = "20 degC"
[sizing]
layer = 1
thicknesses = ["20 mm", "40 mm", "80 mm"]
max_surface_temperature = "50 degC"
"""


def _case(text: str):
    text = textwrap.dedent(text)
    return parse_case(tomllib.loads(text), text=text)


def test_a_run_that_overheats_its_insulation_warns_naming_layer_and_temperature():
    """PIR (limit 100 degC in the library) on a 180 degC line: the run warns
    with the layer, the material, the highest temperature and when, and the
    result records it."""
    with pytest.warns(UserWarning, match=r"layer 1 \(pir\) reaches 180\.0 degC at .*above its maximum service temperature of 100 degC"):
        ds = simulate(_case(HOT_PIR))
    assert "pir" in ds.attrs["service_temperature_exceeded"]


def test_sizing_refuses_candidates_that_overheat_their_insulation():
    """Before this check, sizing recommended 20 mm of PIR on a 180 degC line
    (its touch limit is met); now no candidate passes, since the PIR face at
    the pipe is at 180 degC whatever its thickness."""
    ds = size(_case(HOT_PIR))
    assert bool(ds["passes_max_surface_temperature"][0])
    assert not ds["passes_service_temperature"].values.any()
    assert np.isnan(ds.attrs["recommended_thickness"])
    np.testing.assert_allclose(ds["margin_service_temperature"].values, 100.0 - 180.0, atol=1e-6)


def test_a_material_within_its_limit_passes():
    """Mineral wool (limit 250 degC in the library) on the same line passes the
    service check and keeps the touch criterion as before."""
    ds = size(_case(HOT_PIR.replace('"pir"', '"mineral-wool"')))
    assert ds["passes_service_temperature"].values.all()
    assert ds.attrs["recommended_thickness"] == pytest.approx(float(ds["thickness"][np.argmax(ds["passes_all"].values)]))


def test_sizing_stores_its_film_coefficients_and_the_units_of_its_limits():
    """The film each candidate was sized with is in the file (here the fixed
    10 W/(m2 K) of the case: exact), and every limit attribute names its unit."""
    ds = size(_case(HOT_PIR.replace('"pir"', '"mineral-wool"')))
    np.testing.assert_allclose(ds["film_coefficient_outside"].values, 10.0, rtol=1e-12)
    assert ds["film_coefficient_outside"].attrs["units"] == "W m-2 K-1"
    assert ds.attrs["max_surface_temperature_units"] == "degC" and ds.attrs["recommended_thickness_units"] == "m"
