"""The exact path for linear cases (layers/exact.py).

References: the exact solution of a linear system of ODEs with forcing
linear in time (variation of constants; Hochbruck & Ostermann, "Exponential
integrators", Acta Numerica 19 (2010), the phi-functions; from memory).  The
expected values below are written out in the tests from the eigenmodes of
matrices the tests build themselves, or taken from a fine-step run of the
stepping march (a different method), never from the code under test.
"""

from __future__ import annotations

import math
import textwrap
import tomllib

import numpy as np
import pytest

from layers.case import parse_case
from layers.errors import CaseError
from layers.exact import _phi, exact_march
from layers.march import march
from layers.simulation import simulate, system_for
from tests.test_march import SLAB, _slab_mode


def _case(text: str, base_dir=None):
    text = textwrap.dedent(text)
    return parse_case(tomllib.loads(text), text=text, base_dir=base_dir)


def test_a_mode_decays_exactly():
    """A discrete eigenmode of the slab (K and C built in the test) decays as
    exp(-lambda t) at any step: 1e-12 relative after 12 h of 2-hour steps,
    where every stepping scheme errs (backward Euler by about 4 % here)."""
    case = _case(SLAB.format(cells=40))
    lam, v = _slab_mode(40)
    res = exact_march(system_for(case, case.mesh()), 20.0 * v, 7200.0, 6)
    np.testing.assert_allclose(res.temperature[-1], 20.0 * v * math.exp(-lam * 43200.0), rtol=1e-12, atol=1e-14)


def test_phi_functions_match_their_closed_forms_and_series():
    """phi_1..3 against the closed forms in extended precision (math.fsum on
    the exact Taylor series with 40 terms) across the switch between series
    and closed form at s = 0.5: 1e-14 relative."""
    s = np.array([1e-12, 1e-6, 0.1, 0.49, 0.5, 0.51, 2.0, 30.0, 700.0])
    decay, p1, p2, p3 = _phi(s)

    def series(x, k):
        return math.fsum((-x) ** n / math.factorial(n + k) for n in range(60)) if x < 5 else None

    for i, x in enumerate(s):
        for got, k in ((p1[i], 1), (p2[i], 2), (p3[i], 3)):
            want = series(x, k)
            if want is None:  # large s: the closed forms are well conditioned
                want = {1: -math.expm1(-x) / x, 2: (1 - (-math.expm1(-x) / x)) / x}.get(k)
                if want is None:
                    want = (0.5 - (1 - (-math.expm1(-x) / x)) / x) / x
            assert got == pytest.approx(want, rel=1e-14, abs=1e-300)
        assert decay[i] == pytest.approx(math.exp(-x), rel=1e-15)


WALL = """
[[layers]]
material = "gypsum-plaster"
thickness = "15 mm"
[[layers]]
material = "brick"
thickness = "240 mm"
[[layers]]
material = "mineral-wool"
thickness = "120 mm"
[[layers]]
material = "cement-sand-render"
thickness = "10 mm"
[mesh]
max_cell = "10 mm"
[series]
file = "weather.csv"
[series.columns]
t = {{column = "T", unit = "degC"}}
sun = {{column = "I", unit = "W/m2"}}
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t"
surface_resistance = "0.04 m2*K/W"
solar_absorptance = 0.6
solar_irradiance = "series:sun"
[time]
duration = "5 d"
step = "{step}"
output_every = "1 h"
initial = "{initial}"
scheme = "{scheme}"
"""


def _weather(folder) -> None:
    """An invented hourly series: a daily cycle with noise and a sun that rises and sets."""
    rng = np.random.default_rng(7)
    rows = ["time,T,I"]
    for hour in range(5 * 24 + 1):
        t = 5 + 7 * math.sin(2 * math.pi * (hour - 9) / 24) + rng.normal(0, 1.5)
        sun = max(0.0, 600 * math.sin(2 * math.pi * (hour - 6) / 24)) * rng.uniform(0.5, 1.0)
        day, h = divmod(hour, 24)
        rows.append(f"2026-03-{1 + day:02d}T{h:02d}:00,{t:.2f},{sun:.1f}")
    (folder / "weather.csv").write_text("\n".join(rows) + "\n")


