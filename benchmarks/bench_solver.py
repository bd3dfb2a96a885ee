"""Speed and memory of layers, against baselines timed in the same run on the same data.

    python benchmarks/bench_solver.py [--repeat 5] [--rounds 7] [--quick] [--sections abcde]

Every line prints absolute times (the median of ``--repeat`` runs unless it
says "1 run") and the ratio to a baseline timed in the same process, on the
same data, so that a busy or slow machine moves both: the ratios are what to
compare between machines and versions.  Every case, and the hourly weather
year they use, is an INVENTED scenario written by this script into a
temporary folder; none of it is measured data.

(a) An hourly year (8,760 steps) of a five-layer wall with fixed films under
    the invented hourly weather (outside air and sun; sampled hourly, so the
    forcing is linear between steps), at N = 100 and N = 400 cells, every
    cell kept every hour:

    * the default path: ``scheme = "auto"`` takes the exact modal path here
      (:func:`layers.exact.exact_march`; ``simulate`` end to end is printed too),
    * the stepping march, :func:`layers.march.march` with backward Euler and TR-BDF2,
      and :func:`layers.march.march_batch` with 256 walls together (as sweeps and
      uncertainty samples march; kept daily, to bound memory),
    * the plain baseline: a loop of one ``scipy.linalg.solve_banded`` call per
      backward-Euler step, on matrices built here from the mesh,
    * the floor of any Python-level loop: LAPACK ``dpttrs`` per step on a
      matrix factorised once with ``dpttrf``,
    * the compiled limit of stepping: the same backward-Euler loop in C
      (Thomas, factorised once), compiled here with the system's C compiler
      and called through ctypes (left out, and said, where there is none),
    * ``scipy.integrate.solve_ivp(method="BDF")`` on the same semi-discrete
      system C dT/dt = -K T + b(t) (the constant sparse Jacobian given), its
      tolerance (rtol = atol) tuned on the 30 days where TR-BDF2 at 1 h errs
      most to reach 0.01 K at both surface cells at every hour, then timed
      over the whole year (tighter if the year misses 0.01 K; ``--quick``:
      the 30-day time extrapolated to the year).

    Accuracy of each: the largest difference at both surface cells over all
    hours from the exact path, which is itself checked against TR-BDF2 at
    1- and 2-minute steps (and their Richardson extrapolation) over those 30 days.
    For backward Euler and TR-BDF2 the step each needs for 0.01 K is found
    on the 30 days that end with its worst hour at 1 h (started from the
    reference state), and checked over the year where that is cheap.

(b) 1,000 wall-years in one sweep: 40 insulation thicknesses x 25
    conductivities of a case-defined ``[materials.wool] base = "mineral-wool"``,
    hourly weather, ``output_every = "1 d"``; the public :func:`layers.sweep`
    (:func:`layers.sweeps.sweep`) timed end to end (the case read from its
    file included).  Baseline: the case of
    each of 20 grid points read from its own file and run with ``simulate``,
    extrapolated to 1,000.  The 20 points must equal the sweep's to 1e-6 K.
    Then a nonlinear sweep: 64 wall-years with automatic films (the stepping
    path, TR-BDF2), marched together, against two points run alone.

(c) Sizing with 10,000 candidate thicknesses (the hot-oil line of
    ``cases/hot-oil-line-touch.toml`` with ``thicknesses = {from = "20 mm",
    to = "219.98 mm", step = "0.02 mm"}``): :func:`layers.sizing.size` in
    process against one ``size`` call per candidate (20 timed, extrapolated);
    the command lines ``layers size`` and ``layers check`` on the same case,
    each in a fresh interpreter, in paired shuffled rounds with ``import
    numpy``, ``import xarray`` and ``import xarray`` plus a first Dataset.

(d) Peak memory of ``simulate`` for a 36-day run and a 360-day run (10 times
    longer, same ``output_every``), each in a fresh child process whose peak
    resident set size is read with ``resource.getrusage(RUSAGE_CHILDREN)`` by
    a fresh parent interpreter; the same case run for 1 day is the baseline
    (interpreter, imports, case).  ``tracemalloc`` peaks of the same runs are
    printed beside.

(e) Start-up: ``layers --version`` and ``python -c "import layers"`` in fresh
    interpreters, paired with ``python -c "import numpy"`` (the helpers of
    ``benchmarks/bench_startup.py``).

Targets are printed as met / NOT MET and never change the exit status.  BLAS
and OpenMP are held to one thread (set before numpy is imported, and passed
to every child process).  Exit status 0, except 1 when an agreement check
shows that a baseline does not compute the same thing as what it is compared
with.
"""

from __future__ import annotations

import os

for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS", "VECLIB_MAXIMUM_THREADS"):
    os.environ[_name] = "1"

import argparse  # noqa: E402
import dataclasses  # noqa: E402
import datetime as dt  # noqa: E402
import gc  # noqa: E402
import json  # noqa: E402
import math  # noqa: E402
import platform  # noqa: E402
import random  # noqa: E402
import re  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402
from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402
import scipy  # noqa: E402
import scipy.linalg  # noqa: E402
import scipy.sparse  # noqa: E402
from scipy.integrate import solve_ivp  # noqa: E402
from scipy.linalg import lapack  # noqa: E402

from bench_startup import layers_command, wall_time  # noqa: E402
from layers.api import load_case, sweep  # noqa: E402
from layers.exact import exact_march  # noqa: E402
from layers.march import march, march_batch  # noqa: E402
from layers.simulation import initial_state, simulate, system_for  # noqa: E402
from layers.sizing import size  # noqa: E402

HOUR = 3600.0
YEAR_HOURS = 8760
#: The accuracy every method of (a) is asked for, at both surface cells at every hour [K].
ACCURACY = 0.01
#: (a) backward Euler: largest allowed difference between the march and the plain loops [K].
AGREEMENT = 1e-9
#: (b) largest allowed difference between a sweep point and its lone run [K, W m-2] (the contract's).
SWEEP_AGREEMENT = 1e-6
#: (c) largest allowed difference between one-candidate and vectorised sizing [K] (a sanity check:
#: both iterate the same steady solver to its tolerance, so they agree far closer than this).
SIZING_AGREEMENT = 1e-3
#: (a) the windows on which tolerances and steps for 0.01 K are found [h].
WINDOW_HOURS = 30 * 24
#: (a) BDF tolerances tried (rtol = atol), loosest first.
BDF_TOLERANCES = (1e-4, 5e-5, 2e-5, 1e-5, 5e-6, 2e-6, 1e-6)
#: (a) walls marched together by the batched stepping path.
BATCH = 256
#: (a) a step's run over the full year is made only when it is expected to take less than this [s].
YEAR_CHECK_BUDGET = 8.0

