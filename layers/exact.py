"""The exact path: linear, time-invariant cases advanced exactly in time.

Where no coefficient depends on temperature (constant conductivities, fixed
films, temperature, flux or adiabatic boundaries, no contents) the
semi-discrete system of :mod:`layers.march`,

    C dT/dt = -K T + e_in beta_in(t) + e_out beta_out(t),
    beta(t) = G (theta(t) - 0) + Q(t)   (the Thevenin drive of each side),

is diagonalised once: with y = C^(1/2) T the matrix A = C^(-1/2) K C^(-1/2)
is symmetric tridiagonal, A = V diag(lambda) V^T (LAPACK ``stemr`` through
:func:`scipy.linalg.eigh_tridiagonal`), and each mode z = V^T y obeys

    dz_j/dt = -lambda_j z_j + p_j beta(t),      p = V^T C^(-1/2) e.

Taking each drive linear between the step's end points (exact for series
sampled at the step or at a multiple of it, which the reader interpolates
linearly) a step of length h is exact (exponential integrator; Hochbruck &
Ostermann, Acta Numerica 19, 2010, the phi-functions, from memory):

    z(h) = e^(-s) z(0) + h p [beta_0 (phi_1 - phi_2) + beta_1 phi_2],  s = lambda h,

and so is the heat through each surface over the step, from the exact
integral of the modes,

    int_0^h z = h phi_1 z(0) + h^2 p [beta_0 (phi_2 - phi_3) + beta_1 phi_3],

with phi_1 = (1 - e^-s)/s, phi_2 = (1 - phi_1)/s, phi_3 = (1/2 - phi_2)/s.
The energy balance closes at round-off and, for forcing that is linear
between steps (constants, series sampled on the step times), there is no
time-step error: the only error left is the mesh's.  Forcing that is not
(a generated cycle, a series sampled between the steps) is interpolated
linearly between the steps; ``scheme = "auto"`` then steps with TR-BDF2
instead (:func:`layers.simulation.scheme_for`).  The periodic state is exact too: one period
from rest gives the forced response r, and the periodic start is
z_0 = r / (1 - e^(-lambda P)) mode by mode.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from typing import NamedTuple

import numpy as np

from layers.constants import ABSOLUTE_ZERO_CELSIUS, HIGHEST_PHYSICAL_TEMPERATURE
from layers.march import CHUNK, MarchResult, System, UnphysicalState, _check_physical


def is_exact_ready(system: System) -> bool:
    """True when the exact path applies: nothing depends on temperature, no
    contents, and at least one side holds a temperature or a film (else K is
    singular and the uniform mode would decay by round-off)."""
    fixes_a_temperature = any(ex.kind in ("film", "temperature") for ex in (system.inside, system.outside))
    return not system.depends_on_temperature and system.water is None and fixes_a_temperature


def _phi(s: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """e^-s, phi_1, phi_2, phi_3 of s >= 0, by series where the closed forms cancel."""
    s = np.asarray(s, dtype=float)
    small = s < 0.5
    safe = np.where(small, 1.0, s)
    decay = np.exp(-s)
    phi1 = np.where(small, 0.0, -np.expm1(-safe) / safe)
    phi2 = np.where(small, 0.0, (1.0 - phi1) / safe)
    phi3 = np.where(small, 0.0, (0.5 - phi2) / safe)
    if np.any(small):
        x = s[small]
        # phi_k(s) = sum_n (-s)^n / (n + k)!  (14 terms: below 1e-16 for s < 0.5)
        terms = np.array([(-x) ** n for n in range(14)])
        fact = np.array([math.factorial(n) for n in range(17)], dtype=float)
        phi1[small] = np.sum(terms / fact[1:15, None], axis=0)
        phi2[small] = np.sum(terms / fact[2:16, None], axis=0)
        phi3[small] = np.sum(terms / fact[3:17, None], axis=0)
    return decay, phi1, phi2, phi3


class ModalSystem:
    """The eigenmodes of a linear system (see the module docstring)."""

    def __init__(self, system: System) -> None:
        from scipy.linalg import eigh_tridiagonal

        if not is_exact_ready(system):
            raise ValueError("the exact path needs a linear case (constant k, fixed films, no contents)")
        self.system = system
        mesh = system.mesh
        k, g, (r_in, r_out) = system.conduction(np.zeros(mesh.n))
        self.k, self.g, self.r_in, self.r_out = k, g, r_in, r_out
        # boundary conductances (constant): the Thevenin resistance plus the half cell
        self.g_in = self._conductance(system.inside, system.area_in, r_in)
        self.g_out = self._conductance(system.outside, system.area_out, r_out)
        c = system.capacity
        diag = np.zeros(mesh.n)
        diag[:-1] += g
        diag[1:] += g
        diag[0] += self.g_in
        diag[-1] += self.g_out
        s = 1.0 / np.sqrt(c)
        lam, vec = eigh_tridiagonal(diag * s * s, -g * s[:-1] * s[1:])
        self.lam = np.maximum(lam, 0.0)  # round-off below zero for a singular K
        self.to_cells = s[:, None] * vec  # T = to_cells @ z
        self.to_modes = vec.T * np.sqrt(c)[None, :]  # z = to_modes @ T
        self.p_in = vec[0, :] * s[0]
        self.p_out = vec[-1, :] * s[-1]

    @staticmethod
    def _conductance(exchange, area: float, r_half: float) -> float:
        from layers.exchange import thevenin

        forcing = exchange.forcing(np.zeros(1))
        film = exchange.film(forcing, np.zeros(1))
        _, resistance = thevenin(float(film.h[0]), float(film.t_eq[0]), float(film.q_imposed[0]), float(area))
        return 0.0 if math.isinf(resistance) else 1.0 / (resistance + r_half)

    def drives(self, seconds: np.ndarray) -> tuple[np.ndarray, np.ndarray, dict, dict]:
        """beta_in, beta_out at ``seconds`` [W per reference unit], and the forcing of each side."""
        from layers.exchange import thevenin

        out = []
        forcings = []
        for ex, g, area in ((self.system.inside, self.g_in, self.system.area_in), (self.system.outside, self.g_out, self.system.area_out)):
            forcing = ex.forcing(seconds)
            film = ex.film(forcing, np.zeros(seconds.shape))
            theta, resistance = thevenin(np.broadcast_to(film.h, seconds.shape), film.t_eq, film.q_imposed, area)
            imposed = np.broadcast_to(film.q_imposed * area, seconds.shape)
            beta = np.where(np.isinf(resistance), imposed, g * np.where(np.isinf(resistance), 0.0, theta))
            out.append(np.asarray(beta, dtype=float) + 0.0 * seconds)
            forcings.append((forcing, film))
        return out[0], out[1], forcings[0], forcings[1]


def _recurrence(decay: np.ndarray, start: np.ndarray, forced: np.ndarray) -> np.ndarray:
    """x_i = decay x_(i-1) + forced_i for every mode at once, from x_(-1) = start.

    A parallel prefix over the steps (Hillis & Steele, Commun. ACM 29, 1986,
    from memory): after the pass with shift s each x_i holds the sum over the
    last 2 s steps, so log2(m) array passes replace m scalar ones; the powers
    of the decay only shrink (0 <= decay <= 1), so nothing overflows.
    """
    x = forced.copy()
    x[0] += decay * start
    power = decay.copy()
    shift = 1
    while shift < x.shape[0]:
        previous = x.copy()
        x[shift:] += power[None, :] * previous[:-shift]
        power = power * power
        shift *= 2
    return x


class _Film(NamedTuple):
    h: np.ndarray
    t_eq: np.ndarray


def _films(f_in, f_out, shape) -> dict:
    return {key: _Film(np.broadcast_to(f.h, shape), np.broadcast_to(f.t_eq, shape)) for key, (_, f) in (("in", f_in), ("out", f_out))}


def exact_march(
    system: System,
    initial: np.ndarray,
    step: float,
    n_steps: int,
    *,
    output_every: int = 1,
    t0: float = 0.0,
    progress: Callable[[int], None] | None = None,
    modal: ModalSystem | None = None,
) -> MarchResult:
    """Advance a linear case exactly (see the module docstring); the result has
    the same fields as :func:`layers.march.march`'s."""
    modal = modal or ModalSystem(system)
    mesh = system.mesh
    h = step
    decay, phi1, phi2, phi3 = _phi(modal.lam * h)
    w0, w1 = h * (phi1 - phi2), h * phi2            # step: weights of beta at the start and the end
    i0, i1 = h * h * (phi2 - phi3), h * h * phi3    # integral of the modes over the step
    z = modal.to_modes @ np.asarray(initial, dtype=float)
    row_in, row_out = modal.to_cells[0, :], modal.to_cells[-1, :]
    kept = n_steps // output_every + 1 + (1 if n_steps % output_every else 0)
    temps = np.empty((kept, mesh.n))
    q_in_rec, q_out_rec = np.empty(kept), np.empty(kept)
    times = np.empty(kept)
    t_eq = {"in": np.empty(kept), "out": np.empty(kept)}
    film = {"in": np.empty(kept), "out": np.empty(kept)}
    heat_in = heat_out = heat_abs = 0.0
    low, high = float(np.min(initial)), float(np.max(initial))
    j = 0

    def keep(t_index: int, z: np.ndarray, b_in: float, b_out: float, films: dict, col: int) -> None:
        nonlocal j
        temp = modal.to_cells @ z
        temps[j] = temp
        q_in_rec[j] = b_in - modal.g_in * temp[0]
        q_out_rec[j] = b_out - modal.g_out * temp[-1]
        times[j] = t0 + h * t_index
        for key in ("in", "out"):
            t_eq[key][j] = films[key].t_eq[col]
            film[key][j] = films[key].h[col]
        j += 1

    # the surface cells' response to the modes, and the modes' integral over a step
    a_in, a_out = row_in * (h * phi1), row_out * (h * phi1)
    k = 0
    if n_steps == 0:
        b_in, b_out, f_in, f_out = modal.drives(np.array([t0]))
        keep(0, z, b_in[0], b_out[0], _films(f_in, f_out, (1,)), 0)
    while k < n_steps:
        m = min(CHUNK, n_steps - k)
        nodes = t0 + h * (k + np.arange(m + 1))
        b_in, b_out, f_in, f_out = modal.drives(nodes)
        for name in ("air", "radiant", "surface", "sky"):
            for forcing, _ in (f_in, f_out):
                if name in forcing:
                    low, high = min(low, float(np.min(forcing[name]))), max(high, float(np.max(forcing[name])))
        films = _films(f_in, f_out, nodes.shape)
        if k == 0:
            keep(0, z, b_in[0], b_out[0], films, 0)
        # every mode through the chunk at once: z_(i+1) = decay z_i + u_i, one linear recurrence per mode
        drive_in = w0[None, :] * b_in[:-1, None] + w1[None, :] * b_in[1:, None]
        drive_out = w0[None, :] * b_out[:-1, None] + w1[None, :] * b_out[1:, None]
        forced = modal.p_in[None, :] * drive_in + modal.p_out[None, :] * drive_out  # (m, modes)
        zs = np.empty((m + 1, z.size))
        zs[0] = z
        zs[1:] = _recurrence(decay, z, forced)
        # every step's surface cells (where the extremes beyond the start lie, by
        # the maximum principle), not only the kept states
        surface_cells = np.concatenate([zs[1:] @ row_in, zs[1:] @ row_out])
        if not np.all((surface_cells > ABSOLUTE_ZERO_CELSIUS) & (surface_cells < HIGHEST_PHYSICAL_TEMPERATURE)):
            bad = np.flatnonzero(~((surface_cells > ABSOLUTE_ZERO_CELSIUS) & (surface_cells < HIGHEST_PHYSICAL_TEMPERATURE))) % m
            i = int(bad.min())
            cells = modal.to_cells @ zs[i + 1]
            _check_physical(cells, math.nan, t0 + h * (k + i + 1), b_in[i + 1] - modal.g_in * cells[0], b_out[i + 1] - modal.g_out * cells[-1])
        # heat through each surface over each step: int beta - G int T_cell
        starts = zs[:-1]
        part_in = (i0[None, :] * b_in[:-1, None] + i1[None, :] * b_in[1:, None])
        part_out = (i0[None, :] * b_out[:-1, None] + i1[None, :] * b_out[1:, None])
        cell_in = starts @ a_in + (part_in * modal.p_in[None, :]) @ row_in + (part_out * modal.p_out[None, :]) @ row_in
        cell_out = starts @ a_out + (part_in * modal.p_in[None, :]) @ row_out + (part_out * modal.p_out[None, :]) @ row_out
        e_in = 0.5 * h * (b_in[:-1] + b_in[1:]) - modal.g_in * cell_in
        e_out = 0.5 * h * (b_out[:-1] + b_out[1:]) - modal.g_out * cell_out
        heat_in += float(np.sum(e_in))
        heat_out += float(np.sum(e_out))
        heat_abs += float(np.sum(np.abs(e_in)) + np.sum(np.abs(e_out)))
        done = k + np.arange(1, m + 1)
        rows = np.flatnonzero((done % output_every == 0) | (done == n_steps)) + 1  # rows of zs to keep
        if rows.size:
            kept_t = zs[rows] @ modal.to_cells.T
            span = slice(j, j + rows.size)
            temps[span] = kept_t
            q_in_rec[span] = b_in[rows] - modal.g_in * kept_t[:, 0]
            q_out_rec[span] = b_out[rows] - modal.g_out * kept_t[:, -1]
            times[span] = t0 + h * (k + rows)
            for key in ("in", "out"):
                t_eq[key][span] = films[key].t_eq[rows]
                film[key][span] = films[key].h[rows]
            j += rows.size
            sound = (kept_t.min(axis=1) > ABSOLUTE_ZERO_CELSIUS) & (kept_t.max(axis=1) < HIGHEST_PHYSICAL_TEMPERATURE)
            if not sound.all():  # the earliest kept state outside physics
                row = int(np.argmin(sound))
                _check_physical(kept_t[row], math.nan, times[span][row], q_in_rec[span][row], q_out_rec[span][row])
        z = zs[-1]
        k += m
        if progress is not None:
            progress(k)
    final = modal.to_cells @ z
    surface_in = temps[:, 0] + q_in_rec * modal.r_in
    surface_out = temps[:, -1] + q_out_rec * modal.r_out
    faces = mesh.interface_temperatures(temps, modal.k, modal.g, q_in_rec, q_out_rec)
    stored = temps @ system.capacity
    return MarchResult(
        time=times,
        temperature=temps,
        interface_temperature=faces,
        q_in=q_in_rec,
        q_out=q_out_rec,
        film_in=film["in"] if system.inside.kind == "film" else np.full(kept, math.nan),
        film_out=film["out"] if system.outside.kind == "film" else np.full(kept, math.nan),
        t_eq_in=t_eq["in"],
        t_eq_out=t_eq["out"],
        surface_in=surface_in,
        surface_out=surface_out,
        contents_temperature=None,
        ice_fraction=None,
        heat_in=heat_in,
        heat_out=heat_out,
        heat_abs=heat_abs,
        stored=stored,
        stored_initial=float(stored[0]),
        stored_final=float(final @ system.capacity),
        final=final,
        final_enthalpy=0.0,
        initial_enthalpy=0.0,
        unconverged_steps=0,
        max_iterations_used=0,
        smoothed_steps=0,
        factorisations=0,
        drive_range=(low, high),
        scheme="exact",
    )


def exact_periodic_start(system: System, step: float, steps: int, modal: ModalSystem | None = None) -> np.ndarray:
    """The exact start of the periodic state of a period of ``steps`` steps [degC]:
    the forced response of one period from rest, r, gives z_0 = r / (1 - e^(-lambda P))."""
    modal = modal or ModalSystem(system)
    h = step
    decay, phi1, phi2, _ = _phi(modal.lam * h)
    w0, w1 = h * (phi1 - phi2), h * phi2
    nodes = h * np.arange(steps + 1)
    b_in, b_out, _, _ = modal.drives(nodes)
    z = np.zeros(modal.lam.size)
    for i in range(steps):
        z = decay * z + modal.p_in * (w0 * b_in[i] + w1 * b_in[i + 1]) + modal.p_out * (w0 * b_out[i] + w1 * b_out[i + 1])
    denominator = -np.expm1(-modal.lam * h * steps)
    if np.any(denominator <= 0.0):
        raise UnphysicalState(0.0, math.nan, math.nan, 0.0, 0.0)  # a mode that never decays: no periodic state
    return modal.to_cells @ (z / denominator)
