"""ISO 13788 monthly interstitial condensation (the Glaser method), layers/iso13788.py.

Sources of the expected values
------------------------------
* ISO 13788:2012 clause 6 (from memory): saturation pressure
  psat = 610.5 exp(17.269 t/(237.3 + t)) for t >= 0 degC and
  610.5 exp(21.875 t/(265.5 + t)) below; vapour flux g = delta_0 dp / s_d with
  delta_0 = 2e-10 kg/(m s Pa); condensation rate at a plane
  g_c = delta_0 [(p_i - p_c)/s_d,i - (p_c - p_e)/s_d,e]; moisture at a plane
  keeps the pressure there at saturation; months of calendar length; the
  calculation starts with a dry construction in the first month that
  condenses after one that does not.
* ISO 6946 / textbook steady conduction: the temperature falls through a
  plane wall in proportion to the thermal resistances (R_T = Rsi + sum d/k + Rse).
* Every expected number below is computed from those formulas, written out in
  the test (not by the code under test): "computed" in the sense of
  REFERENCES.md. No published worked example with numbers was found (searched:
  ISO 13788 and Glaser worked examples); none is invented here.

Tolerances: the method is algebra (a steady profile, an exponential, straight
lines), so the code and the hand or independent calculation agree to
round-off: 1e-9 relative on pressures and temperatures, and on rates 1e-7
relative to the flux scale (a rate is a difference of two fluxes, which loses
a few digits).
"""

from __future__ import annotations

import itertools
import math
from pathlib import Path

import numpy as np
import pytest

import layers
from layers.cli import main
from layers.errors import CaseError

CASES = Path(__file__).resolve().parents[1] / "cases"
DELTA_0 = 2e-10  # kg/(m s Pa), ISO 13788 (from memory)
DAYS = (31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31)


def psat(t):
    """ISO 13788 saturation pressure [Pa], written out here (from memory, REFERENCES.md section 7)."""
    t = np.asarray(t, dtype=float)
    return np.where(t >= 0, 610.5 * np.exp(17.269 * t / (237.3 + t)), 610.5 * np.exp(21.875 * t / (265.5 + t)))


def wall(layers_toml: str, condensation: str, materials: str = "", films: str = "0.13", rse: str = "0.04") -> str:
    return f"""
title = "test wall"
{materials}
{layers_toml}
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "{films} m2*K/W"
[outside]
type = "film"
air_temperature = "0 degC"
surface_resistance = "{rse} m2*K/W"
[time]
duration = "1 d"
step = "1 h"
[condensation]
{condensation}
"""


TWO_LAYERS = """
[materials.wool-a]
conductivity = "0.04 W/(m*K)"
density = "30 kg/m3"
specific_heat = "840 J/(kg*K)"
vapour_resistance_factor = 1
[materials.board-b]
conductivity = "0.2 W/(m*K)"
density = "600 kg/m3"
specific_heat = "1500 J/(kg*K)"
vapour_resistance_factor = 100
"""
TWO_LAYER_STACK = """
[[layers]]
material = "wool-a"
thickness = "100 mm"
[[layers]]
material = "board-b"
thickness = "20 mm"
"""
STEADY_CLIMATE = """
inside_temperature = "20 degC"
inside_relative_humidity = "50 %"
outside_temperature = "0 degC"
outside_relative_humidity = "80 %"
"""


# --------------------------------------------------------------------------- (a) hand calculation


