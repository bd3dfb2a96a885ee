"""Constructions marched together (:func:`layers.march.march_batch`).

The members are laid end to end as one tridiagonal system with no
conductance between them, so each is the system it is alone; what may differ
is the chord iteration of the stages, which runs until every member has
converged to the march's tolerance (``TOLERANCE`` = 1e-6 K) and refactorises
when any member's boundary conductance moves: a member may take an iteration
more than alone.  Hence the comparisons with lone runs at 1e-6 K (the
contract's limit for sweep points), and the energy balance of each member at
round-off (it is the scheme's own bookkeeping, member by member).
"""

from __future__ import annotations

import numpy as np
import pytest

from layers.api import parse_case
from layers.march import TOLERANCE, UnphysicalState, march, march_batch
from layers.simulation import initial_state, system_for

WALL = """
title = "batch wall (invented)"
[[layers]]
material = "gypsum-plaster"
thickness = "15 mm"
[[layers]]
material = "mineral-wool"
thickness = "{wool}"
[[layers]]
material = "brick"
thickness = "100 mm"
[inside]
type = "film"
air_temperature = "20 degC"
film_coefficient = "auto"
heat_flow_direction = "horizontal"
[outside]
type = "film"
air_temperature = "series:t"
film_coefficient = "auto"
wind_speed = "2 m/s"
emissivity = 0.9
[series.cycles.t]
mean = "-2 degC"
amplitude = "8 K"
peak_hour = 14
[time]
start = "2026-01-10T00:00"
duration = "3 d"
step = "1 h"
initial = "{initial}"
scheme = "{scheme}"
"""

PIPE = """
title = "batch pipe (invented)"
[geometry]
kind = "cylinder"
inner_radius = "30 mm"
[[layers]]
material = "{material}"
thickness = "{thickness}"
[inside]
type = "temperature"
surface_temperature = "series:hot"
[outside]
type = "film"
air_temperature = "15 degC"
film_coefficient = "auto"
emissivity = 0.8
[series.cycles.hot]
mean = "160 degC"
amplitude = "30 K"
peak_hour = 6
[time]
duration = "2 d"
step = "30 min"
initial = "20 degC"
"""


def _built(text: str, scheme: str):
    case = parse_case(text)
    mesh = case.mesh()
    system = system_for(case, mesh)
    initial, _ = initial_state(case, mesh, system, scheme)
    return case, system, initial


def _compare(members, scheme: str, smooth_start: bool = False):
    systems = [m[1] for m in members]
    initials = [m[2] for m in members]
    n = members[0][0].time.n_steps
    step = members[0][0].time.step
    together = march_batch(systems, initials, step, n, scheme=scheme, smooth_start=smooth_start)
    for (case, system, initial), batched in zip(members, together):
        alone = march(system, initial, step, n, scheme=scheme, smooth_start=smooth_start)
        assert batched.temperature.shape == alone.temperature.shape
        np.testing.assert_allclose(batched.temperature, alone.temperature, rtol=0, atol=TOLERANCE)
        np.testing.assert_allclose(batched.interface_temperature, alone.interface_temperature, rtol=0, atol=TOLERANCE)
        for name in ("surface_in", "surface_out"):
            np.testing.assert_allclose(getattr(batched, name), getattr(alone, name), rtol=0, atol=TOLERANCE)
        # heat through each surface: the same to the iteration tolerance times a conductance
        scale = max(abs(alone.heat_in), abs(alone.heat_out))
        assert batched.heat_out == pytest.approx(alone.heat_out, rel=1e-6, abs=1e-9 * scale)
        # each member's own energy balance closes at round-off
        stored = batched.stored_final - batched.stored_initial
        assert abs(batched.heat_in + batched.heat_out - stored) <= 1e-9 * batched.heat_abs
    return together


@pytest.mark.parametrize("scheme", ["backward-euler", "crank-nicolson", "tr-bdf2"])
def test_walls_of_different_cell_counts_equal_their_lone_runs(scheme):
    """Automatic films on both sides (nonlinear), three insulation thicknesses
    (so three cell counts), every scheme of the table."""
    members = [_built(WALL.format(wool=w, initial="steady", scheme=scheme), scheme) for w in ("40 mm", "120 mm", "220 mm")]
    assert len({m[1].mesh.n for m in members}) == 3
    _compare(members, scheme)


def test_a_start_from_a_temperature_is_smoothed_for_every_member():
    """A start from 20 degC into a cold outside: the smoothed start (backward-Euler
    half steps) applies to all members as to each alone."""
    members = [_built(WALL.format(wool=w, initial="20 degC", scheme="tr-bdf2"), "tr-bdf2") for w in ("60 mm", "160 mm")]
    together = _compare(members, "tr-bdf2", smooth_start=True)
    assert together[0].smoothed_steps >= 2


def test_pipes_of_different_diameters_and_conductivity_laws():
    """Cylinders whose outside auto film depends on each one's own diameter
    (each member's exchange evaluated on its own), one with a k(T) law (calcium
    silicate's table) and one with a constant conductivity."""
    members = [
        _built(PIPE.format(material="calcium-silicate", thickness="40 mm"), "tr-bdf2"),
        _built(PIPE.format(material="calcium-silicate", thickness="80 mm"), "tr-bdf2"),
        _built(PIPE.format(material="mineral-wool-pipe", thickness="60 mm"), "tr-bdf2"),
    ]
    assert not members[0][1].constant_k
    together = _compare(members, "tr-bdf2", smooth_start=True)
    # a thicker jacket is cooler: the members did not mix
    assert together[1].surface_out[-1] < together[0].surface_out[-1]


def test_the_member_that_leaves_physics_is_named():
    """An imposed outflow of 500 W/m2 drives a wall below absolute zero; of two
    members with the same boundaries the one that starts at -200 degC gets
    there first, and the batch stops naming it (``member`` = 1)."""
    text = WALL.format(wool="100 mm", initial="10 degC", scheme="tr-bdf2").replace(
        'type = "film"\nair_temperature = "20 degC"\nfilm_coefficient = "auto"\nheat_flow_direction = "horizontal"',
        'type = "flux"\nheat_flux = "-500 W/m2"',
    )
    case, system, initial = _built(text, "tr-bdf2")
    assert case.inside.kind == "flux"
    with pytest.raises(UnphysicalState) as info:
        march_batch([system, system], [initial, initial - 210.0], 3600.0, 72, scheme="tr-bdf2")
    assert info.value.member == 1


def test_a_batch_of_one_is_the_march():
    """``march`` is a batch of one: the same numbers exactly."""
    case, system, initial = _built(WALL.format(wool="90 mm", initial="steady", scheme="tr-bdf2"), "tr-bdf2")
    one = march_batch([system], [initial], 3600.0, 24, scheme="tr-bdf2")[0]
    alone = march(system, initial, 3600.0, 24, scheme="tr-bdf2")
    np.testing.assert_array_equal(one.temperature, alone.temperature)
    assert one.heat_out == alone.heat_out