@pytest.mark.parametrize("initial", ["steady", "-5 degC"])
def test_exact_at_the_sample_step_matches_a_one_minute_stepping_run(tmp_path, initial):
    """With hourly weather (linear between its samples, as the series reader
    interpolates it), the exact path at 1-hour steps matches TR-BDF2 at
    1-minute steps to 1e-3 K in every cell at every hour (the contract's
    figure; TR-BDF2's own error at 1 minute, second order from about 0.2 K
    at 1 hour, is of order 1e-5 K) and closes the energy balance at
    round-off."""
    _weather(tmp_path)
    exact = simulate(_case(WALL.format(step="1 h", initial=initial, scheme="auto"), tmp_path))
    fine = simulate(_case(WALL.format(step="1 min", initial=initial, scheme="tr-bdf2"), tmp_path))
    assert exact.attrs["scheme"] == "exact" and exact.attrs["scheme_requested"] == "auto"
    assert float(np.max(np.abs(exact["temperature"].values - fine["temperature"].values))) < 1e-3
    assert exact.attrs["energy_balance_error"] < 1e-12


def test_exact_periodic_start_repeats_itself(tmp_path):
    """Under a generated daily cycle, asked for explicitly, the exact periodic
    start is the periodic state of the cycle as the exact path sees it
    (linear between the hours): the state after one period equals the start
    to 1e-9 K (round-off of a 24-step march).  The run warns that the cycle
    is interpolated between steps; under auto the case steps with tr-bdf2."""
    text = SLAB.format(cells=30).replace('surface_temperature = "0 degC"\n[time]', 'surface_temperature = "series:c"\n[time]')
    text = text.replace('duration = "1 h"\nstep = "1 h"\ninitial = "0 degC"', 'duration = "1 d"\nstep = "1 h"\ninitial = "periodic"')
    text += '[series.cycles.c]\nmean = "10 degC"\namplitude = "8 K"\n'
    assert simulate(_case(text)).attrs["scheme"] == "tr-bdf2"
    with pytest.warns(UserWarning, match="linear between steps"):
        ds = simulate(_case(text.replace('initial = "periodic"', 'initial = "periodic"\nscheme = "exact"')))
    assert ds.attrs["scheme"] == "exact"
    t = ds["temperature"].values
    np.testing.assert_allclose(t[-1], t[0], atol=1e-9)


def test_auto_steps_where_the_case_is_not_linear_and_exact_is_refused_there():
    """An automatic film makes the case nonlinear: auto steps with tr-bdf2, and
    an explicit scheme = "exact" is refused naming the reason."""
    text = SLAB.format(cells=10).replace(
        '[outside]\ntype = "temperature"\nsurface_temperature = "0 degC"',
        '[outside]\ntype = "film"\nair_temperature = "0 degC"\nfilm_coefficient = "auto"',
    )
    assert simulate(_case(text)).attrs["scheme"] == "tr-bdf2"
    with pytest.raises(CaseError, match="exact needs a linear case"):
        simulate(_case(text.replace('step = "1 h"', 'step = "1 h"\nscheme = "exact"')))


def test_exact_and_the_march_agree_on_a_fine_step():
    """The same linear system from the same state under a constant flux (so the
    exact path is exact at any step): exact at 1-minute steps against TR-BDF2
    at 5-second steps over 4 hours.  TR-BDF2 errs by 3.5e-5 K at 1-minute
    steps here (the flux switched on at t = 0 excites the fast modes), so
    second order leaves about 2.5e-7 K at 5 s: tolerance 1e-6 K."""
    text = SLAB.format(cells=20).replace(
        '[inside]\ntype = "temperature"\nsurface_temperature = "0 degC"',
        '[inside]\ntype = "flux"\nheat_flux = "50 W/m2"',
    )
    case = _case(text)
    system = system_for(case, case.mesh())
    start = np.full(case.mesh().n, 5.0)
    exact = exact_march(system, start, 60.0, 240, output_every=60)
    stepped = march(system, start, 5.0, 2880, output_every=720, scheme="tr-bdf2")
    np.testing.assert_allclose(exact.temperature, stepped.temperature, atol=1e-6)