def test_single_interface_by_hand():
    """Two layers, one interface, the same climate every month.

    Hand calculation (computed from ISO 6946 resistances and the ISO 13788 formulas):
      R_T = Rsi + d_a/k_a + d_b/k_b + Rse = 0.13 + 0.100/0.04 + 0.020/0.2 + 0.04 = 2.77 m2K/W
      theta_1 = 0 + 20 (0.1 + 0.04)/2.77 = 1.01083 degC
      psat(theta_1) = 610.5 exp(17.269 x 1.01083/238.31083) = 656.897 Pa
      p_i = 0.5 x psat(20) = 0.5 x 2336.95 = 1168.48 Pa;  p_e = 0.8 x 610.5 = 488.40 Pa
      s_d: S_1 = 1 x 0.1 = 0.1 m;  S_T = 0.1 + 100 x 0.02 = 2.1 m
      the straight line at S_1: 1168.48 - 680.08 x 0.1/2.1 = 1136.09 Pa > 656.90 Pa: condensation
      g_c = 2e-10 [(1168.48 - 656.90)/0.1 - (656.90 - 488.40)/2.0] = 1.00631e-6 kg/(m2 s)
          = 2695.3 g/m2 in January (31 d)
    Every month condenses alike, so after twelve months 1.00631e-6 x 365 x 86400 = 31.73 kg/m2
    remain: the verdict is "accumulates".
    """
    ds = layers.condensation(layers.parse_case(wall(TWO_LAYER_STACK, STEADY_CLIMATE, TWO_LAYERS)))
    theta_1 = 20.0 * 0.14 / 2.77
    p_c = float(psat(theta_1))
    p_i = 0.5 * float(psat(20.0))
    p_e = 0.8 * 610.5
    g = DELTA_0 * ((p_i - p_c) / 0.1 - (p_c - p_e) / 2.0)
    assert g == pytest.approx(1.00631e-6, rel=1e-5)  # the hand figure in the docstring, to its printed digits
    assert float(ds["interface_temperature"][0, 1]) == pytest.approx(theta_1, rel=1e-9)
    assert float(ds["saturation_vapour_pressure"][0, 1]) == pytest.approx(p_c, rel=1e-9)
    assert float(ds["vapour_pressure"][0, 0]) == pytest.approx(p_i, rel=1e-9)
    assert float(ds["vapour_pressure"][0, 2]) == pytest.approx(p_e, rel=1e-9)
    assert float(ds["vapour_pressure"][0, 1]) == pytest.approx(p_c, rel=1e-9)  # pinned at saturation
    assert float(ds["condensation_rate"][0, 1]) == pytest.approx(g, rel=1e-7)
    np.testing.assert_array_equal(ds["condensation_rate"].values[:, [0, 2]], 0.0)
    assert ds.attrs["verdict"] == "accumulates"
    assert ds.attrs["moisture_remaining_after_year"] == pytest.approx(g * 365 * 86400, rel=1e-7)
    assert ds.attrs["surface_resistance_inside"] == 0.13 and ds.attrs["surface_resistance_outside"] == 0.04
    np.testing.assert_allclose(ds["equivalent_air_thickness"].values, [0.0, 0.1, 2.1], rtol=1e-12)


def test_humidity_class_inside_pressure_by_hand():
    """Class 3 (ISO 13788 Annex A, from memory): Delta p = 810 Pa at or below 0 degC, falling
    linearly to 0 at 20 degC; p_i = p_e + 1.10 Delta p. At 5 degC outside, 80 %:
    p_e = 0.8 x 610.5 exp(17.269 x 5/242.3) = 0.8 x 871.87 = 697.49 Pa, Delta p = 810 x (1 - 5/20)
    = 607.5 Pa, p_i = 697.49 + 1.10 x 607.5 = 697.49 + 668.25 = 1365.74 Pa (computed)."""
    climate = STEADY_CLIMATE.replace('inside_relative_humidity = "50 %"', "humidity_class = 3").replace('"0 degC"', '"5 degC"')
    ds = layers.condensation(layers.parse_case(wall(TWO_LAYER_STACK, climate, TWO_LAYERS)))
    p_e = 0.8 * float(psat(5.0))
    assert float(ds["vapour_pressure_outside"][0]) == pytest.approx(p_e, rel=1e-12)
    assert float(ds["vapour_pressure_inside"][0]) == pytest.approx(p_e + 1.10 * 810.0 * 0.75, rel=1e-12)
    assert p_e + 1.10 * 810 * 0.75 == pytest.approx(1365.74, abs=0.005)  # the docstring's figure


# --------------------------------------------------------------------------- (b) an independent implementation


def brute_force_profile(s, saturation, p_in, p_out, wet):
    """The vapour pressure line found by search, not construction: every subset
    of the dry interior interfaces is tried as the set of condensation planes
    (wet planes always pinned); the answer is the subset whose piecewise-linear
    line stays at or below saturation everywhere and condenses (does not
    evaporate) at each of its planes. Returns (pressure, rate)."""
    n = len(s)
    interior = [k for k in range(1, n - 1) if not wet[k]]
    found = None
    for size in range(len(interior) + 1):
        for subset in itertools.combinations(interior, size):
            pins = sorted({0, n - 1, *subset, *[k for k in range(1, n - 1) if wet[k]]})
            values = [p_in if k == 0 else p_out if k == n - 1 else saturation[k] for k in pins]
            line = np.interp(s, [s[k] for k in pins], values)
            tol = 1e-9 * max(p_in, p_out, max(saturation))
            if any(line[k] > saturation[k] + tol for k in range(1, n - 1)):
                continue
            rate = np.zeros(n)
            for j in range(1, len(pins) - 1):
                a, k, b = pins[j - 1], pins[j], pins[j + 1]
                rate[k] = DELTA_0 * ((values[j - 1] - values[j]) / (s[k] - s[a]) - (values[j] - values[j + 1]) / (s[b] - s[k]))
            scale = DELTA_0 * abs(p_in - p_out) / s[-1] + 1e-30
            if any(rate[k] < -1e-9 * scale for k in subset):
                continue
            found = (line, rate)
            break
        if found:
            break
    assert found is not None
    return found