#: Where the case files and the weather are written, and every cache and archive points.
FOLDER = Path(".")
#: Failed agreement checks (exit 1).
FAILURES: list[str] = []
#: Targets: (what, measured, target, met: True, False or None for "not measured").
TARGETS: list[tuple[str, str, str, bool | None]] = []


def timed(fn: Callable[[], object], repeat: int, warm: bool = False) -> tuple[float, object]:
    """Median wall time of ``repeat`` calls [s] and the last call's result (``warm``:
    after one call that is not counted, which pays for lazy imports and caches)."""
    times = []
    out = fn() if warm else None
    for _ in range(max(repeat, 1)):
        out = None
        gc.collect()
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times), out


def check(what: str, value: float, limit: float, unit: str = "K") -> str:
    """An agreement check: ``value`` must not exceed ``limit``; a failure is recorded (exit 1)."""
    ok = value <= limit
    if not ok:
        FAILURES.append(f"{what}: {value:.2e} {unit} (limit {limit:g} {unit})")
    return f"{value:.1e} {unit} ({'ok' if ok else 'FAILED'}, limit {limit:g} {unit})"


def target(what: str, measured: str, goal: str, met: bool | None) -> str:
    TARGETS.append((what, measured, goal, met))
    return "met" if met else ("NOT MET" if met is not None else "not measured")


def ms(seconds: float) -> str:
    return f"{seconds * 1e3:8.1f} ms"


