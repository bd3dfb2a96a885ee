"""Speed and memory of the numerical core, against baselines measured in the same run.

    python benchmarks/bench_solver.py [--repeat 3]

Every section prints absolute times (the median of ``--repeat`` runs, unless
a line says "1 run") and the ratio to a baseline timed in the same process
on the same data, so that a busy or slow machine moves both.  All cases are
invented scenarios written by this script; none of their inputs is measured.

(a) Stepping cost of :func:`layers.march.march` on a linear five-layer wall
    (100 cells, fixed films, an hourly year: 8,760 steps, every step kept),
    per cell-step, for backward Euler, Crank-Nicolson and TR-BDF2.  Baseline:
    a plain loop of one ``scipy.linalg.solve_banded`` call per backward-Euler
    step on the same matrices, built here from the mesh (``solve_banded``
    refactorises the band at every call).  The backward-Euler march must
    agree with it to 1e-9 K, or the baseline is not the same computation.
    For reference, the floor of any Python-level march is also printed: a
    loop of LAPACK ``dpttrs`` on a matrix factorised once.
(b) An insulated pipe with an automatic outside film (free and forced
    convection in a constant 2 m/s wind plus radiation) under a daily air
    cycle, 30 days at 10-minute steps: the march as ``run_march`` sets it up
    (``system_for`` tabulates the convection once; its cost is counted),
    against the same march with the table removed, so that the convection
    correlation is evaluated at every iteration (``system_for`` not counted).
    The two must agree to 1e-3 K on the outside surface.
(c) A year of invented hourly weather (sinusoids: air, sun on the wall,
    sky, wind) on a four-layer masonry wall with an automatic outside film
    and TR-BDF2: the whole ``simulate`` per year and per step, against the
    same wall with fixed films under the same weather.
(d) Sizing: :func:`layers.steady.steady_state` for 5,000 candidate
    thicknesses in one call, against one call per candidate (200 of them
    timed, the 5,000 extrapolated).
(e) Memory: peak traced memory (``tracemalloc``) of ``simulate`` for 10 and
    100 days of a small wall at 10-minute steps with hourly output (no
    times: ``tracemalloc`` slows the march).

BLAS and OpenMP are held to one thread (set before numpy is imported), so
no baseline and no measurement gets a second core; the march itself is
serial either way.

Exit status 0 (these are measurements, not tests), except 1 when (b)'s
ratio is below :data:`MIN_TABLE_RATIO` or (a)'s backward-Euler agreement
check fails.
"""

from __future__ import annotations

import os

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
import gc  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
import tracemalloc  # noqa: E402
from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import scipy.linalg  # noqa: E402
from scipy.linalg import lapack  # noqa: E402

from layers.api import load_case, parse_case  # noqa: E402
from layers.march import march  # noqa: E402
from layers.simulation import initial_state, simulate, system_for  # noqa: E402
from layers.steady import steady_state  # noqa: E402

#: (b) must be at least this many times faster with the convection table.
MIN_TABLE_RATIO = 4.0
#: (a) backward Euler: largest allowed difference between march and baseline [K].
AGREEMENT = 1e-9
#: (b) largest allowed difference in outside surface temperature, table or not [K].
TABLE_AGREEMENT = 1e-3


def timed(fn: Callable[[], object], repeat: int) -> tuple[float, object]:
    """Median wall time of ``repeat`` calls [s] and the last call's result."""
    times = []
    out = None
    for _ in range(repeat):
        gc.collect()
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times), out


# --------------------------------------------------------------------------- (a)
WALL_5 = """
title = "benchmark: five-layer wall, fixed films (invented)"
[[layers]]
material = "gypsum-plaster"
thickness = "15 mm"
cells = 20
[[layers]]
material = "brick"
thickness = "240 mm"
cells = 20
[[layers]]
material = "mineral-wool"
thickness = "120 mm"
cells = 20
[[layers]]
material = "timber"
thickness = "20 mm"
cells = 20
[[layers]]
material = "cement-sand-render"
thickness = "10 mm"
cells = 20
[series.cycles.t_out]
mean = "5 degC"
amplitude = "6 K"
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t_out"
surface_resistance = "0.04 m2*K/W"
[time]
duration = "365 d"
step = "1 h"
output_every = "1 h"
initial = "10 degC"
"""


