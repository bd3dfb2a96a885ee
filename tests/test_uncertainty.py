"""Uncertainty sampling (layers/uncertainty.py) against closed forms.

A plane layer of thickness d and conductivity k, its inside face held at T_h,
its outside face losing heat through a fixed film h to air at T_a, has in
steady state (one-dimensional conduction in series with the film; any heat
transfer text, e.g. Incropera et al., Fundamentals of Heat and Mass Transfer,
ch. 3, the plane wall with convection, from memory)

    T_s - T_a = (T_h - T_a) / (1 + h d / k),

so it meets a touch limit T_lim exactly when k <= h d / (r - 1), with
r = (T_h - T_a) / (T_lim - T_a).  With k normal (mean k0, sd s) the chance
of passing is the normal CDF Phi((h d / (r - 1) - k0) / s); with h uniform
on [lo, hi] it is (hi - h*) / (hi - lo), h* = k (r - 1) / d.  A share
estimated from n samples has a binomial standard error sqrt(p (1 - p) / n)
for independent draws (quasi-random points do better), so the tests allow
three of those plus 1/n (one sample either way at a tie).
"""

from __future__ import annotations

import math
import textwrap
import tomllib

import numpy as np
import pytest
from scipy.stats import norm

from layers.api import simulate
from layers.case import parse_case
from layers.errors import CaseError
from layers.sizing import size
from layers.uncertainty import sample_numbers

T_HOT, T_AIR, T_LIMIT, H, K0 = 150.0, 25.0, 50.0, 10.0, 0.040
RATIO = (T_HOT - T_AIR) / (T_LIMIT - T_AIR)

PLATE = """
title = "hot plate"
[materials.board]
conductivity = "0.040 W/(m*K)"
density = "100 kg/m3"
specific_heat = "1000 J/(kg*K)"
[[layers]]
material = "board"
thickness = "16 mm"
[inside]
type = "temperature"
surface_temperature = "150 degC"
[outside]
type = "film"
air_temperature = "25 degC"
film_coefficient = "10 W/(m2*K)"
[time]
duration = "2 h"
step = "10 min"
initial = "steady"
[sizing]
layer = 1
thicknesses = ["12 mm", "14 mm", "16 mm", "18 mm", "20 mm", "24 mm"]
max_surface_temperature = "50 degC"
[uncertainty]
samples = {samples}
seed = {seed}
confidence = 0.95
[uncertainty.vary]
{vary}
"""
NORMAL_K = '"materials.board.conductivity" = {relative_sd = "10 %"}'


def _case(samples=2000, seed=3, vary=NORMAL_K):
    text = textwrap.dedent(PLATE.format(samples=samples, seed=seed, vary=vary))
    return parse_case(tomllib.loads(text), text=text)


def _allowance(p: float, n: int) -> float:
    return 3.0 * math.sqrt(p * (1.0 - p) / n) + 1.0 / n


def test_chance_of_passing_a_touch_limit_is_the_normal_cdf():
    ds = size(_case())
    d = ds["thickness"].values
    expected = norm.cdf((H * d / (RATIO - 1.0) - K0) / (0.1 * K0))
    got = ds["probability_passes_max_surface_temperature"].values
    for p_got, p_want in zip(got, expected):
        assert abs(p_got - p_want) <= _allowance(p_want, 2000)
    np.testing.assert_array_equal(ds["probability_passes"].values, got)  # the only criterion
    # thinnest candidate whose chance is at least 95 %: 20 mm (99.4 %; 18 mm is 89.4 %)
    assert ds.attrs["recommended_thickness_at_confidence"] == pytest.approx(0.020)
    assert ds.attrs["recommended_thickness"] == pytest.approx(0.016)  # the nominal answer is thinner


def test_a_uniform_film_coefficient_gives_a_linear_chance():
    lo, hi = 6.0, 14.0
    ds = size(_case(vary='"outside.film_coefficient" = {low = "6 W/(m2*K)", high = "14 W/(m2*K)"}'))
    d = ds["thickness"].values
    h_needed = K0 * (RATIO - 1.0) / d
    expected = np.clip((hi - h_needed) / (hi - lo), 0.0, 1.0)
    for p_got, p_want in zip(ds["probability_passes"].values, expected):
        assert abs(p_got - p_want) <= _allowance(p_want, 2000)