def independent_year(thicknesses, conductivities, mus, r_si, r_se, t_i, t_e, rh_i, rh_e):
    """ISO 13788 month by month written independently: temperatures by the
    resistance sum, psat written out, planes by brute force, a month split
    where a wet plane dries out, the starting-month rule by scanning the
    calendar. Returns (first_month, verdict, rate, accumulated)."""
    r_layers = np.array(thicknesses) / np.array(conductivities)
    r_cum = np.concatenate([[r_si], r_si + np.cumsum(r_layers)])  # resistance from the inside air to each interface
    r_total = r_si + r_layers.sum() + r_se
    s = np.concatenate([[0.0], np.cumsum(np.array(mus) * np.array(thicknesses))])
    theta = [t_i[m] - (t_i[m] - t_e[m]) * r_cum / r_total for m in range(12)]
    sat = [psat(th) for th in theta]
    p_in = [rh_i[m] * float(psat(t_i[m])) for m in range(12)]
    p_out = [rh_e[m] * float(psat(t_e[m])) for m in range(12)]
    dry = [brute_force_profile(s, sat[m], p_in[m], p_out[m], [False] * len(s))[1] for m in range(12)]
    condenses = [bool(np.any(r > 0)) for r in dry]
    if not any(condenses):
        return 0, "no condensation", np.zeros((12, len(s))), np.zeros((12, len(s)))
    starts = [m for m in range(12) if condenses[m] and not condenses[(m + 11) % 12]]
    if not starts:
        starts = [(int(np.argmin([r.sum() for r in dry])) + 1) % 12]
    best = None
    for start in starts:
        moisture = [0.0] * len(s)
        rate = np.zeros((12, len(s)))
        acc = np.zeros((12, len(s)))
        for step in range(12):
            m = (start + step) % 12
            left = DAYS[m] * 86400.0
            r = None
            while left > 0:  # the month in parts, each ending where a wet plane dries out (or at the month's end)
                _, g = brute_force_profile(s, sat[m], p_in[m], p_out[m], [x > 1e-9 for x in moisture])
                r = g if r is None else r  # the month reports the line at its start
                ends = [x / -y for x, y in zip(moisture, g) if x > 1e-9 and y < 0]
                part = min([left, *ends])
                moisture = [max(0.0, x + y * part) for x, y in zip(moisture, g)]
                moisture = [0.0 if x <= 1e-9 else x for x in moisture]
                left -= part
            rate[m], acc[m] = r, moisture
        key = (sum(moisture), acc.max())
        if best is None or key > best[0]:
            best = (key, start, rate, acc)
    (left, _), start, rate, acc = best
    return start + 1, "accumulates" if left > 0 else "dries out within the year", rate, acc


def random_case(rng):
    n = int(rng.integers(2, 6))
    d = rng.uniform(0.005, 0.15, n).round(4)
    k = rng.uniform(0.03, 1.5, n).round(3)
    mu = rng.choice([1.0, 5.0, 20.0, 60.0, 150.0, 1000.0], n)
    r_si, r_se = float(rng.choice([0.10, 0.13, 0.17])), float(rng.choice([0.04, 0.08]))
    mean, amp = rng.uniform(0, 12), rng.uniform(4, 12)
    t_e = (mean - amp * np.cos(2 * np.pi * (np.arange(12) + 0.5 - 0.5) / 12)).round(2)
    rh_e = rng.uniform(0.65, 0.95, 12).round(3)
    t_i = np.full(12, 20.0)
    rh_i = np.full(12, float(rng.uniform(0.35, 0.7)).__round__(3))
    mats = "".join(
        f'[materials.m{j}]\nconductivity = {k[j]}\ndensity = 500\nspecific_heat = 1000\nvapour_resistance_factor = {mu[j]}\n'
        for j in range(n))
    stack = "".join(f'[[layers]]\nmaterial = "m{j}"\nthickness = {d[j]}\n' for j in range(n))
    def listed(values):
        return "[" + ", ".join(repr(float(v)) for v in values) + "]"

    climate = (f"inside_temperature = {listed(t_i)}\ninside_relative_humidity = {listed(rh_i)}\n"
               f"outside_temperature = {listed(t_e)}\noutside_relative_humidity = {listed(rh_e)}\n")
    text = wall(stack, climate, mats, films=str(r_si), rse=str(r_se))
    return text, (d, k, mu, r_si, r_se, t_i, t_e, rh_i, rh_e)


@pytest.mark.parametrize("seed", range(12))
def test_against_an_independent_brute_force_implementation(seed):
    """Random constructions (2-5 layers) and climates: every month's rates and
    amounts, the starting month and the verdict agree with the brute-force
    implementation above (round-off tolerances, see the module docstring)."""
    rng = np.random.default_rng(1000 + seed)
    text, (d, k, mu, r_si, r_se, t_i, t_e, rh_i, rh_e) = random_case(rng)
    ds = layers.condensation(layers.parse_case(text))
    first, verdict, rate, acc = independent_year(d, k, mu, r_si, r_se, t_i, t_e, rh_i, rh_e)
    assert ds.attrs["first_month"] == first
    assert ds.attrs["verdict"] == verdict
    scale = DELTA_0 * 2000.0 / max(float(np.sum(mu * d)), 1e-3)  # a flux scale [kg m-2 s-1]
    np.testing.assert_allclose(ds["condensation_rate"].values, rate, rtol=1e-7, atol=1e-9 * scale)
    np.testing.assert_allclose(ds["accumulated_moisture"].values, acc, rtol=1e-7, atol=1e-9 * scale * 3e7)


