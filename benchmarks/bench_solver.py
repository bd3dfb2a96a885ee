"""Solver speed, as ratios against baselines measured in the same run.

Run:  python benchmarks/bench_solver.py

1. Linear march: the factorise-once banded march (LAPACK dpttrf/dpttrs)
   against a dense solve per step of the same system (numpy.linalg.solve),
   for a wall of 50, 200 and 800 cells.  The banded march should cost O(n)
   per step, so its advantage grows with n.
2. Vectorised steady sizing: 5,000 candidate thicknesses in one call of
   layers.steady.steady_state against 50 one-candidate calls (per candidate).
3. A year of hourly weather with automatic films (nonlinear march): seconds
   per simulated year, against the linear march of the same wall.
"""

from __future__ import annotations

import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np

from layers.case import load_case
from layers.simulation import assemble, mesh_for, simulate
from layers.solver import march
from layers.steady import steady_state


def _best(fn, repeat: int = 3) -> float:
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def _wall(cells: int, folder: Path) -> Path:
    path = folder / f"wall{cells}.toml"
    path.write_text(
        textwrap.dedent(
            f"""
            [[layers]]
            material = "brick"
            thickness = "240 mm"
            cells = {cells}
            [series.cycles.c]
            mean = "5 degC"
            amplitude = "6 K"
            [inside]
            type = "film"
            air_temperature = "20 degC"
            [outside]
            type = "film"
            air_temperature = "series:c"
            [time]
            duration = "2 d"
            step = "10 min"
            """
        )
    )
    return path


def bench_linear(folder: Path) -> None:
    print("1. linear march, 288 steps: banded factorise-once vs dense solve per step")
    for cells in (50, 200, 800):
        case = load_case(_wall(cells, folder))
        mesh = mesh_for(case)
        system = assemble(case, mesh)
        t0 = np.full(mesh.n, 10.0)
        banded = _best(lambda: march(system, t0, 600.0, 288))
        d, e = system.k_diagonals()
        k = np.diag(d) - np.diag(e, 1) - np.diag(e, -1)
        a = np.diag(system.capacity) + 600.0 * k

        def dense() -> None:
            temp = t0.copy()
            for _ in range(288):
                temp = np.linalg.solve(a, system.capacity * temp)

        base = _best(dense, repeat=1)
        print(f"   {cells:4d} cells: banded {banded * 1e3:7.1f} ms, dense {base * 1e3:8.1f} ms, ratio dense/banded {base / banded:6.1f}")


def bench_steady(folder: Path) -> None:
    print("2. steady sizing: 5000 candidates vectorised vs one call per candidate")
    case = load_case(Path(__file__).resolve().parents[1] / "cases" / "hot-oil-line-touch.toml")
    many = np.linspace(0.01, 0.2, 5000)
    vector = _best(lambda: steady_state(case, 2, many))
    single = _best(lambda: [steady_state(case, 2, many[i : i + 1]) for i in range(50)], repeat=1) / 50
    print(f"   vectorised {vector * 1e3:.1f} ms for 5000 ({vector / 5000 * 1e6:.1f} us each); "
          f"one at a time {single * 1e3:.2f} ms each; ratio {single / (vector / 5000):.0f}x")


def bench_year(folder: Path) -> None:
    print("3. a year of hourly steps, wall of ~40 cells: nonlinear (auto films) vs linear")
    base = _wall(40, folder).read_text().replace('duration = "2 d"', 'duration = "365 d"').replace('step = "10 min"', 'step = "1 h"')
    lin = folder / "lin.toml"
    lin.write_text(base)
    non = folder / "non.toml"
    non.write_text(base.replace('air_temperature = "series:c"', 'air_temperature = "series:c"\nfilm_coefficient = "auto"'))
    t_lin = _best(lambda: simulate(load_case(lin)), repeat=1)
    t_non = _best(lambda: simulate(load_case(non)), repeat=1)
    print(f"   linear {t_lin:.2f} s, nonlinear {t_non:.2f} s per simulated year; ratio {t_non / t_lin:.1f}")


if __name__ == "__main__":
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        bench_linear(folder)
        bench_steady(folder)
        bench_year(folder)
