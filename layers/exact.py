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

import functools
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


@functools.cache
def _eigh_tridiagonal():
    """scipy's symmetric tridiagonal eigensolver (LAPACK stemr), imported on first use."""
    from scipy.linalg import eigh_tridiagonal

    return eigh_tridiagonal


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
        lam, vec = _eigh_tridiagonal()(diag * s * s, -g * s[:-1] * s[1:])
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

    def forcing(self, seconds: np.ndarray) -> tuple[tuple[dict, object], tuple[dict, object]]:
        """Each side's forcing and film at ``seconds`` ((inside), (outside)); members
        of a batch with the same boundaries share it."""
        pairs = []
        for ex in (self.system.inside, self.system.outside):
            forcing = ex.forcing(seconds)
            pairs.append((forcing, ex.film(forcing, np.zeros(seconds.shape))))
        return pairs[0], pairs[1]


def _sources(film_in, film_out, shape: tuple) -> tuple[np.ndarray, np.ndarray]:
    """What drives each side of members that share their films: ``u`` (times,
    sides) and ``open_side`` (sides,).  Through a film u is the Thevenin source
    temperature theta (:func:`layers.exchange.thevenin`) and the drive is
    beta = G u; a side with no film (flux, adiabatic) has u its imposed flux
    and beta = A u.  G and A are each member's own."""
    from layers.exchange import thevenin

    u = np.empty((shape[0], 2))
    open_side = np.zeros(2, dtype=bool)
    for side, film in enumerate((film_in, film_out)):
        theta, resistance = thevenin(np.broadcast_to(film.h, shape), film.t_eq, film.q_imposed, 1.0)
        none = np.broadcast_to(np.isinf(resistance), shape)
        if none.any() != none.all():
            raise ValueError("a linear boundary keeps its film, or its lack of one, throughout")
        open_side[side] = bool(none[0])
        u[:, side] = np.broadcast_to(film.q_imposed if open_side[side] else theta, shape)
    return u, open_side


#: A mode whose decay over one step is below e^-SLOW_LIMIT (2e-16) is "fast":
#: it follows its drive within the step, so its state at a step's end is the
#: forced term alone and it needs no recurrence.  Only the slow modes (a few
#: tens in a wall at hourly steps, whatever the number of cells) are carried.
SLOW_LIMIT = 36.0
#: Most drive values (members x steps x sides) and modal states (members x steps x slow
#: modes) a batch holds at once: the march's memory does not grow with the run.
BLOCK_VALUES = 1 << 22
CHUNK_VALUES = 1 << 20


#: Below this many carried modes per step of a chunk the recurrence runs mode by
#: mode along time (scipy.signal.lfilter, a compiled loop: about 5 us a call plus
#: 4 ns a step); above it, step by step over all modes at once (about 1 us a
#: step plus 1 ns a mode).  Measured on the 2-core machine of docs/benchmarks.md.
LFILTER_MODES_PER_STEP = 0.15


def _recur(zs: np.ndarray, decay: np.ndarray, tmp: np.ndarray) -> None:
    """z_i = decay z_(i-1) + zs_i in place along the first axis of ``zs`` (steps,
    members, modes); ``zs[0]`` already holds the first state."""
    steps = zs.shape[0]
    carried = np.flatnonzero(decay.ravel() != 0.0)  # padding modes (decay 0) need nothing
    if steps > 1 and carried.size < LFILTER_MODES_PER_STEP * steps:
        from scipy.signal import lfilter

        flat = zs.reshape(steps, -1)
        rates = decay.ravel()
        for j in carried:
            flat[:, j] = lfilter(_ONE, (1.0, -rates[j]), flat[:, j])
        if not np.shares_memory(flat, zs):
            zs[...] = flat.reshape(zs.shape)
        return
    for i in range(1, steps):
        np.multiply(decay, zs[i - 1], out=tmp)
        zs[i] += tmp


_ONE = (1.0,)