def test_the_random_cases_reach_every_verdict():
    """The random constructions above are not all alike: they cover each verdict."""
    verdicts = set()
    for seed in range(12):
        text, _ = random_case(np.random.default_rng(1000 + seed))
        verdicts.add(layers.condensation(layers.parse_case(text)).attrs["verdict"])
    assert verdicts == {"no condensation", "dries out within the year", "accumulates"}


def test_several_condensation_planes_at_once():
    """A vapour-open layer between two tight ones, cold outside: two planes in one
    month, each equal to the brute-force answer; the line passes through
    saturation at both (the tangent construction with two planes)."""
    from layers.iso13788 import vapour_profile

    s = np.array([0.0, 1.0, 1.2, 1.4, 4.0])
    sat = np.array([2337.0, 1500.0, 700.0, 650.0, 600.0])
    pressure, rate = vapour_profile(s, sat, 1400.0, 450.0)
    line, expected = brute_force_profile(s, sat, 1400.0, 450.0, [False] * 5)
    np.testing.assert_allclose(pressure, line, rtol=1e-12)
    np.testing.assert_allclose(rate, expected, rtol=1e-9, atol=1e-20)
    assert (rate > 0).sum() >= 2


def test_a_plane_that_dries_out_mid_month_splits_the_month():
    """Two planes, A (s_d 0.2 m from inside) and B (2.2 m), total 4.2 m; pressures
    made up for the check, the formulas as in the module docstring (computed here).

    January (31 d): p_i 1100, p_sat,A 1000, p_sat,B 500, p_e 350 Pa. The slopes
    -500, -250, -75 Pa/m rise, so both planes condense:
      g_A = delta_0 (500 - 250) = 5e-8, g_B = delta_0 (250 - 75) = 3.5e-8 kg/(m2 s).
    February (28 d) and later: p_i 1050, p_sat,A 1100, p_sat,B 700, p_e 600 Pa.
    Both wet, pinned: g_A = delta_0 (-250 - 200) = -9e-8 (drying), g_B =
    delta_0 (200 - 50) = 3e-8. A holds 5e-8 x 31 d = 0.13392 kg/m2 and is dry
    after t_A = 0.13392/9e-8 = 1.488e6 s (17.2 d). From then the line runs
    straight from p_i to B (A lies 82 Pa below it) and
      g_B' = delta_0 [(1050 - 700)/2.2 - 50] = 2.1818e-8 kg/(m2 s)
    for the rest of February. Setting A to zero at the month's end instead
    would credit B with 3e-8 for the whole month: 7.6 g/m2 that no plane
    ever gave up.
    """
    from layers.iso13788 import moisture_year

    s = np.array([0.0, 0.2, 2.2, 4.2])
    sat = np.tile([2000.0, 1100.0, 700.0, 600.0], (12, 1))
    sat[0] = [2000.0, 1000.0, 500.0, 350.0]
    p_in, p_out = np.full(12, 1050.0), np.full(12, 600.0)
    p_in[0], p_out[0] = 1100.0, 350.0
    year = moisture_year(s, sat, p_in, p_out, 1)
    jan, feb = 31 * 86400.0, 28 * 86400.0
    m_a, m_b = 5e-8 * jan, 3.5e-8 * jan
    t_a = m_a / 9e-8
    g_b2 = DELTA_0 * ((1050.0 - 700.0) / 2.2 - 50.0)
    assert t_a / 86400.0 == pytest.approx(17.22, abs=0.01) and g_b2 == pytest.approx(2.1818e-8, rel=1e-4)
    np.testing.assert_allclose(year.accumulated[0, 1:3], [m_a, m_b], rtol=1e-12)
    np.testing.assert_allclose(year.rate[1, 1:3], [-9e-8, 3e-8], rtol=1e-9)  # the line at the start of February
    assert year.accumulated[1, 1] == 0.0
    assert year.accumulated[1, 2] == pytest.approx(m_b + 3e-8 * t_a + g_b2 * (feb - t_a), rel=1e-12)
    clipped = m_b + 3e-8 * feb
    assert (clipped - year.accumulated[1, 2]) * 1000.0 == pytest.approx(7.6, abs=0.05)  # what the split saves
    # mass: February's gain at B is what came in at the inside surface minus what left outside
    into = DELTA_0 * ((1050.0 - 1100.0) / 0.2 * t_a + (1050.0 - 700.0) / 2.2 * (feb - t_a))
    out = DELTA_0 * (700.0 - 600.0) / 2.0 * feb
    assert year.accumulated[1, 1:3].sum() - (m_a + m_b) == pytest.approx(into - out, rel=1e-12)
    assert (year.accumulated[2:, 1] == 0.0).all() and (year.rate[2:, 1] == 0.0).all()  # A stays dry


