"""Assembly and time marching of the finite-volume heat equation.

The semi-discrete system for the cell temperatures T [degC] is

    C dT/dt = -K T + b(t)

with C the diagonal of cell heat capacities, K the symmetric tridiagonal
conductance matrix (neighbour conductances plus the linearised boundary
conductances G on the first and last diagonal entries) and b(t) the boundary
drive ``G * T_ext(t) + Q(t)`` on the first and last cells.

Schemes at a constant step h (theta-methods and TR-BDF2):

* backward Euler:   (C + hK) T1 = C T0 + h b1                         (order 1)
* Crank-Nicolson:   (C + hK/2) T1 = (C - hK/2) T0 + h (b0 + b1)/2     (order 2)
* TR-BDF2, gamma = 2 - sqrt(2): a trapezoidal stage to t + gamma h, then
  BDF2 to t + h (Bank et al., IEEE Trans. Electron Devices 32, 1985;
  Hosea & Shampine, Appl. Numer. Math. 20, 1996).  Order 2, L-stable.

C + a h K is symmetric positive definite and tridiagonal, so it is factorised
once with LAPACK ``dpttrf`` (L D L^T) and each step costs one ``dpttrs``
solve, O(cells).  The heat that crosses each boundary in a step is taken from
the scheme's own quadrature of the boundary fluxes, so the sum over all cells
of the update telescopes and the energy balance closes at round-off.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator
from dataclasses import dataclass

import numpy as np
from scipy.linalg import lapack

SCHEMES = ("backward-euler", "crank-nicolson", "tr-bdf2")
GAMMA = 2.0 - math.sqrt(2.0)


@dataclass(frozen=True)
class Drive:
    """Boundary drive on one side: heat into the construction is ``G (T_ext - T_cell) + Q``.

    Parameters
    ----------
    conductance : float
        G, from the outer environment to the nearest cell centre [W K-1 per reference unit].
    t_ext : callable
        Environment temperature at times [s] -> [degC] (film air or sol-air
        temperature, or a prescribed surface temperature).
    q : callable
        Imposed heat into the construction at times [s] -> [W per reference unit].
    """

    conductance: float
    t_ext: Callable[[np.ndarray], np.ndarray]
    q: Callable[[np.ndarray], np.ndarray]


@dataclass(frozen=True)
class LinearSystem:
    """The assembled linear system for one construction.

    Attributes
    ----------
    capacity : (n,) [J K-1 per reference unit]
    conductance : (n-1,) [W K-1 per reference unit] between neighbouring cells
    inside, outside : Drive
    """

    capacity: np.ndarray
    conductance: np.ndarray
    inside: Drive
    outside: Drive

    @property
    def n(self) -> int:
        return self.capacity.size

    def k_diagonals(self) -> tuple[np.ndarray, np.ndarray]:
        """Main and off diagonal of K (off diagonal stored positive: K[i, i+1] = -e[i])."""
        g = self.conductance
        d = np.zeros(self.n)
        d[:-1] += g
        d[1:] += g
        d[0] += self.inside.conductance
        d[-1] += self.outside.conductance
        return d, g

    def k_times(self, temperature: np.ndarray) -> np.ndarray:
        """K @ T without forming K."""
        d, g = self.k_diagonals()
        out = d * temperature
        out[:-1] -= g * temperature[1:]
        out[1:] -= g * temperature[:-1]
        return out


class _Factor:
    """L D L^T factors of C + a K (symmetric positive definite, tridiagonal)."""

    def __init__(self, capacity: np.ndarray, d: np.ndarray, e: np.ndarray, a: float) -> None:
        diag = capacity + a * d
        off = -a * e
        self.d, self.e, info = lapack.dpttrf(diag, off)
        if info != 0:
            raise np.linalg.LinAlgError(f"matrix not positive definite (dpttrf info={info})")

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        x, info = lapack.dpttrs(self.d, self.e, rhs)
        if info != 0:
            raise np.linalg.LinAlgError(f"dpttrs failed (info={info})")
        return x


def _boundary_arrays(system: LinearSystem, times: np.ndarray) -> dict[str, np.ndarray]:
    """Evaluate both drives at all times at once (vectorised)."""
    return {
        "te_in": np.asarray(system.inside.t_ext(times), dtype=float) * np.ones_like(times),
        "q_in": np.asarray(system.inside.q(times), dtype=float) * np.ones_like(times),
        "te_out": np.asarray(system.outside.t_ext(times), dtype=float) * np.ones_like(times),
        "q_out": np.asarray(system.outside.q(times), dtype=float) * np.ones_like(times),
    }


def steady_state(system: LinearSystem, time: float = 0.0) -> np.ndarray:
    """Steady cell temperatures for the drives at ``time`` [degC]: solves K T = b."""
    gi, go = system.inside.conductance, system.outside.conductance
    if gi <= 0.0 and go <= 0.0:
        raise ValueError(
            "no steady state: neither boundary fixes a temperature (both are flux or adiabatic)"
        )
    t = np.array([time], dtype=float)
    bnd = _boundary_arrays(system, t)
    b = np.zeros(system.n)
    b[0] += gi * bnd["te_in"][0] + bnd["q_in"][0]
    b[-1] += go * bnd["te_out"][0] + bnd["q_out"][0]
    d, e = system.k_diagonals()
    fac = _Factor(np.zeros(system.n), d, e, 1.0)
    return fac.solve(b)


@dataclass
class MarchResult:
    """Arrays kept by a march, at the output times.

    Attributes
    ----------
    time : (m,) [s] from the start
    temperature : (m, n) [degC]
    q_in, q_out : (m,) heat into the construction through the inside and the
        outside surface, instantaneous at the output times [W per reference unit]
    heat_in, heat_out : float
        Heat into the construction through each surface over the whole march,
        from the scheme's own fluxes [J per reference unit]
    """

    time: np.ndarray
    temperature: np.ndarray
    q_in: np.ndarray
    q_out: np.ndarray
    heat_in: float
    heat_out: float
    heat_abs: float
    final: np.ndarray


def march(
    system: LinearSystem,
    initial: np.ndarray,
    step: float,
    n_steps: int,
    output_every: int = 1,
    scheme: str = "backward-euler",
    t0: float = 0.0,
    progress: Callable[[int], None] | None = None,
) -> MarchResult:
    """March the linear system ``n_steps`` steps of ``step`` seconds.

    Parameters
    ----------
    system : LinearSystem
    initial : (n,) initial cell temperatures [degC]
    step : float
        Time step [s].
    n_steps : int
        Number of steps; the march ends at ``t0 + n_steps * step``.
    output_every : int
        Keep every ``output_every``-th state (the initial state is kept).
    scheme : {"backward-euler", "crank-nicolson", "tr-bdf2"}
    t0 : float
        Time of the initial state [s].
    progress : callable, optional
        Called with the number of steps done, every few hundred steps.
    """
    if scheme not in SCHEMES:
        raise ValueError(f"scheme must be one of {SCHEMES}, got {scheme!r}")
    return _collect(system, initial, step, n_steps, output_every, scheme, t0, progress)


def _collect(system, initial, step, n_steps, output_every, scheme, t0, progress) -> MarchResult:
    n_out = n_steps // output_every + 1
    temps = np.empty((n_out, system.n))
    out_times = t0 + step * output_every * np.arange(n_out)
    tracker = _EnergyTracker()
    gen = _states(system, initial, step, n_steps, scheme, t0, progress, tracker)
    j = 0
    for index, state in gen:
        if index % output_every == 0:
            temps[j] = state
            j += 1
    bnd = _boundary_arrays(system, out_times)
    gi, go = system.inside.conductance, system.outside.conductance
    q_in = gi * (bnd["te_in"] - temps[:, 0]) + bnd["q_in"]
    q_out = go * (bnd["te_out"] - temps[:, -1]) + bnd["q_out"]
    return MarchResult(
        time=out_times,
        temperature=temps,
        q_in=q_in,
        q_out=q_out,
        heat_in=tracker.heat_in,
        heat_out=tracker.heat_out,
        heat_abs=tracker.heat_abs,
        final=state,
    )


class _EnergyTracker:
    def __init__(self) -> None:
        self.heat_in = 0.0
        self.heat_out = 0.0
        self.heat_abs = 0.0

    def add(self, e_in: float, e_out: float) -> None:
        self.heat_in += e_in
        self.heat_out += e_out
        self.heat_abs += abs(e_in) + abs(e_out)


def _states(
    system: LinearSystem,
    initial: np.ndarray,
    step: float,
    n_steps: int,
    scheme: str,
    t0: float,
    progress: Callable[[int], None] | None = None,
    tracker: _EnergyTracker | None = None,
) -> Iterator[tuple[int, np.ndarray]]:
    """Yield ``(step index, temperatures)`` from the initial state to the last step."""
    h = step
    cap = system.capacity
    d, e = system.k_diagonals()
    gi, go = system.inside.conductance, system.outside.conductance
    times = t0 + h * np.arange(n_steps + 1)
    bnd = _boundary_arrays(system, times)
    # drive vector entries: b = G T_ext + Q on the first and the last cell
    b_in = gi * bnd["te_in"] + bnd["q_in"]
    b_out = go * bnd["te_out"] + bnd["q_out"]
    if scheme == "tr-bdf2":
        bnd_g = _boundary_arrays(system, times[:-1] + GAMMA * h)
        bg_in = gi * bnd_g["te_in"] + bnd_g["q_in"]
        bg_out = go * bnd_g["te_out"] + bnd_g["q_out"]

    def q_pair(temp: np.ndarray, k: int, mid: bool = False) -> tuple[float, float]:
        if mid:
            return bg_in[k] - gi * temp[0], bg_out[k] - go * temp[-1]
        return b_in[k] - gi * temp[0], b_out[k] - go * temp[-1]

    temp = np.array(initial, dtype=float)
    yield 0, temp
    report = max(1, n_steps // 200)
    if scheme == "backward-euler":
        fac = _Factor(cap, d, e, h)
        for k in range(n_steps):
            rhs = cap * temp
            rhs[0] += h * b_in[k + 1]
            rhs[-1] += h * b_out[k + 1]
            temp = fac.solve(rhs)
            if tracker is not None:
                qi, qo = q_pair(temp, k + 1)
                tracker.add(h * qi, h * qo)
            yield k + 1, temp
            if progress is not None and (k + 1) % report == 0:
                progress(k + 1)
    elif scheme == "crank-nicolson":
        fac = _Factor(cap, d, e, 0.5 * h)
        for k in range(n_steps):
            rhs = cap * temp - 0.5 * h * system.k_times(temp)
            rhs[0] += 0.5 * h * (b_in[k] + b_in[k + 1])
            rhs[-1] += 0.5 * h * (b_out[k] + b_out[k + 1])
            new = fac.solve(rhs)
            if tracker is not None:
                qi0, qo0 = q_pair(temp, k)
                qi1, qo1 = q_pair(new, k + 1)
                tracker.add(0.5 * h * (qi0 + qi1), 0.5 * h * (qo0 + qo1))
            temp = new
            yield k + 1, temp
            if progress is not None and (k + 1) % report == 0:
                progress(k + 1)
    else:
        g = GAMMA
        w = (1.0 - g) / (2.0 - g)
        a = 1.0 / (g * (2.0 - g))
        c = (1.0 - g) ** 2 / (g * (2.0 - g))
        fac1 = _Factor(cap, d, e, 0.5 * g * h)
        fac2 = _Factor(cap, d, e, w * h)
        for k in range(n_steps):
            rhs = cap * temp - 0.5 * g * h * system.k_times(temp)
            rhs[0] += 0.5 * g * h * (b_in[k] + bg_in[k])
            rhs[-1] += 0.5 * g * h * (b_out[k] + bg_out[k])
            mid = fac1.solve(rhs)
            rhs = cap * (a * mid - c * temp)
            rhs[0] += w * h * b_in[k + 1]
            rhs[-1] += w * h * b_out[k + 1]
            new = fac2.solve(rhs)
            if tracker is not None:
                qi0, qo0 = q_pair(temp, k)
                qim, qom = q_pair(mid, k, mid=True)
                qi1, qo1 = q_pair(new, k + 1)
                tracker.add(
                    a * 0.5 * g * h * (qi0 + qim) + w * h * qi1,
                    a * 0.5 * g * h * (qo0 + qom) + w * h * qo1,
                )
            temp = new
            yield k + 1, temp
            if progress is not None and (k + 1) % report == 0:
                progress(k + 1)