def section_a(repeat: int) -> bool:
    case = parse_case(WALL_5)
    mesh = case.mesh()
    system = system_for(case, mesh)
    step, n_steps = case.time.step, case.time.n_steps
    initial = np.full(mesh.n, 10.0)
    cell_steps = mesh.n * n_steps
    print(f"(a) linear march: 5-layer wall, {mesh.n} cells, fixed films, {n_steps} steps of {step:g} s, every step kept")
    assert mesh.is_linear and not system.depends_on_temperature

    # the backward-Euler system, built from the mesh by hand
    capacity = mesh.capacity()
    k = mesh.conductivity()
    g = mesh.conductances(k)
    r_half_in, r_half_out = mesh.half_resistances(k)
    g_in = 1.0 / (case.inside.surface_resistance / mesh.area_inside + r_half_in)
    g_out = 1.0 / (case.outside.surface_resistance / mesh.area_outside + r_half_out)
    diag = capacity.copy()
    diag[:-1] += step * g
    diag[1:] += step * g
    diag[0] += step * g_in
    diag[-1] += step * g_out
    band = np.zeros((3, mesh.n))
    band[0, 1:] = -step * g
    band[1] = diag
    band[2, :-1] = -step * g

    def drives() -> tuple[np.ndarray, np.ndarray]:
        seconds = step * np.arange(1, n_steps + 1)  # backward Euler: the end of each step
        return system.inside.forcing(seconds)["air"], system.outside.forcing(seconds)["air"]

    def banded_loop() -> np.ndarray:
        t_in, t_out = drives()
        temps = np.empty((n_steps + 1, mesh.n))
        temp = temps[0] = initial
        for i in range(n_steps):
            rhs = capacity * temp
            rhs[0] += step * g_in * t_in[i]
            rhs[-1] += step * g_out * t_out[i]
            temp = temps[i + 1] = scipy.linalg.solve_banded((1, 1), band, rhs)
        return temps

    def factor_once_loop() -> np.ndarray:
        t_in, t_out = drives()
        d, e, info = lapack.dpttrf(diag, -step * g)
        assert info == 0
        temps = np.empty((n_steps + 1, mesh.n))
        temp = temps[0] = initial
        for i in range(n_steps):
            rhs = capacity * temp
            rhs[0] += step * g_in * t_in[i]
            rhs[-1] += step * g_out * t_out[i]
            temp, _ = lapack.dpttrs(d, e, rhs)
            temps[i + 1] = temp
        return temps

    t_base, reference = timed(banded_loop, repeat)
    t_floor, _ = timed(factor_once_loop, repeat)
    ns = 1e9 / cell_steps
    print(f"    baseline  solve_banded per step      {t_base:6.3f} s  {t_base * ns:6.0f} ns/cell-step")
    print(f"    reference dpttrs, factorised once    {t_floor:6.3f} s  {t_floor * ns:6.0f} ns/cell-step  (floor of a Python loop)")
    ok = True
    for scheme in ("backward-euler", "crank-nicolson", "tr-bdf2"):
        t, res = timed(lambda: march(system, initial, step, n_steps, output_every=1, scheme=scheme), repeat)
        print(f"    march     {scheme:16s}           {t:6.3f} s  {t * ns:6.0f} ns/cell-step  "
              f"x{t / t_base:5.2f} the baseline, x{t / t_floor:5.1f} the floor")
        if scheme == "backward-euler":
            diff = float(np.max(np.abs(res.temperature - reference)))
            ok = diff <= AGREEMENT
            print(f"    backward Euler, march vs baseline: largest difference {diff:.1e} K "
                  f"({'ok' if ok else 'FAILED'}: limit {AGREEMENT:g} K)")
    print("    (TR-BDF2 takes two stage solves per step, the others one)")
    # the exact path (what scheme = "auto" takes on this linear wall): time, and its
    # accuracy against TR-BDF2 at 1-minute steps over the first 30 days, both
    # seeing the forcing linear between the hours (the exact path's assumption)
    from layers.exact import exact_march

    t_exact, res = timed(lambda: exact_march(system, initial, step, n_steps, output_every=1), repeat)
    print(f"    exact     (modes, phi-functions)    {t_exact:6.3f} s  {t_exact * ns:6.0f} ns/cell-step  "
          f"x{t_exact / t_base:5.2f} the baseline, x{t_exact / t_floor:5.1f} the floor; "
          f"energy balance {abs(res.stored_final - res.stored_initial - res.heat_in - res.heat_out) / res.heat_abs:.1e}")
    days = 30
    fine = march(system, initial, 60.0, days * 1440, output_every=60, scheme="tr-bdf2", smooth_start=True)
    hourly = exact_march(system, initial, step, days * 24, output_every=1)
    print(f"    exact at 1 h vs TR-BDF2 at 1 min (30 days, every hour, every cell): largest difference "
          f"{float(np.max(np.abs(hourly.temperature - fine.temperature))):.1e} K (the daily cycle is sampled "
          "hourly by the exact path and every minute by TR-BDF2: most of it is that sampling)")
    return ok