def test_the_table_amounts_add_up_to_the_moisture():
    """The printed g column is each month's change in M, so M is the running sum
    of g (from a dry start), including the month in which the plane dries out."""
    from layers.iso13788 import condensation_table

    text = (CASES / "timber-frame-wall-no-vcl.toml").read_text()
    text = text.replace('material = "osb"', 'material = "wood-fibre-board"').replace("humidity_class = 3", "humidity_class = 2")
    ds = layers.condensation(layers.parse_case(text))
    assert ds.attrs["verdict"] == "dries out within the year"
    rows = [line.split() for line in condensation_table(ds).splitlines() if line[:3] in MONTH_ABBR]
    g, m = np.array([[float(r[-2]), float(r[-1])] for r in rows]).T
    assert g.min() < 0 and m[-1] == 0.0
    np.testing.assert_allclose(np.cumsum(g), m, atol=0.15)  # printed to 0.1 g/m2


MONTH_ABBR = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


# --------------------------------------------------------------------------- (d) starting month and verdicts


def seasonal_climate(cold: set[int]) -> str:
    """Outside -5 degC in the `cold` months (1-12) and 18 degC in the others; 80 %."""
    t = [("-5 degC" if m in cold else "18 degC") for m in range(1, 13)]
    return (f'inside_temperature = "20 degC"\ninside_relative_humidity = "50 %"\n'
            f'outside_temperature = {t}\noutside_relative_humidity = "80 %"\n')


def test_starting_month_is_the_first_condensing_month_after_a_dry_one():
    """Cold November to February, warm otherwise: with a dry construction the two-layer
    wall condenses only in the cold months (at 18 degC outside the interface is at
    19.88 degC, psat 2319 Pa > p_i 1168 Pa: no condensation, computed), so the year starts in November."""
    ds = layers.condensation(layers.parse_case(wall(TWO_LAYER_STACK, seasonal_climate({11, 12, 1, 2}), TWO_LAYERS)))
    assert ds.attrs["first_month"] == 11
    assert float(psat(18 + 2 * 0.14 / 2.77)) > 0.5 * float(psat(20.0))
    acc = ds["accumulated_moisture"].values[:, 1]
    assert acc[10] > 0 and acc[9] == 0.0  # Nov holds moisture; Oct (the end of the year) is dry again
    assert ds.attrs["verdict"] == "dries out within the year"


def test_two_condensing_seasons_take_the_conservative_start():
    """Two cold spells: each start the rule allows is tried; the one kept leaves
    at least as much moisture, then at least as large a peak, as the other."""
    from layers.iso13788 import moisture_year

    ds = layers.condensation(layers.parse_case(wall(TWO_LAYER_STACK, seasonal_climate({1, 2, 7}), TWO_LAYERS)))
    assert ds.attrs["first_month"] in (1, 7)
    s = ds["equivalent_air_thickness"].values
    sat = ds["saturation_vapour_pressure"].values
    p_in, p_out = ds["vapour_pressure_inside"].values, ds["vapour_pressure_outside"].values
    kept = moisture_year(s, sat, p_in, p_out, ds.attrs["first_month"])
    other = moisture_year(s, sat, p_in, p_out, 8 - ds.attrs["first_month"])
    assert (kept.remaining.sum(), kept.accumulated.max()) >= (other.remaining.sum(), other.accumulated.max())


@pytest.mark.parametrize("case, verdict, first", [
    ("timber-frame-wall-vcl", "no condensation", 0),
    ("timber-frame-wall-no-vcl", "accumulates", 10),
])
def test_demo_cases_verdicts(case, verdict, first):
    ds = layers.condensation(layers.load_case(CASES / f"{case}.toml"))
    assert ds.attrs["verdict"] == verdict and ds.attrs["first_month"] == first
    for name in ds.variables:
        if name not in ("interface_name", "layer_name"):
            assert "units" in ds[name].attrs and "long_name" in ds[name].attrs, name


def test_dries_out_verdict_on_a_vapour_open_sheathing():
    """The demo wall without its vapour control layer, with a vapour-open fibreboard
    (mu 5) as sheathing and humidity class 2: moisture collects in winter and all
    of it evaporates by the end of the year."""
    text = (CASES / "timber-frame-wall-no-vcl.toml").read_text()
    text = text.replace('material = "osb"', 'material = "wood-fibre-board"').replace("humidity_class = 3", "humidity_class = 2")
    ds = layers.condensation(layers.parse_case(text))
    assert ds.attrs["verdict"] == "dries out within the year"
    assert ds.attrs["max_accumulated_moisture"] > 0 and ds.attrs["moisture_remaining_after_year"] == 0.0
    acc = ds["accumulated_moisture"].values
    assert acc[(ds.attrs["first_month"] - 2) % 12].max() == 0.0  # dry at the end of the calculation year