def test_run_quantiles_follow_the_conductivity_quantiles():
    """In a steady run T_s rises with k, so each quantile of T_s is T_s at that
    quantile of k: k0 (1 + 0.1 z_q).  Tolerance: 0.03 sd of k carried through
    dT_s/dk (a quantile's sampling error from 500 quasi-random points is
    well below that; independent draws would give about 0.04 sd at 5 %)."""
    ds = simulate(_case(samples=500))
    d = 0.016
    for q, band in zip(ds["quantile"].values, ds["surface_temperature_outside_quantile"].values):
        k = K0 * (1.0 + 0.1 * norm.ppf(q))
        want = T_AIR + (T_HOT - T_AIR) / (1.0 + H * d / k)
        slope = (T_HOT - T_AIR) * H * d / (k + H * d) ** 2
        np.testing.assert_allclose(band, want, atol=0.03 * 0.1 * K0 * slope)
    assert ds.attrs["uncertainty_samples"] == 500
    # the nominal run is unchanged by the sampling
    assert float(ds["surface_temperature_outside"].values[-1]) == pytest.approx(50.0, abs=1e-9)


def test_samples_are_reproducible_and_cover_the_distribution():
    a = sample_numbers(_case(seed=3))["materials.board.conductivity"]
    b = sample_numbers(_case(seed=3))["materials.board.conductivity"]
    c = sample_numbers(_case(seed=4))["materials.board.conductivity"]
    np.testing.assert_array_equal(a, b)
    assert not np.array_equal(a, c)
    # mean and sd of 2000 quasi-random normal draws: within 1 % of k0 and 5 % of 0.1 k0
    assert abs(a.mean() - K0) < 0.01 * K0 and abs(a.std() - 0.1 * K0) < 0.05 * 0.1 * K0


@pytest.mark.parametrize(
    ("vary", "extra", "key", "reason"),
    [
        ('"inside.surface_temperature" = {relative_sd = "5 %"}', "", "uncertainty.vary.inside.surface_temperature.relative_sd", "no relative spread"),
        ('"materials.board.conductivity" = {sd = "0.004 W/(m*K)", low = "0.03 W/(m*K)"}', "", "uncertainty.vary.materials.board.conductivity", "low and high"),
        ('"materials.nothing.conductivity" = {relative_sd = "5 %"}', "", "uncertainty.vary.materials.nothing.conductivity", "no 'materials.nothing'"),
        ('"outside.film_coefficient" = {low = "14 W/(m2*K)", high = "6 W/(m2*K)"}', "", "uncertainty.vary.outside.film_coefficient.high", "above low"),
        (NORMAL_K, '\n[[sweep]]\nname = "t"\nkey = "layers.1.thickness"\nvalues = ["1 cm"]\n', "uncertainty", "not both"),
    ],
)
def test_bad_uncertainty_tables_are_refused(vary, extra, key, reason):
    text = textwrap.dedent(PLATE.format(samples=100, seed=1, vary=vary)) + extra
    with pytest.raises(CaseError) as info:
        parse_case(tomllib.loads(text), text=text)
    assert info.value.key == key and reason in info.value.reason


def test_a_sample_outside_what_the_case_allows_names_the_sample():
    """A 40 % spread on a conductivity draws negative values in the far tail:
    the case reader refuses the sample that carries one, naming it."""
    with pytest.raises(CaseError) as info:
        size(_case(samples=4000, vary='"materials.board.conductivity" = {relative_sd = "40 %"}'))
    assert "sample" in info.value.reason and "materials.board.conductivity" in info.value.reason


def test_a_tolerance_on_the_sized_thickness_is_refused():
    """Each sizing candidate replaces the sized layer's thickness, so a
    tolerance on it would be silently ignored: refused instead."""
    with pytest.raises(CaseError) as info:
        size(_case(vary='"layers.1.thickness" = {relative_sd = "5 %"}'))
    assert info.value.key == "uncertainty.vary.layers.1.thickness"


def test_run_samples_on_a_local_cluster_equal_the_serial_ones(tmp_path):
    """`layers run --workers 2` runs the samples on a local dask cluster: the
    quantiles equal the serial run's exactly (the same fixed jobs)."""
    pytest.importorskip("distributed")
    import xarray as xr

    from layers.cli import main

    path = tmp_path / "plate.toml"
    path.write_text(textwrap.dedent(PLATE.format(samples=64, seed=2, vary=NORMAL_K)))
    assert main(["run", str(path), "--archive", str(tmp_path / "serial"), "-q"]) == 0
    assert main(["run", str(path), "--archive", str(tmp_path / "spread"), "--workers", "2", "-q"]) == 0
    (a,), (b,) = (tmp_path / "serial").glob("*.nc"), (tmp_path / "spread").glob("*.nc")
    with xr.open_dataset(a) as serial, xr.open_dataset(b) as spread:
        np.testing.assert_array_equal(serial["surface_temperature_outside_quantile"].values, spread["surface_temperature_outside_quantile"].values)