def test_auto_takes_the_exact_path_only_where_the_forcing_is_linear_between_steps(tmp_path):
    """Hourly weather stepped hourly: exact.  The same weather stepped every
    2 hours (samples between the steps): tr-bdf2.  Both sides flux or
    adiabatic (a singular system): tr-bdf2."""
    _weather(tmp_path)
    assert simulate(_case(WALL.format(step="1 h", initial="steady", scheme="auto"), tmp_path)).attrs["scheme"] == "exact"
    coarse = WALL.format(step="2 h", initial="steady", scheme="auto").replace('output_every = "1 h"', 'output_every = "2 h"')
    assert simulate(_case(coarse, tmp_path)).attrs["scheme"] == "tr-bdf2"
    boxed = SLAB.format(cells=10).replace(
        '[inside]\ntype = "temperature"\nsurface_temperature = "0 degC"', '[inside]\ntype = "flux"\nheat_flux = "5 W/m2"'
    ).replace('[outside]\ntype = "temperature"\nsurface_temperature = "0 degC"', '[outside]\ntype = "adiabatic"')
    assert simulate(_case(boxed)).attrs["scheme"] == "tr-bdf2"


def test_a_state_outside_physics_is_caught_between_kept_states():
    """A flux drawn out of an insulated slab passes absolute zero within hours;
    with only the last of 240 hourly states kept, the exact path still stops
    at the first step outside physics (it checks the surface cells, where a
    diffusion problem's extremes lie, at every step), not at the end."""
    from layers.march import UnphysicalState

    text = SLAB.format(cells=10).replace(
        '[inside]\ntype = "temperature"\nsurface_temperature = "0 degC"', '[inside]\ntype = "flux"\nheat_flux = "-3000 W/m2"'
    )
    case = _case(text)
    with pytest.raises(UnphysicalState) as info:
        exact_march(system_for(case, case.mesh()), np.zeros(case.mesh().n), 3600.0, 240, output_every=240)
    # the surface cell falls about 15 K an hour near the crossing (7 h here); the
    # stop comes at the hour it passes absolute zero, long before the kept state
    assert info.value.time < 24 * 3600.0 and -290.0 < info.value.low <= -273.15


COMPOSITE = """
[materials.heavy]
conductivity = "1.4 W/(m*K)"
density = "2100 kg/m3"
specific_heat = "900 J/(kg*K)"
[materials.light]
conductivity = "0.04 W/(m*K)"
density = "30 kg/m3"
specific_heat = "1400 J/(kg*K)"
[[layers]]
material = "heavy"
thickness = "50 mm"
cells = {n1}
[[layers]]
material = "light"
thickness = "100 mm"
cells = {n2}
[inside]
type = "temperature"
surface_temperature = "0 degC"
[outside]
type = "temperature"
surface_temperature = "0 degC"
[time]
duration = "3 h"
step = "10 min"
output_every = "10 min"
initial = "20 degC"
"""