def test_wet_cup_data_changes_the_vapour_resistances():
    """vapour_data = "wet-cup" takes the ISO 10456 wet-cup mu (plasterboard 4 instead of 10, OSB 30 instead of 50)."""
    text = (CASES / "timber-frame-wall-no-vcl.toml").read_text().replace("humidity_class = 3", 'humidity_class = 3\nvapour_data = "wet-cup"')
    ds = layers.condensation(layers.parse_case(text))
    np.testing.assert_allclose(ds["layer_vapour_resistance_factor"].values[[0, 2]], [4.0, 30.0])


# --------------------------------------------------------------------------- (e) bad input


BAD = [
    ('outside_temperature = "0 degC"', 'outside_temperature = ["0 degC", "1 degC"]', "condensation.outside_temperature", "12 values"),
    ('inside_relative_humidity = "50 %"', 'inside_relative_humidity = "120 %"', "condensation.inside_relative_humidity", "100 %"),
    ('outside_relative_humidity = "80 %"', "outside_relative_humidity = 0", "condensation.outside_relative_humidity", "above 0"),
    ('outside_temperature = "0 degC"', "outside_temperature = nan", "condensation.outside_temperature", "finite"),
    ('inside_relative_humidity = "50 %"', 'inside_relative_humidity = "50 %"\nhumidity_class = 3', "condensation.humidity_class", "not both"),
    ('inside_relative_humidity = "50 %"', "humidity_class = 6", "condensation.humidity_class", "1 to 5"),
    ('inside_relative_humidity = "50 %"', "", "condensation.inside_relative_humidity", "required"),
    ('outside_relative_humidity = "80 %"', 'outside_relative_humidity = "80 %"\nvapour_data = "damp"', "condensation.vapour_data", "wet-cup"),
    ('outside_relative_humidity = "80 %"', 'outside_relative_humidity = "80 %"\nmonths = 12', "condensation.months", "unknown key"),
]


@pytest.mark.parametrize("old, new, key, words", BAD)
def test_bad_condensation_tables_are_refused(old, new, key, words):
    text = wall(TWO_LAYER_STACK, STEADY_CLIMATE.replace(old, new), TWO_LAYERS)
    with pytest.raises(CaseError) as info:
        layers.condensation(layers.parse_case(text, file="bad.toml"))
    assert info.value.key.startswith(key) and words in info.value.reason and info.value.file == "bad.toml"


@pytest.mark.parametrize("edit, key, words", [
    (lambda t: t.replace("vapour_resistance_factor = 100\n", ""), "layers[2].material", "no vapour_resistance_factor"),
    (lambda t: t.replace("vapour_resistance_factor = 100", "vapour_resistance_factor = 0.5"), "materials.board-b.vapour_resistance_factor", "at least 1"),
    (lambda t: t.replace('thickness = "20 mm"', 'thickness = "20 mm"\nvapour_resistance_factor = "lots"'), "layers[2].vapour_resistance_factor", "plain number"),
    (lambda t: t.replace('[[layers]]\nmaterial = "board-b"', '[[layers]]\nkind = "membrane"\n[[layers]]\nmaterial = "board-b"'), "layers[2].equivalent_air_thickness", "required"),
    (lambda t: t.replace('[[layers]]\nmaterial = "board-b"', '[[layers]]\nkind = "membrane"\nequivalent_air_thickness = "2 m"\nthickness = "1 mm"\n[[layers]]\nmaterial = "board-b"'), "layers[2].thickness", "no thermal thickness"),
    (lambda t: t.replace('[[layers]]\nmaterial = "board-b"', '[[layers]]\nkind = "membrane"\nmaterial = "osb"\n[[layers]]\nmaterial = "board-b"'), "layers[2].material", "not a membrane"),
    (lambda t: t.replace('[[layers]]\nmaterial = "board-b"', '[[layers]]\nkind = "membrane"\nequivalent_air_thickness = "20 km"\n[[layers]]\nmaterial = "board-b"'), "layers[2].equivalent_air_thickness", "range of real sheets"),
    (lambda t: t.replace('material = "board-b"', 'material = "polyethylene-vcl"'), "layers[2].material", "is a membrane"),
    (lambda t: t.replace('title = "test wall"', 'title = "test wall"\n[geometry]\nkind = "cylinder"\ninner_radius = "20 mm"').replace('surface_resistance = "0.13 m2*K/W"', 'film_coefficient = "500 W/(m2*K)"'), "geometry.kind", "plane elements"),
    (lambda t: t.replace('type = "film"\nair_temperature = "0 degC"\nsurface_resistance = "0.04 m2*K/W"', 'type = "adiabatic"'), "outside.type", "no surface resistance"),
])
def test_bad_layers_are_refused(edit, key, words):
    text = edit(wall(TWO_LAYER_STACK, STEADY_CLIMATE, TWO_LAYERS))
    with pytest.raises(CaseError) as info:
        layers.condensation(layers.parse_case(text, file="bad.toml"))
    assert info.value.key == key and words in info.value.reason


