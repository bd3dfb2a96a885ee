"""Points marched together by the stepping path (:func:`layers.march.march_batch`
through a sweep) keep what is each point's own: the error of a start that
cannot be made, the convergence warning and count, an automatic film's
error, and memory for the cell fields of points that do not keep them.

Every case here is invented for the test.
"""

from __future__ import annotations

import textwrap
import tomllib
import warnings

import numpy as np
import pytest

import layers.march as march_module
from layers.api import parse_case as parse_text
from layers.case import parse_case
from layers.errors import CaseError
from layers.march import march, march_batch
from layers.results import FieldExtremes
from layers.simulation import initial_state, simulate, system_for
from layers.sweeps import sweep
from layers.variation import with_values

PIPE = """
title = "review pipe (invented)"
[geometry]
kind = "cylinder"
inner_radius = "30 mm"
{materials}
[[layers]]
material = "{material}"
thickness = "{thickness}"
[inside]
type = "temperature"
surface_temperature = "{hot}"
[outside]
type = "film"
air_temperature = "15 degC"
{film}
[series.cycles.hot]
mean = "160 degC"
amplitude = "60 K"
peak_hour = 6
[time]
duration = "{duration}"
step = "{step}"
initial = "{initial}"
scheme = "tr-bdf2"
{sweep}
"""

AUTO = 'film_coefficient = "auto"\nemissivity = 0.8'
FIXED = 'surface_resistance = "0.1 m2*K/W"'


def _pipe(**kw) -> str:
    values = dict(materials="", material="calcium-silicate", thickness="50 mm", hot="series:hot", film=AUTO,
                  duration="1 d", step="1 h", initial="steady", sweep="")
    values.update(kw)
    return textwrap.dedent(PIPE.format(**values))


def _sweep_case(text: str):
    return parse_case(tomllib.loads(text), text=text)


def _alone(text: str, settings: dict):
    return simulate(parse_case(with_values(tomllib.loads(text), settings), text=text))


def _texts(caught) -> list[str]:
    return [str(w.message) for w in caught]


def test_a_steady_start_that_breaks_a_k_law_names_its_own_point():
    """The third point's k(T) law turns negative near the hot face: its steady
    start fails before the march, and the error names that point, not the
    first of the batch."""
    materials = textwrap.dedent("""
        [materials.failing]
        conductivity = {polynomial = [0.05, -4e-4], reference = "degC"}
        density = "100 kg/m3"
        specific_heat = "900 J/(kg*K)"
        max_temperature = "100 degC"
    """)
    text = _pipe(materials=materials, material="mineral-wool-pipe", hot="160 degC", sweep=textwrap.dedent("""
        [[sweep]]
        name = "mat"
        key = "layers.1.material"
        values = ["mineral-wool-pipe", "calcium-silicate", "failing"]
    """))
    with pytest.raises(CaseError) as info:
        sweep(_sweep_case(text))
    assert "at the point mat = failing:" in str(info.value)


def test_convergence_warnings_and_counts_belong_to_the_points_that_gave_them(monkeypatch):
    """With the iteration limit cut to 3, calcium silicate's k(T) stalls while a
    constant-k mineral wool (same boundaries, so marched in the same batch)
    does not: the warnings say 1 of 2 points, and each point's
    nonlinear_unconverged_steps is its lone run's."""
    monkeypatch.setattr(march_module, "MAX_ITERATIONS", 3)
    text = _pipe(film=FIXED, duration="2 d", sweep=textwrap.dedent("""
        [[sweep]]
        name = "mat"
        key = "layers.1.material"
        values = ["calcium-silicate", "mineral-wool"]
    """))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        ds = sweep(_sweep_case(text))
    stalled = [t for t in _texts(caught) if "iterations before" in t]
    assert stalled and all("[at 1 of 2 sweep points, the first mat = calcium-silicate]" in t for t in stalled)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        alone = _alone(text, {"layers.1.material": "calcium-silicate"})
    assert ds["nonlinear_unconverged_steps"].isel(mat=0) == alone.attrs["nonlinear_unconverged_steps"] > 0
    assert np.isnan(ds["nonlinear_unconverged_steps"].isel(mat=1))


def test_unconverged_steps_count_steps_not_stages(monkeypatch):
    """TR-BDF2 has two stages a step; a step whose stages both stall is one
    unconverged step (the warning said "48 of 24 steps" before)."""
    monkeypatch.setattr(march_module, "MAX_ITERATIONS", 2)
    case = parse_text(_pipe(initial="20 degC"))
    mesh = case.mesh()
    system = system_for(case, mesh)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = march(system, np.full(mesh.n, 20.0), 3600.0, 24, scheme="tr-bdf2")
    assert 0 < result.unconverged_steps <= 24
    assert any(t.startswith(f"{result.unconverged_steps} of 24 steps stopped at 2 iterations") for t in _texts(caught))


def test_a_pipe_film_beyond_its_correlations_names_its_point():
    """A 2 mm steel jacket at 2100 degC takes its outside surface beyond the air
    properties of the auto film's correlation while the thick ones do not:
    the error names the thin point, as its lone run would be refused."""
    text = _pipe(material="steel", hot="2100 degC", duration="6 h", step="10 min", initial="20 degC", sweep=textwrap.dedent("""
        [[sweep]]
        name = "th"
        key = "layers.1.thickness"
        values = ["150 mm", "100 mm", "2 mm"]
    """))
    with pytest.raises(CaseError) as info:
        sweep(_sweep_case(text))
    assert info.value.key == "outside.film_coefficient"
    assert "at the point th = 2 mm:" in str(info.value)


def test_a_batch_gives_each_member_its_own_field_sink():
    """Fields not kept go to one FieldExtremes per member: the results hold no
    field, and each sink's extremes and hottest cell per layer are those of
    the member's lone field."""
    members = []
    for thickness in ("30 mm", "90 mm"):
        case = parse_text(_pipe(thickness=thickness))
        mesh = case.mesh()
        system = system_for(case, mesh)
        members.append((mesh, system, initial_state(case, mesh, system, "tr-bdf2")[0]))
    sinks = [FieldExtremes(mesh) for mesh, _, _ in members]
    together = march_batch([s for _, s, _ in members], [x for _, _, x in members], 3600.0, 24, scheme="tr-bdf2", field_sink=sinks)
    for (mesh, system, initial), sink, batched in zip(members, sinks, together):
        assert batched.temperature is None
        alone = march(system, initial, 3600.0, 24, scheme="tr-bdf2")
        assert sink.rows == alone.temperature.shape[0]
        assert sink.low == pytest.approx(float(alone.temperature.min()), abs=1e-6)
        assert sink.high == pytest.approx(float(alone.temperature.max()), abs=1e-6)
        np.testing.assert_allclose(sink.layer_hottest[:, 0], alone.temperature.max(axis=1), rtol=0, atol=1e-6)
    with pytest.raises(ValueError, match="one sink per member"):
        march_batch([s for _, s, _ in members], [x for _, _, x in members], 3600.0, 2, field_sink=sinks[0])