class BatchResult(NamedTuple):
    """What :meth:`ModalBatch.run` returns, each with the members in front.

    ``kept_steps`` (m,) are the step numbers kept (0 = the initial state).
    Temperatures [degC]; ``q_in``/``q_out`` heat into the construction through
    each surface [W per reference unit]; ``heat_*`` totals over the run [J
    per reference unit]; ``stored`` [J per reference unit, from 0 degC].
    """

    kept_steps: np.ndarray
    temperature: np.ndarray | None      # (B, m, n) with keep_fields, else None
    interface_temperature: np.ndarray   # (B, m, layers + 1)
    surface_in: np.ndarray              # (B, m)
    surface_out: np.ndarray
    q_in: np.ndarray
    q_out: np.ndarray
    stored: np.ndarray
    t_eq_in: np.ndarray                 # (B, m) the Thevenin drive temperature of each side
    t_eq_out: np.ndarray
    film_in: np.ndarray                 # (B, m) film coefficient (NaN where the side has none)
    film_out: np.ndarray
    heat_in: np.ndarray                 # (B,)
    heat_out: np.ndarray
    heat_abs: np.ndarray
    final: np.ndarray                   # (B, n), NaN beyond a member's cells
    final_modes: list                   # each member's modal state at the end
    drive_range: np.ndarray             # (B, 2) coldest and hottest temperature met at a boundary [degC]

    def member(self, i: int, system: System, step: float, t0: float = 0.0) -> MarchResult:
        """Member ``i`` (marching ``system`` in steps of ``step`` [s] from ``t0``
        [s]) as a :class:`layers.march.MarchResult`, its arrays cut to its own cells."""
        n = system.mesh.n
        kept = self.kept_steps.size
        final = self.final[i, :n]
        return MarchResult(
            time=t0 + step * self.kept_steps.astype(float),
            temperature=self.temperature[i, :, :n] if self.temperature is not None else None,
            interface_temperature=self.interface_temperature[i],
            q_in=self.q_in[i], q_out=self.q_out[i],
            film_in=self.film_in[i] if system.inside.kind == "film" else np.full(kept, math.nan),
            film_out=self.film_out[i] if system.outside.kind == "film" else np.full(kept, math.nan),
            t_eq_in=self.t_eq_in[i], t_eq_out=self.t_eq_out[i],
            surface_in=self.surface_in[i], surface_out=self.surface_out[i],
            contents_temperature=None, ice_fraction=None,
            heat_in=float(self.heat_in[i]), heat_out=float(self.heat_out[i]), heat_abs=float(self.heat_abs[i]),
            stored=self.stored[i], stored_initial=float(self.stored[i, 0]), stored_final=float(final @ system.capacity),
            final=final, final_enthalpy=0.0, initial_enthalpy=0.0, unconverged_steps=0, max_iterations_used=0,
            smoothed_steps=0, factorisations=0, drive_range=(float(self.drive_range[i, 0]), float(self.drive_range[i, 1])),
            scheme="exact",
        )