# --------------------------------------------------------------------------- (b)
PIPE = """
title = "benchmark: insulated steam pipe outdoors (invented)"
[geometry]
kind = "cylinder"
inner_radius = "57 mm"
[[layers]]
material = "steel"
thickness = "4 mm"
[[layers]]
material = "mineral-wool"
thickness = "60 mm"
[series.cycles.air]
mean = "8 degC"
amplitude = "6 K"
[inside]
type = "temperature"
surface_temperature = "180 degC"
[outside]
type = "film"
air_temperature = "series:air"
film_coefficient = "auto"
emissivity = 0.3
wind_speed = "2 m/s"
[time]
duration = "30 d"
step = "10 min"
output_every = "1 h"
initial = "steady"
scheme = "{scheme}"
"""


def section_b(repeat: int) -> bool:
    print("(b) auto-film pipe, air 8 +- 6 degC daily, wind 2 m/s, 30 days at 10 min, hourly output")
    ok = True
    for scheme in ("backward-euler", "tr-bdf2"):
        case = parse_case(PIPE.format(scheme=scheme))
        mesh = case.mesh()
        plan = case.time
        initial, _ = initial_state(case, mesh, system_for(case, mesh))

        def tabled():
            system = system_for(case, mesh)  # tabulates the convection: counted
            return march(system, initial, plan.step, plan.n_steps, output_every=plan.output_stride, scheme=scheme)

        t_table, res = timed(tabled, repeat)
        plain = system_for(case, mesh)
        plain.outside._table = None  # the correlation at every iteration
        t_plain, base = timed(
            lambda: march(plain, initial, plan.step, plan.n_steps, output_every=plan.output_stride, scheme=scheme), 1)
        diff = float(np.max(np.abs(res.surface_out - base.surface_out)))
        ratio = t_plain / t_table
        ok = ok and ratio >= MIN_TABLE_RATIO
        same = "ok" if diff < TABLE_AGREEMENT else "TOO LARGE"
        print(f"    {scheme:15s} ({mesh.n} cells, {plan.n_steps} steps): table {t_table:6.2f} s, "
              f"correlation every iteration {t_plain:6.2f} s (1 run); ratio {ratio:5.1f} "
              f"(limit {MIN_TABLE_RATIO:g}); outside surface differs by {diff:.1e} K ({same}: limit {TABLE_AGREEMENT:g} K)")
    print("    (before the rewrite this case took 7.2 s with backward Euler on the 2-core machine; not measured here)")
    return ok