def test_thermal_commands_work_without_vapour_data():
    """A material without a vapour_resistance_factor is refused only by the condensation check."""
    text = wall(TWO_LAYER_STACK, STEADY_CLIMATE, TWO_LAYERS).replace("vapour_resistance_factor = 100\n", "")
    case = layers.parse_case(text)
    assert np.isfinite(layers.simulate(case)["temperature"].values).all()


def test_sizing_layer_numbering_counts_membranes_and_refuses_one():
    text = (CASES / "timber-frame-wall-vcl.toml").read_text()
    sized = text + '\n[sizing]\nlayer = 3\nthicknesses = ["100 mm", "140 mm"]\nmax_heat_loss = "30 W/m2"\n'
    case = layers.parse_case(sized)
    assert case.layers[case.sizing.layer - 1].name == "mineral wool"  # case layer 3 is the wool
    with pytest.raises(CaseError) as info:
        layers.parse_case(sized.replace("layer = 3", "layer = 2"))
    assert info.value.key == "sizing.layer" and "membrane" in info.value.reason


# --------------------------------------------------------------------------- (f) command line


def test_cli_exit_statuses_and_archive(tmp_path, capsys):
    archive = tmp_path / "runs"
    assert main(["condensation", str(CASES / "timber-frame-wall-vcl.toml"), "--archive", str(archive)]) == 0
    out = capsys.readouterr().out
    assert "verdict: no condensation" in out and "caution: The ISO 13788 (Glaser) method" in out
    assert "Rsi = 0.13" in out
    out_file = tmp_path / "no-vcl.nc"
    assert main(["condensation", str(CASES / "timber-frame-wall-no-vcl.toml"), "--archive", str(archive), "-o", str(out_file)]) == 1
    out = capsys.readouterr().out
    assert "verdict: accumulates" in out and "g1 [g/m2]" in out and "Oct" in out.split("g1 [g/m2]")[1].splitlines()[2]
    files = sorted(archive.glob("*-condensation-*.nc"))
    assert len(files) == 2 and out_file.is_file()
    import xarray as xr

    with xr.open_dataset(out_file) as ds:
        assert ds.attrs["verdict"] == "accumulates" and ds.attrs["product"] == "condensation"
        assert ds["condensation_rate"].attrs["units"] == "kg m-2 s-1"
        assert ds.attrs["case_sha256"] == layers.load_case(CASES / "timber-frame-wall-no-vcl.toml").sha256
    # bad input: exit 2, one line, nothing archived
    bad = tmp_path / "bad.toml"
    bad.write_text((CASES / "timber-frame-wall-vcl.toml").read_text().replace("humidity_class = 3", "humidity_class = 9"))
    assert main(["condensation", str(bad), "--archive", str(archive)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "condensation.humidity_class" in err[0] and str(bad) in err[0]
    no_table = tmp_path / "none.toml"
    no_table.write_text((CASES / "timber-frame-wall-vcl.toml").read_text().split("[condensation]")[0])
    assert main(["condensation", str(no_table), "--archive", str(archive)]) == 2
    assert "condensation: is required" in capsys.readouterr().err
    assert main(["condensation", str(CASES / "timber-frame-wall-vcl.toml"), "--archive", str(archive), "-o", str(out_file)]) == 2
    assert len(sorted(archive.glob("*-condensation-*.nc"))) == 2
    # `layers list` names what the files are (not a run, not a sizing)
    capsys.readouterr()
    assert main(["list", str(archive)]) == 0
    listed = capsys.readouterr().out
    assert listed.count("an interstitial condensation check (layers condensation), not a run") == 2


def test_plot_kind_condensation(tmp_path, capsys):
    out = tmp_path / "c.nc"
    assert main(["condensation", str(CASES / "timber-frame-wall-no-vcl.toml"), "--archive", str(tmp_path), "-o", str(out)]) == 1
    png = tmp_path / "c.png"
    assert main(["plot", str(out), "-o", str(png)]) == 0  # the default kind for this file
    assert png.stat().st_size > 10_000
    assert main(["plot", str(out), "--kind", "carpet", "-o", str(tmp_path / "x.png")]) == 2
    assert "use --kind condensation" in capsys.readouterr().err


# --------------------------------------------------------------------------- (g) membranes and thermal results


def _without_membranes(text: str) -> str:
    """The case text with every [[layers]] table of kind "membrane" left out."""
    tables, current = [], []
    for line in text.splitlines(keepends=True):
        if line.startswith("[") and current:
            tables.append("".join(current))
            current = []
        current.append(line)
    tables.append("".join(current))
    return "".join(t for t in tables if not (t.startswith("[[layers]]") and 'kind = "membrane"' in t))


def test_membranes_do_not_change_thermal_results():
    """The VCL demo wall with and without its two membranes: the same mesh, the
    same run (bit for bit), the same steady state and ISO 13786 characteristics."""
    from layers.report import periodic_report
    from layers.steady import steady_state

    text = (CASES / "timber-frame-wall-vcl.toml").read_text()
    bare = _without_membranes(text)
    assert bare.count("[[layers]]") == 3 and text.count("[[layers]]") == 5
    a, b = layers.parse_case(text), layers.parse_case(bare)
    assert a.layers == b.layers
    np.testing.assert_array_equal(a.mesh().x, b.mesh().x)
    run_a, run_b = layers.simulate(a), layers.simulate(b)
    np.testing.assert_array_equal(run_a["temperature"].values, run_b["temperature"].values)
    np.testing.assert_array_equal(run_a["heat_flow_inside"].values, run_b["heat_flow_inside"].values)
    np.testing.assert_array_equal(steady_state(a).face_temperature, steady_state(b).face_temperature)
    assert periodic_report(a, 86400.0).text.split("\n", 1)[1] == periodic_report(b, 86400.0).text.split("\n", 1)[1]
    sized_a = layers.size(layers.parse_case(text + '\n[sizing]\nlayer = 3\nthicknesses = ["100 mm", "140 mm"]\nmax_heat_loss = "30 W/m2"\n'))
    sized_b = layers.size(layers.parse_case(bare + '\n[sizing]\nlayer = 2\nthicknesses = ["100 mm", "140 mm"]\nmax_heat_loss = "30 W/m2"\n'))
    np.testing.assert_array_equal(sized_a["heat_flow"].values, sized_b["heat_flow"].values)


def test_membrane_interfaces_share_the_temperature_of_their_point():
    """A membrane has no thermal part: its two faces have the same temperature, and
    the interface list counts it (5 layers, 6 interfaces)."""
    ds = layers.condensation(layers.load_case(CASES / "timber-frame-wall-vcl.toml"))
    assert ds.sizes["interface"] == 6
    t = ds["interface_temperature"].values
    np.testing.assert_array_equal(t[:, 1], t[:, 2])  # either side of the vapour control layer
    np.testing.assert_array_equal(t[:, 4], t[:, 5])  # the breather membrane on the outside surface
    np.testing.assert_allclose(ds["layer_equivalent_air_thickness"].values[[1, 4]], [20.0, 0.05])


def test_auto_films_use_the_iso_6946_design_values():
    """An "auto" film takes Exchange.design_resistance: ISO 6946 values at the case's
    emissivity (inside 0.13 and outside 0.04 m2K/W within 0.002, ISO 6946 Table 7, found)."""
    text = wall(TWO_LAYER_STACK, STEADY_CLIMATE, TWO_LAYERS).replace(
        'surface_resistance = "0.13 m2*K/W"', 'film_coefficient = "auto"').replace(
        'surface_resistance = "0.04 m2*K/W"', 'film_coefficient = "auto"')
    ds = layers.condensation(layers.parse_case(text))
    assert ds.attrs["surface_resistance_inside"] == pytest.approx(0.13, abs=0.002)
    assert ds.attrs["surface_resistance_outside"] == pytest.approx(0.04, abs=0.002)
    assert "ISO 6946" in ds.attrs["surface_resistances"]


def test_condensation_messages_point_at_the_likely_slip(tmp_path, capsys):
    """A misspelt humidity key is named as a likely misspelling, and a bare 55 for
    a relative humidity (a fraction in SI) gets the fix "55 %"."""
    base = (CASES / "timber-frame-wall-vcl.toml").read_text()
    typo = tmp_path / "typo.toml"
    typo.write_text(base.replace("humidity_class = 3", 'inside_relative_humidty = "50 %"'))
    assert main(["condensation", str(typo), "--archive", str(tmp_path / "runs")]) == 2
    err = capsys.readouterr().err
    assert "condensation.inside_relative_humidity: is required" in err and "'inside_relative_humidty' a misspelling" in err
    bare = tmp_path / "bare.toml"
    bare.write_text(base.replace("humidity_class = 3", "inside_relative_humidity = 55"))
    assert main(["condensation", str(bare), "--archive", str(tmp_path / "runs")]) == 2
    assert 'write "55 %"' in capsys.readouterr().err


def test_a_result_outside_physics_is_refused_before_it_is_archived():
    """The last guard before the dataset: a temperature that is not finite or below
    absolute zero, a negative pressure or amount, is refused as a CaseError
    (exit 2), so no such file is ever archived; a sound result passes."""
    import numpy as np

    from layers.errors import CaseError
    from layers.iso13788 import MoistureYear, _check_physical

    case = layers.load_case(CASES / "timber-frame-wall-vcl.toml")
    good = MoistureYear(1, np.zeros((12, 3)), np.zeros((12, 3)), np.full((12, 3), 800.0), np.zeros(3))
    t = np.full((12, 3), 5.0)
    _check_physical(case, t, np.full((12, 3), 900.0), good)
    for bad_t, year in ((np.where(np.eye(12, 3) > 0, np.nan, t), good), (t - 300.0, good),
                        (t, MoistureYear(1, np.zeros((12, 3)), -np.ones((12, 3)), np.full((12, 3), 800.0), np.zeros(3)))):
        with pytest.raises(CaseError, match="outside physics"):
            _check_physical(case, bad_t, np.full((12, 3), 900.0), year)