class ModalBatch:
    """Many linear systems, advanced exactly
    together (see the module docstring); one system is a batch of one.

    Every output of a step (the surface cells, the stored heat, the layer
    faces, the heat through each surface over the step) is a fixed linear
    functional of the modal state and of the drives at the step's ends, so
    the per-variant work is a few small matrices built once: the march
    itself is one vector recurrence over the slow modes of all members and
    one batched matrix product per chunk of steps.
    """

    def __init__(self, modals: list[ModalSystem], step: float, groups: list[list[int]] | None = None) -> None:
        if not modals:
            raise ValueError("an empty batch")
        # members may differ in their number of cells: cell arrays are padded to
        # the largest (NaN in results); the march itself runs on the modes
        self.cells = np.array([m.system.mesh.n for m in modals])
        self.modals, self.step, self.n = modals, step, int(self.cells.max())
        h = step
        parts = []
        for modal in modals:
            mesh = modal.system.mesh
            n = mesh.n
            decay, phi1, phi2, phi3 = _phi(modal.lam * h)
            slow = modal.lam * h < SLOW_LIMIT
            fast = ~slow
            w = np.stack([h * (phi1 - phi2), h * phi2])                      # (2 ends, modes): the state at the step's end
            integral = np.stack([h * h * (phi2 - phi3), h * h * phi3])        # the modes' integral over the step
            p = np.stack([modal.p_in, modal.p_out])                           # (2 sides, modes)
            # The rows read at each step's end: surface cells, stored heat, layer
            # faces (linear in the cells and the surface fluxes: read from the
            # mesh's own rule applied to unit states, so it is not written twice).
            faces_modes = mesh.interface_temperatures(modal.to_cells.T, modal.k, modal.g, 0.0, 0.0).T     # (faces, modes)
            faces_q = np.stack([mesh.interface_temperatures(np.zeros(n), modal.k, modal.g, q_in, q_out) for q_in, q_out in ((1.0, 0.0), (0.0, 1.0))], axis=1)
            rows = np.vstack([modal.to_cells[[0, -1]], modal.system.capacity[None, :] @ modal.to_cells, faces_modes])  # (R, modes)
            # state at a step's end: slow modes carried, fast ones their forced term;
            # coefficients of the drives (columns: [end, side] = p_side w_end per mode)
            by_end = (w[:, None, :] * p[None, :, :]).reshape(4, -1).T           # (modes, ends x sides)
            end_fast = (rows[:, fast] @ by_end[fast]).reshape(-1, 2, 2)        # (R, ends, sides)
            field_fast = np.zeros((self.n, 2, 2))
            field_fast[:n] = (modal.to_cells[:, fast] @ by_end[fast]).reshape(n, 2, 2)
            # the surface cells' integral over a step: h phi_1 z(start) + forced terms; a fast
            # mode's start is its forced term of the step before (lags -1, 0, +1 below)
            surf = rows[:2]
            lags = np.zeros((2, 3, 2))                                         # (surface, lag, side)
            lags[:, 1:, :] = (surf @ (integral[:, None, :] * p[None, :, :]).reshape(4, -1).T).reshape(2, 2, 2)
            lags[:, :2, :] += ((surf[:, fast] * (h * phi1[fast])) @ by_end[fast]).reshape(2, 2, 2)
            parts.append(dict(
                slow=slow, decay=decay[slow], drive=(p[:, None, slow] * w[None, :, slow]),  # (sides, ends, slow)
                rows=rows[:, slow].T, end_fast=end_fast, lags=lags, start_rows=(surf[:, slow] * (h * phi1[slow])).T,
                start_fast_rows=surf[:, fast] * (h * phi1[fast]), fast_drive=p[:, fast] * (w[0, fast] + w[1, fast]),
                field=modal.to_cells[:, slow], field_fast=field_fast, faces_q=faces_q,
            ))
        self.slow_count = max(int(part["slow"].sum()) for part in parts)
        ms, b = max(self.slow_count, 1), len(modals)
        n_rows = parts[0]["rows"].shape[1]
        self.decay = np.zeros((b, ms))
        self.drive = np.zeros((b, 2, 2, ms))
        self.rows = np.zeros((b, ms, n_rows))
        self.start_rows = np.zeros((b, ms, 2))
        self.field = np.zeros((b, self.n, ms))
        for i, part in enumerate(parts):
            k = int(part["slow"].sum())
            self.decay[i, :k] = part["decay"]
            self.drive[i, :, :, :k] = part["drive"]
            self.rows[i, :k] = part["rows"]
            self.start_rows[i, :k] = part["start_rows"]
            self.field[i, : self.cells[i], :k] = part["field"]
        # the rows read at every step in one matrix (surface cells at the end,
        # the surface cells' integral from the start)
        self.every_rows = np.concatenate([self.rows[:, :, :2], self.start_rows], axis=2)     # (B, slow, 4)
        self.kept_rows = np.ascontiguousarray(self.rows[:, :, 2:])                          # (B, slow, R - 2)
        self.end_fast = np.stack([part["end_fast"] for part in parts])      # (B, R, ends, sides)
        self.lags = np.stack([part["lags"] for part in parts])              # (B, 2, lags, sides)
        self.field_fast = np.stack([part["field_fast"] for part in parts])  # (B, n, ends, sides)
        self.faces_q = np.stack([part["faces_q"] for part in parts])        # (B, faces, sides)
        # the same, laid out for batched products with the drives (B, steps, sides)
        # the fast modes' part of the rows, per drive at a step's start and at its end (B, sides, R)
        self.end_fast_start, self.end_fast_end = (np.ascontiguousarray(self.end_fast[:, :, e].transpose(0, 2, 1)) for e in (0, 1))
        self.lags_t = [np.ascontiguousarray(self.lags[:, :, lag].transpose(0, 2, 1)) for lag in (0, 1, 2)]    # (B, sides, 2)
        self.field_fast_t = [np.ascontiguousarray(self.field_fast[:, :, e].transpose(0, 2, 1)) for e in (0, 1)]  # (B, sides, n)
        self.g = np.array([[m.g_in, m.g_out] for m in modals])               # (B, sides)
        self.area = np.array([[m.system.area_in, m.system.area_out] for m in modals])
        # members with the same boundaries share one forcing evaluation
        self.groups = [np.array(members) for members in (groups or [[i] for i in range(len(modals))])]
        # each side is driven through its film (beta = G u) or, with none, by an
        # imposed flux (beta = A u): the gain of each member, and per group the
        # products of the gains with the slow modes' drive coefficients (4, members x slow)
        self.nan_beyond = np.where(np.arange(self.n)[None, :] < self.cells[:, None], 0.0, math.nan)  # (B, n)
        self.one_group = len(self.groups) == 1 and np.array_equal(self.groups[0], np.arange(b))
        forcing0 = [self.modals[members[0]].forcing(np.zeros(1)) for members in self.groups]
        self.open_side = [_sources(f_in[1], f_out[1], (1,))[1] for f_in, f_out in forcing0]
        open_member = np.zeros((b, 2), dtype=bool)
        for gi, members in enumerate(self.groups):
            open_member[members] = self.open_side[gi]
        self.gain = np.where(open_member, self.area, self.g)
        self.group_drive = [
            np.einsum("js,jsem->esjm", self.gain[members], self.drive[members]).reshape(4, -1) for members in self.groups
        ]
        self.r_in = np.array([m.r_in for m in modals])
        self.r_out = np.array([m.r_out for m in modals])
        self._parts = parts

    def _split(self, state: np.ndarray) -> tuple[np.ndarray, list[np.ndarray]]:
        """The slow modes (B, slow) of cell states (B, n), and each member's fast ones."""
        slow = np.zeros((len(self.modals), self.decay.shape[1]))
        fast = []
        for i, (modal, part) in enumerate(zip(self.modals, self._parts)):
            z = modal.to_modes @ state[i, : self.cells[i]]
            k = int(part["slow"].sum())
            slow[i, :k] = z[part["slow"]]
            fast.append(z[~part["slow"]])
        return slow, fast

    def _drives(self, nodes: np.ndarray, kept_local: np.ndarray, out: dict, at: np.ndarray, ranges: np.ndarray) -> tuple[np.ndarray, list]:
        """Each member's drives at ``nodes`` (B, nodes, sides) and each group's
        sources u (nodes, sides) (:func:`_sources`), the forcing computed once per
        group of members with the same boundaries; records the Thevenin
        temperatures and films at the kept nodes and the range of every boundary
        temperature met."""
        beta = np.empty((len(self.modals), nodes.size, 2))
        sources = []
        for gi, members in enumerate(self.groups):
            f_in, f_out = self.modals[members[0]].forcing(nodes)
            u, open_side = _sources(f_in[1], f_out[1], nodes.shape)
            if not np.array_equal(open_side, self.open_side[gi]):
                raise ValueError("a linear boundary keeps its film, or its lack of one, throughout")
            beta[members] = self.gain[members][:, None, :] * u[None, :, :]
            sources.append(u)
            low, high = math.inf, -math.inf
            for side, (forcing, film) in (("in", f_in), ("out", f_out)):
                for name in ("air", "radiant", "surface", "sky"):
                    if name in forcing:
                        low, high = min(low, float(np.min(forcing[name]))), max(high, float(np.max(forcing[name])))
                if kept_local.size:
                    out[f"t_eq_{side}"][np.ix_(members, at)] = np.broadcast_to(film.t_eq, nodes.shape)[kept_local]
                    out[f"film_{side}"][np.ix_(members, at)] = np.broadcast_to(film.h, nodes.shape)[kept_local]
            ranges[members, 0] = np.minimum(ranges[members, 0], low)
            ranges[members, 1] = np.maximum(ranges[members, 1], high)
        return beta, sources

    def run(
        self,
        initial: np.ndarray,
        n_steps: int,
        *,
        output_every: int = 1,
        t0: float = 0.0,
        keep_fields: bool = True,
        progress: Callable[[int], None] | None = None,
        record: bool = True,
        field_sink=None,
        check: bool = True,
    ) -> BatchResult:
        """March every member from ``initial`` (B, n) [degC] for ``n_steps`` steps,
        keeping every ``output_every``-th state and the last (``record=False``:
        only the initial state and the end).  ``field_sink`` (a batch of one)
        takes the kept cell fields as they are made instead of the result
        (:class:`layers.results.FieldSink`).  ``check=False`` skips the
        physical-range check (for a computation that is not a state of the
        construction, such as the forced response from rest).

        Raises
        ------
        UnphysicalState
            At the first step where a member's surface cell leaves the
            physical range; its ``member`` attribute is the member's index.
        """
        h, n, b = self.step, self.n, len(self.modals)
        initial = self.padded(initial)
        last_cell = self.cells - 1
        members = np.arange(b)
        steps = np.arange(1, n_steps + 1)
        kept_steps = np.concatenate([[0], steps[(steps % output_every == 0) | (steps == n_steps)]]) if record else np.array([0])
        m = kept_steps.size
        faces = self.faces_q.shape[1]
        out = {key: np.full((b, m), math.nan) for key in ("t_eq_in", "t_eq_out", "film_in", "film_out")}
        cells = np.empty((b, m, 2))
        q = np.empty((b, m, 2))
        stored = np.empty((b, m))
        face_t = np.empty((b, m, faces))
        if field_sink is not None and b != 1:
            raise ValueError("a field sink takes the fields of a batch of one")
        fields = np.empty((b, m, n)) if keep_fields and field_sink is None else None
        make_fields = fields is not None or field_sink is not None
        ranges = np.stack([np.nanmin(initial, axis=1), np.nanmax(initial, axis=1)], axis=1)
        heat = np.zeros((b, 2))
        heat_abs = np.zeros(b)
        z, z_fast = self._split(initial)
        # drives in blocks of up to BLOCK_VALUES numbers, the recurrence in chunks of
        # up to CHUNK_VALUES modal states (a flat memory whatever the run's length)
        block = max(1, min(n_steps, BLOCK_VALUES // (2 * b)))
        chunk = max(8, min(CHUNK, CHUNK_VALUES // (b * self.decay.shape[1])))
        g = self.g
        step_tmp = np.empty_like(z)

        beta0 = self._drives(np.array([t0]), np.array([0]), out, np.array([0]), ranges)[0][:, 0, :]
        surface0 = np.stack([initial[:, 0], initial[members, last_cell]], axis=1)
        q0 = beta0 - g * surface0
        cells[:, 0] = surface0
        q[:, 0] = q0
        stored[:, 0] = np.array([initial[i, :c] @ modal.system.capacity for i, (c, modal) in enumerate(zip(self.cells, self.modals))])
        face_t[:, 0] = np.stack([modal.system.mesh.interface_temperatures(initial[i, :c], modal.k, modal.g, q0[i, 0], q0[i, 1])
                                 for i, (c, modal) in enumerate(zip(self.cells, self.modals))])
        if fields is not None:
            fields[:, 0] = initial
        if field_sink is not None:
            field_sink.write(initial[:, : self.cells[0]])
        beta_prev = beta0
        last = np.stack([beta0, beta0], axis=1)
        k0 = 0
        while k0 < n_steps:
            nb = min(block, n_steps - k0)
            nodes = t0 + h * (k0 + np.arange(nb + 1))
            recorded = np.flatnonzero((kept_steps > k0) & (kept_steps <= k0 + nb))
            beta_block, sources = self._drives(nodes, kept_steps[recorded] - k0, out, recorded, ranges)   # (B, nb + 1, sides)
            ends_block = [np.concatenate([u[:-1], u[1:]], axis=1) for u in sources]                    # (nb, 4) each
            for c0 in range(0, nb, chunk):
                k = k0 + c0
                mm = min(chunk, nb - c0)
                beta = beta_block[:, c0:c0 + mm + 1]
                # every slow mode of every member: z_(i+1) = decay z_i + drive, in place; the
                # drives of a group of members sharing their boundaries in one product
                if self.one_group:
                    zs = (ends_block[0][c0:c0 + mm] @ self.group_drive[0]).reshape(mm, b, -1)
                else:
                    zs = np.empty((mm, b, self.decay.shape[1]))
                    for gi, members in enumerate(self.groups):
                        zs[:, members] = (ends_block[gi][c0:c0 + mm] @ self.group_drive[gi]).reshape(mm, members.size, -1)
                zs[0] += self.decay * z
                _recur(zs, self.decay, step_tmp)
                by_member = zs.transpose(1, 0, 2)                                  # (B, mm, slow)
                every = by_member @ self.every_rows                                # (B, mm, 4)
                # surface cells at each step's end: the slow modes' part and the fast modes' (drives at both ends)
                ends = every[:, :, :2] + beta[:, :-1] @ self.end_fast_start[:, :, :2] + beta[:, 1:] @ self.end_fast_end[:, :, :2]
                if check:
                    self._check_surfaces(ends, by_member, beta, t0 + h * k)
                # heat through each surface over each step: int beta - G int T_cell
                before = np.concatenate([beta_prev[:, None, :], beta[:, :-2]], axis=1)
                integral = before @ self.lags_t[0] + beta[:, :-1] @ self.lags_t[1] + beta[:, 1:] @ self.lags_t[2]
                integral[:, 0] += np.einsum("bm,bmr->br", z, self.start_rows)
                integral[:, 1:] += every[:, :-1, 2:]
                if k == 0:  # the fast modes' true start (the lag formula assumes a step before)
                    for j, part in enumerate(self._parts):
                        if z_fast[j].size:
                            assumed = np.einsum("sm,s->m", part["fast_drive"], beta[j, 0])
                            integral[j, 0] += part["start_fast_rows"] @ (z_fast[j] - assumed)
                per_step = 0.5 * h * (beta[:, :-1] + beta[:, 1:]) - g[:, None, :] * integral   # (B, mm, sides)
                heat += per_step.sum(axis=1)
                heat_abs += np.abs(per_step).sum(axis=(1, 2))
                keep_here = np.flatnonzero((kept_steps > k) & (kept_steps <= k + mm))
                if keep_here.size:
                    local = kept_steps[keep_here] - k                              # 1..mm
                    rows = local - 1
                    kept_cells = ends[:, rows]
                    kq = beta[:, local] - g[:, None, :] * kept_cells
                    cells[:, keep_here] = kept_cells
                    q[:, keep_here] = kq
                    rest = (by_member[:, rows] @ self.kept_rows + beta[:, rows] @ self.end_fast_start[:, :, 2:]
                            + beta[:, rows + 1] @ self.end_fast_end[:, :, 2:])
                    stored[:, keep_here] = rest[:, :, 0]
                    face_t[:, keep_here] = rest[:, :, 1:] + kq @ self.faces_q.transpose(0, 2, 1)
                    if make_fields:
                        made = (by_member[:, rows] @ self.field.transpose(0, 2, 1) + beta[:, local - 1] @ self.field_fast_t[0]
                                + beta[:, local] @ self.field_fast_t[1]) + self.nan_beyond[:, None, :]
                        if fields is not None:
                            fields[:, keep_here] = made
                        else:
                            field_sink.write(made[0, :, : self.cells[0]])
                z = zs[-1].copy()
                beta_prev = beta[:, -2]
                last = beta[:, -2:]
                if progress is not None:
                    progress(k + mm)
            k0 += nb
        final = (np.einsum("bnm,bm->bn", self.field, z) + np.einsum("bsc,bs->bc", self.field_fast_t[0], last[:, 0])
                 + np.einsum("bsc,bs->bc", self.field_fast_t[1], last[:, 1]) + self.nan_beyond) if n_steps else initial.copy()
        final_modes = [modal.to_modes @ final[i, :c] for i, (c, modal) in enumerate(zip(self.cells, self.modals))]
        surface_in = cells[:, :, 0] + q[:, :, 0] * self.r_in[:, None]
        surface_out = cells[:, :, 1] + q[:, :, 1] * self.r_out[:, None]
        return BatchResult(
            kept_steps=kept_steps, temperature=fields, interface_temperature=face_t, surface_in=surface_in, surface_out=surface_out,
            q_in=q[:, :, 0], q_out=q[:, :, 1], stored=stored, t_eq_in=out["t_eq_in"], t_eq_out=out["t_eq_out"],
            film_in=out["film_in"], film_out=out["film_out"], heat_in=heat[:, 0], heat_out=heat[:, 1], heat_abs=heat_abs,
            final=final, final_modes=final_modes, drive_range=ranges,
        )

    def _check_surfaces(self, ends: np.ndarray, by_member: np.ndarray, beta: np.ndarray, t_start: float) -> None:
        """Stop at the first step where a member's surface cell (where a diffusion
        problem's extremes beyond its start lie) leaves the physical range."""
        surface = ends[:, :, :2]
        sound = (surface > ABSOLUTE_ZERO_CELSIUS) & (surface < HIGHEST_PHYSICAL_TEMPERATURE)
        if sound.all():
            return
        bad = ~sound.all(axis=2)
        first = np.where(bad.any(axis=1), np.argmax(bad, axis=1), bad.shape[1] + 1)
        member = int(np.argmin(first))
        i = int(first[member])
        state = self.field[member] @ by_member[member, i] + beta[member, i] @ self.field_fast_t[0][member] + beta[member, i + 1] @ self.field_fast_t[1][member]
        state = state[: self.cells[member]]
        qs = beta[member, i + 1] - self.g[member] * state[[0, -1]]
        try:
            _check_physical(state, math.nan, t_start + self.step * (i + 1), float(qs[0]), float(qs[1]))
        except UnphysicalState as exc:
            exc.member = member
            raise

    def padded(self, states) -> np.ndarray:
        """Cell states of the members (a (B, n) array, or one array per member) as
        one (B, largest n) array, NaN beyond each member's cells."""
        out = np.full((len(self.modals), self.n), math.nan)
        for i, c in enumerate(self.cells):
            out[i, :c] = np.asarray(states[i], dtype=float)[:c]
        return out

    def steady_start(self, t0: float = 0.0) -> np.ndarray:
        """Each member's steady state under its drives at ``t0`` [s] [degC] (B,
        largest n; NaN beyond a member's cells): K T = e beta, mode by mode
        z_j = (p_in,j beta_in + p_out,j beta_out) / lambda_j.  This is the mesh's
        own steady state, which for constant conductivities is the exact steady
        profile at the cell centres that :func:`layers.steady.cell_temperatures`
        gives a lone run (they agree to round-off), for all members in one pass."""
        b = len(self.modals)
        out = {key: np.full((b, 1), math.nan) for key in ("t_eq_in", "t_eq_out", "film_in", "film_out")}
        ranges = np.stack([np.full(b, math.inf), np.full(b, -math.inf)], axis=1)
        beta, _ = self._drives(np.array([float(t0)]), np.zeros(0, dtype=int), out, np.zeros(0, dtype=int), ranges)
        states = []
        for i, modal in enumerate(self.modals):
            if np.any(modal.lam <= 0.0):  # no side holds a temperature: no steady state (is_exact_ready refuses it)
                raise ValueError("a member without a steady state")
            z = (modal.p_in * beta[i, 0, 0] + modal.p_out * beta[i, 0, 1]) / modal.lam
            states.append(modal.to_cells @ z)
        return self.padded(states)

    def periodic_start(self, steps: int) -> np.ndarray:
        """The exact start of each member's periodic state of a period of ``steps``
        steps [degC] (B, largest n; NaN beyond a member's cells): the forced
        response of one period from rest, r, gives z_0 = r / (1 - e^(-lambda P))
        mode by mode."""
        # the forced response from rest is a step of the computation, not a state
        # of the construction: it may pass through any temperature (a flux side)
        res = self.run([np.zeros(c) for c in self.cells], steps, keep_fields=False, record=False, check=False)
        starts = []
        for i, modal in enumerate(self.modals):
            denominator = -np.expm1(-modal.lam * self.step * steps)
            if np.any(denominator <= 0.0):
                raise UnphysicalState(0.0, math.nan, math.nan, 0.0, 0.0)  # a mode that never decays: no periodic state
            starts.append(modal.to_cells @ (res.final_modes[i] / denominator))
        return self.padded(starts)


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
    field_sink=None,
) -> MarchResult:
    """Advance a linear case exactly (see the module docstring): a batch of
    one; the result has the same fields as :func:`layers.march.march`'s
    (``field_sink`` as there)."""
    modal = modal or ModalSystem(system)
    res = ModalBatch([modal], step).run(initial[None, :], n_steps, output_every=output_every, t0=t0, progress=progress,
                                        field_sink=field_sink)
    return res.member(0, system, step, t0)


def exact_periodic_start(system: System, step: float, steps: int, modal: ModalSystem | None = None) -> np.ndarray:
    """The exact start of the periodic state of a period of ``steps`` steps [degC]
    (:meth:`ModalBatch.periodic_start` for one system)."""
    return ModalBatch([modal or ModalSystem(system)], step).periodic_start(steps)[0]