# --------------------------------------------------------------------------- the invented weather
def invented_weather(path: Path, days: int = 365, seed: int = 2026) -> tuple[np.ndarray, np.ndarray]:
    """Write an hourly year of INVENTED weather (not measured): outside air from a
    seasonal and a daily cosine plus a seeded red noise, and sun on a wall that
    rises and sets under seeded clouds.  Returns the values as written
    (outside air [degC], irradiance [W m-2]), hour 0 to hour 24 * days."""
    rng = np.random.default_rng(seed)
    hours = np.arange(days * 24 + 1)
    hour_of_day = hours % 24
    season = np.cos(2.0 * np.pi * (hours - 200 * 24) / (365 * 24))   # warmest in late July
    daily = np.cos(2.0 * np.pi * (hour_of_day - 15) / 24)              # warmest at 15 h
    kicks = rng.normal(0.0, 0.6, hours.size)
    noise = np.zeros(hours.size)
    for i in range(1, hours.size):                                      # weather systems of a few days
        noise[i] = 0.97 * noise[i - 1] + kicks[i]
    air = np.round(10.0 + 9.0 * season + 4.0 * daily + noise, 2)
    clear = np.clip(0.6 + 0.4 * np.sin(2.0 * np.pi * hours / (24 * 3.7)) + rng.normal(0.0, 0.15, hours.size), 0.0, 1.0)
    sun = np.round((320.0 + 180.0 * season) * np.clip(np.sin(2.0 * np.pi * (hour_of_day - 6) / 24), 0.0, None) * clear, 1)
    stamps = np.datetime64("2026-01-01T00:00") + hours.astype("timedelta64[h]")
    lines = ["# INVENTED DATA, NOT MEASURED: written by benchmarks/bench_solver.py (cosines, seeded noise)",
             "time,T_out,I_south"]
    lines += [f"{str(s)[:16]},{a:.2f},{b:.1f}" for s, a, b in zip(stamps, air, sun)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return air, sun


WEATHER = """
[series]
file = "weather.csv"
[series.columns]
t_out = {column = "T_out", unit = "degC"}
solar = {column = "I_south", unit = "W/m2"}
[inside]
type = "film"
air_temperature = "20 degC"
surface_resistance = "0.13 m2*K/W"
[outside]
type = "film"
air_temperature = "series:t_out"
surface_resistance = "0.04 m2*K/W"
solar_absorptance = 0.6
solar_irradiance = "series:solar"
"""
#: The fixed films and absorptance above, for the hand-built baselines.
R_IN, R_OUT, T_IN, ABSORPTANCE = 0.13, 0.04, 20.0, 0.6

WALL_5 = """
title = "benchmark: five-layer wall, fixed films, invented weather"
[[layers]]
material = "gypsum-plaster"
thickness = "15 mm"
cells = {per_layer}
[[layers]]
material = "brick"
thickness = "240 mm"
cells = {per_layer}
[[layers]]
material = "mineral-wool"
thickness = "120 mm"
cells = {per_layer}
[[layers]]
material = "timber"
thickness = "20 mm"
cells = {per_layer}
[[layers]]
material = "cement-sand-render"
thickness = "10 mm"
cells = {per_layer}
[time]
duration = "{duration}"
step = "1 h"
output_every = "{output_every}"
initial = "steady"
scheme = "{scheme}"
"""


def wall_file(cells: int, duration: str = "365 d", output_every: str = "1 h", scheme: str = "auto") -> Path:
    path = FOLDER / f"wall-{cells}-{duration.replace(' ', '')}-{output_every.replace(' ', '')}-{scheme}.toml"
    path.write_text(WALL_5.format(per_layer=cells // 5, duration=duration, output_every=output_every, scheme=scheme)
                    + WEATHER, encoding="utf-8")
    return path


# --------------------------------------------------------------------------- (a)
class HandSystem:
    """The semi-discrete wall C dT/dt = -K T + b(t), built here from the mesh (not
    from the march): K tridiagonal, b from the fixed films and the sol-air
    temperature t_air + absorptance I R_out, linear between the hours."""

    def __init__(self, mesh, air: np.ndarray, sun: np.ndarray) -> None:
        self.n = mesh.n
        self.c = mesh.capacity()
        k = mesh.conductivity()
        self.g = mesh.conductances(k)
        r_half_in, r_half_out = mesh.half_resistances(k)
        self.g_in = 1.0 / (R_IN / mesh.area_inside + r_half_in)
        self.g_out = 1.0 / (R_OUT / mesh.area_outside + r_half_out)
        self.k_diag = np.zeros(self.n)
        self.k_diag[:-1] += self.g
        self.k_diag[1:] += self.g
        self.k_diag[0] += self.g_in
        self.k_diag[-1] += self.g_out
        self.sol_air = air + ABSORPTANCE * sun * R_OUT
        self.hours = HOUR * np.arange(air.size)

    def backward_euler(self, h: float) -> tuple[np.ndarray, np.ndarray]:
        """The diagonal and off-diagonal of C + h K."""
        return self.c + h * self.k_diag, -h * self.g

    def rhs(self, t: float, temp: np.ndarray) -> np.ndarray:
        """dT/dt = (-K T + b(t)) / C."""
        r = -self.k_diag * temp
        r[:-1] += self.g * temp[1:]
        r[1:] += self.g * temp[:-1]
        r[0] += self.g_in * T_IN
        r[-1] += self.g_out * np.interp(t, self.hours, self.sol_air)
        return r / self.c

    def jacobian(self):
        """-C^-1 K, sparse (constant)."""
        k = scipy.sparse.diags([-self.g, self.k_diag, -self.g], [-1, 0, 1], format="csc")
        return (scipy.sparse.diags(1.0 / self.c) @ (-k)).tocsc()


def banded_loop(hs: HandSystem, initial: np.ndarray, n_steps: int) -> np.ndarray:
    """Backward Euler at 1 h: one ``solve_banded`` per step (it factorises the band every call)."""
    diag, off = hs.backward_euler(HOUR)
    band = np.zeros((3, hs.n))
    band[0, 1:] = off
    band[1] = diag
    band[2, :-1] = off
    drive = HOUR * hs.g_out * hs.sol_air[1:n_steps + 1]  # backward Euler: the end of each step
    temps = np.empty((n_steps + 1, hs.n))
    temp = temps[0] = initial
    for i in range(n_steps):
        rhs = hs.c * temp
        rhs[0] += HOUR * hs.g_in * T_IN
        rhs[-1] += drive[i]
        temp = temps[i + 1] = scipy.linalg.solve_banded((1, 1), band, rhs)
    return temps


def floor_loop(hs: HandSystem, initial: np.ndarray, n_steps: int) -> np.ndarray:
    """Backward Euler at 1 h: ``dpttrs`` per step on a matrix factorised once (``dpttrf``)."""
    diag, off = hs.backward_euler(HOUR)
    d, e, info = lapack.dpttrf(diag, off)
    assert info == 0
    drive = HOUR * hs.g_out * hs.sol_air[1:n_steps + 1]
    temps = np.empty((n_steps + 1, hs.n))
    temp = temps[0] = initial
    for i in range(n_steps):
        rhs = hs.c * temp
        rhs[0] += HOUR * hs.g_in * T_IN
        rhs[-1] += drive[i]
        temp, _ = lapack.dpttrs(d, e, rhs)
        temps[i + 1] = temp
    return temps


C_LOOP = r"""
/* Backward Euler, prefactorised Thomas: the stepping limit of a compiled loop.
   (C + h K) T_(i+1) = C T_i + h b_(i+1); the L D L^T factors are made once. */
void be_loop(int n, int steps, const double *c, const double *diag, const double *off,
             double b_in, const double *b_out, double *temps)
{
    double l[n], d[n];
    d[0] = diag[0];
    for (int j = 1; j < n; j++) { l[j] = off[j - 1] / d[j - 1]; d[j] = diag[j] - l[j] * off[j - 1]; }
    for (int i = 0; i < steps; i++) {
        const double *t = temps + (long) i * n;
        double *x = temps + (long) (i + 1) * n;
        for (int j = 0; j < n; j++) x[j] = c[j] * t[j];
        x[0] += b_in;
        x[n - 1] += b_out[i];
        for (int j = 1; j < n; j++) x[j] -= l[j] * x[j - 1];
        x[n - 1] /= d[n - 1];
        for (int j = n - 2; j >= 0; j--) x[j] = x[j] / d[j] - l[j + 1] * x[j + 1];
    }
}
"""


def compiled_loop():
    """The C loop above, compiled here with the system's C compiler (``cc -O2``), or
    None (and why) where there is none: a baseline only, never part of the package."""
    import ctypes
    import shutil

    compiler = shutil.which("cc") or shutil.which("gcc")
    if compiler is None:
        return None, "no C compiler on this machine"
    source, library = FOLDER / "be_loop.c", FOLDER / "be_loop.so"
    source.write_text(C_LOOP)
    done = subprocess.run([compiler, "-O2", "-shared", "-fPIC", "-o", str(library), str(source)], capture_output=True, text=True)
    if done.returncode != 0:
        return None, f"the C baseline did not compile: {done.stderr.strip()[:200]}"
    lib = ctypes.CDLL(str(library))
    pointer = np.ctypeslib.ndpointer(dtype=np.float64, flags="C_CONTIGUOUS")
    lib.be_loop.argtypes = [ctypes.c_int, ctypes.c_int, pointer, pointer, pointer, ctypes.c_double, pointer, pointer]
    lib.be_loop.restype = None
    return lib.be_loop, f"{Path(compiler).name} -O2"


def c_loop(function, hs: HandSystem, initial: np.ndarray, n_steps: int) -> np.ndarray:
    """Backward Euler at 1 h in the compiled loop (same system and drive as :func:`floor_loop`)."""
    diag, off = hs.backward_euler(HOUR)
    drive = np.ascontiguousarray(HOUR * hs.g_out * hs.sol_air[1:n_steps + 1])
    temps = np.empty((n_steps + 1, hs.n))
    temps[0] = initial
    function(hs.n, n_steps, np.ascontiguousarray(hs.c), np.ascontiguousarray(diag), np.ascontiguousarray(off),
             HOUR * hs.g_in * T_IN, drive, temps)
    return temps


def surface_error(temps: np.ndarray, ref: np.ndarray) -> float:
    """Largest difference at both surface cells over all kept hours [K]."""
    return float(np.max(np.abs(temps[:, [0, -1]] - ref[: temps.shape[0], [0, -1]])))


def bdf(hs: HandSystem, initial: np.ndarray, first_hour: int, hours: int, tol: float) -> tuple[float, np.ndarray, object]:
    """solve_ivp BDF from ``initial`` at ``first_hour`` for ``hours`` hours, kept every hour:
    time [s], temperatures (hours + 1, n), the solution object."""
    jac = hs.jacobian()
    start = time.perf_counter()
    sol = solve_ivp(hs.rhs, (first_hour * HOUR, (first_hour + hours) * HOUR), initial, method="BDF", jac=jac, rtol=tol, atol=tol,
                    t_eval=HOUR * np.arange(first_hour, first_hour + hours + 1))
    elapsed = time.perf_counter() - start
    if not sol.success:
        raise RuntimeError(f"solve_ivp BDF failed: {sol.message}")
    return elapsed, sol.y.T, sol


def step_for_accuracy(system, ref: np.ndarray, scheme: str, order: int, hourly: np.ndarray) -> dict:
    """The steps per hour m a scheme needs for ACCURACY at both surface cells, found on the
    WINDOW_HOURS that end with its worst hour at 1 h (started from the reference state there)."""
    worst = int(np.argmax(np.max(np.abs(hourly[:, [0, -1]] - ref[:, [0, -1]]), axis=1)))
    start = int(min(max(worst + 24 - WINDOW_HOURS, 0), YEAR_HOURS - WINDOW_HOURS))
    err = surface_error(hourly[start:start + WINDOW_HOURS + 1], ref[start:start + WINDOW_HOURS + 1])
    tries: dict[int, tuple[float, float]] = {}

    def attempt(m: int) -> float:
        began = time.perf_counter()
        res = march(system, ref[start], HOUR / m, WINDOW_HOURS * m, output_every=m, scheme=scheme, t0=start * HOUR)
        tries[m] = (surface_error(res.temperature, ref[start:]), time.perf_counter() - began)
        return tries[m][0]

    # from the 1 h error by the scheme's order, up until a step meets ACCURACY ...
    low, m = 1, 1
    for _ in range(6):
        m = max(m + 1, math.ceil(m * (err / (0.8 * ACCURACY)) ** (1.0 / order)))
        err = attempt(m)
        if err <= ACCURACY:
            break
        low = m
    high = m if err <= ACCURACY else None
    # ... then the largest such step to within about 10 % (bisection on steps per hour)
    while high is not None and high > 1.1 * low + 1:
        mid = (low + high) // 2
        if attempt(mid) <= ACCURACY:
            high = mid
        else:
            low = mid
    m = high or m
    return dict(m=m, error=tries[m][0], window_start=start, window_time=tries[m][1],
                year_estimate=tries[m][1] * YEAR_HOURS / WINDOW_HOURS, tries=sorted((k, v[0]) for k, v in tries.items()),
                found=high is not None)


def section_a(repeat: int, quick: bool, air: np.ndarray, sun: np.ndarray) -> None:
    print("(a) an hourly year of a five-layer wall (plaster, brick, mineral wool, timber, render), fixed films,\n"
          "    invented hourly weather (outside air and sun, linear between the hours), initial steady state,\n"
          "    8,760 steps of 1 h, every cell kept every hour")
    for cells in (100, 400):
        case = load_case(wall_file(cells))
        mesh = case.mesh()
        system = system_for(case, mesh)
        initial, _ = initial_state(case, mesh, system)
        n = case.time.n_steps
        assert n == YEAR_HOURS and mesh.n == cells and mesh.is_linear and not system.depends_on_temperature
        hs = HandSystem(mesh, air, sun)
        per_cell = 1e9 / (cells * n)
        print(f"  N = {cells} cells")

        t_exact, exact = timed(lambda: exact_march(system, initial, HOUR, n, output_every=1), repeat, warm=True)
        ref = exact.temperature
        t_sim, ds = timed(lambda: simulate(case), repeat, warm=True)
        # what the target asks for: both surfaces at every hour (and the layer faces), no cell field
        from layers.exact import ModalBatch, ModalSystem

        t_surf, surf = timed(lambda: ModalBatch([ModalSystem(system)], HOUR).run(initial[None, :], n, keep_fields=False), repeat, warm=True)
        surf_diff = float(max(np.max(np.abs(surf.surface_in[0] - exact.surface_in)), np.max(np.abs(surf.surface_out[0] - exact.surface_out))))
        sim_diff = float(np.max(np.abs(ds["temperature"].values - ref)))
        t_be, be = timed(lambda: march(system, initial, HOUR, n, output_every=1, scheme="backward-euler"), repeat, warm=True)
        t_tr, tr = timed(lambda: march(system, initial, HOUR, n, output_every=1, scheme="tr-bdf2"), repeat, warm=True)
        # the stepping path as sweeps and samples use it: BATCH walls marched together (one tridiagonal
        # system; the cost does not depend on the members being alike), kept daily to bound memory
        t_batch, batch = timed(lambda: march_batch([system] * BATCH, [initial] * BATCH, HOUR, n, output_every=24,
                                                   scheme="backward-euler"), max(1, repeat // 2), warm=True)
        batch_diff = float(np.max(np.abs(batch[-1].temperature - be.temperature[::24][: batch[-1].temperature.shape[0]])))
        t_band, band = timed(lambda: banded_loop(hs, initial, n), repeat, warm=True)
        t_floor, floor = timed(lambda: floor_loop(hs, initial, n), repeat, warm=True)
        c_function, c_how = compiled_loop()
        if c_function is not None:
            t_c, c_temps = timed(lambda: c_loop(c_function, hs, initial, n), repeat, warm=True)

        # the step each stepping scheme needs for ACCURACY
        need = {name: step_for_accuracy(system, ref, name, order, res.temperature)
                for name, order, res in (("backward-euler", 1, be), ("tr-bdf2", 2, tr))}
        w0 = need["tr-bdf2"]["window_start"]  # the 30 days ending with TR-BDF2's worst hour at 1 h
        for name, found in need.items():
            found["year"] = None
            if not quick and found["found"] and found["year_estimate"] <= YEAR_CHECK_BUDGET:
                m = found["m"]
                began = time.perf_counter()
                res = march(system, initial, HOUR / m, YEAR_HOURS * m, output_every=m, scheme=name)
                found["year"] = (time.perf_counter() - began, surface_error(res.temperature, ref))

        # the reference: the exact path, against TR-BDF2 at 1 and 2 minutes over the same 30 days
        fine1 = march(system, ref[w0], 60.0, WINDOW_HOURS * 60, output_every=60, scheme="tr-bdf2", t0=w0 * HOUR).temperature
        fine2 = march(system, ref[w0], 120.0, WINDOW_HOURS * 30, output_every=30, scheme="tr-bdf2", t0=w0 * HOUR).temperature
        richardson = (4.0 * fine1 - fine2) / 3.0

        # solve_ivp BDF: the loosest tolerance that reaches ACCURACY on the 30 days where TR-BDF2 at 1 h
        # errs most (started from the reference state there), then the year (a tighter one if it misses)
        tuning = []
        for tol in BDF_TOLERANCES:
            t_w, y_w, sol_w = bdf(hs, ref[w0], w0, WINDOW_HOURS, tol)
            tuning.append((tol, surface_error(y_w, ref[w0:]), t_w, sol_w.nfev, sol_w.nlu))
            if tuning[-1][1] <= ACCURACY:
                break
        tol, e_w, t_w = tuning[-1][:3]
        if e_w > ACCURACY:
            FAILURES.append(f"(a) N = {cells}: solve_ivp BDF did not reach {ACCURACY} K at tolerance {tol:g}")
        if quick:
            t_bdf, e_bdf = t_w * YEAR_HOURS / WINDOW_HOURS, e_w
            bdf_note = f"(--quick: the time on hours {w0}..{w0 + WINDOW_HOURS} x 365/30, the error there)"
        else:
            year_runs = []
            for tol in [t for t in BDF_TOLERANCES if t <= tol][:3]:  # tighter if the year misses ACCURACY
                t_bdf, y_year, _ = bdf(hs, initial, 0, YEAR_HOURS, tol)
                e_bdf = surface_error(y_year, ref)
                year_runs.append((tol, e_bdf, t_bdf))
                if e_bdf <= ACCURACY:
                    break
            bdf_note = f"(the whole year, 1 run{'' if e_bdf <= ACCURACY else '; MISSED 0.01 K'})"

        print(f"    {'method':<46} {'year':>10} {'ns/cell-step':>13} {'speed-up vs plain':>17}   max error, surface cells")

        def row(label: str, seconds: float, error: float | None, note: str = "") -> None:
            err = "" if error is None else f"{error:.1e} K"
            print(f"    {label:<46} {seconds:8.3f} s {seconds * per_cell:11.1f}   {t_band / seconds:13.2f}x    {err:>10} {note}")

        row("default (auto = exact modal path), exact_march", t_exact, 0.0, "(the reference; see the reference check)")
        row(f"default, simulate end to end (auto -> {ds.attrs.get('scheme')})", t_sim, sim_diff, "(vs exact_march)")
        row("default, surfaces and layer faces only (no field)", t_surf, surf_diff, "(surface temperatures vs exact_march)")
        row("march backward Euler, 1 h", t_be, surface_error(be.temperature, ref))
        row("march TR-BDF2, 1 h (2 stage solves per step)", t_tr, surface_error(tr.temperature, ref))
        row(f"march_batch backward Euler, {BATCH} walls, per wall", t_batch / BATCH, None,
            f"(kept daily; a member vs the lone march: {batch_diff:.1e} K)")
        row("plain loop: solve_banded per step, BE 1 h", t_band, surface_error(band, ref), "(baseline)")
        row("floor: dpttrs per step, factorised once, BE", t_floor, surface_error(floor, ref))
        if c_function is not None:
            row(f"compiled C loop, BE 1 h, factorised once ({c_how})", t_c, surface_error(c_temps, ref))
        row(f"solve_ivp BDF, rtol = atol = {tol:g}", t_bdf, e_bdf, bdf_note)
        print(f"    agreement: march backward Euler vs solve_banded loop {check(f'(a) N={cells} BE march vs solve_banded', float(np.max(np.abs(be.temperature - band))), AGREEMENT)}; "
              f"dpttrs loop vs solve_banded loop {check(f'(a) N={cells} dpttrs vs solve_banded', float(np.max(np.abs(floor - band))), AGREEMENT)}"
              + (f"; C loop vs solve_banded loop {check(f'(a) N={cells} C loop vs solve_banded', float(np.max(np.abs(c_temps - band))), AGREEMENT)}"
                 if c_function is not None else f"; no C baseline ({c_how})"))
        print(f"    reference check on hours {w0}..{w0 + WINDOW_HOURS}, surface cells: exact path vs TR-BDF2 at 1 min {surface_error(fine1, ref[w0:]):.1e} K, "
              f"at 2 min {surface_error(fine2, ref[w0:]):.1e} K, their Richardson extrapolation {surface_error(richardson, ref[w0:]):.1e} K")
        print(f"    solve_ivp BDF, tolerance tuned on hours {w0}..{w0 + WINDOW_HOURS} (tolerance: error there, time, rhs calls, "
              "LU factorisations): " + "; ".join(f"{t:g}: {e:.1e} K, {s:.2f} s, {f}, {lu}" for t, e, s, f, lu in tuning))
        if not quick:
            print("    solve_ivp BDF over the year (tolerance: error, time): "
                  + "; ".join(f"{t:g}: {e:.1e} K, {s:.1f} s" for t, e, s in year_runs))
        for name, found in need.items():
            tries = ", ".join(f"{m} steps/h -> {e:.1e} K" for m, e in found["tries"])
            m = found["m"]
            text = (f"    {name} for {ACCURACY} K: " + (f"{m} steps per hour (step {HOUR / m:.0f} s)" if found["found"] else "not found")
                    + f" on hours {found['window_start']}..{found['window_start'] + WINDOW_HOURS} ({tries}); ")
            if found["year"] is not None:
                t_year, e_year = found["year"]
                text += f"the year at that step: {t_year:.2f} s, {t_year * per_cell / m:.0f} ns/cell-step, {e_year:.1e} K, {t_year / t_exact:.0f}x the default path"
            else:
                text += (f"the year at that step estimated from the window: {found['year_estimate']:.1f} s, "
                         f"{found['year_estimate'] / t_exact:.0f}x the default path (not run: "
                         + ("--quick)" if quick else f"over the {YEAR_CHECK_BUDGET:g} s budget)"))
            print(text)
        # the targets are about both surfaces at every hour: the default path producing those
        speed_loop = t_band / t_surf
        speed_bdf = t_bdf / t_surf
        print(f"    (with every cell kept every hour as well: {t_band / t_exact:.1f}x the plain loop, {t_bdf / t_exact:.0f}x solve_ivp BDF)")
        print(f"    targets (both surfaces every hour): default path {speed_loop:.1f}x faster than the plain loop at 1 h "
              f"({target(f'(a) N={cells}: default path vs plain solve_banded loop, 1 h', f'{speed_loop:.1f}x faster', 'at least 10x', speed_loop >= 10)}, target 10x); "
              f"{speed_bdf:.0f}x faster than solve_ivp BDF at {ACCURACY} K "
              f"({target(f'(a) N={cells}: default path vs solve_ivp BDF at 0.01 K', f'{speed_bdf:.0f}x faster', 'at least 1,000x', speed_bdf >= 1000)}, target 1,000x)")
        be_ns, tr_ns, floor_ns = t_be * per_cell, t_tr * per_cell, t_floor * per_cell
        if c_function is None:
            print(f"    stepping path per cell-step: backward Euler {be_ns:.0f} ns, TR-BDF2 {tr_ns:.0f} ns; dpttrs floor of a Python loop "
                  f"{floor_ns:.0f} ns. Target 'within 3x of a compiled C loop': not measured ({c_how})")
            target(f"(a) N={cells}: stepping path within 3x of a compiled C loop per cell-step",
                   f"BE {be_ns:.0f} ns, TR-BDF2 {tr_ns:.0f} ns per cell-step", "within 3x of C", None)
        else:
            c_ns = t_c * per_cell
            batch_ns = t_batch / BATCH * per_cell
            print(f"    stepping path per cell-step: backward Euler {be_ns:.0f} ns ({be_ns / c_ns:.1f}x the C loop), TR-BDF2 {tr_ns:.0f} ns "
                  f"({tr_ns / c_ns:.1f}x); {BATCH} walls marched together {batch_ns:.1f} ns ({batch_ns / c_ns:.1f}x); compiled C loop {c_ns:.1f} ns; "
                  f"dpttrs floor of a Python loop {floor_ns:.0f} ns ({floor_ns / c_ns:.1f}x); "
                  f"the default path {t_surf * per_cell:.1f} ns ({t_surf / t_c:.2f}x) with surfaces and faces only")
            target(f"(a) N={cells}: stepping path (backward Euler), one wall, within 3x of a compiled C loop per cell-step",
                   f"BE {be_ns:.0f} ns = {be_ns / c_ns:.1f}x C ({c_ns:.1f} ns); TR-BDF2 {tr_ns / c_ns:.1f}x", "within 3x of C", be_ns <= 3.0 * c_ns)
            target(f"(a) N={cells}: stepping path (backward Euler), {BATCH} walls together, within 3x of a compiled C loop per cell-step",
                   f"{batch_ns:.1f} ns = {batch_ns / c_ns:.1f}x C ({c_ns:.1f} ns)", "within 3x of C", batch_ns <= 3.0 * c_ns)


# --------------------------------------------------------------------------- (b)
SWEEP_WALL = """
title = "benchmark: 1,000 wall-years (invented weather)"
[materials.wool]
base = "mineral-wool"
conductivity = "{conductivity}"
[[layers]]
material = "gypsum-plaster"
thickness = "15 mm"
[[layers]]
material = "brick"
thickness = "240 mm"
[[layers]]
material = "wool"
thickness = "{thickness}"
[[layers]]
material = "cement-sand-render"
thickness = "10 mm"
[time]
duration = "365 d"
step = "1 h"
output_every = "1 d"
initial = "steady"
"""
SWEEP_TABLES = """
[[sweep]]
name = "wool_thickness"
key = "layers.3.thickness"
range = {from = "50 mm", to = "245 mm", count = 40}
[[sweep]]
name = "wool_conductivity"
key = "materials.wool.conductivity"
range = {from = "0.030 W/(m*K)", to = "0.042 W/(m*K)", count = 25}
"""
THICKNESSES = np.linspace(50.0, 245.0, 40)       # [mm], as the range above
CONDUCTIVITIES = np.linspace(0.030, 0.042, 25)    # [W/(m*K)]


def section_b(repeat: int) -> None:
    path = FOLDER / "sweep.toml"
    path.write_text(SWEEP_WALL.format(thickness="120 mm", conductivity="0.036 W/(m*K)") + WEATHER + SWEEP_TABLES, encoding="utf-8")
    points = THICKNESSES.size * CONDUCTIVITIES.size
    print(f"(b) {points} wall-years in one sweep: {THICKNESSES.size} wool thicknesses x {CONDUCTIVITIES.size} conductivities of "
          "[materials.wool] base = \"mineral-wool\",\n    4-layer wall, fixed films, invented hourly weather, 8,760 steps of 1 h, "
          "output_every = 1 d")
    sweep(load_case(path))  # first call: imports and caches, not counted
    t_sweep, ds = timed(lambda: sweep(load_case(path)), min(repeat, 3))
    assert np.allclose(ds["wool_thickness"].values, THICKNESSES) and np.allclose(ds["wool_conductivity"].values, CONDUCTIVITIES)

    chosen = np.linspace(0, points - 1, 20).round().astype(int)
    lone = []
    start = time.perf_counter()
    for flat in chosen:
        i, j = divmod(int(flat), CONDUCTIVITIES.size)
        one = FOLDER / f"point-{i}-{j}.toml"
        one.write_text(SWEEP_WALL.format(thickness=f"{THICKNESSES[i]:.15g} mm", conductivity=f"{CONDUCTIVITIES[j]:.15g} W/(m*K)") + WEATHER,
                       encoding="utf-8")
        lone.append((i, j, simulate(load_case(one))))
    t_loop = time.perf_counter() - start
    t_all = t_loop / chosen.size * points
    diff = 0.0
    for i, j, one in lone:
        member = ds.isel(wool_thickness=i, wool_conductivity=j)
        for name in ("surface_temperature_inside", "surface_temperature_outside", "heat_flow_inside", "heat_flow_outside"):
            diff = max(diff, float(np.max(np.abs(member[name].values - one[name].values))))
    print(f"    layers.sweep, case file read included         {t_sweep:7.2f} s  ({t_sweep / points * 1e3:.2f} ms per wall-year, "
          f"scheme {ds.attrs.get('scheme')}, {ds.nbytes / 1e6:.0f} MB Dataset)")
    print(f"    baseline: load_case + simulate per point       {t_loop:7.2f} s for {chosen.size} points (1 run), extrapolated to "
          f"{points}: {t_all:6.1f} s; the sweep is {t_all / t_sweep:.1f}x faster")
    print(f"    agreement: the {chosen.size} lone runs vs their sweep points (surface temperatures, heat flows): "
          + check("(b) sweep points vs lone simulate", diff, SWEEP_AGREEMENT, "K or W m-2"))
    print(f"    target: 1,000 wall-years under 3 s: {t_sweep:.2f} s ({target('(b) 1,000 wall-years in one sweep', f'{t_sweep:.2f} s', 'under 3 s', t_sweep < 3.0)})")
    section_b_nonlinear()


#: (b) the nonlinear sweep: automatic films on both sides (ISO 6946 inside, wind and sky outside)
AUTO_WEATHER = WEATHER.replace('surface_resistance = "0.13 m2*K/W"', 'film_coefficient = "auto"\nheat_flow_direction = "horizontal"').replace(
    'surface_resistance = "0.04 m2*K/W"', 'film_coefficient = "auto"\nwind_speed = "3 m/s"\nemissivity = 0.9')
AUTO_POINTS = 64


def section_b_nonlinear() -> None:
    """64 wall-years whose films depend on the surface temperature: the stepping path (TR-BDF2),
    marched together by the sweep, against the same points run one by one."""
    tables = SWEEP_TABLES.replace("count = 40", "count = 8").replace("count = 25", "count = 8")
    path = FOLDER / "sweep-auto.toml"
    path.write_text(SWEEP_WALL.format(thickness="120 mm", conductivity="0.036 W/(m*K)") + AUTO_WEATHER + tables, encoding="utf-8")
    print(f"    nonlinear: {AUTO_POINTS} wall-years with automatic films on both sides (8 thicknesses x 8 conductivities), TR-BDF2")
    began = time.perf_counter()
    ds = sweep(load_case(path))
    t_sweep = time.perf_counter() - began
    chosen = [(0, 0), (7, 7)]
    start = time.perf_counter()
    diff = 0.0
    for i, j in chosen:
        one = FOLDER / f"auto-{i}-{j}.toml"
        thickness = float(ds["wool_thickness"].values[i])
        conductivity = float(ds["wool_conductivity"].values[j])
        one.write_text(SWEEP_WALL.format(thickness=f"{thickness:.15g} mm", conductivity=f"{conductivity:.15g} W/(m*K)") + AUTO_WEATHER,
                       encoding="utf-8")
        alone = simulate(load_case(one))
        member = ds.isel(wool_thickness=i, wool_conductivity=j)
        for name in ("surface_temperature_inside", "surface_temperature_outside"):
            diff = max(diff, float(np.max(np.abs(member[name].values - alone[name].values))))
    t_one = (time.perf_counter() - start) / len(chosen)
    print(f"    layers.sweep (stepping points marched together)  {t_sweep:7.2f} s  ({t_sweep / AUTO_POINTS * 1e3:.0f} ms per wall-year, "
          f"scheme {ds.attrs.get('scheme')}); one by one: {t_one:.2f} s per point (1 run each of {len(chosen)}), "
          f"{t_one * AUTO_POINTS:.1f} s for {AUTO_POINTS}: the sweep is {t_one * AUTO_POINTS / t_sweep:.1f}x faster")
    print(f"    agreement: lone runs vs their sweep points (surface temperatures): "
          + check("(b) nonlinear sweep points vs lone simulate", diff, SWEEP_AGREEMENT, "K"))


# --------------------------------------------------------------------------- (c)
def sizing_file() -> Path:
    text = (ROOT / "cases" / "hot-oil-line-touch.toml").read_text(encoding="utf-8")
    text, count = re.subn(r"^thicknesses = .*$", 'thicknesses = {from = "20 mm", to = "219.98 mm", step = "0.02 mm"}', text,
                          flags=re.M)
    assert count == 1
    path = FOLDER / "hot-oil-10000.toml"
    path.write_text(text, encoding="utf-8")
    return path


def child_env() -> dict[str, str]:
    """Every child: one BLAS thread, bytecode kept in the temporary folder, the
    temporary cache and archive (as ``bench_startup.py`` does)."""
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env.update(LAYERS_CACHE_DIR=str(FOLDER / "cache"), LAYERS_ARCHIVE=str(FOLDER / "archive"),
               PYTHONPYCACHEPREFIX=str(FOLDER / "pycache"), PYTHONPATH=str(ROOT))
    return env


def paired_rounds(commands: dict[str, list[str]], rounds: int) -> dict[str, list[float]]:
    """Wall time of each command in a fresh interpreter, ``rounds`` shuffled rounds
    after one warm-up round (bytecode, file-system cache, units cache)."""
    env = child_env()
    for command in commands.values():
        wall_time(command, env)
    times: dict[str, list[float]] = {name: [] for name in commands}
    for _ in range(rounds):
        order = list(commands)
        random.shuffle(order)
        for name in order:
            times[name].append(wall_time(commands[name], env))
    return times


def print_rounds(times: dict[str, list[float]], base: str) -> dict[str, float]:
    """Median time and median paired ratio to ``base`` of each command; returns the ratios."""
    ratios = {}
    for name, values in times.items():
        ratios[name] = statistics.median(v / b for v, b in zip(values, times[base]))
        print(f"    {name:<52} {statistics.median(values) * 1e3:7.0f} ms   x{ratios[name]:5.2f} {base}")
    return ratios


def section_c(repeat: int, rounds: int) -> None:
    path = sizing_file()
    case = load_case(path)
    thick = np.asarray(case.sizing.thicknesses)
    print(f"(c) sizing: the hot-oil line of cases/hot-oil-line-touch.toml (an invented scenario) with {thick.size} candidate "
          f"thicknesses\n    ({thick[0] * 1e3:g} to {thick[-1] * 1e3:g} mm by 0.02 mm; touch limit, heat-loss budget, service temperature)")
    began = time.perf_counter()
    size(case)
    t_first = time.perf_counter() - began
    t_size, ds = timed(lambda: size(case), repeat)
    sample = np.linspace(0, thick.size - 1, 20).round().astype(int)

    def one_by_one():
        return [size(dataclasses.replace(case, sizing=dataclasses.replace(case.sizing, thicknesses=(float(thick[i]),))))
                for i in sample]

    t_loop, singles = timed(one_by_one, 1)
    t_loop_all = t_loop / sample.size * thick.size
    diff = max(float(np.max(np.abs(one["surface_temperature_outside"].values[0] - ds["surface_temperature_outside"].values[i])))
               for i, one in zip(sample, singles))
    print(f"    layers.sizing.size, {thick.size} candidates in one call   {ms(t_size)}   (the first call in this process: {t_first * 1e3:.0f} ms)")
    print(f"    baseline: one size call per candidate           {ms(t_loop)} for {sample.size} (1 run), extrapolated to "
          f"{thick.size}: {t_loop_all:.1f} s; one call is {t_loop_all / t_size:.0f}x faster")
    print("    agreement: outside surface temperature, one-candidate calls vs the vectorised call: "
          + check("(c) one-candidate size vs vectorised size", diff, SIZING_AGREEMENT))
    print(f"    recommended thickness {ds.attrs['recommended_thickness'] * 1e3:.2f} mm")
    print(f"    target: size() under 1 s: {t_size * 1e3:.0f} ms ({target('(c) layers.sizing.size, 10,000 candidates, in process', f'{t_size * 1e3:.0f} ms', 'under 1 s', t_size < 1.0)})")

    layers = layers_command()
    (FOLDER / "archive").mkdir(exist_ok=True)
    write = ("import os, tempfile, numpy, xarray; folder = tempfile.mkdtemp(dir=os.environ['LAYERS_ARCHIVE']); "
             "xarray.Dataset({'a': ('x', numpy.zeros(3))}).to_netcdf(folder + '/a.nc', engine='netcdf4')")
    commands = {
        "numpy": [sys.executable, "-c", "import numpy"],
        "xarray": [sys.executable, "-c", "import xarray"],
        "write": [sys.executable, "-c", write],
        "check": [*layers, "check", str(path)],
        "size": [*layers, "size", str(path)],
    }
    labels = {
        "numpy": 'python -c "import numpy"',
        "xarray": 'python -c "import xarray"',
        "write": 'python -c "import xarray", a first Dataset to netCDF',
        "check": "layers check CASE",
        "size": "layers size CASE (table to /dev/null, file archived)",
    }
    print(f"    command lines, fresh interpreters, {rounds} paired shuffled rounds (median wall time, median ratio to layers check "
          "within a round):")
    times = paired_rounds(commands, rounds)
    print_rounds({labels[k]: v for k, v in times.items()}, labels["check"])
    med = {name: statistics.median(values) for name, values in times.items()}
    ratio = statistics.median(a / b for a, b in zip(times["size"], times["check"]))
    print(f"    layers size takes {(med['size'] - med['check']) * 1e3:.0f} ms more than layers check. Beyond import numpy, "
          f"import xarray costs {(med['xarray'] - med['numpy']) * 1e3:.0f} ms, and import xarray with a first Dataset written "
          f"to netCDF {(med['write'] - med['numpy']) * 1e3:.0f} ms;\n    neither layers check nor layers size imports xarray: "
          "size archives its table with netCDF4 directly (results.Table)")
    print(f"    target: layers size within 1.5x of layers check: {ratio:.2f}x "
          f"({target('(c) layers size vs layers check, command lines', f'{ratio:.2f}x', 'within 1.5x', ratio <= 1.5)})")


# --------------------------------------------------------------------------- (d)
CHILD = """
import json, os, sys, time
for name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ[name] = "1"
from layers.api import load_case
from layers.simulation import simulate
case = load_case(sys.argv[1])
trace = sys.argv[2] == "trace"
if trace:
    import tracemalloc
    tracemalloc.start()
ds = simulate(case)
peak = tracemalloc.get_traced_memory()[1] if trace else None
print(json.dumps({"nbytes": ds.nbytes, "scheme": ds.attrs.get("scheme"), "steps": case.time.n_steps,
                  "records": ds.sizes["time"], "traced_peak": peak}))
"""
#: A fresh parent interpreter: runs one child, then reads the children's peak resident set size.
WRAPPER = """
import resource, subprocess, sys
done = subprocess.run(sys.argv[1:], capture_output=True, text=True)
if done.returncode:
    sys.exit(done.stderr)
print(done.stdout.strip())
print(resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss)
"""


def peak_memory(path: Path, trace: bool) -> dict:
    done = subprocess.run([sys.executable, "-c", WRAPPER, sys.executable, "-c", CHILD, str(path), "trace" if trace else "plain"],
                          env=child_env(), cwd=FOLDER, capture_output=True, text=True)
    if done.returncode:
        raise SystemExit(f"memory child failed: {done.stderr.strip()}")
    info, rss = done.stdout.strip().splitlines()[-2:]
    out = json.loads(info)
    out["rss"] = int(rss) * 1024  # ru_maxrss is in KiB on Linux
    return out


def section_d() -> None:
    print("(d) peak memory of simulate: the five-layer wall of (a), 100 cells, 1 h steps, invented weather; each run in a "
          "fresh child process\n    (peak RSS from getrusage(RUSAGE_CHILDREN) in a fresh parent; tracemalloc peak of "
          "simulate in a second child); baseline: the same case for 1 day")
    print(f"    {'case':<28} {'run':>6} {'records':>8} {'peak RSS':>11} {'vs 1 d':>10} {'traced peak':>12} {'Dataset':>10}")
    for scheme, every in (("auto", "1 d"), ("tr-bdf2", "1 d"), ("auto", "1 h")):
        rows = {}
        for days in (1, 36, 360):
            path = wall_file(100, duration=f"{days} d", output_every=every, scheme=scheme)
            rows[days] = peak_memory(path, trace=False)
            rows[days]["traced_peak"] = peak_memory(path, trace=True)["traced_peak"]
        base, traced_base = rows[1]["rss"], rows[1]["traced_peak"]
        label = f"{rows[36]['scheme']}, output every {every}"
        for days, r in rows.items():
            print(f"    {label:<28} {days:4d} d {r['records']:8d} {r['rss'] / 2**20:7.1f} MiB {(r['rss'] - base) / 2**20:+6.1f} MiB "
                  f"{r['traced_peak'] / 2**20:8.2f} MiB {r['nbytes'] / 2**20:6.2f} MiB")
        total = rows[360]["rss"] / rows[36]["rss"]
        traced = rows[360]["traced_peak"] / rows[36]["traced_peak"]
        growth = (rows[360]["traced_peak"] - traced_base) / 2**20, (rows[360]["nbytes"] - rows[1]["nbytes"]) / 2**20
        verdict = target(f"(d) peak RSS of simulate, 10x longer run ({label})", f"{total:.2f}x (tracemalloc peak {traced:.2f}x)",
                         "under 1.5x", total < 1.5)
        print(f"    {label}: 360 d / 36 d peak RSS {total:.2f}x ({verdict}, target under 1.5x), tracemalloc peak {traced:.2f}x; "
              f"from 1 d to 360 d the traced peak grew {growth[0]:.2f} MiB, the result Dataset {growth[1]:.2f} MiB")


# --------------------------------------------------------------------------- (e)
def section_e(rounds: int) -> None:
    layers = layers_command()
    commands = {
        'python -c "import numpy" (baseline)': [sys.executable, "-c", "import numpy"],
        "layers --version": [*layers, "--version"],
        'python -c "import layers"': [sys.executable, "-c", "import layers"],
    }
    print(f"(e) start-up, fresh interpreters, {rounds} paired shuffled rounds (median wall time, median ratio within a round; "
          "bench_startup.py also times layers check)")
    print_rounds(paired_rounds(commands, rounds), 'python -c "import numpy" (baseline)')


# --------------------------------------------------------------------------- main
def machine() -> str:
    cpu = platform.processor() or platform.machine()
    try:
        for text in Path("/proc/cpuinfo").read_text().splitlines():
            if text.startswith("model name"):
                cpu = text.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return f"{platform.system()} {platform.release()}, {os.cpu_count()} cores ({cpu})"


def main() -> int:
    global FOLDER
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="timings per in-process figure (the median is printed; the sweep of (b) at most 3)")
    parser.add_argument("--rounds", type=int, default=7, help="paired rounds of the command-line timings of (c) and (e)")
    parser.add_argument("--quick", action="store_true",
                        help="(a): time solve_ivp on 30 days and extrapolate, and run no year at the 0.01 K steps")
    parser.add_argument("--sections", default="abcde", help="which sections to run, e.g. ac")
    args = parser.parse_args()
    start = time.perf_counter()
    stamp = dt.datetime.now(dt.timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    print(f"layers benchmarks, {stamp}; {machine()}; Python {platform.python_version()}, numpy {np.__version__}, "
          f"scipy {scipy.__version__}; BLAS and OpenMP held to one thread")
    print(f"load average at the start: {', '.join(f'{v:.2f}' for v in os.getloadavg())}")
    print("All cases and the weather year are INVENTED scenarios written by this script (not measured data).")
    print("Times are medians of the repeats unless a line says 1 run; compare the ratios, not the absolute times.\n")
    with tempfile.TemporaryDirectory(prefix="layers-bench-") as tmp:
        FOLDER = Path(tmp)
        os.environ["LAYERS_CACHE_DIR"] = str(FOLDER / "cache")  # never the user's cache or archive
        os.environ["LAYERS_ARCHIVE"] = str(FOLDER / "archive")
        air, sun = invented_weather(FOLDER / "weather.csv")
        sections = {
            "a": lambda: section_a(args.repeat, args.quick, air, sun),
            "b": lambda: section_b(args.repeat),
            "c": lambda: section_c(args.repeat, args.rounds),
            "d": section_d,
            "e": lambda: section_e(args.rounds),
        }
        for name in args.sections:
            began = time.perf_counter()
            sections[name]()
            print(f"    [({name}) took {time.perf_counter() - began:.0f} s]\n")
    print("targets (measurements, not tests: they never change the exit status)")
    for what, measured, goal, met in TARGETS:
        verdict = "met" if met else ("NOT MET" if met is not None else "not measured")
        print(f"  {verdict:<12} {what}: {measured} (target {goal})")
    print(f"load average at the end: {', '.join(f'{v:.2f}' for v in os.getloadavg())}; total {time.perf_counter() - start:.0f} s")
    for failure in FAILURES:
        print(f"FAILED agreement check: {failure}")
    return 1 if FAILURES else 0


if __name__ == "__main__":
    sys.exit(main())