# --------------------------------------------------------------------------- (c)
MASONRY = """
title = "benchmark: masonry wall, invented weather year"
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
thickness = "15 mm"
[series]
file = "weather.csv"
[series.columns]
t_out = {{column = "T_out", unit = "degC"}}
solar = {{column = "I_south", unit = "W/m2"}}
t_sky = {{column = "T_sky", unit = "degC"}}
wind = {{column = "wind", unit = "m/s"}}
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t_out"
solar_absorptance = 0.6
solar_irradiance = "series:solar"
{outside}
[time]
step = "1 h"
output_every = "1 h"
initial = "steady"
scheme = "tr-bdf2"
[mesh]
max_cell = "20 mm"
"""
AUTO_OUTSIDE = """film_coefficient = "auto"
emissivity = 0.9
wind_speed = "series:wind"
sky_temperature = "series:t_sky"
"""
FIXED_OUTSIDE = 'surface_resistance = "0.04 m2*K/W"\n'


def invented_weather(path: Path) -> None:
    """An hourly year of INVENTED weather made of sinusoids (not measured data)."""
    hours = np.arange(365 * 24 + 1)
    hour_of_day = hours % 24
    season = np.cos(2.0 * np.pi * (hours - 200 * 24) / (365 * 24))  # warmest in late July
    daily = np.cos(2.0 * np.pi * (hour_of_day - 15) / 24)            # warmest at 15 h
    air = 10.0 + 9.0 * season + 5.0 * daily
    sun = (300.0 + 150.0 * season) * np.clip(np.sin(2.0 * np.pi * (hour_of_day - 6) / 24), 0.0, None)
    sky = air - 12.0 + 4.0 * daily
    wind = 3.0 + 2.0 * np.sin(2.0 * np.pi * hours / (24 * 5.3))
    stamps = np.datetime64("2026-01-01T00:00") + hours.astype("timedelta64[h]")
    lines = ["# INVENTED DATA, NOT MEASURED: sinusoids written by benchmarks/bench_solver.py",
             "time,T_out,I_south,T_sky,wind"]
    lines += [f"{str(s)[:16]},{a:.2f},{b:.1f},{c:.2f},{d:.2f}" for s, a, b, c, d in zip(stamps, air, sun, sky, wind)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def section_c(repeat: int, folder: Path) -> None:
    invented_weather(folder / "weather.csv")
    (folder / "auto.toml").write_text(MASONRY.format(outside=AUTO_OUTSIDE), encoding="utf-8")
    (folder / "fixed.toml").write_text(MASONRY.format(outside=FIXED_OUTSIDE), encoding="utf-8")
    start = time.perf_counter()
    auto = load_case(folder / "auto.toml")
    t_load = time.perf_counter() - start
    fixed = load_case(folder / "fixed.toml")
    n_steps, cells = auto.time.n_steps, auto.mesh().n
    print(f"(c) nonlinear year: 4-layer masonry wall, {cells} cells, auto outside film with sun, sky and wind "
          f"from an invented hourly series, {n_steps} steps of 1 h, tr-bdf2")
    t_fixed, _ = timed(lambda: simulate(fixed), repeat)
    t_auto, ds = timed(lambda: simulate(auto), repeat)
    print(f"    simulate, auto film:  {t_auto:6.2f} s per year, {t_auto / n_steps * 1e6:6.0f} us per step "
          f"(loading the case and its 8,761-row series: {t_load:.2f} s, not counted)")
    print(f"    baseline, fixed films, same weather: {t_fixed:6.2f} s per year; ratio auto/fixed {t_auto / t_fixed:4.1f}")
    print(f"    iterations per stage at most {ds.attrs.get('nonlinear_max_iterations')}, "
          f"unconverged steps {ds.attrs.get('nonlinear_unconverged_steps')}")


# --------------------------------------------------------------------------- (d)
def section_d(repeat: int) -> None:
    case = parse_case(PIPE.format(scheme="backward-euler"))
    layer = 2  # the mineral wool
    candidates = np.linspace(0.010, 0.250, 5000)
    sample = candidates[:: candidates.size // 200]
    print(f"(d) sizing the pipe of (b): steady_state for {candidates.size} thicknesses of layer {layer} (auto film)")
    t_vector, res = timed(lambda: steady_state(case, layer, candidates), repeat)

    def one_by_one():
        return [steady_state(case, layer, sample[i: i + 1]) for i in range(sample.size)]

    t_loop, singles = timed(one_by_one, 1)
    t_loop_all = t_loop / sample.size * candidates.size
    q_single = np.array([s.heat_flow[0] for s in singles])
    q_vector = res.heat_flow[:: candidates.size // 200]
    spread = float(np.max(np.abs(q_single - q_vector) / np.abs(q_single)))
    print(f"    one call, {candidates.size} candidates: {t_vector * 1e3:7.1f} ms ({res.iterations} iterations)")
    print(f"    one call per candidate: {t_loop * 1e3:7.1f} ms for {sample.size} (1 run), "
          f"extrapolated to {candidates.size}: {t_loop_all:5.1f} s; ratio {t_loop_all / t_vector:6.0f}")
    print(f"    heat flows agree to {spread:.1e} (relative)")


# --------------------------------------------------------------------------- (e)
SMALL_WALL = """
title = "benchmark: small wall (invented)"
[[layers]]
material = "brick"
thickness = "240 mm"
[[layers]]
material = "mineral-wool"
thickness = "100 mm"
[series.cycles.t_out]
mean = "5 degC"
amplitude = "6 K"
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t_out"
surface_resistance = "0.04 m2*K/W"
[time]
duration = "{days} d"
step = "10 min"
output_every = "1 h"
initial = "steady"
scheme = "backward-euler"
[mesh]
max_cell = "20 mm"
"""


def section_e() -> None:
    simulate(parse_case(SMALL_WALL.format(days=1)))  # imports and caches, not counted
    rows = []
    for days in (10, 100):
        case = parse_case(SMALL_WALL.format(days=days))
        gc.collect()
        tracemalloc.start()
        ds = simulate(case)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        rows.append((days, case.time.n_steps, case.mesh().n, peak, ds.nbytes))
        del ds
    print(f"(e) memory: small wall, {rows[0][2]} cells, 10-minute steps, hourly output, backward Euler (tracemalloc peak of simulate)")
    for days, steps, _, peak, nbytes in rows:
        print(f"    {days:3d} days ({steps:5d} steps): peak {peak / 1e6:5.2f} MB; the result Dataset holds {nbytes / 1e6:5.2f} MB")
    (_, _, _, p10, b10), (_, _, _, p100, b100) = rows
    print(f"    ratio 100 d / 10 d: {p100 / p10:4.2f} for 10 times the run; the peak grew by {(p100 - p10) / 1e6:.2f} MB "
          f"where the output grew by {(b100 - b10) / 1e6:.2f} MB")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="timings per figure (the median is printed)")
    args = parser.parse_args()
    start = time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="layers-bench-") as tmp:
        folder = Path(tmp)
        os.environ["LAYERS_CACHE_DIR"] = str(folder / "cache")  # never the user's cache
        parse_case(SMALL_WALL.format(days=1)).mesh()  # warm the unit registry, not counted
        results = {}
        sections = (("a", lambda: section_a(args.repeat)), ("b", lambda: section_b(args.repeat)),
                    ("c", lambda: section_c(args.repeat, folder)), ("d", lambda: section_d(args.repeat)),
                    ("e", section_e))
        for name, run in sections:
            began = time.perf_counter()
            results[name] = run()
            print(f"    [({name}) took {time.perf_counter() - began:.0f} s]")
        ok_a, ok_b = results["a"], results["b"]
    print(f"total {time.perf_counter() - start:.0f} s")
    if not ok_a:
        print("FAILED: (a) the backward-Euler march and its baseline disagree")
    if not ok_b:
        print(f"FAILED: (b) the convection table gains less than {MIN_TABLE_RATIO:g}x")
    return 0 if ok_a and ok_b else 1


if __name__ == "__main__":
    sys.exit(main())