def _composite_series(x: np.ndarray, t: float) -> np.ndarray:
    """A two-layer slab (k, rho c per layer; thicknesses a, b), both faces held
    at 0 from a uniform 20 degC: the eigenfunction expansion of the composite
    medium (Carslaw & Jaeger, Conduction of Heat in Solids, 2nd ed., 1959,
    sec. 12.8; Ozisik, Heat Conduction, composite media; from memory).  With
    beta_i = lambda / sqrt(alpha_i) the modes are sin(beta_1 x) in the first
    layer and A sin(beta_2 (a + b - x)) in the second; continuity of
    temperature and flux at x = a gives the eigenvalues
    k1 beta1 cos(beta1 a) sin(beta2 b) + k2 beta2 sin(beta1 a) cos(beta2 b) = 0,
    and the coefficients follow from orthogonality with weight rho c."""
    from scipy.optimize import brentq

    k1, rc1, a = 1.4, 2100.0 * 900.0, 0.05
    k2, rc2, b = 0.04, 30.0 * 1400.0, 0.10
    s1, s2 = math.sqrt(k1 / rc1), math.sqrt(k2 / rc2)

    def f(lam):
        b1, b2 = lam / s1, lam / s2
        return k1 * b1 * np.cos(b1 * a) * np.sin(b2 * b) + k2 * b2 * np.sin(b1 * a) * np.cos(b2 * b)

    # every root up to lambda^2 t = 60 (later terms below e^-60); the roots lie about 0.02 apart
    grid = np.linspace(1e-6, math.sqrt(60.0 / t), 200_001)
    values = f(grid)
    roots = [brentq(f, grid[i], grid[i + 1], xtol=1e-15) for i in np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:]))]
    out = np.zeros_like(x)
    for lam in roots:
        b1, b2 = lam / s1, lam / s2
        amp = math.sin(b1 * a) / math.sin(b2 * b)
        mode = np.where(x <= a, np.sin(b1 * x), amp * np.sin(b2 * (a + b - x)))
        weight = rc1 * 20.0 * (1 - math.cos(b1 * a)) / b1 + rc2 * 20.0 * amp * (1 - math.cos(b2 * b)) / b2
        norm = rc1 * (a / 2 - math.sin(2 * b1 * a) / (4 * b1)) + rc2 * amp**2 * (b / 2 - math.sin(2 * b2 * b) / (4 * b2))
        out += weight / norm * mode * math.exp(-lam * lam * t)
    return out


def test_exact_path_meets_the_composite_slab_series_to_its_spatial_error():
    """The exact path has no time-step error, so against the composite slab's
    eigen-series (see _composite_series) what is left is the mesh's: second
    order in the cell size.  Doubling the cells of each layer (40+80 to
    80+160) must cut the largest error at 1 h and 3 h by 2^p with p between
    1.8 and 2.8 (the graded mesh changes its grading a little with the
    count), and the finer mesh must be within 5e-4 K of the series (its
    observed error is 2.4e-4 K at 1 h)."""
    errors = {}
    for n in (40, 80):
        text = COMPOSITE.format(n1=n, n2=2 * n)
        ds = simulate(_case(text))
        assert ds.attrs["scheme"] == "exact"
        errors[n] = [
            float(np.max(np.abs(ds["temperature"].values[i] - _composite_series(ds["x"].values, 600.0 * i)))) for i in (6, 18)
        ]
    for coarse, fine in zip(errors[40], errors[80]):
        assert 1.8 <= math.log2(coarse / fine) <= 2.8
        assert fine < 5e-4


def test_a_periodic_start_with_a_flux_side_is_not_stopped_by_its_helper_run():
    """The exact periodic start runs one period from rest as a step of the
    computation; with a flux drawn out of a hot plate that helper run passes
    below absolute zero although the construction never does.  Steady state
    of this case (constant forcing, so the periodic state is the steady one):
    the outside face is 1500 - 140 x 0.2 / 0.02 = 100 degC (Fourier's law
    through one layer)."""
    text = """
    [materials.light]
    conductivity = "0.02 W/(m*K)"
    density = "10 kg/m3"
    specific_heat = "1000 J/(kg*K)"
    [[layers]]
    material = "light"
    thickness = "200 mm"
    [inside]
    type = "temperature"
    surface_temperature = "1500 degC"
    [outside]
    type = "flux"
    heat_flux = "-140 W/m2"
    [time]
    duration = "1 d"
    step = "1 h"
    initial = "periodic"
    [mesh]
    max_cell = "2 mm"
    """
    ds = simulate(_case(text))
    assert ds.attrs["scheme"] == "exact"
    np.testing.assert_allclose(ds["surface_temperature_outside"].values, 100.0, atol=1e-6)
